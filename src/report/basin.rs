//! A basin run as text, JSON and CSV, and its figure ([`figure`]).
//!
//! JSON: one object, `model`, `fields`, `need`, `efolds`, `velocity`, `sampling` (and `seed`
//! for a random sample), `definition` (the samples and velocity as given), `shard` (for a
//! shard), `summary` (`count`, `fraction_enough`, `fraction_uncertainty`,
//! `outcomes`, `minima`, `directions`, `clusters`) and `points`, each with `index`, `start`
//! (field name -> value), `x_kinetic`, `direction`, `n_total`, `n_inflating`, `outcome`,
//! `end`, `minimum`, `rolls_along`, `n_s` and `r` (lists aligned with `efolds`, null where
//! the run has too few e-folds) and `reason`. CSV: one row per start and N_*.

use crate::analysis::basin::sample::Plan;
use crate::data::DataSet;
use crate::drivers::basin::{BasinPoint, Summary};
use crate::report::numfmt::{number, row_opt, typed};
use crate::report::plot::{self, ColorBar, Marker, Panel, Region, Series};
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
        head.extend(p.start.iter().map(|v| crate::report::numfmt::typed(*v)));
        head.push(p.x_kinetic.map_or(String::new(), crate::report::numfmt::typed));
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

/// The first line of a CSV shard: [`CSV_SHARD_MARK`], then one line of JSON with the run's
/// definition (the keys a JSON shard has besides its summary and points) and the `shard`
/// record, so that [`merge`] can check CSV shards as it checks JSON ones.
pub const CSV_SHARD_MARK: &str = "# efold-basin-shard ";

/// The CSV table of a run; a shard's starts with its provenance line ([`CSV_SHARD_MARK`]).
pub fn csv_table(h: &Header, points: &[BasinPoint]) -> String {
    let body = csv(&h.fields, &h.n_stars, points);
    match &h.shard {
        None => body,
        Some(sh) => {
            let mut m = serde_json::Map::new();
            m.insert("model".into(), json!(h.model));
            m.insert("fields".into(), json!(h.fields));
            m.insert("need".into(), json!(h.need));
            m.insert("efolds".into(), json!(h.n_stars));
            m.insert("velocity".into(), json!(h.velocity));
            m.insert("sampling".into(), json!(h.sampling));
            if let Some(seed) = h.seed {
                m.insert("seed".into(), json!(seed));
            }
            m.insert("definition".into(), json!(h.definition));
            m.insert("shard".into(), sh.clone());
            let line = serde_json::to_string(&Value::Object(m)).expect("JSON values serialise");
            format!("{CSV_SHARD_MARK}{line}\n{body}")
        }
    }
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
    let csv_count = texts.iter().filter(|(_, t)| t.starts_with(CSV_SHARD_MARK)).count();
    if csv_count > 0 && csv_count < texts.len() {
        return Err(err(
            "CSV and JSON shards are mixed: give the shards of one format".into()
        ));
    }
    let csv = csv_count > 0;
    let mut shards: Vec<(String, Value)> = Vec::new();
    let mut bodies: IndexMap<String, String> = IndexMap::new();
    for (name, t) in texts {
        let v: Value = if csv {
            let (line, body) = t.split_once('\n').unwrap_or((t, ""));
            bodies.insert(name.clone(), body.to_string());
            serde_json::from_str(&line[CSV_SHARD_MARK.len()..])
                .map_err(|e| err(format!("`{name}` has a shard line that is not as written: {e}")))?
        } else {
            if t.starts_with("index,") {
                return Err(err(format!(
                    "`{name}` is a CSV table without a shard line: it is not a shard (run with --shard K/N)"
                )));
            }
            serde_json::from_str(t).map_err(|e| err(format!("`{name}` is not the JSON of `efold basin`: {e}")))?
        };
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
    let n_stars: Vec<f64> = serde_json::from_value(first["efolds"].clone()).map_err(|e| err(e.to_string()))?;
    let mut points = Vec::new();
    let mut next = 0u64;
    let mut rows = String::new();
    for (name, v) in &shards {
        if v["shard"]["points"][0].as_u64() != Some(next) {
            return Err(err(format!("`{name}` does not start where the shard before it ends")));
        }
        let first_point = next;
        next = v["shard"]["points"][1].as_u64().unwrap_or(0);
        if csv {
            rows.push_str(&csv_shard_rows(
                name,
                &bodies[name],
                &names,
                n_stars.len(),
                first_point,
                next,
            )?);
            continue;
        }
        for p in v["points"].as_array().into_iter().flatten() {
            points.push(
                point_from_json(&names, p)
                    .ok_or_else(|| err(format!("`{name}` has a point that is not as written")))?,
            );
        }
    }
    if csv {
        if next != total.as_u64().unwrap_or(u64::MAX) {
            return Err(err(format!("the shards end at point {next}, the run has {total}")));
        }
        return Ok(format!("{}\n{rows}", csv_header(&names)));
    }
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

/// The rows of one CSV shard (`body`: the header line and the rows), checked to hold points
/// `first..end` in order with one row per N_* each, every row with the header's number of
/// fields, and a final newline.
fn csv_shard_rows(
    name: &str,
    body: &str,
    names: &[String],
    per_point: usize,
    first: u64,
    end: u64,
) -> Result<String, MergeError> {
    let err = |m: String| MergeError(m);
    let header = csv_header(names);
    let Some(rows) = body.strip_prefix(&header).and_then(|r| r.strip_prefix('\n')) else {
        return Err(err(format!("`{name}` does not have the header of this run's CSV")));
    };
    if !rows.is_empty() && !rows.ends_with('\n') {
        return Err(err(format!(
            "`{name}` is cut short: its last row does not end in a newline"
        )));
    }
    let columns = header.split(',').count();
    let mut count = 0u64;
    for (i, line) in rows.lines().enumerate() {
        let fields = csv_field_count(line);
        let want = first + (i / per_point.max(1)) as u64;
        let index = line.split(',').next().and_then(|x| x.parse::<u64>().ok());
        if fields != columns || index != Some(want) {
            return Err(err(format!(
                "`{name}` row {} is not as written (expected point {want} with {columns} fields)",
                i + 2
            )));
        }
        count += 1;
    }
    if count != (end - first) * per_point as u64 {
        return Err(err(format!(
            "`{name}` holds {count} rows; its points {first}..{end} need {}",
            (end - first) * per_point as u64
        )));
    }
    Ok(rows.to_string())
}

/// The number of fields of a CSV line whose quoted fields may hold commas and doubled quotes
/// (as [`csv_rows`] writes them).
fn csv_field_count(line: &str) -> usize {
    let mut quoted = false;
    1 + line
        .chars()
        .filter(|&c| {
            if c == '"' {
                quoted = !quoted;
            }
            c == ',' && !quoted
        })
        .count()
}

/// How a sampled coordinate is drawn: its values (log10 of them on a logarithmic axis) and
/// its label.
struct MapAxis {
    index: usize,
    log: bool,
    label: String,
}

impl MapAxis {
    fn value(&self, coords: &[f64]) -> f64 {
        let v = coords[self.index];
        if self.log {
            v.log10()
        } else {
            v
        }
    }
}

/// The axes of the map: the plan's first two coordinates, each logarithmic where it was
/// sampled so (a grid axis spanning more than a factor 20 above zero, or a `:log` range).
fn map_axes(plan: &Plan) -> Vec<MapAxis> {
    let names = plan.names();
    let logs: Vec<bool> = match plan {
        Plan::Grid(axes) => axes
            .iter()
            .map(|a| {
                let lo = a.values.iter().copied().fold(f64::INFINITY, f64::min);
                let hi = a.values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                lo > 0.0 && hi / lo > 20.0
            })
            .collect(),
        Plan::Random { ranges, .. } => ranges.iter().map(|r| r.log).collect(),
    };
    names
        .iter()
        .zip(logs)
        .enumerate()
        .take(2)
        .map(|(index, (name, log))| {
            let sym = if name == crate::drivers::basin::X_NAME {
                "$X$ = $\\rho$_{kin}/$V$".to_string()
            } else {
                plot::symbol(name)
            };
            MapAxis {
                index,
                log,
                label: if log { format!("log_{{10}} {sym}") } else { sym },
            }
        })
        .collect()
}

/// The colour of total e-folds on the map's scale (blue few, yellow many), grey for a start
/// that failed or never inflated.
struct Shade {
    lo: f64,
    hi: f64,
}

impl Shade {
    fn of(points: &[BasinPoint]) -> Shade {
        let ns: Vec<f64> = points.iter().map(|p| p.result.n_total).filter(|n| *n > 0.0).collect();
        let lo = ns.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = ns.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if lo.is_finite() && hi > lo {
            Shade { lo, hi }
        } else if lo.is_finite() {
            Shade {
                lo: lo / 2.0,
                hi: lo * 2.0,
            }
        } else {
            Shade { lo: 0.1, hi: 100.0 }
        }
    }

    fn color(&self, p: &BasinPoint) -> String {
        let n = p.result.n_total;
        if p.result.outcome == crate::analysis::basin::Outcome::Failed || n <= 0.0 {
            return "#b0b0b0".into();
        }
        let t = ((n.ln() - self.lo.ln()) / (self.hi.ln() - self.lo.ln())).clamp(0.0, 1.0);
        gradient(t)
    }

    fn bar(&self) -> ColorBar {
        ColorBar {
            label: "$N$_{total}".into(),
            lo: self.lo,
            hi: self.hi,
            log: true,
            colors: (0..=8).map(|i| gradient(i as f64 / 8.0)).collect(),
        }
    }
}

/// Blue (few e-folds) through green to yellow (many).
fn gradient(t: f64) -> String {
    let (r, g, b) = (
        (40.0 + t * (250.0 - 40.0)) as u8,
        (60.0 + t * (200.0 - 60.0)) as u8,
        (160.0 - t * 130.0) as u8,
    );
    format!("#{r:02x}{g:02x}{b:02x}")
}

/// The cells of a grid map (one per point of the first two axes, edges half-way between
/// neighbours) and the boundaries between cells of different outcomes, as one line broken
/// between segments. Points that differ only in further coordinates share a cell: the last
/// drawn shows.
fn grid_cells(
    axes: &[MapAxis],
    grid: &[Vec<f64>; 2],
    points: &[(Vec<f64>, &BasinPoint)],
    shade: &Shade,
) -> (Vec<Region>, Series) {
    let edges = |vs: &[f64], i: usize| -> (f64, f64) {
        let lo = if i == 0 {
            vs[0] - 0.5 * (vs.get(1).map_or(1.0, |v| v - vs[0]))
        } else {
            0.5 * (vs[i - 1] + vs[i])
        };
        let hi = if i + 1 == vs.len() {
            vs[i] + 0.5 * (if i > 0 { vs[i] - vs[i - 1] } else { 1.0 })
        } else {
            0.5 * (vs[i] + vs[i + 1])
        };
        (lo, hi)
    };
    let find = |vs: &[f64], v: f64| vs.iter().position(|&w| w == v);
    let mut outcome = vec![vec![None; grid[1].len()]; grid[0].len()];
    let mut cells = Vec::new();
    for (c, p) in points {
        let (Some(i), Some(j)) = (find(&grid[0], axes[0].value(c)), find(&grid[1], axes[1].value(c))) else {
            continue;
        };
        outcome[i][j] = Some(p.result.outcome);
        cells.push(Region {
            x: edges(&grid[0], i),
            y: Some(edges(&grid[1], j)),
            color: shade.color(p),
            opacity: 1.0,
            label: String::new(),
        });
    }
    let mut line = Vec::new();
    for i in 0..grid[0].len() {
        for j in 0..grid[1].len() {
            let (xe, ye) = (edges(&grid[0], i), edges(&grid[1], j));
            if i + 1 < grid[0].len() && outcome[i][j] != outcome[i + 1][j] {
                line.extend([(xe.1, ye.0), (xe.1, ye.1), (f64::NAN, f64::NAN)]);
            }
            if j + 1 < grid[1].len() && outcome[i][j] != outcome[i][j + 1] {
                line.extend([(xe.0, ye.1), (xe.1, ye.1), (f64::NAN, f64::NAN)]);
            }
        }
    }
    let boundaries = Series {
        name: "outcome boundaries".into(),
        points: line,
        color: "black".into(),
        dashed: false,
    };
    (cells, boundaries)
}

/// The map panel: cells (a grid) or points (random samples, or one sampled coordinate
/// against N_total) coloured by total e-folds.
fn map_panel(fields: &[String], plan: &Plan, points: &[BasinPoint], shade: &Shade, need: Option<f64>) -> Panel {
    let axes = map_axes(plan);
    let coords: Vec<(Vec<f64>, &BasinPoint)> = points.iter().map(|p| (plan_coords(fields, plan, p), p)).collect();
    let mut panel = Panel {
        title: "$N$_{total} of each start".into(),
        colorbar: Some(shade.bar()),
        ..Panel::default()
    };
    if axes.len() < 2 {
        // one coordinate: N_total against it, coloured the same
        panel.x_label = axes.first().map_or(String::new(), |a| a.label.clone());
        panel.y_label = "$N$_{total}".into();
        panel.log_y = true;
        panel.markers = coords
            .iter()
            .filter(|(_, p)| p.result.n_total > 0.0)
            .map(|(c, p)| Marker {
                x: axes[0].value(c),
                y: p.result.n_total,
                label: String::new(),
                color: shade.color(p),
            })
            .collect();
        if let (Some(lo), Some(hi)) = (grid_lo_hi(&panel.markers), need) {
            panel.series = vec![Series {
                name: "needed".into(),
                points: vec![(lo, hi), (grid_hi(&panel.markers), hi)],
                color: "#444444".into(),
                dashed: true,
            }];
            panel.title = format!("$N$_{{total}}; dashed: {} needed", typed(hi));
        }
        return panel;
    }
    panel.x_label = axes[0].label.clone();
    panel.y_label = axes[1].label.clone();
    if let Plan::Grid(g) = plan {
        let values = |k: usize| -> Vec<f64> {
            g[k].values
                .iter()
                .map(|&v| if axes[k].log { v.log10() } else { v })
                .collect()
        };
        let (cells, boundaries) = grid_cells(&axes, &[values(0), values(1)], &coords, shade);
        panel.regions = cells;
        panel.series = vec![boundaries];
        panel.markers = outcome_labels(&axes, &coords);
        panel.title = "$N$_{total}, outcome boundaries".into();
    } else {
        panel.markers = coords
            .iter()
            .map(|(c, p)| Marker {
                x: axes[0].value(c),
                y: axes[1].value(c),
                label: String::new(),
                color: shade.color(p),
            })
            .collect();
        if let Some((cells, b)) = scattered_boundaries(&axes, &coords, shade) {
            panel.regions = cells;
            panel.series = vec![b];
            panel.markers = outcome_labels(&axes, &coords);
            panel.title = "$N$_{total} by nearest start, outcomes".into();
        }
    }
    panel
}

/// The map of scattered starts (random samples): a raster of about one cell per start
/// (sqrt(n) a side, 8 to 64), each cell coloured as the start nearest to its middle (in
/// coordinates scaled to the sampled ranges) and given its outcome, and the edges between
/// cells of different outcomes, as one line broken between segments. None when the starts do
/// not span both coordinates.
fn scattered_boundaries(
    axes: &[MapAxis],
    coords: &[(Vec<f64>, &BasinPoint)],
    shade: &Shade,
) -> Option<(Vec<Region>, Series)> {
    let pts: Vec<(f64, f64, &BasinPoint)> = coords
        .iter()
        .map(|(c, p)| (axes[0].value(c), axes[1].value(c), *p))
        .filter(|(x, y, _)| x.is_finite() && y.is_finite())
        .collect();
    if pts.is_empty() {
        return None;
    }
    let range = |k: usize| {
        let vs = pts.iter().map(|p| if k == 0 { p.0 } else { p.1 });
        vs.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)))
    };
    let (rx, ry) = (range(0), range(1));
    if !(rx.1 > rx.0 && ry.1 > ry.0) {
        return None;
    }
    let side = ((pts.len() as f64).sqrt().round() as usize).clamp(8, 64);
    let unit = |v: f64, r: (f64, f64)| (v - r.0) / (r.1 - r.0);
    let cell_of = |u: f64| ((u * side as f64) as usize).min(side - 1);
    // the starts in buckets of the raster, so that the nearest is found ring by ring
    let mut buckets = vec![Vec::new(); side * side];
    let scaled: Vec<(f64, f64)> = pts.iter().map(|p| (unit(p.0, rx), unit(p.1, ry))).collect();
    for (k, &(u, v)) in scaled.iter().enumerate() {
        buckets[cell_of(u) * side + cell_of(v)].push(k);
    }
    let h = 1.0 / side as f64;
    let nearest = |i: usize, j: usize| -> usize {
        let (cu, cv) = ((i as f64 + 0.5) * h, (j as f64 + 0.5) * h);
        let mut best = (f64::INFINITY, 0usize);
        for ring in 0..side as isize {
            // every start in this ring or beyond is at least (ring - 1/2) cells away
            if best.0.is_finite() && ((ring as f64 - 0.5) * h).powi(2) > best.0 {
                break;
            }
            for di in -ring..=ring {
                for dj in -ring..=ring {
                    if di.abs() != ring && dj.abs() != ring {
                        continue;
                    }
                    let (a, b) = (i as isize + di, j as isize + dj);
                    if a < 0 || b < 0 || a >= side as isize || b >= side as isize {
                        continue;
                    }
                    for &k in &buckets[a as usize * side + b as usize] {
                        let d = (scaled[k].0 - cu).powi(2) + (scaled[k].1 - cv).powi(2);
                        if d < best.0 || (d == best.0 && k < best.1) {
                            best = (d, k);
                        }
                    }
                }
            }
        }
        best.1
    };
    let x_at = |i: usize| rx.0 + (rx.1 - rx.0) * i as f64 * h;
    let y_at = |j: usize| ry.0 + (ry.1 - ry.0) * j as f64 * h;
    let mut outcome = vec![vec![pts[0].2.result.outcome; side]; side];
    let mut cells = Vec::with_capacity(side * side);
    for (i, row) in outcome.iter_mut().enumerate() {
        for (j, o) in row.iter_mut().enumerate() {
            let p = pts[nearest(i, j)].2;
            *o = p.result.outcome;
            cells.push(Region {
                x: (x_at(i), x_at(i + 1)),
                y: Some((y_at(j), y_at(j + 1))),
                color: shade.color(p),
                opacity: 1.0,
                label: String::new(),
            });
        }
    }
    let mut line = Vec::new();
    for i in 0..side {
        for j in 0..side {
            if i + 1 < side && outcome[i][j] != outcome[i + 1][j] {
                line.extend([(x_at(i + 1), y_at(j)), (x_at(i + 1), y_at(j + 1)), (f64::NAN, f64::NAN)]);
            }
            if j + 1 < side && outcome[i][j] != outcome[i][j + 1] {
                line.extend([(x_at(i), y_at(j + 1)), (x_at(i + 1), y_at(j + 1)), (f64::NAN, f64::NAN)]);
            }
        }
    }
    let series = Series {
        name: "outcome boundaries".into(),
        points: line,
        color: "black".into(),
        dashed: false,
    };
    Some((cells, series))
}

/// The smallest x of some markers.
fn grid_lo_hi(m: &[Marker]) -> Option<f64> {
    m.iter().map(|m| m.x).reduce(f64::min)
}

/// The largest x of some markers.
fn grid_hi(m: &[Marker]) -> f64 {
    m.iter().map(|m| m.x).fold(f64::NEG_INFINITY, f64::max)
}

/// One label per outcome on the map, at the start of that outcome nearest to the middle of
/// its starts (the median in each coordinate).
fn outcome_labels(axes: &[MapAxis], coords: &[(Vec<f64>, &BasinPoint)]) -> Vec<Marker> {
    use crate::analysis::basin::Outcome;
    let mut out = Vec::new();
    for o in Outcome::ALL {
        let pts: Vec<(f64, f64)> = coords
            .iter()
            .filter(|(_, p)| p.result.outcome == o)
            .map(|(c, _)| (axes[0].value(c), axes[1].value(c)))
            .collect();
        let median = |mut v: Vec<f64>| {
            v.sort_by(f64::total_cmp);
            v.get(v.len() / 2).copied()
        };
        let (Some(mx), Some(my)) = (
            median(pts.iter().map(|p| p.0).collect()),
            median(pts.iter().map(|p| p.1).collect()),
        ) else {
            continue;
        };
        let span = |k: usize| {
            let vs = coords.iter().map(|(c, _)| axes[k].value(c));
            let (lo, hi) = vs.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
            (hi - lo).max(1e-300)
        };
        let (sx, sy) = (span(0), span(1));
        let Some(&(x, y)) = pts.iter().min_by(|a, b| {
            let d = |p: &(f64, f64)| ((p.0 - mx) / sx).powi(2) + ((p.1 - my) / sy).powi(2);
            d(a).total_cmp(&d(b))
        }) else {
            continue;
        };
        out.push(Marker {
            x,
            y,
            label: o.name().replace('_', " "),
            color: "black".into(),
        });
    }
    out
}

/// The plan's coordinates of a point: its sampled fields and X, in plan order.
fn plan_coords(fields: &[String], plan: &Plan, p: &BasinPoint) -> Vec<f64> {
    plan.names()
        .iter()
        .map(|n| match fields.iter().position(|f| f == n) {
            Some(j) => p.start[j],
            None => p.x_kinetic.unwrap_or(f64::NAN),
        })
        .collect()
}

/// The figure: the map of the starts over the two sampled coordinates coloured by total
/// e-folds (log scale, with its colour bar; on a grid with the boundaries between outcomes),
/// and the n_s-r points of the starts with enough e-folds at the first N_*, over the data's
/// bands (those of the scan figure).
pub fn figure(h: &Header, plan: &Plan, points: &[BasinPoint], data: &DataSet, width_pt: f64) -> String {
    let shade = Shade::of(points);
    let map = map_panel(&h.fields, plan, points, &shade, Some(h.need));
    let first = h.n_stars.first().copied().unwrap_or(f64::NAN);
    let markers: Vec<Marker> = points
        .iter()
        .filter_map(|p| {
            Some(Marker {
                x: p.result.n_s.first().copied().flatten()?,
                y: p.result.r.first().copied().flatten()?,
                label: String::new(),
                color: shade.color(p),
            })
        })
        .collect();
    let ns_r = Panel {
        title: format!("inflating starts at $N$_* = {}", typed(first)),
        x_label: "$n$_s".into(),
        y_label: "$r$".into(),
        log_y: true,
        markers,
        regions: crate::report::scan::data_regions(data),
        ..Panel::default()
    };
    plot::render(&format!("basin of {}", h.model), &[map, ns_r], width_pt)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::basin::{Outcome, StartResult};

    fn point(index: usize, x: f64, y: f64, outcome: Outcome) -> BasinPoint {
        BasinPoint {
            index,
            start: vec![x, y],
            x_kinetic: None,
            direction: None,
            result: StartResult {
                n_total: 10.0,
                n_inflating: 10.0,
                outcome,
                end: vec![0.0, 0.0],
                minimum: None,
                rolls_along: None,
                n_s: vec![None],
                r: vec![None],
                reason: None,
            },
        }
    }

    /// Scattered starts whose outcome changes across the line x + y = 1 (a known boundary):
    /// every boundary segment lies within two raster cells of it, and there are segments all
    /// along it.
    #[test]
    fn the_boundary_of_scattered_starts_follows_the_outcomes() {
        let mut points = Vec::new();
        for i in 0..900 {
            // a low-discrepancy cloud on the unit square
            let (x, y) = ((i as f64 * 0.618_033_988_75).fract(), (i as f64 + 0.5) / 900.0);
            let o = if x + y < 1.0 { Outcome::Enough } else { Outcome::TooFew };
            points.push(point(i, x, y, o));
        }
        let axes: Vec<MapAxis> = (0..2)
            .map(|index| MapAxis {
                index,
                log: false,
                label: String::new(),
            })
            .collect();
        let coords: Vec<(Vec<f64>, &BasinPoint)> = points.iter().map(|p| (p.start.clone(), p)).collect();
        let shade = Shade { lo: 1.0, hi: 100.0 };
        let (cells, b) = scattered_boundaries(&axes, &coords, &shade).unwrap();
        assert_eq!(cells.len(), 30 * 30);
        let segs: Vec<&(f64, f64)> = b.points.iter().filter(|p| p.0.is_finite()).collect();
        assert!(segs.len() >= 2 * 30, "{} points", segs.len());
        let cell = 1.0 / 30.0;
        for p in &segs {
            let off = (p.0 + p.1 - 1.0).abs() / 2f64.sqrt();
            assert!(off < 2.0 * cell, "{p:?} is {off} from the line");
        }
        // one outcome only: no boundary
        let same: Vec<BasinPoint> = (0..50)
            .map(|i| point(i, i as f64, (i * 7 % 50) as f64, Outcome::Enough))
            .collect();
        let coords: Vec<(Vec<f64>, &BasinPoint)> = same.iter().map(|p| (p.start.clone(), p)).collect();
        assert!(scattered_boundaries(&axes, &coords, &shade)
            .unwrap()
            .1
            .points
            .is_empty());
    }
}
