//! Parameter scans: a grid over one or two parameters (linear or logarithmic) and over N_*,
//! every point a full prediction, run in parallel; shards for batch systems and their merge;
//! the n_s–r figure.

use crate::analysis::error::AnalysisError;
use crate::config::Config;
use crate::data::DataSet;
use crate::drivers::predict::{predict, Options, Prediction};
use crate::model::{Model, ModelSpec};
use crate::report::scan::{csv_header, csv_rows, json_row};
use serde::Serialize;

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
                // The end points are the numbers asked for, exactly.
                if i == 0 {
                    lo
                } else if i + 1 == count {
                    hi
                } else if log {
                    // in decades, so that grid points on powers of ten come out exact
                    10f64.powf(lo.log10() + (hi.log10() - lo.log10()) * t)
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
    /// A count above `max_count` (`Limits::max_axis_points`) is refused before anything is
    /// allocated.
    pub fn parse(text: &str, spec: &ModelSpec, default_count: usize, max_count: usize) -> Result<Axis, String> {
        let too_many = |count: usize| {
            format!(
                "`--vary {text}` asks for {count} values; at most {max_count} per parameter (config::Limits::max_axis_points)"
            )
        };
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
            if default_count > max_count {
                return Err(too_many(default_count));
            }
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
        if count > max_count {
            return Err(too_many(count));
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
        // In u128: total * k cannot overflow, and the quotients are at most total.
        let at = |k: usize| (total as u128 * k as u128 / self.n as u128) as usize;
        at(self.k - 1)..at(self.k)
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

/// Most rows a scan computes before it hands them on: the grid runs in chunks of
/// `CHUNK_ROWS / N_*-count` points (2730 points for three N_*), each chunk in parallel, so a
/// scan of any size holds one chunk's rows at a time.
pub const CHUNK_ROWS: usize = 8192;

/// The number of points of a grid, or `None` when the product overflows.
pub fn total_points(axes: &[Axis]) -> Option<usize> {
    axes.iter().try_fold(1usize, |acc, a| acc.checked_mul(a.values.len()))
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
    let mut all = Vec::new();
    let done: Result<(), std::convert::Infallible> =
        run_chunks(spec, axes, n_stars, data, shard, config, progress, &mut |rows| {
            all.extend_from_slice(rows);
            Ok(())
        });
    let Ok(()) = done;
    all
}

/// Runs the grid (or one shard of it) in chunks of points (see [`CHUNK_ROWS`]), each chunk's
/// points in parallel, and hands each chunk's rows to `sink` in point order as it completes.
/// The first error of `sink` stops the scan and is returned.
#[allow(clippy::too_many_arguments)]
pub fn run_chunks<E>(
    spec: &ModelSpec,
    axes: &[Axis],
    n_stars: &[f64],
    data: &DataSet,
    shard: Option<Shard>,
    config: &Config,
    progress: bool,
    sink: &mut dyn FnMut(&[ScanRow]) -> Result<(), E>,
) -> Result<(), E> {
    use rayon::prelude::*;
    let total = total_points(axes).unwrap_or(usize::MAX);
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
    let per_chunk = (CHUNK_ROWS / n_stars.len().max(1)).max(1);
    let mut lo = range.start;
    while lo < range.end {
        let hi = lo + per_chunk.min(range.end - lo);
        let rows: Vec<Vec<ScanRow>> = (lo..hi)
            .into_par_iter()
            .map(|point| {
                let rows = point_rows(spec, axes, n_stars, &opts, config, point);
                bar.inc(1);
                rows
            })
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

/// The rows of one grid point: one per N_*, with the error when the point fails.
fn point_rows(
    spec: &ModelSpec,
    axes: &[Axis],
    n_stars: &[f64],
    opts: &Options,
    config: &Config,
    point: usize,
) -> Vec<ScanRow> {
    let values = grid_point(axes, point);
    let params: Vec<(String, f64)> = axes
        .iter()
        .map(|a| a.name.clone())
        .zip(values.iter().copied())
        .collect();
    match predict_at(spec, &params, opts, config) {
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
    let text = serde_json::to_string(&def).expect("serialisable");
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
        let prov = self
            .provenance
            .as_ref()
            .map(|p| serde_json::to_string(p).expect("serialisable"));
        match (self.json, prov) {
            (false, None) => format!("{}\n", csv_header(axes)),
            (false, Some(p)) => format!("{SHARD_LINE}{p}\n{}\n", csv_header(axes)),
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
        let mut o = String::new();
        for r in rows {
            // The element as serde_json's pretty printer nests it: every line two spaces in.
            let text = serde_json::to_string_pretty(&json_row(r)).expect("serialisable");
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
    json_rows: Vec<serde_json::Value>,
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

fn read_shard<'a>(name: &'a str, text: &'a str) -> Result<ShardFile<'a>, String> {
    if let Some(rest) = text.strip_prefix(SHARD_LINE) {
        let (line, body) = rest.split_once('\n').unwrap_or((rest, ""));
        let prov: Provenance = serde_json::from_str(line)
            .map_err(|e| format!("{name}: its shard line cannot be read ({e}): the file is damaged"))?;
        let (header, body) = body
            .split_once('\n')
            .ok_or_else(|| format!("{name}: no header after the shard line: the file is cut short"))?;
        let columns = header.split(',').count();
        let records = csv_records(body, 3)
            .map_err(|l| format!("{name}: line {l} does not end with a newline: the last row is cut short"))?;
        let mut csv_rows = Vec::with_capacity(records.len());
        for (l, rec, fields) in records {
            if fields != columns {
                return Err(format!(
                    "{name}: line {l} has {fields} fields, the header {columns}: not a row of this scan"
                ));
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
        let v: serde_json::Value = serde_json::from_str(text)
            .map_err(|e| format!("{name}: not a complete JSON file ({e}): is it cut short?"))?;
        if let (Some(prov), Some(rows)) = (v.get("shard"), v.get("rows").and_then(|r| r.as_array())) {
            let prov: Provenance = serde_json::from_value(prov.clone())
                .map_err(|e| format!("{name}: its `shard` object cannot be read ({e}): the file is damaged"))?;
            return Ok(ShardFile {
                name,
                json: true,
                prov,
                header: "",
                csv_rows: Vec::new(),
                json_rows: rows.clone(),
            });
        }
    }
    Err(format!("{name}: not a scan shard: {}", what_it_is(text)))
}

/// Checks that a shard holds exactly its points, each with one row per N_*, in order.
fn check_points(f: &ShardFile<'_>, points: &[Option<u64>]) -> Result<(), String> {
    let (lo, hi) = (f.prov.points[0], f.prov.points[1]);
    let span = match hi - lo {
        0 => "no points".to_string(),
        1 => format!("point {lo}"),
        _ => format!("points {lo} to {}", hi - 1),
    };
    let per = f.prov.efolds.len().max(1);
    let expected = (hi - lo).saturating_mul(per);
    for (i, p) in points.iter().enumerate() {
        let want = (lo + i / per) as u64;
        match p {
            Some(p) if *p == want && i < expected => {}
            Some(p) if i < expected => {
                return Err(format!(
                    "{}: row {} is of point {p}, where point {want} (row {} of its {per}) belongs: each point needs one row per N_*",
                    f.name,
                    i + 1,
                    i % per + 1
                ))
            }
            Some(_) => {
                return Err(format!(
                    "{}: {} rows, but its {span} with {per} N_* each make {expected}",
                    f.name,
                    points.len()
                ))
            }
            None => return Err(format!("{}: row {} has no point index", f.name, i + 1)),
        }
    }
    if points.len() != expected {
        return Err(format!(
            "{}: {} rows, but its {span} with {per} N_* each make {expected}: the file is incomplete",
            f.name,
            points.len()
        ));
    }
    Ok(())
}

/// Joins the shard files of one scan (all CSV or all JSON, as `scan --shard K/N` writes them)
/// into the table the unsharded run writes, byte for byte. Refused, naming the file: a file
/// that is not a shard, shards of different scans or cut differently, a shard missing or given
/// twice, a file that does not hold exactly its point range (one row per N_* per point), a row
/// with another number of fields than the header, a file cut short.
pub fn merge(texts: &[(String, String)]) -> Result<String, String> {
    if texts.is_empty() {
        return Err("no files to merge".to_string());
    }
    let mut files = Vec::with_capacity(texts.len());
    for (name, text) in texts {
        files.push(read_shard(name, text)?);
    }
    let first = &files[0];
    let json = first.json;
    let mut by_index: Vec<Option<usize>> = vec![None; first.prov.shards.min(texts.len())];
    for (i, f) in files.iter().enumerate() {
        let p = &f.prov;
        let this_json = f.json;
        if this_json != json {
            return Err(format!(
                "{}: a {} shard among {} ones: give all CSV or all JSON",
                f.name,
                if this_json { "JSON" } else { "CSV" },
                if json { "JSON" } else { "CSV" }
            ));
        }
        if p.scan != first.prov.scan || p.total != first.prov.total || p.efolds != first.prov.efolds {
            return Err(format!(
                "{}: a shard of another scan than {} (model, grid, N_* or data differ)",
                f.name, first.name
            ));
        }
        if p.shards != first.prov.shards {
            return Err(format!(
                "{}: shard {}/{} among shards of {}: the scan was cut into shards differently",
                f.name, p.shard, p.shards, first.prov.shards
            ));
        }
        if p.shard == 0 || p.shard > p.shards {
            return Err(format!(
                "{}: shard index {} of {}: the file is damaged",
                f.name, p.shard, p.shards
            ));
        }
        if !json && f.header != first.header {
            return Err(format!("{}: its header differs from {}'s", f.name, first.name));
        }
        let range = Shard {
            k: p.shard,
            n: p.shards,
        }
        .range(p.total);
        if p.points != [range.start, range.end] {
            return Err(format!(
                "{}: points {}..{} are not shard {}/{}'s ({}..{}): the file is damaged",
                f.name, p.points[0], p.points[1], p.shard, p.shards, range.start, range.end
            ));
        }
        if p.shards > texts.len() {
            continue; // some are missing: reported below, after the per-file checks
        }
        let slot = &mut by_index[p.shard - 1];
        if let Some(j) = *slot {
            return Err(if files[j].name == f.name {
                format!("{}: given twice: give each shard once", f.name)
            } else {
                format!(
                    "{}: shard {}/{} again (also {}): give each shard once",
                    f.name, p.shard, p.shards, files[j].name
                )
            });
        }
        *slot = Some(i);
    }
    let shards = first.prov.shards;
    if shards > texts.len() {
        // At most texts.len() indices are present, so the first ten missing ones are found
        // within texts.len() + 10 steps, however large the count.
        let missing: Vec<String> = (1..=shards)
            .filter(|k| !files.iter().any(|f| f.prov.shard == *k))
            .take(10)
            .map(|k| k.to_string())
            .collect();
        let more = if shards - texts.len() > missing.len() {
            ", ..."
        } else {
            ""
        };
        return Err(format!(
            "the scan has {shards} shards and {} file(s) were given: shard(s) {}{more} missing",
            texts.len(),
            missing.join(", ")
        ));
    }
    for f in &files {
        let points: Vec<Option<u64>> = if json {
            f.json_rows.iter().map(|r| r["point"].as_u64()).collect()
        } else {
            f.csv_rows
                .iter()
                .map(|r| r.split(',').next().and_then(|p| p.parse().ok()))
                .collect()
        };
        check_points(f, &points)?;
    }
    let order: Vec<&ShardFile<'_>> = by_index.iter().map(|i| &files[i.expect("checked above")]).collect();
    if json {
        let rows: Vec<serde_json::Value> = order.iter().flat_map(|f| f.json_rows.iter().cloned()).collect();
        return Ok(format!(
            "{}\n",
            serde_json::to_string_pretty(&rows).expect("serialisable")
        ));
    }
    let mut o = format!("{}\n", first.header);
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
        rows[0].result = Err("a \"quoted\" reason\non two lines".into());
        let whole: Vec<serde_json::Value> = rows.iter().map(json_row).collect();
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
