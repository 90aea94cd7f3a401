//! Parameter scans: a grid over one or two parameters (linear or logarithmic) and over N_*,
//! every point a full prediction, run in parallel; shards for batch systems and their merge;
//! the n_s–r figure.

use crate::canonical::AnalysisError;
use crate::config::Config;
use crate::data::DataSet;
use crate::model::{Model, ModelSpec};
use crate::plot::{Marker, Panel, Region, Series};
use crate::predict::{predict, Options, Prediction, CSV_KEYS};
use serde::Serialize;

/// One varied parameter: name and values.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    /// Parameter name.
    pub name: String,
    /// The grid values, in order.
    pub values: Vec<f64>,
}

impl Axis {
    /// `count` values from `lo` to `hi`, evenly spaced, or evenly in the logarithm.
    pub fn new(name: &str, lo: f64, hi: f64, count: usize, log: bool) -> Result<Axis, String> {
        if count == 0 || !(lo.is_finite() && hi.is_finite()) || (log && (lo <= 0.0 || hi <= 0.0)) {
            return Err(format!(
                "bad range for `{name}`: {lo}:{hi}:{count}{}",
                if log { ":log" } else { "" }
            ));
        }
        let values = (0..count)
            .map(|i| {
                let t = if count == 1 { 0.0 } else { i as f64 / (count - 1) as f64 };
                if log {
                    (lo.ln() + (hi.ln() - lo.ln()) * t).exp()
                } else {
                    lo + (hi - lo) * t
                }
            })
            .collect();
        Ok(Axis {
            name: name.to_string(),
            values,
        })
    }

    /// Parses `NAME=LO:HI:COUNT[:log]`, or `NAME` alone with the model's scan range and
    /// `default_count` points.
    pub fn parse(text: &str, spec: &ModelSpec, default_count: usize) -> Result<Axis, String> {
        let (name, range) = match text.split_once('=') {
            Some((n, r)) => (n.trim(), Some(r.trim())),
            None => (text.trim(), None),
        };
        if !spec.params.iter().any(|p| p.name == name) {
            let names: Vec<&str> = spec.params.iter().map(|p| p.name.as_str()).collect();
            return Err(format!(
                "`{name}` is not a parameter of the model (its parameters: {})",
                if names.is_empty() {
                    "none".to_string()
                } else {
                    names.join(", ")
                }
            ));
        }
        let Some(range) = range else {
            let p = spec.params.iter().find(|p| p.name == name).expect("checked above");
            let Some((lo, hi, log)) = p.scan else {
                return Err(format!(
                    "no range for `{name}`: give `--vary {name}=LO:HI:COUNT`, or a [scan] range in the model file"
                ));
            };
            return Axis::new(name, lo, hi, default_count, log);
        };
        let parts: Vec<&str> = range.split(':').collect();
        let num = |s: &str| {
            s.trim()
                .parse::<f64>()
                .map_err(|_| format!("`{s}` is not a number in `--vary {text}`"))
        };
        let (lo, hi) = match parts.as_slice() {
            [lo, hi, ..] => (num(lo)?, num(hi)?),
            _ => {
                return Err(format!(
                    "`--vary {text}`: write NAME=LO:HI:COUNT, with `:log` for a logarithmic grid"
                ))
            }
        };
        let count = match parts.get(2) {
            Some(c) => c
                .trim()
                .parse::<usize>()
                .map_err(|_| format!("`{c}` is not a point count in `--vary {text}`"))?,
            None => default_count,
        };
        let log = match parts.get(3).map(|s| s.trim()) {
            None => false,
            Some("log") => true,
            Some("lin") | Some("linear") => false,
            Some(other) => {
                return Err(format!(
                    "`{other}` in `--vary {text}`: the fourth field may only be `log`"
                ))
            }
        };
        if parts.len() > 4 {
            return Err(format!("`--vary {text}` has too many fields"));
        }
        Axis::new(name, lo, hi, count, log)
    }
}

/// A shard: the K-th (1-based) of N contiguous slices of the grid's points.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    /// Which slice, 1-based.
    pub k: usize,
    /// How many slices.
    pub n: usize,
}

impl Shard {
    /// Parses `K/N`.
    pub fn parse(text: &str) -> Result<Shard, String> {
        let bad = || format!("`--shard {text}`: write K/N with 1 <= K <= N, e.g. `--shard 3/8`");
        let (k, n) = text.split_once('/').ok_or_else(bad)?;
        let (k, n) = (
            k.trim().parse::<usize>().map_err(|_| bad())?,
            n.trim().parse::<usize>().map_err(|_| bad())?,
        );
        if k == 0 || n == 0 || k > n {
            return Err(bad());
        }
        Ok(Shard { k, n })
    }

    /// The point indices of this shard among `total`.
    pub fn range(&self, total: usize) -> std::ops::Range<usize> {
        let lo = total * (self.k - 1) / self.n;
        let hi = total * self.k / self.n;
        lo..hi
    }
}

/// One row: a grid point at one N_*.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ScanRow {
    /// The grid point's index (rows of one point share it).
    pub point: usize,
    /// The varied parameters' values, in axis order.
    pub params: Vec<(String, f64)>,
    /// The prediction, or why there is none.
    pub result: Result<Prediction, String>,
    /// The N_* of the row (kept when the prediction failed).
    pub n_star: f64,
}

/// Runs the grid (or one shard of it). Points fail independently: a failed point keeps its
/// rows, with the error.
pub fn run(
    spec: &ModelSpec,
    axes: &[Axis],
    n_stars: &[f64],
    data: &DataSet,
    shard: Option<Shard>,
    config: &Config,
    progress: bool,
) -> Vec<ScanRow> {
    use rayon::prelude::*;
    let total: usize = axes.iter().map(|a| a.values.len()).product();
    let range = shard.map_or(0..total, |s| s.range(total));
    let bar = if progress {
        indicatif::ProgressBar::new(range.len() as u64)
    } else {
        indicatif::ProgressBar::hidden()
    };
    let opts = Options {
        n_stars: n_stars.to_vec(),
        data: data.clone(),
        ..Default::default()
    };
    let rows: Vec<Vec<ScanRow>> = range
        .into_par_iter()
        .map(|point| {
            let values = grid_point(axes, point);
            let params: Vec<(String, f64)> = axes
                .iter()
                .map(|a| a.name.clone())
                .zip(values.iter().copied())
                .collect();
            let result = predict_at(spec, &params, &opts, config);
            bar.inc(1);
            match result {
                Ok(preds) => preds
                    .into_iter()
                    .map(|p| ScanRow {
                        point,
                        params: params.clone(),
                        n_star: p.n_star,
                        result: Ok(p),
                    })
                    .collect(),
                Err(e) => n_stars
                    .iter()
                    .map(|&n| ScanRow {
                        point,
                        params: params.clone(),
                        n_star: n,
                        result: Err(e.clone()),
                    })
                    .collect(),
            }
        })
        .collect();
    bar.finish_and_clear();
    rows.into_iter().flatten().collect()
}

/// The parameter values of a point: the first axis varies slowest.
fn grid_point(axes: &[Axis], mut index: usize) -> Vec<f64> {
    let mut out = vec![0.0; axes.len()];
    for (i, a) in axes.iter().enumerate().rev() {
        out[i] = a.values[index % a.values.len()];
        index /= a.values.len();
    }
    out
}

fn predict_at(
    spec: &ModelSpec,
    params: &[(String, f64)],
    opts: &Options,
    config: &Config,
) -> Result<Vec<Prediction>, String> {
    let mut spec = spec.clone();
    for (name, v) in params {
        spec.set_param(name, &format!("{v:e}"));
    }
    let model = Model::build(&spec, config).map_err(|e| e.diagnostic.message.clone())?;
    let rep = predict(&model, opts, config).map_err(|e: AnalysisError| e.message)?;
    Ok(rep.predictions)
}

fn csv_field(s: &str) -> String {
    format!("\"{}\"", s.replace('"', "\"\""))
}

/// The CSV header for these axes.
pub fn csv_header(axes: &[String]) -> String {
    let mut cols: Vec<String> = vec!["point".into()];
    cols.extend(axes.iter().cloned());
    cols.extend(CSV_KEYS.iter().map(|s| s.to_string()));
    cols.push("error".into());
    cols.join(",")
}

/// Rows as CSV (header first): point, varied parameters, then the prediction keys of
/// `efold predict --format csv`, then `error` (empty when the point succeeded).
pub fn csv(axes: &[String], rows: &[ScanRow]) -> String {
    let mut o = csv_header(axes);
    o.push('\n');
    for r in rows {
        let mut f: Vec<String> = vec![r.point.to_string()];
        f.extend(r.params.iter().map(|(_, v)| format!("{v:e}")));
        match &r.result {
            Ok(p) => {
                f.extend(crate::predict::csv_values(p));
                f.push(String::new());
            }
            Err(e) => {
                f.push(format!("{}", r.n_star));
                f.extend((1..CSV_KEYS.len()).map(|_| String::new()));
                f.push(csv_field(e));
            }
        }
        o.push_str(&f.join(","));
        o.push('\n');
    }
    o
}

/// Rows as a JSON array of flat objects (pandas `read_json`, numpy via a list of dicts).
pub fn json(rows: &[ScanRow]) -> String {
    let arr: Vec<serde_json::Value> = rows
        .iter()
        .map(|r| {
            let mut m = serde_json::Map::new();
            m.insert("point".into(), serde_json::json!(r.point));
            for (n, v) in &r.params {
                m.insert(n.clone(), serde_json::json!(v));
            }
            match &r.result {
                Ok(p) => {
                    if let serde_json::Value::Object(o) = serde_json::to_value(p).expect("serialisable") {
                        for (k, v) in o {
                            if !v.is_object() {
                                m.insert(k, v);
                            }
                        }
                    }
                    m.insert("error".into(), serde_json::Value::Null);
                }
                Err(e) => {
                    m.insert("n_star".into(), serde_json::json!(r.n_star));
                    m.insert("error".into(), serde_json::json!(e));
                }
            }
            serde_json::Value::Object(m)
        })
        .collect();
    format!("{}\n", serde_json::to_string_pretty(&arr).expect("serialisable"))
}

/// Joins shard outputs (all CSV or all JSON, as written by `scan`) into the table an unsharded
/// run writes: rows ordered by point, each point's rows in their written order.
pub fn merge(texts: &[(String, String)]) -> Result<String, String> {
    let first = texts.first().ok_or("no files to merge")?;
    if first.1.trim_start().starts_with('[') {
        let mut rows: Vec<serde_json::Value> = Vec::new();
        for (name, t) in texts {
            let v: Vec<serde_json::Value> =
                serde_json::from_str(t).map_err(|e| format!("{name}: not a scan JSON file: {e}"))?;
            rows.extend(v);
        }
        rows.sort_by_key(|r| r["point"].as_u64().unwrap_or(u64::MAX));
        let mut seen = std::collections::BTreeSet::new();
        for r in &rows {
            seen.insert((r["point"].as_u64(), r["n_star"].to_string()));
        }
        if seen.len() != rows.len() {
            return Err("the files overlap: a point appears twice".to_string());
        }
        return Ok(format!(
            "{}\n",
            serde_json::to_string_pretty(&rows).expect("serialisable")
        ));
    }
    let header = first.1.lines().next().unwrap_or_default().to_string();
    let mut rows: Vec<(usize, usize, String)> = Vec::new();
    for (name, t) in texts {
        let mut lines = t.lines();
        let h = lines.next().unwrap_or_default();
        if h != header {
            return Err(format!(
                "{name}: its header differs from the first file's: not shards of one scan"
            ));
        }
        for (i, line) in lines.enumerate() {
            let point: usize = line
                .split(',')
                .next()
                .and_then(|p| p.parse().ok())
                .ok_or_else(|| format!("{name}: line {} has no point index", i + 2))?;
            rows.push((point, i, line.to_string()));
        }
    }
    rows.sort_by_key(|r| (r.0, r.1));
    for w in rows.windows(2) {
        if w[0].0 == w[1].0 && w[0].2 == w[1].2 {
            return Err(format!("the files overlap: point {} appears twice", w[0].0));
        }
    }
    let mut o = header;
    o.push('\n');
    for r in rows {
        o.push_str(&r.2);
        o.push('\n');
    }
    Ok(o)
}

/// The n_s–r plane (log r), with the data's n_s bands (1 and 2 sigma) and r limit drawn as
/// regions; one curve per N_* (and per value of a second parameter), markers coloured by the
/// first parameter's value.
pub fn figure(title: &str, axes: &[Axis], rows: &[ScanRow], data: &DataSet, width_pt: f64) -> String {
    let ok: Vec<(&ScanRow, &Prediction)> = rows
        .iter()
        .filter_map(|r| r.result.as_ref().ok().map(|p| (r, p)))
        .collect();
    let mut n_values: Vec<f64> = ok.iter().map(|(_, p)| p.n_star).collect();
    n_values.sort_by(f64::total_cmp);
    n_values.dedup();
    let first = axes.first().map(|a| a.name.clone()).unwrap_or_default();
    let (lo, hi) = axes
        .first()
        .map(|a| {
            let lo = a.values.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = a.values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            (lo, hi)
        })
        .unwrap_or((0.0, 1.0));
    let log_axis = lo > 0.0 && hi / lo > 20.0;
    let frac = |v: f64| {
        let t = if log_axis {
            (v.ln() - lo.ln()) / (hi.ln() - lo.ln())
        } else {
            (v - lo) / (hi - lo)
        };
        if t.is_finite() {
            t.clamp(0.0, 1.0)
        } else {
            0.5
        }
    };
    let palette = ["#1f5fa8", "#b03030", "#2a8a2a", "#8a4a00", "#6a3d9a", "#444444"];
    let mut series = Vec::new();
    let mut markers = Vec::new();
    let second: Vec<f64> = axes.get(1).map(|a| a.values.clone()).unwrap_or_else(|| vec![f64::NAN]);
    for (i, &n) in n_values.iter().enumerate() {
        for &s in &second {
            let pts: Vec<(f64, f64)> = ok
                .iter()
                .filter(|(r, p)| p.n_star == n && (s.is_nan() || r.params.get(1).map(|x| x.1) == Some(s)))
                .map(|(_, p)| (p.n_s, p.r))
                .collect();
            if pts.is_empty() {
                continue;
            }
            let name = if s.is_nan() {
                format!("$N$ = {}", crate::numfmt::typed(n))
            } else {
                format!(
                    "$N$ = {}, {} = {}",
                    crate::numfmt::typed(n),
                    crate::plot::symbol(&axes[1].name),
                    crate::numfmt::typed(s)
                )
            };
            series.push(Series {
                name,
                points: pts,
                color: palette[i % palette.len()].into(),
                dashed: false,
            });
        }
    }
    for (r, p) in &ok {
        let t = frac(r.params.first().map_or(0.0, |x| x.1));
        markers.push(Marker {
            x: p.n_s,
            y: p.r,
            label: String::new(),
            color: gradient(t),
        });
    }
    let (m, s) = (data.n_s.mean, data.n_s.sigma);
    let regions = vec![
        Region {
            x: (m - 2.0 * s, m + 2.0 * s),
            y: None,
            color: "#9ecae1".into(),
            opacity: 0.25,
            label: "$n$_s, 2$\\sigma$".into(),
        },
        Region {
            x: (m - s, m + s),
            y: None,
            color: "#3182bd".into(),
            opacity: 0.25,
            label: "$n$_s, 1$\\sigma$".into(),
        },
        Region {
            x: (f64::NEG_INFINITY, f64::INFINITY),
            y: Some((data.r.upper, f64::INFINITY)),
            color: "#de2d26".into(),
            opacity: 0.15,
            label: format!("$r$ > {} excluded", data.r.upper),
        },
    ];
    let panel = Panel {
        colorbar: Some(crate::plot::ColorBar {
            label: crate::plot::symbol(&first),
            lo,
            hi,
            log: log_axis,
            colors: (0..=8).map(|i| gradient(i as f64 / 8.0)).collect(),
        }),
        x_label: "$n$_s".into(),
        y_label: "$r$".into(),
        log_y: true,
        series,
        markers,
        regions,
        ..Panel::default()
    };
    crate::plot::render(title, &[panel], width_pt)
}

/// Blue to yellow.
fn gradient(t: f64) -> String {
    let (r, g, b) = (
        (40.0 + t * (250.0 - 40.0)) as u8,
        (60.0 + t * (200.0 - 60.0)) as u8,
        (160.0 - t * 130.0) as u8,
    );
    format!("#{r:02x}{g:02x}{b:02x}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grids_and_shards() {
        let a = Axis::new("a", 1.0, 100.0, 3, true).unwrap();
        assert_eq!(a.values.len(), 3);
        assert!((a.values[1] - 10.0).abs() < 1e-12);
        let b = Axis::new("b", 0.0, 1.0, 5, false).unwrap();
        assert_eq!(grid_point(&[a.clone(), b.clone()], 7), vec![a.values[1], b.values[2]]);
        let s = |k, n| Shard { k, n }.range(10);
        assert_eq!((s(1, 3), s(2, 3), s(3, 3)), (0..3, 3..6, 6..10));
        assert!(Shard::parse("0/3").is_err() && Shard::parse("4/3").is_err() && Shard::parse("x").is_err());
        assert_eq!(Shard::parse("2/5"), Ok(Shard { k: 2, n: 5 }));
    }
}
