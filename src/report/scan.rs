//! A scan's rows as CSV and JSON, and the n_s–r figure.
//!
//! A JSON row has the keys of the CSV header in the CSV's order: `point`, the varied
//! parameters, the keys of `predict --format csv` ([`CSV_KEYS`]), `error`. A failed point keeps
//! `point`, its parameters, `n_star` and `error`.

use crate::data::DataSet;
use crate::drivers::predict::Prediction;
use crate::drivers::scan::{Axis, ScanRow, Table};
use crate::report::numfmt::typed;
use crate::report::plot::{self, ColorBar, Marker, Panel, Region, Series};
use crate::report::predict::{csv_values, nested_csv_values, CSV_KEYS};
use serde::ser::SerializeMap;

pub(crate) fn csv_field(s: &str) -> String {
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
    o.push_str(&csv_rows(rows));
    o
}

/// The CSV lines of these rows, without the header.
pub fn csv_rows(rows: &[ScanRow]) -> String {
    let mut o = String::new();
    for r in rows {
        let mut f: Vec<String> = vec![r.point.to_string()];
        // grid values as typed: the shortest round-trip form, positional in [1e-4, 1e6)
        f.extend(r.params.iter().map(|(_, v)| typed(*v)));
        match &r.result {
            Ok(p) => {
                f.extend(csv_values(p));
                f.push(String::new());
            }
            Err(e) => {
                f.push(format!("{}", r.n_star));
                f.extend((1..CSV_KEYS.len()).map(|_| String::new()));
                f.push(csv_field(e.message()));
            }
        }
        o.push_str(&f.join(","));
        o.push('\n');
    }
    o
}

/// A flat JSON object whose keys keep their order (a `serde_json::Map` sorts them): one row
/// of a scan, written and read back by `merge` in the same order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct JsonRow(pub Vec<(String, serde_json::Value)>);

impl JsonRow {
    /// The value at `key`.
    pub fn get(&self, key: &str) -> Option<&serde_json::Value> {
        self.0.iter().find(|(k, _)| k == key).map(|(_, v)| v)
    }

    fn push(&mut self, key: &str, value: serde_json::Value) {
        self.0.push((key.to_string(), value));
    }
}

impl serde::Serialize for JsonRow {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let mut m = s.serialize_map(Some(self.0.len()))?;
        for (k, v) in &self.0 {
            m.serialize_entry(k, v)?;
        }
        m.end()
    }
}

impl<'de> serde::Deserialize<'de> for JsonRow {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<JsonRow, D::Error> {
        struct Visit;
        impl<'de> serde::de::Visitor<'de> for Visit {
            type Value = JsonRow;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("a JSON object")
            }
            fn visit_map<A: serde::de::MapAccess<'de>>(self, mut a: A) -> Result<JsonRow, A::Error> {
                let mut row = JsonRow::default();
                while let Some((k, v)) = a.next_entry::<String, serde_json::Value>()? {
                    row.0.push((k, v));
                }
                Ok(row)
            }
        }
        d.deserialize_map(Visit)
    }
}

/// One row as a flat JSON object, with the keys of the CSV header in its order (module docs).
pub fn json_row(r: &ScanRow) -> JsonRow {
    let mut m = JsonRow::default();
    m.push("point", serde_json::json!(r.point));
    for (n, v) in &r.params {
        m.push(n, serde_json::json!(v));
    }
    match &r.result {
        Ok(p) => {
            let serde_json::Value::Object(mut o) = serde_json::to_value(p).expect("serialisable") else {
                unreachable!("a prediction serializes to an object")
            };
            let nested = nested_csv_values(p);
            for key in &CSV_KEYS[..CSV_KEYS.len() - nested.len()] {
                m.push(key, o.remove(*key).unwrap_or_default());
            }
            for (key, x) in nested {
                m.push(key, serde_json::json!(x));
            }
            m.push("error", serde_json::Value::Null);
        }
        Err(e) => {
            m.push("n_star", serde_json::json!(r.n_star));
            m.push("error", serde_json::json!(e));
        }
    }
    m
}

/// Rows as a JSON array of flat objects (pandas `read_json`, numpy via a list of dicts).
pub fn json(rows: &[ScanRow]) -> String {
    let mut t = Table::new(true, None);
    let mut o = t.start(&[]);
    o.push_str(&t.rows(rows));
    o.push_str(&t.end());
    o
}

/// Where a value lies along the first axis, 0 to 1 (logarithmic when the axis spans more
/// than a factor 20 above zero).
struct AxisScale {
    lo: f64,
    hi: f64,
    log: bool,
}

impl AxisScale {
    fn new(axes: &[Axis]) -> AxisScale {
        let (lo, hi) = axes
            .first()
            .map(|a| {
                let lo = a.values.iter().copied().fold(f64::INFINITY, f64::min);
                let hi = a.values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                (lo, hi)
            })
            .unwrap_or((0.0, 1.0));
        AxisScale {
            lo,
            hi,
            log: lo > 0.0 && hi / lo > 20.0,
        }
    }

    fn frac(&self, v: f64) -> f64 {
        let (lo, hi) = (self.lo, self.hi);
        let t = if self.log {
            (v.ln() - lo.ln()) / (hi.ln() - lo.ln())
        } else {
            (v - lo) / (hi - lo)
        };
        if t.is_finite() {
            t.clamp(0.0, 1.0)
        } else {
            0.5
        }
    }
}

/// One curve per N_* (and per value of the second parameter), in (n_s, r).
fn curves(axes: &[Axis], ok: &[(&ScanRow, &Prediction)]) -> Vec<Series> {
    let mut n_values: Vec<f64> = ok.iter().map(|(_, p)| p.n_star).collect();
    n_values.sort_by(f64::total_cmp);
    n_values.dedup();
    let palette = ["#1f5fa8", "#b03030", "#2a8a2a", "#8a4a00", "#6a3d9a", "#444444"];
    let mut series = Vec::new();
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
                format!("$N$ = {}", typed(n))
            } else {
                format!("$N$ = {}, {} = {}", typed(n), plot::symbol(&axes[1].name), typed(s))
            };
            series.push(Series {
                name,
                points: pts,
                color: palette[i % palette.len()].into(),
                dashed: false,
            });
        }
    }
    series
}

/// The data's n_s bands (1 and 2 sigma) and the region its r limit excludes.
pub fn data_regions(data: &DataSet) -> Vec<Region> {
    let (m, s) = (data.n_s.mean, data.n_s.sigma);
    vec![
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
    ]
}

/// The n_s–r plane (log r), with the data's n_s bands (1 and 2 sigma) and r limit drawn as
/// regions; one curve per N_* (and per value of a second parameter), markers coloured by the
/// first parameter's value.
pub fn figure(title: &str, axes: &[Axis], rows: &[ScanRow], data: &DataSet, width_pt: f64) -> String {
    let ok: Vec<(&ScanRow, &Prediction)> = rows
        .iter()
        .filter_map(|r| r.result.as_ref().ok().map(|p| (r, p)))
        .collect();
    let first = axes.first().map(|a| a.name.clone()).unwrap_or_default();
    let scale = AxisScale::new(axes);
    let markers = ok
        .iter()
        .map(|(r, p)| Marker {
            x: p.n_s,
            y: p.r,
            label: String::new(),
            color: gradient(scale.frac(r.params.first().map_or(0.0, |x| x.1))),
        })
        .collect();
    let panel = Panel {
        colorbar: Some(ColorBar {
            label: plot::symbol(&first),
            lo: scale.lo,
            hi: scale.hi,
            log: scale.log,
            colors: (0..=8).map(|i| gradient(i as f64 / 8.0)).collect(),
        }),
        x_label: "$n$_s".into(),
        y_label: "$r$".into(),
        log_y: true,
        series: curves(axes, &ok),
        markers,
        regions: data_regions(data),
        ..Panel::default()
    };
    plot::render(title, &[panel], width_pt)
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
