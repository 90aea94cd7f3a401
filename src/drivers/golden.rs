//! Golden predictions: every model file under a directory gets a `NAME.predictions.json`
//! beside it; a check recomputes and reports, model by model, every number that drifted.
//! Also the comparison that `watch` prints when a model changes.
//!
//! [`diff`] compares two prediction reports (as JSON) leaf by leaf, nested objects and arrays
//! included. Predictions are matched by their `n_star`, not by position. Numbers compare
//! relatively with the tolerance, strings and booleans exactly, and a key on one side only is
//! added or removed. The report's `model` object (name, field, potential, kinetic, params) is
//! the input: its changes are named in the summary, not counted as drift.

use crate::report::numfmt::{json_value, typed};
use std::path::{Path, PathBuf};

/// Why a model file has no predictions, or a directory cannot be walked.
#[derive(Debug, Clone, PartialEq)]
pub enum GoldenError {
    /// A directory cannot be read.
    Directory {
        /// The directory.
        path: PathBuf,
        /// The system's message.
        error: String,
    },
}

impl GoldenError {
    /// Drawn by the one renderer.
    pub fn render(&self) -> String {
        match self {
            GoldenError::Directory { .. } => crate::diag::Diagnostic::new(self.to_string()).render(None),
        }
    }
}

impl std::fmt::Display for GoldenError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            GoldenError::Directory { path, error } => {
                write!(f, "cannot read directory `{}`: {error}", path.display())
            }
        }
    }
}

impl std::error::Error for GoldenError {}

/// The model files (`*.toml`) under `dir`, recursively, sorted.
pub fn model_files(dir: &Path) -> Result<Vec<PathBuf>, GoldenError> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let unreadable = |e: std::io::Error| GoldenError::Directory {
            path: d.clone(),
            error: e.to_string(),
        };
        let entries = std::fs::read_dir(&d).map_err(unreadable)?;
        for e in entries {
            let p = e.map_err(unreadable)?.path();
            // Symbolic links to directories are not followed, so a link loop cannot make the
            // walk endless; links to model files are read like files.
            let is_link = std::fs::symlink_metadata(&p).is_ok_and(|m| m.file_type().is_symlink());
            if p.is_dir() {
                if !is_link {
                    stack.push(p);
                }
            } else if p.extension().is_some_and(|x| x == "toml") {
                out.push(p);
            }
        }
    }
    out.sort();
    Ok(out)
}

/// Where a model's golden predictions live.
pub fn golden_path(model: &Path) -> PathBuf {
    model.with_extension("predictions.json")
}

/// Where a difference lies: in the report around the predictions, or in the prediction at
/// one N_*.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum At {
    /// Outside the predictions (`branch`, `warnings`, ...).
    Report,
    /// The prediction at this N_*.
    NStar(f64),
}

/// One difference between two reports.
#[derive(Debug, Clone, PartialEq)]
pub enum Drift {
    /// A leaf that moved (both sides), was added (`old` is `None`) or removed (`new` is `None`).
    /// `path` is dotted, with indices for arrays: `pole_only.r`, `warnings[0]`.
    Leaf {
        /// Which prediction, or the report.
        at: At,
        /// The leaf's path.
        path: String,
        /// Before.
        old: Option<serde_json::Value>,
        /// Now.
        new: Option<serde_json::Value>,
    },
    /// The old report had a prediction at this N_*; the new one has none.
    Dropped(f64),
    /// The new report has a prediction at an N_* the old one did not have.
    Requested(f64),
}

fn where_(at: At) -> String {
    match at {
        At::Report => "report".to_string(),
        At::NStar(n) => format!("N_* = {}", typed(n)),
    }
}

impl std::fmt::Display for Drift {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Drift::Dropped(n) => write!(f, "  N_* = {} no longer requested", typed(*n)),
            Drift::Requested(n) => write!(f, "  N_* = {} newly requested", typed(*n)),
            Drift::Leaf { at, path, old, new } => {
                let at = where_(*at);
                match (old, new) {
                    (Some(a), Some(b)) => match (
                        a.as_f64().filter(|_| a.is_number()),
                        b.as_f64().filter(|_| b.is_number()),
                    ) {
                        (Some(x), Some(y)) => {
                            // Old and new as one row, with digits enough to see them differ.
                            let cells =
                                crate::report::numfmt::row(&[x, y], crate::report::numfmt::digits_to_resolve(x, y));
                            let rel = if x != 0.0 {
                                format!(
                                    "  (relative {})",
                                    crate::report::numfmt::scientific(((y - x) / x).abs(), 2)
                                )
                            } else {
                                String::new()
                            };
                            write!(f, "  {at}: {path:<20} {} -> {}{rel}", cells[0], cells[1])
                        }
                        _ => write!(f, "  {at}: {path:<20} {} -> {}", json_value(a), json_value(b)),
                    },
                    (None, Some(b)) => write!(f, "  {at}: {path:<20} added: {}", json_value(b)),
                    (Some(a), None) => write!(f, "  {at}: {path:<20} removed (was {})", json_value(a)),
                    (None, None) => write!(f, "  {at}: {path}"),
                }
            }
        }
    }
}

/// Keys of one prediction in the order a diff lists them: the observables and the amplitude
/// first, then the rest in the report's own order.
const PREDICTION_ORDER: [&str; 27] = [
    "n_s",
    "r",
    "alpha_s",
    "a_s_unscaled",
    "potential_scale",
    "n_star",
    "phi_star",
    "phi_end",
    "n_t",
    "eps_v",
    "eta_v",
    "xi2_v",
    "omega3_v",
    "delta_chi",
    "delta_phi",
    "lyth_bound",
    "v_star_quarter_gev",
    "h_star_gev",
    "t_ds_gev",
    "v_end",
    "v_end_quarter_gev",
    "n_s_pull",
    "r_limit",
    "verdict",
    "pole_only",
    "reheating",
    "exact",
];

/// Keys of the report around the predictions, in the report's order.
const REPORT_ORDER: [&str; 9] = [
    "model",
    "method",
    "order",
    "branch",
    "other_branches",
    "data",
    "n_star_from",
    "predictions",
    "warnings",
];

/// Keys of the nested objects, by the key that holds them, in the report's order.
const NESTED_ORDER: [(&str, &[&str]); 7] = [
    (
        "model",
        &["name", "description", "field", "potential", "kinetic", "params"],
    ),
    ("pole_only", &["n_s", "r", "order", "residue", "flatness"]),
    (
        "reheating",
        &["n_star", "n_reh", "t_reh_gev", "w", "g_star", "rho_end_gev4"],
    ),
    (
        "exact",
        &[
            "n_s_slow_roll",
            "r_slow_roll",
            "n_s_second_order",
            "r_second_order",
            "n_t_second_order",
            "p_s_unscaled",
            "n_total",
            "phi_end_slow_roll",
            "phi_star_slow_roll",
            "eps_1",
            "eps_2",
            "eps_3",
            "freeze_drift",
        ],
    ),
    ("branch", &["index", "count", "top", "bottom"]),
    ("other_branches", &["index", "count", "top", "bottom"]),
    ("data", &["name", "source"]),
];

/// One step of a path: an object key or an array index.
#[derive(Debug, Clone, PartialEq)]
enum Step {
    Key(String),
    Index(usize),
}

fn path_text(steps: &[Step]) -> String {
    let mut s = String::new();
    for st in steps {
        match st {
            Step::Key(k) if s.is_empty() => s.push_str(k),
            Step::Key(k) => {
                s.push('.');
                s.push_str(k);
            }
            Step::Index(i) => s.push_str(&format!("[{i}]")),
        }
    }
    s
}

/// A sort key for a path: each key's place in the list for the object holding it (unknown keys
/// after the known ones, by name), each index by its value.
fn path_rank(root: &[&str], steps: &[Step]) -> Vec<(usize, String)> {
    let mut parent: Option<&str> = None;
    let mut out = Vec::new();
    for st in steps {
        match st {
            Step::Index(i) => out.push((*i, String::new())),
            Step::Key(k) => {
                let list: &[&str] = match parent {
                    None => root,
                    Some(p) => NESTED_ORDER
                        .iter()
                        .find(|(n, _)| *n == p)
                        .map(|(_, l)| *l)
                        .unwrap_or(&[]),
                };
                let place = list.iter().position(|x| x == k).unwrap_or(list.len());
                out.push((place, k.clone()));
                parent = Some(k);
            }
        }
    }
    out
}

fn numbers_differ(x: f64, y: f64, tolerance: f64) -> bool {
    (x - y).abs() > tolerance * x.abs().max(y.abs()).max(1e-300)
}

/// Every leaf under `v`, with its path (an empty object or array is a leaf itself).
fn leaves(v: &serde_json::Value, steps: &mut Vec<Step>, out: &mut Vec<(Vec<Step>, serde_json::Value)>) {
    match v {
        serde_json::Value::Object(m) if !m.is_empty() => {
            for (k, x) in m {
                steps.push(Step::Key(k.clone()));
                leaves(x, steps, out);
                steps.pop();
            }
        }
        serde_json::Value::Array(a) if !a.is_empty() => {
            for (i, x) in a.iter().enumerate() {
                steps.push(Step::Index(i));
                leaves(x, steps, out);
                steps.pop();
            }
        }
        _ => out.push((steps.clone(), v.clone())),
    }
}

/// One side's value absent: each of its leaves is added or removed.
fn one_side(
    v: &serde_json::Value,
    steps: &mut Vec<Step>,
    added: bool,
    out: &mut Vec<(Vec<Step>, Option<serde_json::Value>, Option<serde_json::Value>)>,
) {
    let mut ls = Vec::new();
    leaves(v, steps, &mut ls);
    for (p, x) in ls {
        out.push(if added { (p, None, Some(x)) } else { (p, Some(x), None) });
    }
}

/// The leaves that differ between `a` and `b`, recursively.
fn walk(
    a: &serde_json::Value,
    b: &serde_json::Value,
    tolerance: f64,
    steps: &mut Vec<Step>,
    out: &mut Vec<(Vec<Step>, Option<serde_json::Value>, Option<serde_json::Value>)>,
) {
    use serde_json::Value;
    match (a, b) {
        (Value::Object(x), Value::Object(y)) if !x.is_empty() || !y.is_empty() => {
            for (k, va) in x {
                steps.push(Step::Key(k.clone()));
                match y.get(k) {
                    Some(vb) => walk(va, vb, tolerance, steps, out),
                    None => one_side(va, steps, false, out),
                }
                steps.pop();
            }
            for (k, vb) in y.iter().filter(|(k, _)| !x.contains_key(*k)) {
                steps.push(Step::Key(k.clone()));
                one_side(vb, steps, true, out);
                steps.pop();
            }
        }
        (Value::Array(x), Value::Array(y)) if !x.is_empty() || !y.is_empty() => {
            for i in 0..x.len().max(y.len()) {
                steps.push(Step::Index(i));
                match (x.get(i), y.get(i)) {
                    (Some(va), Some(vb)) => walk(va, vb, tolerance, steps, out),
                    (Some(va), None) => one_side(va, steps, false, out),
                    (None, Some(vb)) => one_side(vb, steps, true, out),
                    (None, None) => {}
                }
                steps.pop();
            }
        }
        (Value::Number(_), Value::Number(_)) => {
            let (x, y) = (a.as_f64().unwrap_or(f64::NAN), b.as_f64().unwrap_or(f64::NAN));
            if numbers_differ(x, y, tolerance) {
                out.push((steps.clone(), Some(a.clone()), Some(b.clone())));
            }
        }
        _ => {
            if a != b {
                out.push((steps.clone(), Some(a.clone()), Some(b.clone())));
            }
        }
    }
}

/// The leaves of one pair of values that differ, as drifts at `at`, in diff order.
fn leaf_drifts(a: &serde_json::Value, b: &serde_json::Value, at: At, tolerance: f64) -> Vec<Drift> {
    let root: &[&str] = match at {
        At::Report => &REPORT_ORDER,
        At::NStar(_) => &PREDICTION_ORDER,
    };
    let mut found = Vec::new();
    walk(a, b, tolerance, &mut Vec::new(), &mut found);
    found.sort_by_cached_key(|(p, _, _)| path_rank(root, p));
    found
        .into_iter()
        .map(|(p, old, new)| Drift::Leaf {
            at,
            path: path_text(&p),
            old,
            new,
        })
        .collect()
}

/// Pairs the predictions of two reports by `n_star` (the k-th prediction at one N_* with the
/// k-th at the same N_* on the other side): (old, new) in the old order, then the new ones
/// the old report lacks.
fn pair_predictions<'v>(
    old: &'v serde_json::Value,
    new: &'v serde_json::Value,
) -> Vec<(f64, Option<&'v serde_json::Value>, Option<&'v serde_json::Value>)> {
    let list = |v: &'v serde_json::Value| -> Vec<&'v serde_json::Value> {
        v["predictions"]
            .as_array()
            .map(|a| a.iter().collect())
            .unwrap_or_default()
    };
    let n_star = |p: &serde_json::Value| p["n_star"].as_f64().unwrap_or(f64::NAN);
    let (olds, news) = (list(old), list(new));
    let mut used = vec![false; news.len()];
    let mut out = Vec::new();
    for o in olds {
        let n = n_star(o);
        let hit = (0..news.len()).find(|&j| !used[j] && n_star(news[j]) == n);
        if let Some(j) = hit {
            used[j] = true;
        }
        out.push((n, Some(o), hit.map(|j| news[j])));
    }
    for (_, p) in news.iter().enumerate().filter(|(j, _)| !used[*j]) {
        out.push((n_star(p), None, Some(*p)));
    }
    out
}

/// Everything that differs between two prediction reports, beyond `tolerance` (relative, with
/// an absolute floor of 1e-300) for numbers and at all for other values: the predictions at
/// each N_* (matched by `n_star`) in their order, the keys of each in diff order (n_s, r,
/// alpha_s, the amplitude, then the rest of the report's keys), then the report around them.
/// The `model` object, the input, is left to [`input_changes`].
pub fn compare(old: &serde_json::Value, new: &serde_json::Value, tolerance: f64) -> Vec<Drift> {
    let mut out = Vec::new();
    for (n, o, p) in pair_predictions(old, new) {
        match (o, p) {
            (Some(o), Some(p)) => out.extend(leaf_drifts(o, p, At::NStar(n), tolerance)),
            (Some(_), None) => out.push(Drift::Dropped(n)),
            (None, _) => out.push(Drift::Requested(n)),
        }
    }
    let around = |v: &serde_json::Value| -> serde_json::Value {
        let mut v = v.clone();
        if let Some(m) = v.as_object_mut() {
            m.remove("model");
            m.remove("predictions");
        }
        v
    };
    out.extend(leaf_drifts(&around(old), &around(new), At::Report, tolerance));
    out
}

/// What changed in the input, the report's `model` object: `params.alpha 1 -> 1.01`,
/// `params.beta added (0.1)`, `potential edited`. Exact comparison.
pub fn input_changes(old: &serde_json::Value, new: &serde_json::Value) -> Vec<String> {
    let mut out = Vec::new();
    let wrap = |v: &serde_json::Value| serde_json::json!({ "model": v["model"] });
    for d in leaf_drifts(&wrap(old), &wrap(new), At::Report, 0.0) {
        let Drift::Leaf { path, old, new, .. } = d else {
            continue;
        };
        let path = path.strip_prefix("model.").unwrap_or(&path).to_string();
        let edited = matches!(path.as_str(), "potential" | "kinetic" | "description");
        out.push(match (old, new) {
            (Some(_), Some(_)) if edited => format!("{path} edited"),
            (Some(x), Some(y)) => format!("{path} {} -> {}", json_value(&x), json_value(&y)),
            (None, Some(y)) => format!("{path} added ({})", json_value(&y)),
            (Some(x), None) => format!("{path} removed (was {})", json_value(&x)),
            (None, None) => continue,
        });
    }
    out
}

/// The comparison of two reports as `golden check` and `watch` print it.
#[derive(Debug, Clone, PartialEq)]
pub struct Diff {
    /// What changed in the input (see [`input_changes`]).
    pub inputs: Vec<String>,
    /// One line per N_* that moved (n_s and r before and after, and the input that changed),
    /// or that is no longer or newly requested.
    pub summary: Vec<String>,
    /// Every difference, in diff order (see [`compare`]).
    pub drifts: Vec<Drift>,
}

impl Diff {
    /// True if no prediction and nothing around them moved (input edits alone do not count).
    pub fn is_empty(&self) -> bool {
        self.drifts.is_empty()
    }

    /// The summary lines, then the full diff, one line each, indented.
    pub fn lines(&self) -> Vec<String> {
        let mut out = self.summary.clone();
        out.extend(self.drifts.iter().map(|d| d.to_string()));
        out
    }
}

/// Compares two reports: the input changes, the summary and the full diff.
pub fn diff(old: &serde_json::Value, new: &serde_json::Value, tolerance: f64) -> Diff {
    let drifts = compare(old, new, tolerance);
    let inputs = input_changes(old, new);
    let cause = if inputs.is_empty() {
        "V, K and params unchanged".to_string()
    } else {
        format!("input changed: {}", inputs.join(", "))
    };
    let mut summary = Vec::new();
    for (n, o, p) in pair_predictions(old, new) {
        let line = match (o, p) {
            (Some(o), Some(p)) => {
                let moved = drifts
                    .iter()
                    .any(|d| matches!(d, Drift::Leaf { at: At::NStar(m), .. } if *m == n));
                if !moved {
                    continue;
                }
                let side = |k: &str| format!("{k} {} -> {}", json_value(&o[k]), json_value(&p[k]));
                format!("  N_* = {}: {}, {}; {cause}", typed(n), side("n_s"), side("r"))
            }
            (Some(o), None) => format!(
                "  N_* = {} no longer requested (was n_s {}, r {}); {cause}",
                typed(n),
                json_value(&o["n_s"]),
                json_value(&o["r"])
            ),
            (None, p) => {
                let p = p.unwrap_or(&serde_json::Value::Null);
                format!(
                    "  N_* = {} newly requested (n_s {}, r {}); {cause}",
                    typed(n),
                    json_value(&p["n_s"]),
                    json_value(&p["r"])
                )
            }
        };
        summary.push(line);
    }
    if summary.is_empty() && !drifts.is_empty() {
        summary.push(format!(
            "  the predictions did not move, the report around them did; {cause}"
        ));
    }
    Diff {
        inputs,
        summary,
        drifts,
    }
}

/// The golden report of a model of several fields: the JSON of `efold predict` for it
/// ([`crate::report::multi::json`]), its `model` (the name alone there) replaced by the input
/// (name, description, fields, potential, metric, parameters, start), so that a diff names the
/// input that changed.
pub fn several_fields_report(model: &crate::model::Model, prediction_json: &str) -> serde_json::Value {
    use serde_json::{json, Map, Value};
    let spec = &model.spec;
    let texts = |pairs: Vec<(&String, &String)>| -> Value {
        Value::Object(
            pairs
                .into_iter()
                .map(|(k, v)| (k.clone(), json!(v)))
                .collect::<Map<_, _>>(),
        )
    };
    let numbers = |names: &[String], values: &[f64]| -> Value {
        Value::Object(
            names
                .iter()
                .cloned()
                .zip(values.iter().map(|v| json!(v)))
                .collect::<Map<_, _>>(),
        )
    };
    let input = json!({
        "name": spec.name,
        "description": spec.description,
        "fields": model.field_names(),
        "potential": spec.potential.text,
        "metric": texts(spec.metric.iter().map(|e| (&e.key.text, &e.value.text)).collect()),
        "params": numbers(&model.scope.params, &model.params),
        "start": numbers(model.field_names(), model.start().unwrap_or_default()),
    });
    let mut v: Value = serde_json::from_str(prediction_json).expect("the prediction's own JSON");
    if let Some(m) = v.as_object_mut() {
        m.insert("model".into(), input);
    }
    v
}

/// The fields of the model a golden report was written for, when it has several (`None`: a
/// report of one field).
pub fn report_fields(report: &serde_json::Value) -> Option<Vec<String>> {
    report
        .get("fields")?
        .as_array()
        .map(|a| a.iter().map(|f| f.as_str().unwrap_or_default().to_string()).collect())
}

/// The kind of model a report is of, for people: `one field`, `2 fields (x, y)`.
pub fn kind_text(fields: &Option<Vec<String>>) -> String {
    match fields {
        Some(f) => format!("{} fields ({})", f.len(), f.join(", ")),
        None => "one field".to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::Config;
    use crate::drivers::predict::{predict, Options};
    use crate::model::{Model, ModelSpec};
    use serde_json::json;

    /// A directory that cannot be read is an error naming it, drawn by the one renderer as
    /// its plain message was before.
    #[test]
    fn an_unreadable_directory_is_named() {
        let dir = std::env::temp_dir().join(format!("efold-no-such-dir-{}", std::process::id()));
        let e = model_files(&dir).unwrap_err();
        let GoldenError::Directory { path, error } = &e;
        assert_eq!(path, &dir);
        let message = format!("cannot read directory `{}`: {error}", dir.display());
        assert_eq!(e.to_string(), message);
        assert_eq!(e.render(), crate::diag::Diagnostic::new(message).render(None));
    }

    fn prediction(n_star: f64, n_s: f64, r: f64) -> serde_json::Value {
        json!({
            "n_star": n_star, "phi_star": 2.4, "n_s": n_s, "r": r, "alpha_s": -6e-4,
            "a_s_unscaled": 17.0, "potential_scale": 1.2e-10, "verdict": "consistent",
            "pole_only": {"order": 2.0, "residue": 1.5, "n_s": 0.96, "r": 0.0048},
        })
    }

    fn report(alpha: f64, predictions: Vec<serde_json::Value>) -> serde_json::Value {
        json!({
            "model": {"name": "m", "description": "", "field": "phi", "potential": "phi^2",
                      "kinetic": "1", "params": {"alpha": alpha}},
            "method": "slow-roll", "branch": {"index": 1, "count": 1, "top": 2.0, "bottom": 0.0},
            "predictions": predictions, "warnings": [],
        })
    }

    fn paths(d: &[Drift]) -> Vec<String> {
        d.iter()
            .map(|d| match d {
                Drift::Leaf { at, path, .. } => format!("{}: {path}", where_(*at)),
                Drift::Dropped(n) => format!("dropped {n}"),
                Drift::Requested(n) => format!("requested {n}"),
            })
            .collect()
    }

    #[test]
    fn identical_reports_have_no_drift() {
        let a = report(
            1.0,
            vec![prediction(50.0, 0.96, 0.0046), prediction(55.0, 0.964, 0.0038)],
        );
        assert!(compare(&a, &a, 0.0).is_empty());
        assert!(diff(&a, &a, 1e-8).is_empty());
    }

    #[test]
    fn a_nested_number_is_compared_and_named_by_its_path() {
        let a = report(1.0, vec![prediction(55.0, 0.964, 0.0038)]);
        let mut b = a.clone();
        b["predictions"][0]["pole_only"]["r"] = json!(0.00485);
        let d = compare(&a, &b, 1e-8);
        assert_eq!(
            d,
            vec![Drift::Leaf {
                at: At::NStar(55.0),
                path: "pole_only.r".into(),
                old: Some(json!(0.0048)),
                new: Some(json!(0.00485)),
            }]
        );
    }

    #[test]
    fn numbers_compare_relatively_other_values_exactly() {
        let a = report(1.0, vec![prediction(55.0, 0.964, 0.0038)]);
        let mut b = a.clone();
        // 0.0038 (1 + 5e-9): within 1e-8 of it; 0.964 (1 + 2e-8): beyond
        b["predictions"][0]["r"] = json!(0.0038 * (1.0 + 5e-9));
        b["predictions"][0]["n_s"] = json!(0.964 * (1.0 + 2e-8));
        b["predictions"][0]["verdict"] = json!("tension");
        b["method"] = json!("exact");
        let d = compare(&a, &b, 1e-8);
        assert_eq!(paths(&d), ["N_* = 55: n_s", "N_* = 55: verdict", "report: method"]);
        // a number turned into a string ("inf") is a change
        let mut c = a.clone();
        c["predictions"][0]["r"] = json!("inf");
        assert_eq!(paths(&compare(&a, &c, 1e-8)), ["N_* = 55: r"]);
    }

    #[test]
    fn keys_on_one_side_are_added_or_removed_leaf_by_leaf() {
        let a = report(1.0, vec![prediction(55.0, 0.964, 0.0038)]);
        let mut b = a.clone();
        let p = b["predictions"][0].as_object_mut().unwrap();
        p.remove("pole_only");
        p.insert("reheating".into(), json!({"n_star": 55.0, "w": 0.0}));
        b["warnings"] = json!(["branch 2 was used"]);
        let d = compare(&a, &b, 1e-8);
        assert_eq!(
            paths(&d),
            [
                "N_* = 55: pole_only.n_s",
                "N_* = 55: pole_only.r",
                "N_* = 55: pole_only.order",
                "N_* = 55: pole_only.residue",
                "N_* = 55: reheating.n_star",
                "N_* = 55: reheating.w",
                "report: warnings[0]",
            ]
        );
        assert!(matches!(
            &d[0],
            Drift::Leaf {
                old: Some(_),
                new: None,
                ..
            }
        ));
        assert!(matches!(
            &d[4],
            Drift::Leaf {
                old: None,
                new: Some(_),
                ..
            }
        ));
        assert_eq!(d[0].to_string(), "  N_* = 55: pole_only.n_s        removed (was 0.96)");
        assert_eq!(
            d[6].to_string(),
            "  report: warnings[0]          added: \"branch 2 was used\""
        );
    }

    #[test]
    fn predictions_are_matched_by_n_star_not_position() {
        let p = |n: f64| prediction(n, 1.0 - 2.0 / n, 12.0 / (n * n));
        let a = report(1.0, vec![p(50.0), p(55.0), p(60.0)]);
        let b = report(1.0, vec![p(55.0), p(60.0), p(65.0)]);
        assert_eq!(paths(&compare(&a, &b, 1e-8)), ["dropped 50", "requested 65"]);
        let d = diff(&a, &b, 1e-8);
        assert_eq!(d.summary.len(), 2, "{:?}", d.summary);
        assert!(d.summary[0].starts_with("  N_* = 50 no longer requested (was n_s 0.96, r 0.0048)"));
        assert!(d.summary[1].starts_with("  N_* = 65 newly requested (n_s "));
        assert_eq!(Drift::Dropped(60.0).to_string(), "  N_* = 60 no longer requested");
        assert_eq!(Drift::Requested(65.0).to_string(), "  N_* = 65 newly requested");
    }

    #[test]
    fn a_diff_lists_n_s_r_alpha_s_and_the_amplitude_first() {
        let a = report(1.0, vec![prediction(55.0, 0.964, 0.0038)]);
        let mut b = a.clone();
        for k in [
            "verdict",
            "phi_star",
            "potential_scale",
            "a_s_unscaled",
            "alpha_s",
            "r",
            "n_s",
        ] {
            let v = &mut b["predictions"][0][k];
            *v = match v.as_f64() {
                Some(x) => json!(x * 1.01),
                None => json!("tension"),
            };
        }
        b["predictions"][0]["pole_only"]["residue"] = json!(1.6);
        b["branch"]["top"] = json!(2.1);
        let d = compare(&a, &b, 1e-8);
        assert_eq!(
            paths(&d),
            [
                "N_* = 55: n_s",
                "N_* = 55: r",
                "N_* = 55: alpha_s",
                "N_* = 55: a_s_unscaled",
                "N_* = 55: potential_scale",
                "N_* = 55: phi_star",
                "N_* = 55: verdict",
                "N_* = 55: pole_only.residue",
                "report: branch.top",
            ]
        );
    }

    #[test]
    fn the_summary_names_n_s_r_and_the_input_that_changed() {
        let a = report(1.0, vec![prediction(55.0, 0.964, 0.0038)]);
        let mut b = report(1.01, vec![prediction(55.0, 0.964, 0.00384)]);
        b["model"]["potential"] = json!("phi^2 + phi^4");
        b["model"]["params"]["beta"] = json!(0.5);
        assert_eq!(
            input_changes(&a, &b),
            ["potential edited", "params.alpha 1 -> 1.01", "params.beta added (0.5)"]
        );
        let d = diff(&a, &b, 1e-8);
        assert_eq!(
            d.summary,
            ["  N_* = 55: n_s 0.964 -> 0.964, r 0.0038 -> 0.00384; \
              input changed: potential edited, params.alpha 1 -> 1.01, params.beta added (0.5)"]
        );
        assert_eq!(d.lines()[0], d.summary[0]);
        assert_eq!(
            d.lines()[1],
            "  N_* = 55: r                    0.00380000 -> 0.00384000  (relative 1.1e-2)"
        );
        // an edit of the input alone, with no prediction moving, is no drift
        let mut c = a.clone();
        c["model"]["description"] = json!("now described");
        assert!(diff(&a, &c, 1e-8).is_empty());
        // without an input change the summary says so
        let e = report(1.0, vec![prediction(55.0, 0.965, 0.0038)]);
        assert!(diff(&a, &e, 1e-8).summary[0].ends_with("; V, K and params unchanged"));
    }

    /// The order lists name every key the reports have, so no key falls to the unordered tail.
    #[test]
    fn the_order_lists_cover_the_report() {
        let spec = ModelSpec::inline("phi^2/(6*alpha)", Some("1/(1 - phi^2/(6*alpha))^2"));
        let mut spec = spec;
        spec.set_param("alpha", "1");
        let model = Model::build(&spec, &Config::default()).unwrap();
        let rep = predict(&model, &Options::default(), &Config::default()).unwrap();
        let v = serde_json::to_value(&rep).unwrap();
        let keys = |v: &serde_json::Value| -> Vec<String> { v.as_object().unwrap().keys().cloned().collect() };
        let nested = |name: &str| NESTED_ORDER.iter().find(|(n, _)| *n == name).unwrap().1;
        for k in keys(&v) {
            assert!(REPORT_ORDER.contains(&k.as_str()), "{k}");
        }
        for k in keys(&v["predictions"][0]) {
            assert!(PREDICTION_ORDER.contains(&k.as_str()), "{k}");
        }
        for (name, sub) in [
            ("pole_only", &v["predictions"][0]["pole_only"]),
            ("branch", &v["branch"]),
        ] {
            for k in keys(sub) {
                assert!(nested(name).contains(&k.as_str()), "{name}.{k}");
            }
        }
        let matching = crate::analysis::reheating::Matching {
            n_star: 0.0,
            n_reh: 0.0,
            t_reh_gev: 0.0,
            w: 0.0,
            g_star: 0.0,
            rho_end_gev4: 0.0,
        };
        let exact = crate::analysis::perturbations::ExactExtras {
            n_total: 0.0,
            phi_end_slow_roll: 0.0,
            phi_star_slow_roll: 0.0,
            n_s_slow_roll: 0.0,
            r_slow_roll: 0.0,
            eps_1: 0.0,
            eps_2: 0.0,
            eps_3: 0.0,
            n_s_second_order: 0.0,
            r_second_order: 0.0,
            n_t_second_order: 0.0,
            p_s_unscaled: 0.0,
            freeze_drift: 0.0,
        };
        for (name, sub) in [
            ("reheating", serde_json::to_value(matching).unwrap()),
            ("exact", serde_json::to_value(exact).unwrap()),
            ("data", serde_json::to_value(&rep.data).unwrap()),
            ("model", v["model"].clone()),
        ] {
            let k = keys(&sub);
            assert_eq!(k.len(), nested(name).len(), "{name}: {k:?}");
            for k in k {
                assert!(nested(name).contains(&k.as_str()), "{name}.{k}");
            }
        }
    }
}
