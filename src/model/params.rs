//! Parameters: the [`ParamTable`] of values resolved so far, constant expressions over it,
//! and the resolution of a model's parameters (each from `pi` and earlier ones) and range.

use super::error::ModelError;
use super::spec::{ModelSpec, Text};
use crate::config::Config;
use crate::diag::Diagnostic;
use crate::language::compile::{lower_into, ExprError};
use crate::language::ir::{Graph, Scope};
use crate::language::tape::Tape;

/// Every parameter's value, in order: each an expression of `pi` and earlier ones.
pub(super) fn resolve_params(spec: &ModelSpec, config: &Config) -> Result<ParamTable, ModelError> {
    let mut table = ParamTable::default();
    // A model of several fields names them all in its errors; one field as always.
    let fields: Vec<&str> = if spec.fields.len() > 1 {
        spec.fields.iter().map(|f| f.text.as_str()).collect()
    } else {
        vec![spec.field.as_str()]
    };
    for p in &spec.params {
        if p.name == spec.field {
            return Err(ModelError::plain(
                Diagnostic::new(format!("`{}` is both the field and a parameter", p.name))
                    .with_hint("rename the parameter, or the field with `field = ...`"),
            ));
        }
        if table.contains(&p.name) {
            return Err(ModelError::plain(
                Diagnostic::new(format!("parameter `{}` is given twice", p.name)).with_hint("give each parameter once"),
            ));
        }
        let v = constant(&p.value, &fields, &table, config, &format!("parameter `{}`", p.name))
            .map_err(|e| later_hint(e, spec, table.names().len()))?;
        table.push(&p.name, v);
    }
    Ok(table)
}

/// The user's field interval, its ends evaluated with the parameters' values.
pub(super) fn resolve_range(
    spec: &ModelSpec,
    names: &[String],
    values: &[f64],
    config: &Config,
) -> Result<Option<(f64, f64)>, ModelError> {
    Ok(match &spec.range {
        None => None,
        Some((lo, hi)) => {
            let table = ParamTable::from_parts(names.to_vec(), values.to_vec());
            let lo_v = range_end(lo, &spec.field, &table, config)?;
            let hi_v = range_end(hi, &spec.field, &table, config)?;
            if lo_v >= hi_v {
                return Err(ModelError::plain(
                    Diagnostic::new(format!("the range is empty: {lo_v} is not below {hi_v}"))
                        .with_hint("give the lower end first: --range LO HI"),
                ));
            }
            Some((lo_v, hi_v))
        }
    })
}

/// Parameters resolved so far: names in order, a hash index and values. Evaluating the next
/// value costs time in proportion to that expression alone, not to the number of parameters
/// before it: each expression is compiled over a scope of just the parameters it names.
#[derive(Debug, Clone, Default)]
pub struct ParamTable {
    names: Vec<String>,
    index: rustc_hash::FxHashMap<String, usize>,
    values: Vec<f64>,
}

/// Why [`ParamTable::evaluate`] gave no value.
#[derive(Debug, Clone, PartialEq)]
pub enum ConstantError {
    /// The expression does not parse, or names something unknown (rendered against the
    /// scope of all parameters so far, as if they had all been in scope).
    Expr(ExprError),
    /// The expression depends on the field.
    Varying,
    /// The value is not finite.
    NotFinite(f64),
}

impl ParamTable {
    /// A table from names and values in order (names distinct).
    pub fn from_parts(names: Vec<String>, values: Vec<f64>) -> ParamTable {
        let index = names.iter().enumerate().map(|(i, n)| (n.clone(), i)).collect();
        ParamTable { names, index, values }
    }

    /// The names and the values, in order.
    pub fn into_parts(self) -> (Vec<String>, Vec<f64>) {
        (self.names, self.values)
    }

    /// True if `name` is in the table.
    pub fn contains(&self, name: &str) -> bool {
        self.index.contains_key(name)
    }

    /// The names in order.
    pub fn names(&self) -> &[String] {
        &self.names
    }

    /// Adds a parameter (replacing the value of one already there).
    pub fn push(&mut self, name: &str, value: f64) {
        match self.index.get(name) {
            Some(&i) => self.values[i] = value,
            None => {
                self.index.insert(name.to_string(), self.names.len());
                self.names.push(name.to_string());
                self.values.push(value);
            }
        }
    }

    /// Evaluates `text`, an expression of numbers, `pi` and the parameters in the table, which
    /// must not depend on `field`.
    pub fn evaluate(
        &self,
        field: &str,
        origin: &str,
        text: &str,
        limits: &crate::config::Limits,
    ) -> Result<f64, ConstantError> {
        self.evaluate_over(&[field], origin, text, limits)
    }

    /// [`ParamTable::evaluate`] for a model of several fields: `text` may depend on none of
    /// `fields`, and an error lists them all.
    pub fn evaluate_over(
        &self,
        fields: &[&str],
        origin: &str,
        text: &str,
        limits: &crate::config::Limits,
    ) -> Result<f64, ConstantError> {
        let scope = |params: &[&str]| match fields {
            [one] => Scope::new(one, params),
            _ => Scope::with_fields(fields, params).unwrap_or_else(|_| Scope::new(fields[0], params)),
        };
        let full = || {
            // Only on the way to an error: the scope of every parameter so far, so that the
            // message lists them as it always has.
            let refs: Vec<&str> = self.names.iter().map(String::as_str).collect();
            let mut g = Graph::new(scope(&refs));
            match lower_into(&mut g, origin, text, limits) {
                Err(e) => ConstantError::Expr(e),
                Ok(_) => unreachable!("an expression that fails over its own names fails over all of them"),
            }
        };
        let Ok(ast) = crate::language::syntax::parse(text, limits) else {
            return Err(full());
        };
        let mut used: Vec<usize> = Vec::new();
        collect_params(&ast, &self.index, &mut used);
        let names: Vec<&str> = used.iter().map(|&i| self.names[i].as_str()).collect();
        let values: Vec<f64> = used.iter().map(|&i| self.values[i]).collect();
        let mut g = Graph::new(scope(&names));
        let Ok(id) = g.lower(&ast) else {
            return Err(full());
        };
        if g.is_varying(id) {
            return Err(ConstantError::Varying);
        }
        let v = Tape::compile(&g, &[id]).evaluator(&values).eval(0.0);
        if !v.is_finite() {
            return Err(ConstantError::NotFinite(v));
        }
        Ok(v)
    }
}

/// The table indices of the parameters an expression names, each once, in order of first use.
/// The recursion is over a syntax tree whose height the parser has bounded.
fn collect_params(
    e: &crate::language::syntax::Expr,
    index: &rustc_hash::FxHashMap<String, usize>,
    out: &mut Vec<usize>,
) {
    use crate::language::syntax::ExprKind;
    match &e.kind {
        ExprKind::Number(_) => {}
        ExprKind::Ident(name) => {
            if let Some(&i) = index.get(name.as_str()) {
                if !out.contains(&i) {
                    out.push(i);
                }
            }
        }
        ExprKind::Neg(a) => collect_params(a, index, out),
        ExprKind::Binary(_, a, b) => {
            collect_params(a, index, out);
            collect_params(b, index, out);
        }
        ExprKind::Call { args, .. } => {
            for a in args {
                collect_params(a, index, out);
            }
        }
    }
}

/// A constant expression of numbers, `pi` and the parameters in `table` (a start value of a
/// model of several fields); `what` names it in errors.
pub(super) fn constant_value(
    t: &Text,
    fields: &[&str],
    table: &ParamTable,
    config: &Config,
    what: &str,
) -> Result<f64, ModelError> {
    constant(t, fields, table, config, what)
}

/// Evaluates a constant expression (a parameter or a range end).
fn constant(t: &Text, fields: &[&str], table: &ParamTable, config: &Config, what: &str) -> Result<f64, ModelError> {
    // A plain number needs no compiler.
    if let Ok(v) = t.text.trim().parse::<f64>() {
        if v.is_finite()
            && t.text
                .trim()
                .starts_with(|c: char| c.is_ascii_digit() || c == '.' || c == '-')
        {
            return Ok(v);
        }
    }
    match table.evaluate_over(fields, &t.origin.name, &t.text, &config.limits) {
        Ok(v) => Ok(v),
        Err(ConstantError::Expr(e)) => Err(ModelError::from_expr(e, &t.origin)),
        Err(ConstantError::Varying) => Err(ModelError::plain(
            Diagnostic::new(match fields {
                [one] => format!("{what}: `{}` depends on the field `{one}`", t.text.trim()),
                _ => format!(
                    "{what}: `{}` depends on a field (the fields are `{}`)",
                    t.text.trim(),
                    fields.join("`, `")
                ),
            })
            .with_hint("a value may use numbers, `pi` and parameters defined before it"),
        )),
        Err(ConstantError::NotFinite(v)) => Err(ModelError::plain(Diagnostic::new(format!(
            "{what}: `{}` is not a finite number ({v})",
            t.text.trim()
        )))),
    }
}

/// Adds a hint to an unknown-name error for parameter number `at` when the name is a
/// parameter defined after it.
fn later_hint(mut e: ModelError, spec: &ModelSpec, at: usize) -> ModelError {
    let msg = &e.diagnostic.message;
    let Some(name) = msg.strip_prefix("unknown name `").and_then(|r| r.strip_suffix('`')) else {
        return e;
    };
    if let Some(later) = spec.params.iter().skip(at + 1).find(|p| p.name == name) {
        let this = &spec.params[at].name;
        let hint = format!(
            "`{}` is a parameter defined after `{this}`: a value may use only earlier ones, so move `{this}` below it",
            later.name
        );
        e.diagnostic.hints.insert(0, hint);
    }
    e
}

fn range_end(t: &Text, field: &str, table: &ParamTable, config: &Config) -> Result<f64, ModelError> {
    match t.text.trim() {
        "inf" | "+inf" => Ok(f64::INFINITY),
        "-inf" => Ok(f64::NEG_INFINITY),
        _ => constant(t, &[field], table, config, "range"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Model;

    fn err(text: &str) -> String {
        ModelSpec::from_toml(text, "m.toml")
            .and_then(|s| Model::build(&s, &Config::default()).map(|_| ()))
            .unwrap_err()
            .render()
    }

    #[test]
    fn ten_thousand_chained_parameters_resolve() {
        let mut text = String::from("potential = \"phi^2*p10000/10000\"\n[params]\np1 = 1\n");
        for i in 2..=10_000 {
            text.push_str(&format!("p{i} = \"p{} + 1\"\n", i - 1));
        }
        let spec = ModelSpec::from_toml(&text, "chain.toml").unwrap();
        let m = Model::build(&spec, &Config::default()).unwrap();
        assert_eq!(m.params.len(), 10_000);
        assert_eq!(m.params[9_999], 10_000.0);
        assert_eq!(m.evaluator().eval(3.0), 9.0);
        // The same through a table directly, with a value that names several earlier ones.
        let mut t = ParamTable::default();
        for i in 1..=10_000 {
            let v = if i == 1 {
                1.0
            } else {
                t.evaluate("phi", "p", &format!("p{} + 1", i - 1), &Config::default().limits)
                    .unwrap()
            };
            t.push(&format!("p{i}"), v);
        }
        let v = t
            .evaluate("phi", "q", "p10000 - p9999 + p1*pi", &Config::default().limits)
            .unwrap();
        assert_eq!(v, 1.0 + std::f64::consts::PI);
    }

    #[test]
    fn parameter_errors_keep_their_messages() {
        // A later parameter: unknown here, with the list of those in scope and a hint.
        let e = err("potential = \"a*phi^2\"\n[params]\na = \"2*b\"\nb = 1\n");
        assert!(e.contains("unknown name `b`"), "{e}");
        assert!(e.contains("`b` is a parameter defined after `a`"), "{e}");
        assert!(e.contains("--> m.toml:3:8"), "{e}");
        let e = err("potential = \"a*phi^2\"\n[params]\nz = 1\na = \"2*zz\"\n");
        assert!(e.contains("did you mean `z`?") && e.contains("parameters: `z`"), "{e}");
        let e = err("potential = \"a*phi^2\"\n[params]\na = \"2*phi\"\n");
        assert!(e.contains("parameter `a`: `2*phi` depends on the field `phi`"), "{e}");
        let e = err("potential = \"a*phi^2\"\n[params]\na = \"log(0)\"\n");
        assert!(e.contains("is not a finite number"), "{e}");
        let e = err("potential = \"a*phi^2\"\n[params]\na = \"exp\"\n");
        assert!(e.contains("`exp` is a function, not a value"), "{e}");
    }
}
