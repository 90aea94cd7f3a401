//! `eval` and `compile`: an expression's value and derivatives at points, and the compiler's views.

use crate::cli::*;
use crate::config::Config;
use crate::diag::Diagnostic;
use crate::language::compile::compile;
use crate::language::ir::Scope;
use crate::language::tape::MAX_ORDER;

/// Significant digits of `eval`'s text output (a value checked by hand wants more than a table).
pub(crate) const EVAL_DIGITS: usize = 10;

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
    let c = compile(&[("expression", &a.expr)], &scope, &config.limits)?;
    let mut ev = c.tape.evaluator(&values);
    let derivs = ev.derivatives(x, a.order);
    let mut warnings = Vec::new();
    if c.tape.has_abs() && a.order > 0 {
        warnings.push(
            "`abs` is not differentiable where its argument is zero; derivatives there are undefined".to_string(),
        );
    }
    if let Some((k, v)) = derivs.iter().enumerate().find(|(_, v)| !v.is_finite()) {
        let what = if k == 0 {
            "the value".to_string()
        } else {
            format!("derivative {k}")
        };
        let mut d = Diagnostic::new(format!(
            "{what} of the expression is {} at {field} = {}",
            crate::report::numfmt::number(*v),
            crate::report::numfmt::typed(x)
        ));
        if let Some((id, bad)) = c.graph.first_non_finite(c.roots[0], x, &values) {
            d = d.with_hint(format!("`{}` is {bad} there", c.graph.print(id)));
        } else if c.tape.has_abs() {
            d = d.with_hint("`abs` has no derivative where its argument is zero");
        }
        return Err(d
            .with_hint("check the domain of log, sqrt, asin, acos, acosh, atanh, powers, and divisions by zero")
            .into());
    }
    Ok(match a.format {
        Format::Json => {
            let params: serde_json::Map<String, serde_json::Value> = names
                .iter()
                .cloned()
                .zip(values.iter().map(|v| serde_json::json!(v)))
                .collect();
            let obj = serde_json::json!({
                "expression": a.expr,
                "field": field,
                "at": x,
                "params": params,
                "value": derivs[0],
                "derivatives": &derivs[1..],
                "warnings": warnings,
            });
            format!(
                "{}\n",
                serde_json::to_string_pretty(&obj).expect("json of plain numbers")
            )
        }
        Format::Text => {
            let mut out = String::new();
            for w in &warnings {
                let _ = writeln!(out, "warning: {w}");
            }
            let _ = writeln!(out, "at {field} = {}", crate::report::numfmt::typed(x));
            // The value and its derivatives are one column: one style, decimal points aligned.
            let cells = crate::report::numfmt::row(&derivs, EVAL_DIGITS);
            for (k, v) in cells.iter().enumerate() {
                let label = match k {
                    0 => "value".to_string(),
                    _ => format!("d^{k}/d{field}^{k}"),
                };
                let _ = writeln!(out, "  {label:<16} {v:>24}");
            }
            out
        }
    })
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
                && !crate::language::ir::CONSTANTS.iter().any(|(c, _)| c == n)
                && crate::language::ir::Func::from_name(n).is_none()
                && *n != "pow"
        })
        .map(str::to_string)
        .collect()
}

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
