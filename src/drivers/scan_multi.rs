//! Scans of models of several fields: a grid over parameters and start coordinates
//! (`start.FIELD`), every point the exact multi-field prediction of `efold predict` (the
//! slow-roll delta-N beside it where `predict` computes it), run in parallel, in the shards
//! and the table layout of one-field scans ([`super::scan`]).
//!
//! A row is `point`, the varied names, the columns of `efold predict --format csv` for a model
//! of several fields ([`crate::report::multi::csv`]) and `error`; a JSON row has the same keys
//! in the same order, a number or `null` for each cell.

use super::scan::{fingerprint, grid_point, total_points, Axis, AxisError, PointError, Shard, CHUNK_ROWS};
use crate::analysis::multi::predict::{predict as multi_predict, MultiReport, MultiSettings};
use crate::analysis::multi::space::ModelFieldSpace;
use crate::config::Config;
use crate::data::DataSet;
use crate::diag::{Diagnostic, Source, Span};
use crate::model::{Model, Text};
use crate::report::scan_multi::{header_cells, row_cells};

/// How an axis name names a start coordinate: `start.FIELD`.
pub const START_PREFIX: &str = "start.";

/// Why a `--vary` of a model of several fields cannot be made.
#[derive(Debug, Clone, PartialEq)]
pub enum MultiAxisError {
    /// The name or the range (as for one field).
    Axis(AxisError),
    /// `start.NAME` with a NAME that is not a field of the model.
    UnknownField {
        /// The flag's value.
        text: String,
        /// NAME.
        field: String,
        /// Where NAME lies in it.
        span: Span,
        /// The model's fields.
        fields: Vec<String>,
    },
}

impl MultiAxisError {
    /// As a diagnostic, with how to fix it: an unknown field with a caret under it in the
    /// flag's value (render it with [`MultiAxisError::source`]).
    pub fn diagnostic(&self) -> Diagnostic {
        match self {
            MultiAxisError::Axis(e @ AxisError::NotAParameter { .. }) => e
                .diagnostic()
                .with_hint("or vary a start coordinate of the model: `--vary start.FIELD=LO:HI:COUNT`"),
            MultiAxisError::Axis(AxisError::NoStartRange { name }) => {
                Diagnostic::new(AxisError::NoStartRange { name: name.clone() }.to_string())
                    .with_hint(format!("write `--vary {name}=10:14:3`"))
            }
            MultiAxisError::Axis(e) => e.diagnostic(),
            MultiAxisError::UnknownField {
                text,
                field: name,
                span,
                fields,
            } => {
                let list: Vec<String> = fields.iter().map(|f| format!("`{f}`")).collect();
                Diagnostic::new(format!(
                    "`--vary {text}`: `{name}` is not a field of the model (its fields: {})",
                    list.join(", ")
                ))
                .with_span(*span, "not a field")
                .with_hint(format!(
                    "a start coordinate is varied as `start.FIELD`, e.g. `--vary start.{}=10:14:3`",
                    fields.first().map_or("x", String::as_str)
                ))
            }
        }
    }

    /// The flag's value as the source an unknown field's caret points into.
    pub fn source(&self) -> Option<(&'static str, &str)> {
        match self {
            MultiAxisError::UnknownField { text, .. } => Some(("--vary", text.as_str())),
            MultiAxisError::Axis(_) => None,
        }
    }

    /// The diagnostic drawn by the one renderer, with its caret.
    pub fn render(&self) -> String {
        let d = self.diagnostic();
        match self.source() {
            Some((origin, text)) => d.render(Some(&Source::new(origin, text))),
            None => d.render(None),
        }
    }
}

/// Parses `--vary` for a model of several fields: `NAME=LO:HI[:COUNT[:log]]` for a parameter
/// (as for one field, its `[scan]` range when the range is left out), or
/// `start.FIELD=LO:HI[:COUNT[:log]]` for the start coordinate of FIELD (a range is needed).
pub fn parse_axis(text: &str, model: &Model, default_count: usize, max_count: usize) -> Result<Axis, MultiAxisError> {
    let (name, range) = match text.split_once('=') {
        Some((n, r)) => (n.trim(), Some(r.trim())),
        None => (text.trim(), None),
    };
    let Some(field) = name.strip_prefix(START_PREFIX) else {
        return Axis::parse(text, &model.spec, default_count, max_count).map_err(MultiAxisError::Axis);
    };
    let field = field.trim();
    if !model.field_names().iter().any(|f| f == field) {
        let lead = text.len() - text.trim_start().len();
        let rest = &name[START_PREFIX.len()..];
        let start = lead + START_PREFIX.len() + (rest.len() - rest.trim_start().len());
        let span = match field.is_empty() {
            true => Span::new(lead, lead + name.len()),
            false => Span::new(start, start + field.len()),
        };
        return Err(MultiAxisError::UnknownField {
            text: text.to_string(),
            field: field.to_string(),
            span,
            fields: model.field_names().to_vec(),
        });
    }
    let name = format!("{START_PREFIX}{field}");
    let none = Err(AxisError::NoStartRange { name: name.clone() });
    Axis::parse_range(text, &name, range, none, default_count, max_count).map_err(MultiAxisError::Axis)
}

/// One row of a scan of several fields: a grid point at one N_*.
#[derive(Debug, Clone, PartialEq)]
pub struct MultiScanRow {
    /// The grid point's index (rows of one point share it).
    pub point: usize,
    /// The varied names' values, in axis order.
    pub params: Vec<(String, f64)>,
    /// The N_* of the row (kept when the prediction failed).
    pub n_star: f64,
    /// The cells of `efold predict --format csv` at this N_* (from `n_star` on), or why there
    /// is no prediction.
    pub result: Result<Vec<String>, PointError>,
}

/// One scan of a model of several fields.
#[derive(Debug, Clone, Copy)]
pub struct MultiScanJob<'a> {
    /// The model, compiled once; each point rebinds a copy.
    pub model: &'a Model,
    /// The varied parameters and start coordinates.
    pub axes: &'a [Axis],
    /// N_* values, one row each per point.
    pub n_stars: &'a [f64],
    /// Only this slice of the points, if given.
    pub shard: Option<Shard>,
    /// Limits and tolerances.
    pub config: &'a Config,
    /// Show a progress bar.
    pub progress: bool,
}

impl MultiScanJob<'_> {
    /// The prediction's settings: delta-N beside the exact route where `efold predict` computes
    /// it (at most `MultiLimits::delta_n_max_fields` fields).
    pub fn settings(&self) -> MultiSettings {
        MultiScanJob::settings_for(self.model)
    }

    /// The settings of `efold predict` for `model` (see [`MultiScanJob::settings`]).
    pub fn settings_for(model: &Model) -> MultiSettings {
        let mut settings = MultiSettings::default();
        settings.delta_n = model.n_fields() <= settings.limits.delta_n_max_fields;
        settings
    }

    /// The table's header cells: `point`, the varied names, the predict CSV's columns, `error`.
    pub fn header(&self) -> Vec<String> {
        let mut cols = vec!["point".to_string()];
        cols.extend(self.axes.iter().map(|a| a.name.clone()));
        cols.extend(header_cells(self.model.field_names()));
        cols.push("error".to_string());
        cols
    }
}

/// Rebinds `model` to one point: each `(name, value)` a parameter, or a start coordinate
/// `start.FIELD` set in its `[start]` (the slow-roll attractor's velocity follows unless the
/// model gives `[start.velocity]`), with every check of a model built afresh at these values.
pub fn rebind_point(model: &mut Model, values: &[(String, f64)], config: &Config) -> Result<(), PointError> {
    let mut pairs: Vec<(&str, f64)> = Vec::new();
    for (name, v) in values {
        match name.strip_prefix(START_PREFIX) {
            Some(field) => {
                let entry = model.spec.start_point.iter_mut().find(|e| e.name.text == field);
                if let Some(e) = entry {
                    e.value = Text::inline(name, &format!("{v:e}"));
                }
            }
            None => pairs.push((name.as_str(), *v)),
        }
    }
    model.rebind(&pairs, config)?;
    Ok(())
}

/// The prediction of `efold predict` for the model as it is bound now.
pub fn predict_bound(model: &Model, n_stars: &[f64], settings: &MultiSettings) -> Result<MultiReport, PointError> {
    let mut space = ModelFieldSpace::new(model).expect("a model of several fields has a field space");
    let (start, velocity) = space.start()?;
    Ok(multi_predict(&mut space, &start, Some(&velocity), n_stars, settings)?)
}

/// The rows of one grid point: one per N_*, with the error when the point fails.
fn point_rows(job: &MultiScanJob<'_>, model: &mut Model, settings: &MultiSettings, point: usize) -> Vec<MultiScanRow> {
    let values = grid_point(job.axes, point);
    let params: Vec<(String, f64)> = job.axes.iter().map(|a| a.name.clone()).zip(values).collect();
    let rep = rebind_point(model, &params, job.config).and_then(|_| predict_bound(model, job.n_stars, settings));
    match rep {
        Ok(rep) => row_cells(&rep)
            .into_iter()
            .zip(&rep.predictions)
            .map(|(cells, p)| MultiScanRow {
                point,
                params: params.clone(),
                n_star: p.n_star,
                result: Ok(cells),
            })
            .collect(),
        Err(e) => job
            .n_stars
            .iter()
            .map(|&n| MultiScanRow {
                point,
                params: params.clone(),
                n_star: n,
                result: Err(e.clone()),
            })
            .collect(),
    }
}

/// Runs the grid (or one shard of it) in chunks of points ([`CHUNK_ROWS`]), each chunk's points
/// in parallel (each worker rebinds its own copy of the model), and hands each chunk's rows to
/// `sink` in point order. A failing point keeps its rows, with the error; the first error of
/// `sink` stops the scan and is returned.
pub fn run_chunks<E>(job: &MultiScanJob<'_>, sink: &mut dyn FnMut(&[MultiScanRow]) -> Result<(), E>) -> Result<(), E> {
    use rayon::prelude::*;
    let total = total_points(job.axes).unwrap_or(usize::MAX);
    let range = job.shard.map_or(0..total, |s| s.range(total));
    let bar = if job.progress {
        indicatif::ProgressBar::new(range.len() as u64)
    } else {
        indicatif::ProgressBar::hidden()
    };
    let settings = job.settings();
    let per_chunk = (CHUNK_ROWS / job.n_stars.len().max(1)).max(1);
    let mut lo = range.start;
    while lo < range.end {
        let hi = lo + per_chunk.min(range.end - lo);
        let rows: Vec<Vec<MultiScanRow>> = (lo..hi)
            .into_par_iter()
            .map_init(
                || job.model.clone(),
                |model, point| {
                    let rows = point_rows(job, model, &settings, point);
                    bar.inc(1);
                    rows
                },
            )
            .collect();
        let rows: Vec<MultiScanRow> = rows.into_iter().flatten().collect();
        if let Err(e) = sink(&rows) {
            bar.finish_and_clear();
            return Err(e);
        }
        lo = hi;
    }
    bar.finish_and_clear();
    Ok(())
}

/// Every row of the grid (or one shard), collected; see [`run_chunks`].
pub fn run(job: &MultiScanJob<'_>) -> Vec<MultiScanRow> {
    let mut all = Vec::new();
    let done: Result<(), std::convert::Infallible> = run_chunks(job, &mut |rows| {
        all.extend_from_slice(rows);
        Ok(())
    });
    let Ok(()) = done;
    all
}

/// A fingerprint of everything that makes the rows of a scan of several fields what they are:
/// the model (name, fields, V, metric, parameters, start and its velocity), the axes and their
/// values, the N_* list and the data set; as [`super::scan::definition_id`] for one field.
pub fn definition_id(model: &Model, axes: &[Axis], n_stars: &[f64], data: &DataSet) -> String {
    let spec = &model.spec;
    let def = serde_json::json!({
        "name": spec.name,
        "fields": model.field_names(),
        "potential": spec.potential.text,
        "metric": spec.metric.iter().map(|e| (&e.key.text, &e.value.text)).collect::<Vec<_>>(),
        "params": spec.params.iter().map(|p| (&p.name, &p.value.text)).collect::<Vec<_>>(),
        "start": spec.start_point.iter().map(|e| (&e.name.text, &e.value.text)).collect::<Vec<_>>(),
        "velocity": spec.start_velocity.iter().map(|e| (&e.name.text, &e.value.text)).collect::<Vec<_>>(),
        "axes": axes.iter().map(|a| (&a.name, &a.values)).collect::<Vec<_>>(),
        "efolds": n_stars,
        "data": data,
    });
    fingerprint(&serde_json::to_string(&def).expect("serialisable"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::ModelSpec;

    fn model() -> Model {
        let text = "fields = [\"x\", \"y\"]\npotential = \"(x^2 + ratio*y^2)/2\"\n[params]\nratio = 9\n\
                    [metric]\nx = 1\ny = 1\n[start]\nx = 12\ny = 12\n";
        Model::build(&ModelSpec::from_toml(text, "m.toml").unwrap(), &Config::default()).unwrap()
    }

    #[test]
    fn axes_over_parameters_and_start_coordinates() {
        let m = model();
        let a = parse_axis("start.y=10:14:3", &m, 30, 100).unwrap();
        assert_eq!((a.name.as_str(), a.values.clone()), ("start.y", vec![10.0, 12.0, 14.0]));
        let a = parse_axis("ratio=1:9:2", &m, 30, 100).unwrap();
        assert_eq!(a.values, vec![1.0, 9.0]);
        // an unknown field: the caret under it
        let e = parse_axis("start.z=1:2:2", &m, 30, 100).unwrap_err();
        let MultiAxisError::UnknownField { span, .. } = &e else {
            panic!("{e:?}")
        };
        assert_eq!((span.start, span.end), (6, 7));
        assert!(e.render().contains("`z` is not a field of the model"), "{}", e.render());
        // a start coordinate needs a range
        let e = parse_axis("start.x", &m, 30, 100).unwrap_err();
        assert_eq!(
            e,
            MultiAxisError::Axis(AxisError::NoStartRange { name: "start.x".into() })
        );
        // an unknown parameter points at start coordinates too
        let e = parse_axis("mass=1:2:2", &m, 30, 100).unwrap_err();
        assert!(e.render().contains("start.FIELD"), "{}", e.render());
    }

    /// A rebound point gives the model built afresh with those values, in every number.
    #[test]
    fn a_rebound_point_is_the_fresh_model() {
        let config = Config::default();
        let mut m = model();
        let axes = [
            Axis::new("start.x", 11.0, 11.0, 1, false).unwrap(),
            Axis::new("ratio", 4.0, 4.0, 1, false).unwrap(),
        ];
        let params: Vec<(String, f64)> = axes.iter().map(|a| (a.name.clone(), a.values[0])).collect();
        rebind_point(&mut m, &params, &config).unwrap();
        let text = "fields = [\"x\", \"y\"]\npotential = \"(x^2 + ratio*y^2)/2\"\n[params]\nratio = 4\n\
                    [metric]\nx = 1\ny = 1\n[start]\nx = 11\ny = 12\n";
        let fresh = Model::build(&ModelSpec::from_toml(text, "m.toml").unwrap(), &config).unwrap();
        assert_eq!(m.start(), fresh.start());
        assert_eq!(m.params, fresh.params);
        let mut a = ModelFieldSpace::new(&m).unwrap();
        let mut b = ModelFieldSpace::new(&fresh).unwrap();
        assert_eq!(a.start().unwrap(), b.start().unwrap());
    }
}
