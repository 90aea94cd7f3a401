//! A basin run as text, JSON and CSV.
//!
//! JSON: one object, `model`, `fields`, `need`, `efolds`, `velocity`, `sampling` (and `seed`
//! for a random sample), `definition` (the samples and velocity as given), `shard` (for a
//! shard), `summary` (`count`, `fraction_enough`, `fraction_uncertainty`,
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
    /// What defines the run beyond these: the samples and the velocity as given.
    pub definition: String,
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
    top.insert("definition".into(), json!(h.definition).into());
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

/// Why shards of a basin run cannot be merged.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct MergeError(pub String);

impl std::fmt::Display for MergeError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for MergeError {}

/// The keys every shard of one run shares (the run's definition).
const DEFINITION_KEYS: [&str; 8] = [
    "model",
    "fields",
    "need",
    "efolds",
    "velocity",
    "sampling",
    "seed",
    "definition",
];

/// One point read back from a shard's JSON.
fn point_from_json(names: &[String], v: &Value) -> Option<BasinPoint> {
    use crate::analysis::basin::{Outcome, StartResult};
    let by_name = |m: &Value| -> Option<Vec<f64>> { names.iter().map(|n| m.get(n)?.as_f64()).collect() };
    let opt_list = |m: &Value| -> Option<Vec<Option<f64>>> {
        m.as_array()?
            .iter()
            .map(|x| if x.is_null() { Some(None) } else { x.as_f64().map(Some) })
            .collect()
    };
    let outcome = Outcome::ALL.into_iter().find(|o| v["outcome"] == o.name())?;
    let result = StartResult {
        n_total: v["n_total"].as_f64()?,
        n_inflating: v["n_inflating"].as_f64()?,
        outcome,
        end: if v["end"].is_null() {
            Vec::new()
        } else {
            by_name(&v["end"])?
        },
        minimum: if v["minimum"].is_null() {
            None
        } else {
            Some(by_name(&v["minimum"])?)
        },
        rolls_along: match v["rolls_along"].as_str() {
            Some(s) => Some(names.iter().position(|n| n == s)?),
            None => None,
        },
        n_s: opt_list(&v["n_s"])?,
        r: opt_list(&v["r"])?,
        reason: v["reason"].as_str().map(String::from),
    };
    Some(BasinPoint {
        index: v["index"].as_u64()? as usize,
        start: by_name(&v["start"])?,
        x_kinetic: v["x_kinetic"].as_f64(),
        direction: match v["direction"].as_str() {
            Some("down") => Some("down"),
            Some("up") => Some("up"),
            Some(_) => return None,
            None => None,
        },
        result,
    })
}

/// Joins the JSON shards of one `efold basin --shard K/N` run (`(file name, text)`, in any
/// order) into the output of the unsharded run, byte for byte: every shard 1..N exactly once,
/// all of one run (the same definition and size), their slices contiguous; the summary is
/// computed again from all the points.
pub fn merge(texts: &[(String, String)]) -> Result<String, MergeError> {
    let err = |m: String| MergeError(m);
    let mut shards: Vec<(String, Value)> = Vec::new();
    for (name, t) in texts {
        let v: Value =
            serde_json::from_str(t).map_err(|e| err(format!("`{name}` is not the JSON of `efold basin`: {e}")))?;
        if !v["shard"].is_object() {
            return Err(err(format!(
                "`{name}` is not a shard: it has no `shard` record (run with --shard K/N)"
            )));
        }
        shards.push((name.clone(), v));
    }
    let Some((first_name, first)) = shards.first().cloned() else {
        return Err(err("no shards given".into()));
    };
    let n = first["shard"]["shards"].as_u64().unwrap_or(0) as usize;
    let total = first["shard"]["total"].clone();
    for (name, v) in &shards {
        for k in DEFINITION_KEYS {
            if v.get(k) != first.get(k) {
                return Err(err(format!(
                    "`{name}` and `{first_name}` are shards of different runs (`{k}` differs)"
                )));
            }
        }
        if v["shard"]["shards"].as_u64() != Some(n as u64) || v["shard"]["total"] != total {
            return Err(err(format!(
                "`{name}` and `{first_name}` cut the run into different shards"
            )));
        }
    }
    shards.sort_by_key(|(_, v)| v["shard"]["shard"].as_u64().unwrap_or(0));
    let ks: Vec<u64> = shards
        .iter()
        .map(|(_, v)| v["shard"]["shard"].as_u64().unwrap_or(0))
        .collect();
    if ks != (1..=n as u64).collect::<Vec<_>>() {
        return Err(err(format!(
            "the shards given are {ks:?}; a run of {n} shards needs each of 1..={n} once"
        )));
    }
    let names: Vec<String> = serde_json::from_value(first["fields"].clone()).map_err(|e| err(e.to_string()))?;
    let mut points = Vec::new();
    let mut next = 0u64;
    for (name, v) in &shards {
        if v["shard"]["points"][0].as_u64() != Some(next) {
            return Err(err(format!("`{name}` does not start where the shard before it ends")));
        }
        next = v["shard"]["points"][1].as_u64().unwrap_or(0);
        for p in v["points"].as_array().into_iter().flatten() {
            points.push(
                point_from_json(&names, p)
                    .ok_or_else(|| err(format!("`{name}` has a point that is not as written")))?,
            );
        }
    }
    let n_stars: Vec<f64> = serde_json::from_value(first["efolds"].clone()).map_err(|e| err(e.to_string()))?;
    let random = first["sampling"] == "random";
    let header = Header {
        model: first["model"].as_str().unwrap_or_default().to_string(),
        fields: names.clone(),
        need: first["need"].as_f64().unwrap_or(0.0),
        n_stars: n_stars.clone(),
        velocity: first["velocity"].as_str().unwrap_or_default().to_string(),
        sampling: first["sampling"].as_str().unwrap_or_default().to_string(),
        seed: first["seed"].as_u64(),
        definition: first["definition"].as_str().unwrap_or_default().to_string(),
        shard: None,
    };
    let summary = crate::drivers::basin::summarise(&points, &names, &n_stars, random);
    Ok(json(&header, &summary, &points))
}
