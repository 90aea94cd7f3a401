//! Parameter scans: a grid over one or two parameters (linear or logarithmic) and over N_*,
//! every point a full prediction, run in parallel; shards for batch systems and their merge;
//! the n_s–r figure.

use crate::analysis::error::AnalysisError;
use crate::config::{Config, GRID_SNAP_ULPS};
use crate::data::DataSet;
use crate::diag::Diagnostic;
use crate::drivers::predict::{predict, Options, Prediction};
use crate::drivers::prepared::Prepared;
use crate::model::{Model, ModelSpec};
use crate::report::scan::{csv_header, csv_rows, json_row, JsonRow};
use serde::Serialize;

/// Why a `--vary` axis cannot be made.
#[derive(Debug, Clone, PartialEq)]
pub enum AxisError {
    /// The range is empty, not finite, or not positive on a logarithmic axis.
    BadRange {
        /// The parameter.
        name: String,
        /// Lower end.
        lo: f64,
        /// Upper end.
        hi: f64,
        /// Points.
        count: usize,
        /// Logarithmic.
        log: bool,
    },
    /// More values than `Limits::max_axis_points`.
    TooMany {
        /// The flag's value.
        text: String,
        /// Values asked for.
        count: usize,
        /// The limit.
        max: usize,
    },
    /// Not a parameter of the model.
    NotAParameter {
        /// The name given.
        name: String,
        /// The model's parameters.
        params: Vec<String>,
    },
    /// No range given and none in the model file.
    NoRange {
        /// The parameter.
        name: String,
    },
    /// An end is not a number.
    NotANumber {
        /// The flag's value.
        text: String,
        /// The field that is not a number.
        field: String,
    },
    /// Not `NAME=LO:HI[:COUNT[:log]]`.
    Form {
        /// The flag's value.
        text: String,
    },
    /// The count is not a point count.
    NotACount {
        /// The flag's value.
        text: String,
        /// The field given as count.
        field: String,
    },
    /// The fourth field is not `log` (or `lin`).
    NotLog {
        /// The flag's value.
        text: String,
        /// The field given.
        field: String,
    },
    /// More than four fields.
    TooManyFields {
        /// The flag's value.
        text: String,
    },
    /// A start coordinate (`start.FIELD`) varied without a range.
    NoStartRange {
        /// The axis name, `start.FIELD`.
        name: String,
    },
}

impl std::fmt::Display for AxisError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            AxisError::BadRange {
                name,
                lo,
                hi,
                count,
                log,
            } => write!(
                f,
                "bad range for `{name}`: {lo}:{hi}:{count}{}",
                if *log { ":log" } else { "" }
            ),
            AxisError::TooMany { text, count, max } => write!(
                f,
                "`--vary {text}` asks for {count} values; at most {max} per parameter (config::Limits::max_axis_points)"
            ),
            AxisError::NotAParameter { name, params } => write!(
                f,
                "`{name}` is not a parameter of the model (its parameters: {})",
                if params.is_empty() {
                    "none".to_string()
                } else {
                    params.join(", ")
                }
            ),
            AxisError::NoRange { name } => write!(
                f,
                "no range for `{name}`: give `--vary {name}=LO:HI:COUNT`, or a [scan] range in the model file"
            ),
            AxisError::NotANumber { text, field } => write!(f, "`{field}` is not a number in `--vary {text}`"),
            AxisError::Form { text } => write!(
                f,
                "`--vary {text}`: write NAME=LO:HI:COUNT, with `:log` for a logarithmic grid"
            ),
            AxisError::NotACount { text, field } => write!(f, "`{field}` is not a point count in `--vary {text}`"),
            AxisError::NotLog { text, field } => {
                write!(f, "`{field}` in `--vary {text}`: the fourth field may only be `log`")
            }
            AxisError::TooManyFields { text } => write!(f, "`--vary {text}` has too many fields"),
            AxisError::NoStartRange { name } => write!(
                f,
                "no range for `{name}`: a start coordinate has no default range; give `--vary {name}=LO:HI:COUNT`"
            ),
        }
    }
}

impl std::error::Error for AxisError {}

impl AxisError {
    /// As a diagnostic, with how to fix it.
    pub fn diagnostic(&self) -> Diagnostic {
        let hint = match self {
            AxisError::TooMany { .. } => "give this parameter fewer values",
            _ => "write `--vary alpha=0.1:10:30:log`",
        };
        Diagnostic::new(self.to_string()).with_hint(hint)
    }
}

// The scan's renderings, where they were before they moved to `report`.
pub use crate::report::scan::{csv, figure, json};

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
    pub fn new(name: &str, lo: f64, hi: f64, count: usize, log: bool) -> Result<Axis, AxisError> {
        if count == 0 || !(lo.is_finite() && hi.is_finite()) || (log && (lo <= 0.0 || hi <= 0.0)) {
            return Err(AxisError::BadRange {
                name: name.to_string(),
                lo,
                hi,
                count,
                log,
            });
        }
        let raw: Vec<f64> = (0..count).map(|i| grid_value(lo, hi, i, count, log)).collect();
        let values = (0..count)
            .map(|i| {
                // The end points are the numbers asked for, exactly; the others the shortest
                // decimal near the computed value, so that a row's value typed back gives the
                // row.
                if i == 0 {
                    lo
                } else if i + 1 == count {
                    hi
                } else {
                    let gap = (raw[i] - raw[i - 1]).abs().min((raw[i + 1] - raw[i]).abs());
                    let tol = (GRID_SNAP_ULPS * ulp(raw[i])).min(gap / 4.0);
                    shortest_near(raw[i], tol)
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
    /// A count above `max_count` (`Limits::max_axis_points`) is refused before anything is
    /// allocated.
    pub fn parse(text: &str, spec: &ModelSpec, default_count: usize, max_count: usize) -> Result<Axis, AxisError> {
        let (name, range) = match text.split_once('=') {
            Some((n, r)) => (n.trim(), Some(r.trim())),
            None => (text.trim(), None),
        };
        let Some(p) = spec.params.iter().find(|p| p.name == name) else {
            return Err(AxisError::NotAParameter {
                name: name.to_string(),
                params: spec.params.iter().map(|p| p.name.clone()).collect(),
            });
        };
        let no_range = || AxisError::NoRange { name: name.to_string() };
        Axis::parse_range(text, name, range, p.scan.ok_or_else(no_range), default_count, max_count)
    }

    /// The range part of `--vary {text}` (`range`, after `NAME=`) for the axis `name`; without
    /// one, `default` (the model's scan range, or why there is none) with `default_count`
    /// points. A count above `max_count` is refused before anything is allocated.
    pub fn parse_range(
        text: &str,
        name: &str,
        range: Option<&str>,
        default: Result<(f64, f64, bool), AxisError>,
        default_count: usize,
        max_count: usize,
    ) -> Result<Axis, AxisError> {
        let too_many = |count: usize| AxisError::TooMany {
            text: text.to_string(),
            count,
            max: max_count,
        };
        let with_field = |field: &str| (text.to_string(), field.to_string());
        let Some(range) = range else {
            let (lo, hi, log) = default?;
            if default_count > max_count {
                return Err(too_many(default_count));
            }
            return Axis::new(name, lo, hi, default_count, log);
        };
        let parts: Vec<&str> = range.split(':').collect();
        let num = |s: &str| {
            s.trim().parse::<f64>().map_err(|_| {
                let (text, field) = with_field(s);
                AxisError::NotANumber { text, field }
            })
        };
        let (lo, hi) = match parts.as_slice() {
            [lo, hi, ..] => (num(lo)?, num(hi)?),
            _ => return Err(AxisError::Form { text: text.to_string() }),
        };
        let count = match parts.get(2) {
            Some(c) => c.trim().parse::<usize>().map_err(|_| {
                let (text, field) = with_field(c);
                AxisError::NotACount { text, field }
            })?,
            None => default_count,
        };
        let log = match parts.get(3).map(|s| s.trim()) {
            None => false,
            Some("log") => true,
            Some("lin") | Some("linear") => false,
            Some(other) => {
                let (text, field) = with_field(other);
                return Err(AxisError::NotLog { text, field });
            }
        };
        if parts.len() > 4 {
            return Err(AxisError::TooManyFields { text: text.to_string() });
        }
        if count > max_count {
            return Err(too_many(count));
        }
        Axis::new(name, lo, hi, count, log)
    }
}

/// Point `i` of `count` from `lo` to `hi` (evenly spaced, or evenly in log10), to about an ulp:
/// the fraction `i / (count - 1)` and the interpolated position are carried in two doubles
/// (a value and its rounding error), so that only the last rounding (and for a logarithmic
/// axis `powf`'s own) is left.
fn grid_value(lo: f64, hi: f64, i: usize, count: usize, log: bool) -> f64 {
    if count == 1 {
        return lo;
    }
    let (a, b) = if log { (lo.log10(), hi.log10()) } else { (lo, hi) };
    let m = (count - 1) as f64;
    let t = i as f64 / m;
    let t_err = (-t).mul_add(m, i as f64) / m;
    let (d, d_err) = two_sum(b, -a);
    let p = d * t;
    let p_err = d.mul_add(t, -p) + d * t_err + d_err * t;
    let (x, x_sum_err) = two_sum(a, p);
    let x_err = x_sum_err + p_err;
    if log {
        let v = 10f64.powf(x);
        v.mul_add(std::f64::consts::LN_10 * x_err, v)
    } else {
        x + x_err
    }
}

/// `x + y` and its rounding error (Knuth's two-sum, common practice).
fn two_sum(x: f64, y: f64) -> (f64, f64) {
    let s = x + y;
    let bb = s - x;
    (s, (x - (s - bb)) + (y - bb))
}

/// The spacing of doubles at `x` (the distance to the next one away from zero).
fn ulp(x: f64) -> f64 {
    let a = x.abs();
    if a == 0.0 {
        return f64::from_bits(1);
    }
    f64::from_bits(a.to_bits() + 1) - a
}

/// The double of the shortest decimal within `tol` of `x` (with as few significant digits as
/// any, and of those the nearest to `x`); `x` itself when none is nearer than `x`'s own
/// 17 digits.
fn shortest_near(x: f64, tol: f64) -> f64 {
    for digits in 1..17usize {
        let nearest = format!("{:.*e}", digits - 1, x);
        let Some((mantissa, exp)) = nearest.split_once('e') else {
            return x;
        };
        let (Ok(m), Ok(e)) = (mantissa.parse::<f64>(), exp.parse::<i32>()) else {
            return x;
        };
        // The nearest decimal of this length and its two neighbours, as the digits' rounding
        // may leave the nearest one just outside the tolerance and a neighbour inside.
        let step = 10f64.powi(1 - digits as i32);
        let best = [m - step, m, m + step]
            .iter()
            .filter_map(|c| format!("{c:.*}e{e}", digits - 1).parse::<f64>().ok())
            .filter(|c| (c - x).abs() <= tol)
            .min_by(|p, q| (p - x).abs().total_cmp(&(q - x).abs()));
        if let Some(b) = best {
            return b;
        }
    }
    x
}

/// A `--shard` value that is not K/N with 1 <= K <= N.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ShardError {
    /// The flag's value.
    pub text: String,
}

impl std::fmt::Display for ShardError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "`--shard {}`: write K/N with 1 <= K <= N, e.g. `--shard 3/8`",
            self.text
        )
    }
}

impl std::error::Error for ShardError {}

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
    pub fn parse(text: &str) -> Result<Shard, ShardError> {
        let bad = || ShardError { text: text.to_string() };
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
        // In u128: total * k cannot overflow, and the quotients are at most total.
        let at = |k: usize| (total as u128 * k as u128 / self.n as u128) as usize;
        at(self.k - 1)..at(self.k)
    }
}

/// Why a grid point has no prediction, with the whole diagnosis (message and hints): its
/// model does not build, or an analysis failed. Tables print the message alone.
#[derive(Debug, Clone, PartialEq)]
pub enum PointError {
    /// The model does not build with these values.
    Model(Box<Diagnostic>),
    /// The prediction failed.
    Analysis(AnalysisError),
}

impl PointError {
    /// What went wrong, in one line.
    pub fn message(&self) -> &str {
        match self {
            PointError::Model(d) => &d.message,
            PointError::Analysis(e) => &e.message,
        }
    }

    /// How to fix it.
    pub fn hints(&self) -> &[String] {
        match self {
            PointError::Model(d) => &d.hints,
            PointError::Analysis(e) => &e.hints,
        }
    }

    /// As a diagnostic (no source: a grid point's model is not a file).
    pub fn diagnostic(&self) -> Diagnostic {
        match self {
            PointError::Model(d) => (**d).clone(),
            PointError::Analysis(e) => e.diagnostic(),
        }
    }
}

impl std::fmt::Display for PointError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.message())
    }
}

impl std::error::Error for PointError {}

impl From<crate::model::ModelError> for PointError {
    fn from(e: crate::model::ModelError) -> Self {
        PointError::Model(e.diagnostic)
    }
}

impl From<AnalysisError> for PointError {
    fn from(e: AnalysisError) -> Self {
        PointError::Analysis(e)
    }
}

/// Serialised as its message, as the tables print it.
impl Serialize for PointError {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.message())
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
    pub result: Result<Prediction, PointError>,
    /// The N_* of the row (kept when the prediction failed).
    pub n_star: f64,
}

/// Most rows a scan computes before it hands them on: the grid runs in chunks of
/// `CHUNK_ROWS / N_*-count` points (2730 points for three N_*), each chunk in parallel, so a
/// scan of any size holds one chunk's rows at a time.
pub const CHUNK_ROWS: usize = 8192;

/// The number of points of a grid, or `None` when the product overflows.
pub fn total_points(axes: &[Axis]) -> Option<usize> {
    axes.iter().try_fold(1usize, |acc, a| acc.checked_mul(a.values.len()))
}

/// One scan: the model, the grid, the N_* values and data every point shares, and how to run.
#[derive(Debug, Clone, Copy)]
pub struct ScanJob<'a> {
    /// The model as written (the varied parameters are set at each point).
    pub spec: &'a ModelSpec,
    /// The varied parameters.
    pub axes: &'a [Axis],
    /// N_* values, one row each per point.
    pub n_stars: &'a [f64],
    /// The data to judge against.
    pub data: &'a DataSet,
    /// Only this slice of the points, if given.
    pub shard: Option<Shard>,
    /// Limits and tolerances.
    pub config: &'a Config,
    /// Show a progress bar.
    pub progress: bool,
}

/// Runs the grid (or one shard of it) and returns every row. Points fail independently: a
/// failed point keeps its rows, with the error. See [`run_chunks`] for the streaming form.
pub fn run(
    spec: &ModelSpec,
    axes: &[Axis],
    n_stars: &[f64],
    data: &DataSet,
    shard: Option<Shard>,
    config: &Config,
    progress: bool,
) -> Vec<ScanRow> {
    let job = ScanJob {
        spec,
        axes,
        n_stars,
        data,
        shard,
        config,
        progress,
    };
    let mut all = Vec::new();
    let done: Result<(), std::convert::Infallible> = run_chunks(&job, &mut |rows| {
        all.extend_from_slice(rows);
        Ok(())
    });
    let Ok(()) = done;
    all
}

/// Runs the grid (or one shard of it) in chunks of points (see [`CHUNK_ROWS`]), each chunk's
/// points in parallel, and hands each chunk's rows to `sink` in point order as it completes.
/// The first error of `sink` stops the scan and is returned.
///
/// The model is compiled once: each worker rebinds its own copy to the parameters of each of
/// its points ([`Prepared::rebind`]), which gives the values, predictions and error messages
/// of a model built afresh at that point. Should the model not build at its own parameter
/// values, or an axis vary a name the model does not have, every point builds its model
/// afresh instead.
pub fn run_chunks<E>(job: &ScanJob<'_>, sink: &mut dyn FnMut(&[ScanRow]) -> Result<(), E>) -> Result<(), E> {
    use rayon::prelude::*;
    let total = total_points(job.axes).unwrap_or(usize::MAX);
    let range = job.shard.map_or(0..total, |s| s.range(total));
    let bar = if job.progress {
        indicatif::ProgressBar::new(range.len() as u64)
    } else {
        indicatif::ProgressBar::hidden()
    };
    let opts = Options {
        n_stars: job.n_stars.to_vec(),
        data: job.data.clone(),
        ..Default::default()
    };
    let base = Model::build(job.spec, job.config)
        .ok()
        .filter(|m| job.axes.iter().all(|a| m.scope.params.contains(&a.name)));
    let per_chunk = (CHUNK_ROWS / job.n_stars.len().max(1)).max(1);
    let mut lo = range.start;
    while lo < range.end {
        let hi = lo + per_chunk.min(range.end - lo);
        let rows: Vec<Vec<ScanRow>> = (lo..hi)
            .into_par_iter()
            .map_init(
                || base.as_ref().map(Prepared::new),
                |prep, point| {
                    let rows = point_rows(job, prep.as_mut(), &opts, point);
                    bar.inc(1);
                    rows
                },
            )
            .collect();
        let rows: Vec<ScanRow> = rows.into_iter().flatten().collect();
        if let Err(e) = sink(&rows) {
            bar.finish_and_clear();
            return Err(e);
        }
        lo = hi;
    }
    bar.finish_and_clear();
    Ok(())
}

/// The rows of one grid point: one per N_*, with the error when the point fails. `prep` is the
/// worker's model to rebind, if it has one.
fn point_rows(job: &ScanJob<'_>, prep: Option<&mut Prepared<'_>>, opts: &Options, point: usize) -> Vec<ScanRow> {
    let values = grid_point(job.axes, point);
    let params: Vec<(String, f64)> = job
        .axes
        .iter()
        .map(|a| a.name.clone())
        .zip(values.iter().copied())
        .collect();
    match predict_at(job, prep, &params, opts) {
        Ok(preds) => preds
            .into_iter()
            .map(|p| ScanRow {
                point,
                params: params.clone(),
                n_star: p.n_star,
                result: Ok(p),
            })
            .collect(),
        Err(e) => job
            .n_stars
            .iter()
            .map(|&n| ScanRow {
                point,
                params: params.clone(),
                n_star: n,
                result: Err(e.clone()),
            })
            .collect(),
    }
}

/// The parameter values of a point: the first axis varies slowest.
pub fn grid_point(axes: &[Axis], mut index: usize) -> Vec<f64> {
    let mut out = vec![0.0; axes.len()];
    for (i, a) in axes.iter().enumerate().rev() {
        out[i] = a.values[index % a.values.len()];
        index /= a.values.len();
    }
    out
}

/// The predictions at one point: `prep` rebound to its parameters, or (without one) the model
/// built afresh with them. The error is the model's or the prediction's message.
fn predict_at(
    job: &ScanJob<'_>,
    prep: Option<&mut Prepared<'_>>,
    params: &[(String, f64)],
    opts: &Options,
) -> Result<Vec<Prediction>, PointError> {
    let rep = match prep {
        Some(prep) => {
            let pairs: Vec<(&str, f64)> = params.iter().map(|(n, v)| (n.as_str(), *v)).collect();
            prep.rebind(&pairs, job.config)?;
            prep.predict(opts, job.config)
        }
        None => {
            let mut spec = job.spec.clone();
            for (name, v) in params {
                spec.set_param(name, &format!("{v:e}"));
            }
            let model = Model::build(&spec, job.config)?;
            predict(&model, opts, job.config)
        }
    };
    Ok(rep?.predictions)
}

/// Where a shard comes from, written at its top: the first line of a CSV shard
/// (`# efold-scan-shard {...}`), the `shard` object of a JSON shard. `merge` checks it.
#[derive(Debug, Clone, PartialEq, Serialize, serde::Deserialize)]
pub struct Provenance {
    /// [`definition_id`] of the scan.
    pub scan: String,
    /// This shard's index, 1-based.
    pub shard: usize,
    /// How many shards the scan was cut into.
    pub shards: usize,
    /// The points this shard holds, `[first, one past the last]`.
    pub points: [usize; 2],
    /// The scan's total number of points.
    pub total: usize,
    /// The N_* of every point, in row order.
    pub efolds: Vec<f64>,
    /// The fields of a scan of a model of several fields (absent for one field).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fields: Option<Vec<String>>,
}

/// What starts a CSV shard's first line.
pub const SHARD_LINE: &str = "# efold-scan-shard ";

/// A fingerprint of everything that makes a scan's rows what they are: the model (name, field,
/// V, K, parameters, range, start), the axes and their values, the N_* list and the data set
/// (its values, not its path). 64-bit FNV-1a of their compact JSON, in hex.
pub fn definition_id(spec: &ModelSpec, axes: &[Axis], n_stars: &[f64], data: &DataSet) -> String {
    let def = serde_json::json!({
        "name": spec.name,
        "field": spec.field,
        "potential": spec.potential.text,
        "kinetic": spec.kinetic.text,
        "params": spec.params.iter().map(|p| (&p.name, &p.value.text)).collect::<Vec<_>>(),
        "range": spec.range.as_ref().map(|(a, b)| (&a.text, &b.text)),
        "start": spec.start,
        "axes": axes.iter().map(|a| (&a.name, &a.values)).collect::<Vec<_>>(),
        "efolds": n_stars,
        "data": data,
    });
    fingerprint(&serde_json::to_string(&def).expect("serialisable"))
}

/// 64-bit FNV-1a of `text`, in hex: the fingerprint of [`definition_id`].
pub fn fingerprint(text: &str) -> String {
    // FNV-1a, 64 bits (offset basis and prime of the published definition, from memory).
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in text.bytes() {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    format!("{h:016x}")
}

/// Writes a scan's table piece by piece, in the bytes the whole table would have: the start,
/// the rows chunk by chunk, the end. Unsharded, CSV is a header and rows and JSON an array of
/// rows; a shard adds its [`Provenance`]: a first line in CSV, and in JSON an envelope
/// `{"shard": {...}, "rows": [...]}`.
pub struct Table {
    json: bool,
    provenance: Option<Provenance>,
    written: usize,
}

impl Table {
    /// A table in JSON (else CSV), with the provenance of a shard.
    pub fn new(json: bool, provenance: Option<Provenance>) -> Table {
        Table {
            json,
            provenance,
            written: 0,
        }
    }

    /// What comes before the rows.
    pub fn start(&self, axes: &[String]) -> String {
        self.start_with_header(&csv_header(axes))
    }

    /// What comes before the rows, with this CSV header (without its newline).
    pub fn start_with_header(&self, header: &str) -> String {
        let prov = self
            .provenance
            .as_ref()
            .map(|p| serde_json::to_string(p).expect("serialisable"));
        match (self.json, prov) {
            (false, None) => format!("{header}\n"),
            (false, Some(p)) => format!("{SHARD_LINE}{p}\n{header}\n"),
            (true, None) => "[".to_string(),
            (true, Some(p)) => format!("{{\n\"shard\": {p},\n\"rows\": ["),
        }
    }

    /// These rows, as they follow the rows already written.
    pub fn rows(&mut self, rows: &[ScanRow]) -> String {
        if !self.json {
            self.written += rows.len();
            return csv_rows(rows);
        }
        let rows: Vec<JsonRow> = rows.iter().map(json_row).collect();
        self.json_rows(&rows)
    }

    /// These CSV lines (`count` records), as they follow the rows already written.
    pub fn csv_lines(&mut self, lines: String, count: usize) -> String {
        self.written += count;
        lines
    }

    /// These JSON rows, as they follow the rows already written.
    pub fn json_rows(&mut self, rows: &[JsonRow]) -> String {
        let mut o = String::new();
        for r in rows {
            // The element as serde_json's pretty printer nests it: every line two spaces in.
            let text = serde_json::to_string_pretty(r).expect("serialisable");
            o.push_str(if self.written == 0 { "\n" } else { ",\n" });
            for (i, line) in text.lines().enumerate() {
                if i > 0 {
                    o.push('\n');
                }
                o.push_str("  ");
                o.push_str(line);
            }
            self.written += 1;
        }
        o
    }

    /// What comes after the rows.
    pub fn end(&self) -> String {
        if !self.json {
            return String::new();
        }
        let close = if self.written == 0 { "]" } else { "\n]" };
        match self.provenance {
            None => format!("{close}\n"),
            Some(_) => format!("{close}\n}}\n"),
        }
    }
}

/// One shard file as read back.
struct ShardFile<'a> {
    name: &'a str,
    json: bool,
    prov: Provenance,
    /// CSV: the header line; JSON: empty.
    header: &'a str,
    /// CSV: the record texts, each with its newline; JSON: the rows.
    csv_rows: Vec<&'a str>,
    json_rows: Vec<JsonRow>,
}

/// What a file that is not a shard looks like, for the error.
fn what_it_is(text: &str) -> &'static str {
    let first = text.lines().next().unwrap_or_default();
    let t = text.trim_start();
    if t.is_empty() {
        "it is empty"
    } else if first.starts_with("point,") || t.starts_with('[') {
        "it is the table of an unsharded scan"
    } else if first.starts_with("n_star,") || (t.starts_with('{') && t.contains("\"predictions\"")) {
        "it is a `predict` table"
    } else {
        "it is not a file `efold scan --shard` writes"
    }
}

/// Splits CSV text into records (a quoted field may hold commas, quotes doubled and newlines):
/// (line number of the record's start, the record with its newline, its number of fields).
/// `Err` with the line number when the text ends inside a record.
fn csv_records(text: &str, first_line: usize) -> Result<Vec<(usize, &str, usize)>, usize> {
    let mut out = Vec::new();
    let (mut start, mut line, mut start_line) = (0, first_line, first_line);
    let (mut quoted, mut fields) = (false, 1);
    for (i, c) in text.char_indices() {
        match c {
            '"' => quoted = !quoted,
            ',' if !quoted => fields += 1,
            '\n' => {
                line += 1;
                if !quoted {
                    out.push((start_line, &text[start..=i], fields));
                    start = i + 1;
                    start_line = line;
                    fields = 1;
                }
            }
            _ => {}
        }
    }
    if start < text.len() {
        return Err(start_line);
    }
    Ok(out)
}

/// Why `merge` refuses its files: each names the file (and the row or shard) at fault.
#[derive(Debug, Clone, PartialEq)]
pub enum MergeError {
    /// No files were given.
    NoFiles,
    /// The shard line is not readable JSON.
    ShardLine {
        /// The file.
        name: String,
        /// The parser's message.
        error: String,
    },
    /// No header line after the shard line.
    NoHeader {
        /// The file.
        name: String,
    },
    /// The last record does not end with a newline.
    CutShort {
        /// The file.
        name: String,
        /// The record's first line.
        line: usize,
    },
    /// A record with another number of fields than the header.
    Fields {
        /// The file.
        name: String,
        /// The record's first line.
        line: usize,
        /// Its fields.
        fields: usize,
        /// The header's.
        columns: usize,
    },
    /// A JSON file that does not parse.
    IncompleteJson {
        /// The file.
        name: String,
        /// The parser's message.
        error: String,
    },
    /// The `shard` object of a JSON shard is not readable.
    ShardObject {
        /// The file.
        name: String,
        /// The parser's message.
        error: String,
    },
    /// The rows of a JSON shard are not readable in order.
    Rows {
        /// The file.
        name: String,
        /// The parser's message.
        error: String,
    },
    /// Not a shard at all.
    NotAShard {
        /// The file.
        name: String,
        /// What it looks like.
        what: &'static str,
    },
    /// A row of another point than the one that belongs there.
    WrongPoint {
        /// The file.
        name: String,
        /// The row (1-based).
        row: usize,
        /// Its point.
        point: u64,
        /// The point that belongs there.
        want: u64,
        /// The row's place among its point's rows (1-based).
        of_point: usize,
        /// Rows per point.
        per: usize,
    },
    /// Another number of rows than the shard's points make.
    RowCount {
        /// The file.
        name: String,
        /// Rows found.
        rows: usize,
        /// The shard's points: [first, one past the last].
        points: [usize; 2],
        /// Rows per point.
        per: usize,
        /// Rows expected.
        expected: usize,
        /// Fewer rows than expected (else more).
        incomplete: bool,
    },
    /// A row without a point index.
    NoPointIndex {
        /// The file.
        name: String,
        /// The row (1-based).
        row: usize,
    },
    /// CSV and JSON shards mixed.
    MixedFormats {
        /// The file.
        name: String,
        /// This file is JSON.
        json: bool,
    },
    /// A shard of a scan of a model of several fields among shards of one of one field, or
    /// the other way round.
    MixedKinds {
        /// The file.
        name: String,
        /// Its fields, if its model has several.
        fields: Option<Vec<String>>,
        /// The first file.
        first: String,
        /// The first file's fields, if its model has several.
        first_fields: Option<Vec<String>>,
    },
    /// A shard of another scan.
    OtherScan {
        /// The file.
        name: String,
        /// The first file.
        first: String,
    },
    /// A shard of a scan cut into another number of shards.
    CutDifferently {
        /// The file.
        name: String,
        /// Its index.
        shard: usize,
        /// Its count.
        shards: usize,
        /// The first file's count.
        first_shards: usize,
    },
    /// A shard index outside 1..=N.
    BadIndex {
        /// The file.
        name: String,
        /// Its index.
        shard: usize,
        /// Its count.
        shards: usize,
    },
    /// A CSV header unlike the first file's.
    HeaderDiffers {
        /// The file.
        name: String,
        /// The first file.
        first: String,
    },
    /// A point range that is not the shard's.
    WrongRange {
        /// The file.
        name: String,
        /// The range it states.
        points: [usize; 2],
        /// Its index.
        shard: usize,
        /// Its count.
        shards: usize,
        /// The shard's range.
        range: [usize; 2],
    },
    /// The same file twice.
    GivenTwice {
        /// The file.
        name: String,
    },
    /// The same shard in two files.
    ShardAgain {
        /// The file.
        name: String,
        /// Its index.
        shard: usize,
        /// Its count.
        shards: usize,
        /// The other file.
        other: String,
    },
    /// Shards missing.
    Missing {
        /// The scan's shard count.
        shards: usize,
        /// Files given.
        given: usize,
        /// The first missing indices (at most ten).
        missing: Vec<usize>,
        /// More are missing than listed.
        more: bool,
    },
}

impl std::fmt::Display for MergeError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        use MergeError::*;
        match self {
            NoFiles
            | ShardLine { .. }
            | NoHeader { .. }
            | CutShort { .. }
            | Fields { .. }
            | IncompleteJson { .. }
            | ShardObject { .. }
            | Rows { .. }
            | NotAShard { .. }
            | WrongPoint { .. }
            | RowCount { .. }
            | NoPointIndex { .. } => self.fmt_file(f),
            MixedFormats { .. }
            | MixedKinds { .. }
            | OtherScan { .. }
            | CutDifferently { .. }
            | BadIndex { .. }
            | HeaderDiffers { .. }
            | WrongRange { .. }
            | GivenTwice { .. }
            | ShardAgain { .. }
            | Missing { .. } => self.fmt_set(f),
        }
    }
}

impl MergeError {
    /// The messages about one file on its own.
    fn fmt_file(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        use MergeError::*;
        match self {
            NoFiles => f.write_str("no files to merge"),
            ShardLine { name, error } => write!(f, "{name}: its shard line cannot be read ({error}): the file is damaged"),
            NoHeader { name } => write!(f, "{name}: no header after the shard line: the file is cut short"),
            CutShort { name, line } => write!(
                f,
                "{name}: line {line} does not end with a newline: the last row is cut short"
            ),
            Fields {
                name,
                line,
                fields,
                columns,
            } => write!(
                f,
                "{name}: line {line} has {fields} fields, the header {columns}: not a row of this scan"
            ),
            IncompleteJson { name, error } => write!(f, "{name}: not a complete JSON file ({error}): is it cut short?"),
            ShardObject { name, error } => write!(
                f,
                "{name}: its `shard` object cannot be read ({error}): the file is damaged"
            ),
            Rows { name, error } => write!(f, "{name}: its rows cannot be read ({error}): the file is damaged"),
            NotAShard { name, what } => write!(f, "{name}: not a scan shard: {what}"),
            WrongPoint {
                name,
                row,
                point,
                want,
                of_point,
                per,
            } => write!(
                f,
                "{name}: row {row} is of point {point}, where point {want} (row {of_point} of its {per}) belongs: each point needs one row per N_*"
            ),
            RowCount {
                name,
                rows,
                points: [lo, hi],
                per,
                expected,
                incomplete,
            } => {
                let span = match hi - lo {
                    0 => "no points".to_string(),
                    1 => format!("point {lo}"),
                    _ => format!("points {lo} to {}", hi - 1),
                };
                let tail = if *incomplete { ": the file is incomplete" } else { "" };
                write!(
                    f,
                    "{name}: {rows} rows, but its {span} with {per} N_* each make {expected}{tail}"
                )
            }
            NoPointIndex { name, row } => write!(f, "{name}: row {row} has no point index"),
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }

    /// The messages about a file among the others.
    fn fmt_set(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        use MergeError::*;
        let format = |json: bool| if json { "JSON" } else { "CSV" };
        match self {
            MixedFormats { name, json } => write!(
                f,
                "{name}: a {} shard among {} ones: give all CSV or all JSON",
                format(*json),
                format(!json)
            ),
            MixedKinds {
                name,
                fields,
                first,
                first_fields,
            } => {
                let kind = |fields: &Option<Vec<String>>| match fields {
                    Some(names) => format!("a model of {} fields ({})", names.len(), names.join(", ")),
                    None => "a model of one field".to_string(),
                };
                write!(
                    f,
                    "{name}: a shard of a scan of {}, but {first} is one of {}: shards of one-field and several-field scans cannot be merged",
                    kind(fields),
                    kind(first_fields)
                )
            }
            OtherScan { name, first } => write!(
                f,
                "{name}: a shard of another scan than {first} (model, grid, N_* or data differ)"
            ),
            CutDifferently {
                name,
                shard,
                shards,
                first_shards,
            } => write!(
                f,
                "{name}: shard {shard}/{shards} among shards of {first_shards}: the scan was cut into shards differently"
            ),
            BadIndex { name, shard, shards } => write!(f, "{name}: shard index {shard} of {shards}: the file is damaged"),
            HeaderDiffers { name, first } => write!(f, "{name}: its header differs from {first}'s"),
            WrongRange {
                name,
                points,
                shard,
                shards,
                range,
            } => write!(
                f,
                "{name}: points {}..{} are not shard {shard}/{shards}'s ({}..{}): the file is damaged",
                points[0], points[1], range[0], range[1]
            ),
            GivenTwice { name } => write!(f, "{name}: given twice: give each shard once"),
            ShardAgain {
                name,
                shard,
                shards,
                other,
            } => write!(
                f,
                "{name}: shard {shard}/{shards} again (also {other}): give each shard once"
            ),
            Missing {
                shards,
                given,
                missing,
                more,
            } => {
                let list: Vec<String> = missing.iter().map(|k| k.to_string()).collect();
                write!(
                    f,
                    "the scan has {shards} shards and {given} file(s) were given: shard(s) {}{} missing",
                    list.join(", "),
                    if *more { ", ..." } else { "" }
                )
            }
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }
}

impl std::error::Error for MergeError {}

fn read_shard<'a>(name: &'a str, text: &'a str) -> Result<ShardFile<'a>, MergeError> {
    let named = || name.to_string();
    if let Some(rest) = text.strip_prefix(SHARD_LINE) {
        let (line, body) = rest.split_once('\n').unwrap_or((rest, ""));
        let prov: Provenance = serde_json::from_str(line).map_err(|e| MergeError::ShardLine {
            name: named(),
            error: e.to_string(),
        })?;
        let (header, body) = body
            .split_once('\n')
            .ok_or_else(|| MergeError::NoHeader { name: named() })?;
        let columns = header.split(',').count();
        let records = csv_records(body, 3).map_err(|line| MergeError::CutShort { name: named(), line })?;
        let mut csv_rows = Vec::with_capacity(records.len());
        for (line, rec, fields) in records {
            if fields != columns {
                return Err(MergeError::Fields {
                    name: named(),
                    line,
                    fields,
                    columns,
                });
            }
            csv_rows.push(rec);
        }
        return Ok(ShardFile {
            name,
            json: false,
            prov,
            header,
            csv_rows,
            json_rows: Vec::new(),
        });
    }
    if text.trim_start().starts_with('{') {
        let v: serde_json::Value = serde_json::from_str(text).map_err(|e| MergeError::IncompleteJson {
            name: named(),
            error: e.to_string(),
        })?;
        if let (Some(prov), Some(rows)) = (v.get("shard"), v.get("rows").and_then(|r| r.as_array())) {
            let prov: Provenance = serde_json::from_value(prov.clone()).map_err(|e| MergeError::ShardObject {
                name: named(),
                error: e.to_string(),
            })?;
            // The rows again, with their keys in the order they were written; a row that is
            // not an object has no point, which the point check reports.
            #[derive(serde::Deserialize)]
            #[serde(untagged)]
            enum AnyRow {
                Object(JsonRow),
                Other(#[allow(dead_code)] serde::de::IgnoredAny),
            }
            #[derive(serde::Deserialize)]
            struct Envelope {
                rows: Vec<AnyRow>,
            }
            let ordered: Envelope = serde_json::from_str(text).map_err(|e| MergeError::Rows {
                name: named(),
                error: e.to_string(),
            })?;
            debug_assert_eq!(ordered.rows.len(), rows.len());
            let rows: Vec<JsonRow> = ordered
                .rows
                .into_iter()
                .map(|r| match r {
                    AnyRow::Object(row) => row,
                    AnyRow::Other(_) => JsonRow::default(),
                })
                .collect();
            return Ok(ShardFile {
                name,
                json: true,
                prov,
                header: "",
                csv_rows: Vec::new(),
                json_rows: rows,
            });
        }
    }
    Err(MergeError::NotAShard {
        name: named(),
        what: what_it_is(text),
    })
}

/// Checks that a shard holds exactly its points, each with one row per N_*, in order.
fn check_points(f: &ShardFile<'_>, points: &[Option<u64>]) -> Result<(), MergeError> {
    let (lo, hi) = (f.prov.points[0], f.prov.points[1]);
    let per = f.prov.efolds.len().max(1);
    let expected = (hi - lo).saturating_mul(per);
    let count = |incomplete: bool| MergeError::RowCount {
        name: f.name.to_string(),
        rows: points.len(),
        points: [lo, hi],
        per,
        expected,
        incomplete,
    };
    for (i, p) in points.iter().enumerate() {
        let want = (lo + i / per) as u64;
        match p {
            Some(p) if *p == want && i < expected => {}
            Some(p) if i < expected => {
                return Err(MergeError::WrongPoint {
                    name: f.name.to_string(),
                    row: i + 1,
                    point: *p,
                    want,
                    of_point: i % per + 1,
                    per,
                })
            }
            Some(_) => return Err(count(false)),
            None => {
                return Err(MergeError::NoPointIndex {
                    name: f.name.to_string(),
                    row: i + 1,
                })
            }
        }
    }
    if points.len() != expected {
        return Err(count(true));
    }
    Ok(())
}

/// Checks one shard's provenance against the first file's: the same format, scan, cut and
/// header, and the point range its index gives.
fn check_provenance(f: &ShardFile<'_>, first: &ShardFile<'_>) -> Result<(), MergeError> {
    let p = &f.prov;
    let name = || f.name.to_string();
    if f.json != first.json {
        return Err(MergeError::MixedFormats {
            name: name(),
            json: f.json,
        });
    }
    if p.fields.is_some() != first.prov.fields.is_some() {
        return Err(MergeError::MixedKinds {
            name: name(),
            fields: p.fields.clone(),
            first: first.name.to_string(),
            first_fields: first.prov.fields.clone(),
        });
    }
    if p.scan != first.prov.scan || p.total != first.prov.total || p.efolds != first.prov.efolds {
        return Err(MergeError::OtherScan {
            name: name(),
            first: first.name.to_string(),
        });
    }
    if p.shards != first.prov.shards {
        return Err(MergeError::CutDifferently {
            name: name(),
            shard: p.shard,
            shards: p.shards,
            first_shards: first.prov.shards,
        });
    }
    if p.shard == 0 || p.shard > p.shards {
        return Err(MergeError::BadIndex {
            name: name(),
            shard: p.shard,
            shards: p.shards,
        });
    }
    if !f.json && f.header != first.header {
        return Err(MergeError::HeaderDiffers {
            name: name(),
            first: first.name.to_string(),
        });
    }
    let range = Shard {
        k: p.shard,
        n: p.shards,
    }
    .range(p.total);
    if p.points != [range.start, range.end] {
        return Err(MergeError::WrongRange {
            name: name(),
            points: p.points,
            shard: p.shard,
            shards: p.shards,
            range: [range.start, range.end],
        });
    }
    Ok(())
}

/// The files' indices in shard order, each file checked against the first
/// ([`check_provenance`]) in turn: refused when a shard is given twice or missing.
fn shard_order(files: &[ShardFile<'_>]) -> Result<Vec<usize>, MergeError> {
    let shards = files[0].prov.shards;
    let mut by_index: Vec<Option<usize>> = vec![None; shards.min(files.len())];
    for (i, f) in files.iter().enumerate() {
        check_provenance(f, &files[0])?;
        if shards > files.len() {
            continue; // some are missing: reported below, after the per-file checks
        }
        let slot = &mut by_index[f.prov.shard - 1];
        if let Some(j) = *slot {
            return Err(if files[j].name == f.name {
                MergeError::GivenTwice {
                    name: f.name.to_string(),
                }
            } else {
                MergeError::ShardAgain {
                    name: f.name.to_string(),
                    shard: f.prov.shard,
                    shards: f.prov.shards,
                    other: files[j].name.to_string(),
                }
            });
        }
        *slot = Some(i);
    }
    if shards > files.len() {
        // At most files.len() indices are present, so the first ten missing ones are found
        // within files.len() + 10 steps, however large the count.
        let missing: Vec<usize> = (1..=shards)
            .filter(|k| !files.iter().any(|f| f.prov.shard == *k))
            .take(10)
            .collect();
        return Err(MergeError::Missing {
            shards,
            given: files.len(),
            more: shards - files.len() > missing.len(),
            missing,
        });
    }
    Ok(by_index.into_iter().map(|i| i.expect("every slot is filled")).collect())
}

/// Joins the shard files of one scan (all CSV or all JSON, as `scan --shard K/N` writes them)
/// into the table the unsharded run writes, byte for byte. Refused, naming the file: a file
/// that is not a shard, shards of different scans or cut differently, a shard missing or given
/// twice, a file that does not hold exactly its point range (one row per N_* per point), a row
/// with another number of fields than the header, a file cut short.
pub fn merge(texts: &[(String, String)]) -> Result<String, MergeError> {
    if texts.is_empty() {
        return Err(MergeError::NoFiles);
    }
    let mut files = Vec::with_capacity(texts.len());
    for (name, text) in texts {
        files.push(read_shard(name, text)?);
    }
    let order = shard_order(&files)?;
    let json = files[0].json;
    for f in &files {
        let points: Vec<Option<u64>> = if json {
            f.json_rows
                .iter()
                .map(|r| r.get("point").and_then(|p| p.as_u64()))
                .collect()
        } else {
            f.csv_rows
                .iter()
                .map(|r| r.split(',').next().and_then(|p| p.parse().ok()))
                .collect()
        };
        check_points(f, &points)?;
    }
    let order: Vec<&ShardFile<'_>> = order.iter().map(|&i| &files[i]).collect();
    if json {
        let rows: Vec<JsonRow> = order.iter().flat_map(|f| f.json_rows.iter().cloned()).collect();
        return Ok(format!(
            "{}\n",
            serde_json::to_string_pretty(&rows).expect("serialisable")
        ));
    }
    let mut o = format!("{}\n", files[0].header);
    for f in order {
        for r in &f.csv_rows {
            o.push_str(r);
        }
    }
    Ok(o)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::scan::csv_field;

    /// Grid end points are the numbers asked for, and a log grid over decades hits the powers
    /// of ten exactly (0.1, 1, 10 print as typed).
    #[test]
    fn grid_points_come_out_as_asked() {
        let a = Axis::new("a", 0.1, 10.0, 7, true).unwrap();
        assert_eq!((a.values[0], a.values[3], a.values[6]), (0.1, 1.0, 10.0));
        let b = Axis::new("b", 0.3, 0.7, 3, false).unwrap();
        assert_eq!((b.values[0], b.values[2]), (0.3, 0.7));
        let c = Axis::new("c", 0.01, 100.0, 5, true).unwrap();
        assert_eq!(c.values, vec![0.01, 0.1, 1.0, 10.0, 100.0]);
    }

    /// Interior grid values are the shortest decimals near the grid points: 10^(1/3) =
    /// 2.15443469003188372... and 10^(2/3) = 4.64158883361277889... (from memory; cubed below)
    /// to 16 and 15 digits, within 4 ulp; linear steps as typed; each printed value is the value
    /// used.
    #[test]
    fn interior_grid_values_are_short_decimals() {
        let a = Axis::new("a", 0.1, 10.0, 7, true).unwrap();
        assert_eq!(
            a.values,
            vec![
                0.1,
                0.2154434690031884,
                0.464158883361278,
                1.0,
                2.154434690031884,
                4.64158883361278,
                10.0
            ]
        );
        // each within a few ulp of the exact point: x^3 = 10 and x^3 = 100 (common practice)
        for (x, cube) in [(a.values[4], 10.0), (a.values[5], 100.0)] {
            assert!((x * x * x - cube).abs() < 16.0 * f64::EPSILON * cube, "{x}");
        }
        let b = Axis::new("b", 1.0, 2.0, 6, false).unwrap();
        assert_eq!(b.values, vec![1.0, 1.2, 1.4, 1.6, 1.8, 2.0]);
        let c = Axis::new("c", 0.0, 0.3, 4, false).unwrap();
        assert_eq!(c.values, vec![0.0, 0.1, 0.2, 0.3]);
        for v in a.values.iter().chain(&b.values) {
            assert_eq!(v.to_string().parse::<f64>().unwrap(), *v);
        }
        // 4/3 has no short decimal: the one of 16 digits within the tolerance
        let d = Axis::new("d", 1.0, 2.0, 4, false).unwrap();
        assert_eq!(d.values[1].to_string(), "1.333333333333333");
        assert!((d.values[1] - 4.0 / 3.0).abs() <= GRID_SNAP_ULPS * f64::EPSILON);
        // a grid finer than the tolerance keeps its order
        let e = Axis::new("e", 1.0, 1.0 + 8.0 * f64::EPSILON, 5, false).unwrap();
        assert!(e.values.windows(2).all(|w| w[0] < w[1]), "{:?}", e.values);
    }

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
        // no overflow for any K/N, and the shards of a count tile it
        let huge = Shard {
            k: usize::MAX,
            n: usize::MAX,
        };
        assert_eq!(huge.range(10), 9..10);
        assert_eq!(Shard { k: 1, n: usize::MAX }.range(usize::MAX), 0..1);
    }

    /// The streamed JSON is, byte for byte, serde_json's pretty form of the whole array: rows
    /// that predict, rows that failed (with quotes and a newline in the error), an empty table.
    #[test]
    fn streamed_json_is_the_pretty_array() {
        let mut spec = ModelSpec::inline("m*phi^2", None);
        spec.set_param("m", "1");
        let axes = [Axis::new("m", -1.0, 2.0, 3, false).unwrap()];
        let mut rows = run(
            &spec,
            &axes,
            &[50.0, 60.0],
            &DataSet::builtin(),
            None,
            &Config::default(),
            false,
        );
        assert!(rows.iter().any(|r| r.result.is_ok()) && rows.iter().any(|r| r.result.is_err()));
        rows[0].result = Err(PointError::Model(Box::new(Diagnostic::new(
            "a \"quoted\" reason\non two lines",
        ))));
        let whole: Vec<JsonRow> = rows.iter().map(json_row).collect();
        let expected = format!("{}\n", serde_json::to_string_pretty(&whole).unwrap());
        assert_eq!(json(&rows), expected);
        let mut t = Table::new(true, None);
        let mut chunked = t.start(&[]);
        for chunk in rows.chunks(4) {
            chunked.push_str(&t.rows(chunk));
        }
        chunked.push_str(&t.end());
        assert_eq!(chunked, expected);
        assert_eq!(json(&[]), "[]\n");
    }

    /// A failed point keeps its whole diagnosis, message and hints, as the prediction at that
    /// point gives it; the CSV and JSON rows print the message alone.
    #[test]
    fn failed_rows_keep_the_hints() {
        let mut spec = ModelSpec::inline("m*phi^2", None);
        spec.set_param("m", "1");
        let axes = [Axis::new("m", -1.0, -1.0, 1, false).unwrap()];
        let config = Config::default();
        let rows = run(&spec, &axes, &[50.0], &DataSet::builtin(), None, &config, false);
        let Err(e) = &rows[0].result else {
            panic!("V = -phi^2 predicts: {:?}", rows[0].result)
        };
        let mut at = spec.clone();
        at.set_param("m", &format!("{:e}", -1.0));
        let opts = Options {
            n_stars: vec![50.0],
            data: DataSet::builtin(),
            ..Default::default()
        };
        let direct = predict(&Model::build(&at, &config).unwrap(), &opts, &config).unwrap_err();
        assert_eq!(e, &PointError::Analysis(direct.clone()));
        assert!(!e.hints().is_empty());
        assert_eq!(e.hints(), &direct.hints[..]);
        assert_eq!(e.diagnostic(), direct.diagnostic());
        let csv = csv_rows(&rows);
        assert!(csv.trim_end().ends_with(&csv_field(&direct.message)), "{csv}");
        assert!(!csv.contains(&direct.hints[0]), "{csv}");
        assert_eq!(
            json_row(&rows[0]).get("error"),
            Some(&serde_json::json!(direct.message))
        );
    }

    /// A point whose model does not build keeps the model error's hints.
    #[test]
    fn model_errors_keep_their_hints() {
        let e = Model::build(&ModelSpec::inline("1 - tanhh(phi)^2", None), &Config::default()).unwrap_err();
        let hints = e.diagnostic.hints.clone();
        assert!(!hints.is_empty(), "{}", e.render());
        let p = PointError::from(e);
        assert_eq!(p.hints(), &hints[..]);
        assert!(matches!(p, PointError::Model(_)));
    }

    #[test]
    fn quoted_csv_fields() {
        let recs = csv_records("1,\"a, \"\"b\"\"\n c\",2\n3,4\n", 1).unwrap();
        assert_eq!(
            recs.iter().map(|r| (r.0, r.2)).collect::<Vec<_>>(),
            vec![(1, 3), (3, 2)]
        );
        assert_eq!(csv_records("1,2\n3,4", 1), Err(2));
        assert_eq!(csv_records("1,\"open\n", 1), Err(1));
    }
}

#[cfg(test)]
mod run_tests {
    use super::*;
    use crate::model::Text;

    /// The order-2 pole with the pole at w = sqrt(6 alpha), a derived parameter that fails for
    /// alpha < 0, and the range [0, w] following it.
    fn pole_spec() -> ModelSpec {
        let mut spec = ModelSpec::inline("phi^2/(6*alpha)", Some("1/(1 - (phi/w)^2)^2"));
        spec.set_param("alpha", "1");
        spec.set_param("w", "sqrt(6*alpha)");
        spec.range = Some((Text::inline("lo", "0"), Text::inline("hi", "w")));
        spec
    }

    /// Rows of a rebound model and of a model built afresh at each point are the same, in
    /// every digit the CSV keeps (Rust's shortest round-trip form) and every error message.
    #[test]
    fn rebound_points_give_the_rows_of_fresh_builds() {
        let config = Config::default();
        let spec = pole_spec();
        let axes = [Axis {
            name: "alpha".into(),
            values: vec![-1.0, 0.1, 1.0 / 3.0, -0.5, 3.7, 40.0],
        }];
        let data = DataSet::builtin();
        let job = ScanJob {
            spec: &spec,
            axes: &axes,
            n_stars: &[50.0, 60.0],
            data: &data,
            shard: None,
            config: &config,
            progress: false,
        };
        let opts = Options {
            n_stars: job.n_stars.to_vec(),
            data: data.clone(),
            ..Default::default()
        };
        let model = Model::build(&spec, &config).unwrap();
        let mut prep = Prepared::new(&model);
        let (mut rebound, mut fresh) = (Vec::new(), Vec::new());
        for point in 0..axes[0].values.len() {
            rebound.extend(point_rows(&job, Some(&mut prep), &opts, point));
            fresh.extend(point_rows(&job, None, &opts, point));
        }
        assert_eq!(csv_rows(&rebound), csv_rows(&fresh));
        assert_eq!(rebound, fresh);
        assert_eq!(rebound.iter().filter(|r| r.result.is_err()).count(), 4);
        assert_eq!(rebound.iter().filter(|r| r.result.is_ok()).count(), 8);
        // and the parallel run, with its per-worker models, gives the same rows in order
        assert_eq!(
            csv_rows(&run(&spec, &axes, job.n_stars, &data, None, &config, false)),
            csv_rows(&fresh)
        );
    }

    /// An axis over a name the model does not have keeps its old meaning (a parameter added to
    /// the model and unused), rather than failing every point.
    #[test]
    fn an_axis_over_an_unknown_name_builds_each_point() {
        let config = Config::default();
        let spec = pole_spec();
        let axes = [Axis::new("unused", 1.0, 2.0, 2, false).unwrap()];
        let rows = run(&spec, &axes, &[55.0], &DataSet::builtin(), None, &config, false);
        assert!(rows.iter().all(|r| r.result.is_ok()), "{rows:?}");
        let model = Model::build(&spec, &config).unwrap();
        let opts = Options {
            n_stars: vec![55.0],
            ..Default::default()
        };
        let want = predict(&model, &opts, &config).unwrap().predictions.remove(0);
        assert_eq!(rows[1].result, Ok(want));
    }
}
