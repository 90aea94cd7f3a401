//! Models of several fields: the fields, the `[metric]` table and the `[start]` point checked
//! against each other, and V with its geometry compiled onto one tape whose outputs the
//! [`Layout`] (with its geometry block) names.
//!
//! Everything here is symbolic: the gradient and Hessian of V and the first and second
//! partials of every metric component come from [`Graph::partial`], so the Christoffel
//! symbols and the Riemann tensor built from them need no finite differences.
//!
//! A model written with `fields = ["phi"]` and `[metric] phi = "K"` is the one-field model
//! `field = "phi"`, `kinetic = "K"` (`one_field_form`): the same tape and the same numbers.

use super::error::ModelError;
use super::layout::Layout;
use super::metric::MetricError;
use super::params::{constant_value, ParamTable};
use super::spec::{FieldValue, MetricEntry, ModelSpec, Text};
use crate::config::Config;
use crate::diag::{Diagnostic, Span};
use crate::language::compile::{lower_into, Compiled};
use crate::language::ir::{Func, Graph, Id, Scope};
use crate::language::tape::Tape;

/// An error with a caret under `span` of `t` (spans relative to the text): drawn against the
/// file or flag the text came from.
pub(super) fn error_in(t: &Text, span: Span, d: Diagnostic, label: &str) -> ModelError {
    let d = d.with_span(span, label);
    match &t.origin.file_text {
        Some(file) => ModelError {
            diagnostic: Box::new(d),
            source: Some((t.origin.name.clone(), file.to_string(), t.origin.offset)),
            from_expression: false,
        },
        None => ModelError {
            diagnostic: Box::new(d),
            source: Some((t.origin.name.clone(), t.text.clone(), 0)),
            from_expression: false,
        },
    }
}

/// The whole of `t`, as a span.
fn whole(t: &Text) -> Span {
    Span::new(0, t.text.len().max(1))
}

/// The one-field model a spec of one field written with `fields` stands for (`field` and
/// `kinetic` from the `[metric]` entry), or `None` for a spec of the one-field form or of
/// several fields.
pub(super) fn one_field_form(spec: &ModelSpec) -> Result<Option<ModelSpec>, ModelError> {
    let [field] = spec.fields.as_slice() else {
        return Ok(None);
    };
    let names = field_names(spec)?;
    let components = metric_components(spec, &names)?;
    if let Some(first) = spec.start_point.first().or(spec.start_velocity.first()) {
        return Err(error_in(
            &first.name,
            whole(&first.name),
            Diagnostic::new("a one-field model takes no [start] point")
                .with_hint("the one-field analyses start on the slow-roll attractor of the branch they choose")
                .with_hint("to start elsewhere, use --start-phi with `predict --method exact` or `spectrum`"),
            "a start for one field",
        ));
    }
    let mut one = spec.clone();
    one.field = field.text.clone();
    one.kinetic = components[0].1.clone();
    one.fields.clear();
    one.metric.clear();
    Ok(Some(one))
}

/// The fields' names, each a valid name, none twice.
pub(super) fn field_names(spec: &ModelSpec) -> Result<Vec<String>, ModelError> {
    let mut names: Vec<String> = Vec::with_capacity(spec.fields.len());
    for f in &spec.fields {
        let name = f.text.as_str();
        let valid = name.chars().next().is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
            && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
        let reserved = name == "pi" || name == "pow" || Func::from_name(name).is_some();
        if !valid || reserved {
            let why = if reserved {
                "is a built-in name"
            } else {
                "is not a valid name"
            };
            return Err(error_in(
                f,
                whole(f),
                Diagnostic::new(format!("field `{name}` {why}"))
                    .with_hint("names are letters, digits and _, starting with a letter, and not a function or `pi`"),
                "here",
            ));
        }
        if names.iter().any(|n| n == name) {
            return Err(error_in(
                f,
                whole(f),
                Diagnostic::new(format!("field `{name}` is given twice")).with_hint("give each field once"),
                "given again here",
            ));
        }
        if spec.params.iter().any(|p| p.name == name) {
            return Err(error_in(
                f,
                whole(f),
                Diagnostic::new(format!("`{name}` is both a field and a parameter"))
                    .with_hint("rename the parameter or the field: each name is one field or one parameter"),
                "a field",
            ));
        }
        names.push(name.to_string());
    }
    Ok(names)
}

/// The field index of each name of a `[metric]` key (one name or two, separated by spaces).
fn metric_key(entry: &MetricEntry, names: &[String]) -> Result<(usize, usize), ModelError> {
    let key = &entry.key;
    let mut parts = Vec::new();
    let mut at = 0;
    for word in key.text.split(' ') {
        if !word.is_empty() {
            parts.push((at, word));
        }
        at += word.len() + 1;
    }
    let fields = names.iter().map(|n| format!("`{n}`")).collect::<Vec<_>>().join(", ");
    if parts.is_empty() || parts.len() > 2 {
        return Err(error_in(
            key,
            whole(key),
            Diagnostic::new(format!("[metric] key `{}` is not one field or two", key.text)).with_hint(
                "write `x = \"...\"` for G_xx, `\"x y\" = \"...\"` for G_xy (missing off-diagonal entries are 0)",
            ),
            "one or two field names expected",
        ));
    }
    let mut index = [0usize; 2];
    for (k, &(start, word)) in parts.iter().enumerate() {
        let Some(i) = names.iter().position(|n| n == word) else {
            let mut d = Diagnostic::new(format!(
                "[metric] key `{}` names `{word}`, which is not a field",
                key.text
            ));
            if let Some(s) = crate::diag::closest(word, names.iter().map(String::as_str)) {
                d = d.with_hint(format!("did you mean `{s}`?"));
            }
            return Err(error_in(
                key,
                Span::new(start, start + word.len()),
                d.with_hint(format!("the fields are {fields}")),
                "not a field",
            ));
        };
        index[k] = i;
    }
    if parts.len() == 2 && index[0] == index[1] {
        return Err(error_in(
            key,
            whole(key),
            Diagnostic::new(format!("[metric] key `{}` names one field twice", key.text)).with_hint(format!(
                "write the diagonal entry under the field's name alone: `{} = ...`",
                parts[0].1
            )),
            "a diagonal entry",
        ));
    }
    let (a, b) = if parts.len() == 1 {
        (index[0], index[0])
    } else {
        (index[0], index[1])
    };
    Ok((a.min(b), a.max(b)))
}

/// A metric component G_ab (a <= b) and its expression.
pub(super) type Component<'s> = ((usize, usize), &'s Text);

/// The metric's components (a <= b, sorted) with their expressions: every key a field or a
/// pair of fields, each component once, every diagonal entry given.
pub(super) fn metric_components<'s>(spec: &'s ModelSpec, names: &[String]) -> Result<Vec<Component<'s>>, ModelError> {
    let mut out: Vec<Component<'s>> = Vec::new();
    for entry in &spec.metric {
        let ab = metric_key(entry, names)?;
        if out.iter().any(|(c, _)| *c == ab) {
            let (a, b) = (&names[ab.0], &names[ab.1]);
            return Err(error_in(
                &entry.key,
                whole(&entry.key),
                Diagnostic::new(format!("the metric component G_{a}{b} is given twice"))
                    .with_hint("give each component once (`\"x y\"` and `\"y x\"` are the same)"),
                "given again here",
            ));
        }
        out.push((ab, &entry.value));
    }
    for (a, f) in spec.fields.iter().enumerate() {
        if !out.iter().any(|(c, _)| *c == (a, a)) {
            return Err(error_in(
                f,
                whole(f),
                Diagnostic::new(format!("the metric has no diagonal entry for the field `{}`", f.text)).with_hint(
                    format!(
                        "add `{} = \"...\"` under [metric] (or `--metric {}=EXPR`): G_{}{} has no default",
                        f.text, f.text, f.text, f.text
                    ),
                ),
                "no [metric] entry",
            ));
        }
    }
    out.sort_by_key(|(c, _)| *c);
    Ok(out)
}

/// The values of `[start]` or `[start.velocity]` in field order: every name a field, each
/// once, every field given.
pub(super) fn field_values(
    entries: &[FieldValue],
    spec: &ModelSpec,
    names: &[String],
    table: &ParamTable,
    config: &Config,
    what: &str,
) -> Result<Vec<f64>, ModelError> {
    let mut out: Vec<Option<f64>> = vec![None; names.len()];
    let fields = names.iter().map(|n| format!("`{n}`")).collect::<Vec<_>>().join(", ");
    for e in entries {
        let name = e.name.text.as_str();
        let Some(i) = names.iter().position(|n| n == name) else {
            let mut d = Diagnostic::new(format!("{what} names `{name}`, which is not a field"));
            if let Some(s) = crate::diag::closest(name, names.iter().map(String::as_str)) {
                d = d.with_hint(format!("did you mean `{s}`?"));
            }
            return Err(error_in(
                &e.name,
                whole(&e.name),
                d.with_hint(format!("the fields are {fields}")),
                "not a field",
            ));
        };
        if out[i].is_some() {
            return Err(error_in(
                &e.name,
                whole(&e.name),
                Diagnostic::new(format!("{what} gives `{name}` twice")).with_hint("give each field once"),
                "given again here",
            ));
        }
        let label = format!("{what} of `{name}`");
        let all: Vec<&str> = names.iter().map(|n| n.as_str()).collect();
        out[i] = Some(constant_value(&e.value, &all, table, config, &label)?);
    }
    let mut values = Vec::with_capacity(names.len());
    for (i, v) in out.into_iter().enumerate() {
        let Some(v) = v else {
            let f = &spec.fields[i];
            return Err(error_in(
                f,
                whole(f),
                Diagnostic::new(format!("{what} gives no value for the field `{}`", f.text)).with_hint(format!(
                    "give every field a value: `{} = ...` under [{}] (or `--start {}=VALUE`)",
                    f.text,
                    if what == "the start" { "start" } else { "start.velocity" },
                    f.text
                )),
                "no value",
            ));
        };
        values.push(v);
    }
    Ok(values)
}

/// V and the metric of several fields, lowered onto one graph with every derivative the
/// geometry needs, compiled to one tape in the order of `layout`.
pub(super) struct GeometryTape {
    /// The scope: the fields, then the parameters.
    pub scope: Scope,
    /// The compiled expressions.
    pub compiled: Compiled,
    /// Which output holds what.
    pub layout: Layout,
}

/// Compiles V, its gradient and Hessian, the metric's components with sqrt(G_aa), and their
/// first and second partials.
pub(super) fn compile_geometry(
    spec: &ModelSpec,
    names: &[String],
    params: &[String],
    config: &Config,
) -> Result<GeometryTape, ModelError> {
    let components = metric_components(spec, names)?;
    let fields: Vec<&str> = names.iter().map(String::as_str).collect();
    let refs: Vec<&str> = params.iter().map(String::as_str).collect();
    let scope = Scope::with_fields(&fields, &refs).map_err(|e| ModelError::plain(e.diagnostic()))?;
    let mut graph = Graph::new(scope.clone());
    let lower = |graph: &mut Graph, t: &Text| {
        lower_into(graph, &t.origin.name, &t.text, &config.limits).map_err(|e| ModelError::from_expr(e, &t.origin))
    };
    let (v_ast, v) = lower(&mut graph, &spec.potential)?;
    let mut asts = vec![v_ast];
    let n = names.len();
    let diagonal = components.iter().all(|((a, b), _)| a == b);
    let base = if diagonal { Layout::diagonal(n) } else { Layout::full(n) };
    let layout = base.expect("a model of several fields has fields").with_geometry();
    let mut g_of = vec![None; n * n];
    for ((a, b), t) in &components {
        let (ast, id) = lower(&mut graph, t)?;
        asts.push(ast);
        g_of[a * n + b] = Some(id);
    }
    let zero = graph.constant(0.0);
    let mut roots = vec![zero; layout.n_outputs()];
    roots[layout.v()] = v;
    let dv: Vec<Id> = (0..n).map(|a| graph.partial(v, a)).collect();
    for a in 0..n {
        roots[layout.grad(a).expect("a field")] = dv[a];
        for b in a..n {
            roots[layout.hessian(a, b).expect("a field")] = graph.partial(dv[a], b);
        }
    }
    for a in 0..n {
        for b in a..n {
            let (Some(g), Some(out)) = (g_of[a * n + b], layout.component(a, b)) else {
                continue;
            };
            roots[out] = g;
            for c in 0..n {
                let dg = graph.partial(g, c);
                roots[layout.metric_partial(a, b, c).expect("a stored component")] = dg;
                for d in c..n {
                    roots[layout.metric_second_partial(a, b, c, d).expect("a stored component")] = graph.partial(dg, d);
                }
            }
        }
        let gaa = g_of[a * n + a].expect("every diagonal entry is given");
        roots[layout.sqrt_diagonal(a).expect("a field")] = graph.func(Func::Sqrt, gaa);
    }
    let tape = Tape::compile(&graph, &roots);
    Ok(GeometryTape {
        scope,
        compiled: Compiled {
            asts,
            graph,
            roots,
            tape,
        },
        layout,
    })
}

/// What [`check_start`] evaluates: the compiled model at its start.
#[derive(Clone, Copy)]
pub(super) struct StartAt<'a> {
    /// The fields' names.
    pub names: &'a [String],
    /// The model's tape.
    pub tape: &'a Tape,
    /// Its layout.
    pub layout: Layout,
    /// The parameter values.
    pub params: &'a [f64],
    /// The start point.
    pub start: &'a [f64],
    /// The start velocity dphi^a/dN, if given.
    pub velocity: Option<&'a [f64]>,
}

/// The start must lie where V and the metric are finite and the metric is positive definite:
/// an error at the `[start]` table (its first entry) otherwise, naming the component or the
/// pivot.
pub(super) fn check_start(spec: &ModelSpec, at: StartAt<'_>) -> Result<(), ModelError> {
    let StartAt {
        names,
        tape,
        layout,
        params,
        start,
        velocity,
    } = at;
    let mut ev = tape.evaluator(params);
    let v = ev.eval_at(start);
    let outputs: Vec<f64> = (0..layout.n_outputs()).map(|i| ev.output(i)).collect();
    let point = show_point(names, start);
    let at = spec.start_point.first().map(|e| &e.name);
    let fail = |message: String, hint: &str| match at {
        Some(t) => error_in(
            t,
            whole(t),
            Diagnostic::new(message)
                .with_hint(hint)
                .with_hint("move the [start] point inside the domain"),
            "the start",
        ),
        None => ModelError::plain(Diagnostic::new(message).with_hint(hint)),
    };
    if !v.is_finite() {
        return Err(fail(
            format!("the start {point} lies outside the domain: V = {v} there"),
            "V must be finite at the start",
        ));
    }
    match layout.metric().read(&outputs, start) {
        Ok(g) => check_velocity(spec, g.matrix(), velocity),
        Err(MetricError::NotFinite { a, b, value, .. }) => Err(fail(
            format!(
                "the start {point} lies outside the domain: the metric component G_{}{} = {value} there",
                names[a], names[b]
            ),
            "the metric must be finite at the start",
        )),
        Err(MetricError::NotPositive { a, pivot, .. }) => Err(fail(
            format!(
                "the metric is {} at the start {point}: the Cholesky pivot of row {} (G_{}{} less the rows before it) is {pivot}",
                if pivot == 0.0 { "singular" } else { "not positive definite" },
                names[a], names[a], names[a]
            ),
            "the kinetic term 1/2 G_ab dphi^a dphi^b must be positive for every velocity: check the [metric] entries there",
        )),
        Err(e @ MetricError::MissingOutputs { .. }) => Err(ModelError::plain(e.diagnostic())),
    }
}

/// A given start velocity must leave H^2 = V / (3 - eps) positive, eps = G_ab pi^a pi^b / 2
/// (the background in e-folds; common practice): an error at `[start.velocity]` otherwise.
fn check_velocity(spec: &ModelSpec, g: &nalgebra::DMatrix<f64>, velocity: Option<&[f64]>) -> Result<(), ModelError> {
    let Some(pi) = velocity else {
        return Ok(());
    };
    let n = pi.len();
    let eps = 0.5
        * (0..n)
            .map(|a| (0..n).map(|b| g[(a, b)] * pi[a] * pi[b]).sum::<f64>())
            .sum::<f64>();
    if eps < 3.0 {
        return Ok(());
    }
    let d = Diagnostic::new(format!(
        "the start velocity gives eps = G_ab pi^a pi^b / 2 = {} at the start, not below 3: H^2 = V / (3 - eps) would not be positive",
        crate::report::numfmt::number(eps)
    ))
    .with_hint("give a smaller [start.velocity] (in dphi/dN), or leave it out to start on the slow-roll attractor");
    Err(match spec.start_velocity.first() {
        Some(t) => error_in(&t.name, whole(&t.name), d, "the start velocity"),
        None => ModelError::plain(d),
    })
}

/// A point as `(x, y) = (0.3, -0.2)`.
pub(crate) fn show_point(names: &[String], point: &[f64]) -> String {
    let xs: Vec<String> = point.iter().map(|x| crate::report::numfmt::number(*x)).collect();
    format!("({}) = ({})", names.join(", "), xs.join(", "))
}
