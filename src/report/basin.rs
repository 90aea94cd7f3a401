//! A basin run as text, JSON and CSV.
//!
//! JSON: one object, `model`, `fields`, `need`, `efolds`, `velocity`, `sampling` (and `seed`,
//! `shard` where they apply), `summary` (`count`, `fraction_enough`, `fraction_uncertainty`,
//! `outcomes`, `minima`, `directions`, `clusters`) and `points`, each with `index`, `start`
//! (field name -> value), `x_kinetic`, `direction`, `n_total`, `n_inflating`, `outcome`,
//! `end`, `minimum`, `rolls_along`, `n_s` and `r` (lists aligned with `efolds`, null where
//! the run has too few e-folds) and `reason`. CSV: one row per start and N_*.

use crate::drivers::basin::{BasinPoint, Summary};
use crate::report::numfmt::{number, row_opt, typed};
use indexmap::IndexMap;
use serde_json::{json, Value};

/// A JSON object that keeps its keys in the order written (a `serde_json::Map` sorts them).
type Object = IndexMap<String, Node>;

/// A value of an [`Object`]: a plain JSON value, or an object or list that keeps its order.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(untagged)]
enum Node {
    Leaf(Value),
    Obj(Object),
    List(Vec<Object>),
}

impl<T: Into<Value>> From<T> for Node {
    fn from(v: T) -> Node {
        Node::Leaf(v.into())
    }
}

/// What a report says about the run besides its points.
#[derive(Debug, Clone, PartialEq)]
pub struct Header {
    /// The model's name.
    pub model: String,
    /// The field names.
    pub fields: Vec<String>,
    /// `--need`.
    pub need: f64,
    /// N_* values.
    pub n_stars: Vec<f64>,
    /// `attractor`, `rest` or `kinetic`.
    pub velocity: String,
    /// `grid` or `random`.
    pub sampling: String,
    /// The seed of a random sample.
    pub seed: Option<u64>,
    /// Shard provenance (a JSON object), if sharded.
    pub shard: Option<Value>,
}

fn named(names: &[String], xs: &[f64]) -> Object {
    names
        .iter()
        .zip(xs)
        .map(|(n, x)| (n.clone(), Node::from(json!(x))))
        .collect()
}

/// One point as a JSON object (module docs), keys in the documented order.
fn json_point(names: &[String], p: &BasinPoint) -> Object {
    let r = &p.result;
    let mut m = Object::new();
    let mut put = |k: &str, v: Node| {
        m.insert(k.to_string(), v);
    };
    put("index", json!(p.index).into());
    put("start", Node::Obj(named(names, &p.start)));
    put("x_kinetic", json!(p.x_kinetic).into());
    put("direction", json!(p.direction).into());
    put("n_total", json!(r.n_total).into());
    put("n_inflating", json!(r.n_inflating).into());
    put("outcome", json!(r.outcome.name()).into());
    put(
        "end",
        if r.end.is_empty() {
            Value::Null.into()
        } else {
            Node::Obj(named(names, &r.end))
        },
    );
    put(
        "minimum",
        r.minimum
            .as_ref()
            .map_or(Value::Null.into(), |m| Node::Obj(named(names, m))),
    );
    put("rolls_along", json!(r.rolls_along.map(|a| names[a].clone())).into());
    put("n_s", json!(r.n_s).into());
    put("r", json!(r.r).into());
    put("reason", json!(r.reason).into());
    m
}

/// The whole run as one JSON object (module docs).
pub fn json(h: &Header, s: &Summary, points: &[BasinPoint]) -> String {
    let mut top = Object::new();
    top.insert("model".into(), json!(h.model).into());
    top.insert("fields".into(), json!(h.fields).into());
    top.insert("need".into(), json!(h.need).into());
    top.insert("efolds".into(), json!(h.n_stars).into());
    top.insert("velocity".into(), json!(h.velocity).into());
    top.insert("sampling".into(), json!(h.sampling).into());
    if let Some(seed) = h.seed {
        top.insert("seed".into(), json!(seed).into());
    }
    if let Some(sh) = &h.shard {
        top.insert("shard".into(), sh.clone().into());
    }
    top.insert("summary".into(), Node::Obj(summary_object(s)));
    top.insert(
        "points".into(),
        Node::List(points.iter().map(|p| json_point(&h.fields, p)).collect()),
    );
    let mut out = serde_json::to_string_pretty(&top).expect("JSON values serialise");
    out.push('\n');
    out
}

/// The summary with its keys in the documented order.
fn summary_object(s: &Summary) -> Object {
    let mut m = Object::new();
    m.insert("count".into(), json!(s.count).into());
    m.insert("fraction_enough".into(), json!(s.fraction_enough).into());
    m.insert("fraction_uncertainty".into(), json!(s.fraction_uncertainty).into());
    let counts = |c: &IndexMap<String, usize>| Node::Obj(c.iter().map(|(k, v)| (k.clone(), json!(v).into())).collect());
    m.insert("outcomes".into(), counts(&s.outcomes));
    m.insert("minima".into(), counts(&s.minima));
    m.insert("directions".into(), counts(&s.directions));
    let spread = |x: &crate::drivers::basin::Spread| {
        Node::Obj(
            [("min", x.min), ("median", x.median), ("max", x.max)]
                .into_iter()
                .map(|(k, v)| (k.to_string(), json!(v).into()))
                .collect(),
        )
    };
    let clusters: Vec<Object> = s
        .clusters
        .iter()
        .map(|c| {
            let mut o = Object::new();
            o.insert("label".into(), json!(c.label).into());
            o.insert("n_star".into(), json!(c.n_star).into());
            o.insert("count".into(), json!(c.count).into());
            o.insert("n_s".into(), spread(&c.n_s));
            o.insert("r".into(), spread(&c.r));
            o
        })
        .collect();
    m.insert("clusters".into(), Node::List(clusters));
    m
}

fn csv_num(x: Option<f64>) -> String {
    x.map_or(String::new(), |v| format!("{v:e}"))
}

fn csv_text(s: &str) -> String {
    format!("\"{}\"", s.replace('"', "\"\""))
}

/// The CSV header.
pub fn csv_header(names: &[String]) -> String {
    let mut cols: Vec<String> = vec!["index".into()];
    cols.extend(names.iter().cloned());
    cols.extend(["x_kinetic", "direction", "n_total", "n_inflating", "outcome"].map(String::from));
    cols.extend(names.iter().map(|n| format!("end_{n}")));
    cols.extend(["minimum", "rolls_along", "n_star", "n_s", "r", "reason"].map(String::from));
    cols.join(",")
}

/// The CSV lines of the points, one per start and N_*, without the header.
pub fn csv_rows(names: &[String], n_stars: &[f64], points: &[BasinPoint]) -> String {
    let mut o = String::new();
    for p in points {
        let r = &p.result;
        let mut head: Vec<String> = vec![p.index.to_string()];
        head.extend(p.start.iter().map(|v| format!("{v:e}")));
        head.push(csv_num(p.x_kinetic));
        head.push(p.direction.unwrap_or("").to_string());
        head.push(format!("{:e}", r.n_total));
        head.push(format!("{:e}", r.n_inflating));
        head.push(r.outcome.name().to_string());
        for j in 0..names.len() {
            head.push(csv_num(r.end.get(j).copied()));
        }
        head.push(r.minimum.as_ref().map_or(String::new(), |m| {
            csv_text(&crate::drivers::basin::point_label(names, m))
        }));
        head.push(r.rolls_along.map_or(String::new(), |a| names[a].clone()));
        for (i, n) in n_stars.iter().enumerate() {
            let mut f = head.clone();
            f.push(format!("{n}"));
            f.push(csv_num(r.n_s[i]));
            f.push(csv_num(r.r[i]));
            f.push(r.reason.as_deref().map_or(String::new(), csv_text));
            o.push_str(&f.join(","));
            o.push('\n');
        }
    }
    o
}

/// The CSV table, header first.
pub fn csv(names: &[String], n_stars: &[f64], points: &[BasinPoint]) -> String {
    format!("{}\n{}", csv_header(names), csv_rows(names, n_stars, points))
}

/// The summary for people.
pub fn text(h: &Header, s: &Summary) -> String {
    let mut o = format!(
        "basin of initial conditions: {} ({} starts, {} sampling, velocity: {})\n",
        h.model, s.count, h.sampling, h.velocity
    );
    let enough = s.outcomes.get("enough").copied().unwrap_or(0);
    let unc = s
        .fraction_uncertainty
        .map_or(String::new(), |u| format!(" +- {}", number(u)));
    o.push_str(&format!(
        "  enough e-folds (n_total >= {}): {}{} ({enough} of {})\n",
        typed(h.need),
        number(s.fraction_enough),
        unc,
        s.count
    ));
    o.push_str("  outcomes:\n");
    for (k, v) in &s.outcomes {
        o.push_str(&format!("    {k:<14} {v}\n"));
    }
    if !s.minima.is_empty() {
        o.push_str("  final minimum of V:\n");
        for (k, v) in &s.minima {
            o.push_str(&format!("    {k:<20} {v}\n"));
        }
    }
    if !s.directions.is_empty() {
        o.push_str("  rolling along at the end of inflation:\n");
        for (k, v) in &s.directions {
            o.push_str(&format!("    {k:<20} {v}\n"));
        }
    }
    if !s.clusters.is_empty() {
        o.push_str("  n_s and r (min, median, max) per cluster:\n");
        for c in &s.clusters {
            let ns = row_opt(&[Some(c.n_s.min), Some(c.n_s.median), Some(c.n_s.max)], 5);
            let r = row_opt(&[Some(c.r.min), Some(c.r.median), Some(c.r.max)], 4);
            o.push_str(&format!(
                "    {} at N_* = {} ({} starts): n_s {}, r {}\n",
                c.label,
                typed(c.n_star),
                c.count,
                ns.join(" "),
                r.join(" ")
            ));
        }
    }
    o
}
