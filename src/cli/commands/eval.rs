//! `eval` and `compile`: an expression's value and derivatives at points, and the compiler's views.

use crate::api::Evaluated;
use crate::cli::args::{CompileArgs, Emit, EvalArgs, Format};
use crate::cli::check::{bind_params, check_count, check_field_name, constant_expr, split_binding};
use crate::cli::Failure;
use crate::config::Config;
use crate::diag::Diagnostic;
use crate::language::compile::compile;
use crate::language::ir::{Func, Scope, CONSTANTS};
use crate::language::tape::MAX_ORDER;
use crate::report::numfmt;
use std::fmt::Write as _;

/// Significant digits of `eval`'s text output (a value checked by hand wants more than a table).
pub(crate) const EVAL_DIGITS: usize = 10;

/// `efold eval`: the expression and its derivatives at one point ([`crate::api::eval`]).
pub(crate) fn eval(a: &EvalArgs, config: &Config) -> Result<String, Failure> {
    if a.order > MAX_ORDER {
        return Err(Diagnostic::new(format!(
            "--order {} is above the highest supported, {MAX_ORDER}",
            a.order
        ))
        .with_hint(format!("use --order 0 to {MAX_ORDER}"))
        .into());
    }
    let (at_name, at_text) = split_binding("--at", &a.at)?;
    if let Some(f) = &a.scope.field {
        check_field_name(f)?;
    }
    let field = a.scope.field.clone().unwrap_or_else(|| at_name.to_string());
    if at_name != field {
        return Err(
            Diagnostic::new(format!("--at names `{at_name}`, but the field is `{field}`"))
                .with_hint(format!("write `--at {field}=VALUE`, or `--field {at_name}`"))
                .into(),
        );
    }
    let (names, values) = bind_params(&a.scope.params, &field, config)?;
    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
    if refs.contains(&field.as_str()) {
        return Err(Diagnostic::new(format!("`{field}` is both the field and a parameter"))
            .with_hint("rename the parameter")
            .into());
    }
    let scope = Scope::new(&field, &refs);
    let x = constant_expr("--at", at_text, &scope, &values, config)?;
    let params: Vec<(String, f64)> = names.into_iter().zip(values).collect();
    let e = crate::api::eval(&a.expr, &field, x, &params, a.order, config).map_err(|e| Failure::input(e.message))?;
    Ok(match a.format {
        Format::Json => format!(
            "{}\n",
            serde_json::to_string_pretty(&e.json()).expect("json of plain numbers")
        ),
        Format::Text => eval_text(&e),
    })
}

/// `eval`'s text: the point, then the value and its derivatives as one column.
fn eval_text(e: &Evaluated) -> String {
    let mut out = String::new();
    for w in &e.warnings {
        let _ = writeln!(out, "warning: {w}");
    }
    let _ = writeln!(out, "at {} = {}", e.field, numfmt::typed(e.x));
    // The value and its derivatives are one column: one style, decimal points aligned.
    let cells = numfmt::row(&e.derivatives, EVAL_DIGITS);
    for (k, v) in cells.iter().enumerate() {
        let label = match k {
            0 => "value".to_string(),
            _ => format!("d^{k}/d{}^{k}", e.field),
        };
        let _ = writeln!(out, "  {label:<16} {v:>24}");
    }
    out
}

/// The names of `expr` that are neither the field, a declared parameter, a constant nor a
/// function: `compile` shows them as symbolic parameters. A syntax error is left to `compile`.
pub(crate) fn undeclared_names(expr: &str, field: &str, declared: &[String], config: &Config) -> Vec<String> {
    let Ok(ast) = crate::language::syntax::parse(expr, &config.limits) else {
        return Vec::new();
    };
    ast.names()
        .into_iter()
        .filter(|n| {
            *n != field
                && !declared.iter().any(|d| d == n)
                && !CONSTANTS.iter().any(|(c, _)| c == n)
                && Func::from_name(n).is_none()
                && *n != "pow"
        })
        .map(str::to_string)
        .collect()
}

/// `efold compile`: the compiler's views of an expression.
pub(crate) fn compile_view(a: &CompileArgs, config: &Config) -> Result<String, Failure> {
    if let Some(f) = &a.field {
        check_field_name(f)?;
    }
    let field = a.field.clone().unwrap_or_else(|| "phi".to_string());
    check_count(
        "--order",
        a.order,
        config.limits.max_symbolic_order,
        "max_symbolic_order",
    )?;
    let (mut names, _) = bind_params(&a.params, &field, config)?;
    let symbolic = undeclared_names(&a.expr, &field, &names, config);
    names.extend(symbolic.iter().cloned());
    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
    let scope = Scope::new(&field, &refs);
    let mut c = compile(&[("expression", &a.expr)], &scope, &config.limits)?;
    let emit = if a.emit.is_empty() {
        vec![Emit::Ast, Emit::Ir, Emit::Tape, Emit::Derivatives]
    } else {
        a.emit.clone()
    };
    let mut out = String::new();
    if !symbolic.is_empty() {
        let list: Vec<String> = symbolic.iter().map(|n| format!("`{n}`")).collect();
        let (verb, what) = if symbolic.len() == 1 {
            ("is", "a symbolic parameter")
        } else {
            ("are", "symbolic parameters")
        };
        let _ = writeln!(
            out,
            "note: {} {verb} not declared, shown as {what}; `efold eval` needs values (`--param {}=VALUE`)",
            list.join(", "),
            symbolic[0]
        );
    }
    for e in emit {
        match e {
            Emit::Ast => {
                let _ = write!(out, "== syntax tree\n{}", c.asts[0].tree());
            }
            Emit::Ir => {
                let _ = writeln!(
                    out,
                    "== IR ({} distinct nodes)\n{}",
                    c.graph.reachable(&c.roots).len(),
                    c.graph.print(c.roots[0])
                );
            }
            Emit::Tape => {
                let _ = write!(out, "== tape\n{}", c.tape);
            }
            Emit::Derivatives => {
                let _ = writeln!(out, "== derivatives");
                let mut d = c.roots[0];
                for k in 1..=a.order {
                    d = c.graph.derivative(d);
                    let _ = writeln!(out, "d^{k}/d{field}^{k} = {}", c.graph.print(d));
                }
            }
        }
    }
    Ok(out)
}
