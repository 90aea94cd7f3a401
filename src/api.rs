//! Entry points for programs that use efold as a library (the Python module is one): a built
//! [`Model`] and plain options in, the JSON values of the commands' `--format json` out, and
//! errors sorted by stage ([`ApiError`]), each drawn by the one renderer of [`crate::diag`].
//!
//! Every function here composes the drivers and reports the commands use, with the same checks
//! in the same order, so that its value is the command's JSON: `predict` is `efold predict`,
//! `inspect` is `efold inspect`, `spectrum` is `efold spectrum` on a given grid of k, `scan` is
//! the rows of `efold scan --format json`, `eval` is `efold eval --format json`. Options that
//! are flags on the command line are fields here, and their errors name the option (`efolds`,
//! `method`, `reheat`) where the command names the flag.

use crate::analysis::background::Settings;
use crate::analysis::error::AnalysisError;
use crate::analysis::multi::at_pivot::{pivot_extras, PivotExtras};
use crate::analysis::multi::delta_n_route::predict_delta_n;
use crate::analysis::multi::predict::{predict as multi_predict, MultiSettings};
use crate::analysis::multi::space::ModelFieldSpace;
use crate::analysis::perturbations::TILT_STEP;
use crate::analysis::reheating::Reheating;
use crate::config::{Config, DEFAULT_N_STARS, MAX_REHEAT_EFOLDS, MIN_EFOLDS, SLOW_ROLL_WARN_EFOLDS};
use crate::data::{DataError, DataSet};
use crate::diag::{Diagnostic, Source, Span};
use crate::drivers::inspect::{inspect as inspect_one, ModelSummary};
use crate::drivers::inspect_multi::{inspect_multi, MultiInspectError};
use crate::drivers::predict::Report;
use crate::drivers::prepared::Prepared;
use crate::drivers::scan::{total_points, Axis, ScanJob};
use crate::drivers::scan_multi::{self, MultiScanJob};
use crate::drivers::spectrum::{spectrum as spectrum_one, start_background};
use crate::drivers::spectrum_multi::{spectrum_multi, MultiSpectrumRequest};
use crate::language::compile::{compile, ExprError};
use crate::language::ir::{Func, Scope};
use crate::language::tape::MAX_ORDER;
use crate::model::{Model, ModelError, ModelParts, ModelSpec};
use crate::report::numfmt;
use crate::report::scan::JsonRow;
use serde_json::Value;

/// The stage an error comes from: what a program's error classes tell apart.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stage {
    /// An expression that does not parse, or names what is not in scope.
    Expression,
    /// A model (or data) file or its parts: structure, parameters, the range, the start.
    Model,
    /// An analysis that fails: no end of inflation, too few e-folds, a pole in the range, ...
    Analysis,
    /// An option's value: out of its range, or two that conflict.
    Input,
}

/// An error of an entry point: its stage and the diagnostic as the command prints it (carets
/// under the offending part, hints), without the command's `efold: ` prefix.
#[derive(Debug, Clone, PartialEq)]
pub struct ApiError {
    /// Where it comes from.
    pub stage: Stage,
    /// The rendered diagnostic, ending in a newline.
    pub message: String,
}

impl std::fmt::Display for ApiError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for ApiError {}

impl ApiError {
    fn new(stage: Stage, message: String) -> ApiError {
        ApiError { stage, message }
    }

    /// An option's bad value, drawn with `option = value` as the source line and carets
    /// under the value.
    fn option(option: &str, value: &str, d: Diagnostic) -> ApiError {
        let line = format!("{option} = {value}");
        let at = option.len() + 3;
        let d = d.with_span(Span::new(at, line.len().max(at + 1)), "not a valid value");
        ApiError::new(Stage::Input, d.render(Some(&Source::new("argument", &line))))
    }
}

impl From<ExprError> for ApiError {
    fn from(e: ExprError) -> ApiError {
        ApiError::new(Stage::Expression, e.render())
    }
}

impl From<ModelError> for ApiError {
    fn from(e: ModelError) -> ApiError {
        let stage = if e.from_expression {
            Stage::Expression
        } else {
            Stage::Model
        };
        ApiError::new(stage, e.render())
    }
}

impl From<AnalysisError> for ApiError {
    fn from(e: AnalysisError) -> ApiError {
        ApiError::new(Stage::Analysis, e.diagnostic().render(None))
    }
}

impl From<DataError> for ApiError {
    fn from(e: DataError) -> ApiError {
        ApiError::new(Stage::Model, e.render())
    }
}

impl From<Diagnostic> for ApiError {
    fn from(d: Diagnostic) -> ApiError {
        ApiError::new(Stage::Input, d.render(None))
    }
}

/// A model from strings ([`ModelParts`]): the field names checked first (each a valid name, and
/// not the language's own: a function, `pow`, `pi`), as `--field` is, then built as a model file
/// is ([`Model::build`]).
pub fn build_model(parts: &ModelParts, config: &Config) -> Result<Model, ApiError> {
    let names = parts
        .field
        .iter()
        .map(|f| ("field", f))
        .chain(parts.fields.iter().map(|f| ("fields", f)));
    for (option, name) in names {
        let valid = name.chars().next().is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
            && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
        let reserved = name == "pi" || name == "pow" || Func::from_name(name).is_some();
        let d = match (valid, reserved) {
            (false, _) => Diagnostic::new(format!("`{name}` is not a valid name for a field"))
                .with_hint("a name is a letter or `_`, then letters, digits or `_`"),
            (true, true) => Diagnostic::new(format!("`{name}` is a built-in name")).with_hint(
                "choose another name: the functions (exp, sqrt, ...), `pow` and `pi` are the language's own",
            ),
            (true, false) => continue,
        };
        return Err(ApiError::option(option, name, d));
    }
    Ok(Model::build(&ModelSpec::from_parts(parts), config)?)
}

/// Which route `predict` takes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Route {
    /// The slow-roll formulas (the command's default).
    #[default]
    SlowRoll,
    /// The exact background and Mukhanov–Sasaki modes.
    Exact,
    /// Several fields: the slow-roll delta-N alone on the exact background.
    DeltaN,
}

impl Route {
    /// The route named as `--method` names it: `slow-roll`, `exact` or `delta-n`.
    pub fn from_name(name: &str) -> Result<Route, ApiError> {
        match name {
            "slow-roll" => Ok(Route::SlowRoll),
            "exact" => Ok(Route::Exact),
            "delta-n" => Ok(Route::DeltaN),
            _ => Err(ApiError::option(
                "method",
                name,
                Diagnostic::new(format!("unknown method `{name}`"))
                    .with_hint("the methods are `slow-roll` (the default), `exact` and `delta-n` (several fields)"),
            )),
        }
    }
}

/// A prediction's options: `efold predict`'s flags as fields.
#[derive(Debug, Clone, Default)]
pub struct PredictRequest {
    /// N_* values; `None`: the model's `efolds`, else [`DEFAULT_N_STARS`].
    pub efolds: Option<Vec<f64>>,
    /// The route.
    pub route: Route,
    /// Second-order slow-roll observables (one field, slow roll).
    pub second_order: bool,
    /// A reheating history that fixes N_* (one field); see [`reheating`].
    pub reheating: Option<Reheating>,
    /// The data set; `None`: the built-in one.
    pub data: Option<DataSet>,
}

/// Relativistic degrees of freedom at reheating when none are given: the Standard Model's
/// 106.75 above the electroweak scale (common practice), as `--g-star`'s default.
pub const DEFAULT_G_STAR: f64 = 106.75;

/// A reheating history from its parts, as the `--reheat*` flags give it: `instant`, or an
/// equation of state `w` with a temperature `temp_gev` or a number of e-folds `efolds`; each
/// value checked against the range the flags allow.
pub fn reheating(
    instant: bool,
    w: Option<f64>,
    temp_gev: Option<f64>,
    efolds: Option<f64>,
    g_star: Option<f64>,
) -> Result<Reheating, ApiError> {
    let check = |name: &str, v: f64, ok: bool, what: &str| -> Result<(), ApiError> {
        match ok && v.is_finite() {
            true => Ok(()),
            false => Err(ApiError::option(
                name,
                &numfmt::typed(v),
                Diagnostic::new(what.to_string()),
            )),
        }
    };
    let g_star = g_star.unwrap_or(DEFAULT_G_STAR);
    check(
        "g_star",
        g_star,
        g_star > 0.0,
        "the relativistic degrees of freedom must be a finite number above 0",
    )?;
    if let Some(w) = w {
        check(
            "w",
            w,
            w > -1.0 / 3.0 && w <= 1.0,
            "the equation of state during reheating must lie in (-1/3, 1]",
        )?;
    }
    if let Some(t) = temp_gev {
        check(
            "temp",
            t,
            t > 0.0,
            "the reheating temperature must be a finite number of GeV above 0",
        )?;
    }
    if let Some(n) = efolds {
        check(
            "efolds",
            n,
            (0.0..=MAX_REHEAT_EFOLDS).contains(&n),
            &format!("the e-folds of reheating must lie in [0, {MAX_REHEAT_EFOLDS}]"),
        )?;
    }
    match (instant, w, temp_gev, efolds) {
        (true, None, None, None) => Ok(Reheating::Instant { g_star }),
        (false, Some(w), Some(t), None) => Ok(Reheating::Temperature {
            w,
            t_reh_gev: t,
            g_star,
        }),
        (false, Some(w), None, Some(n)) => Ok(Reheating::Efolds { w, n_reh: n, g_star }),
        _ => Err(Diagnostic::new("incomplete or conflicting reheating options")
            .with_hint("`instant`, or `w` with one of `temp` (GeV) and `efolds`")
            .into()),
    }
}

/// The N_* list of a request: `efolds`, else the model's, else [`DEFAULT_N_STARS`]; at most
/// `Limits::max_efolds` values, each finite and at least `MIN_EFOLDS`.
pub fn n_stars(efolds: Option<&[f64]>, model: &Model, config: &Config) -> Result<Vec<f64>, ApiError> {
    let list = match (efolds, &model.spec.efolds) {
        (Some(e), _) => e.to_vec(),
        (None, Some(e)) => e.clone(),
        (None, None) => DEFAULT_N_STARS.to_vec(),
    };
    let limit = config.limits.max_efolds;
    if list.len() > limit {
        return Err(Diagnostic::new(format!(
            "{} N_* values given; at most {limit} (config::Limits::max_efolds)",
            list.len()
        ))
        .with_hint("give fewer values to efolds")
        .into());
    }
    if let Some(v) = list.iter().find(|v| !(v.is_finite() && **v >= MIN_EFOLDS)) {
        return Err(ApiError::option(
            "efolds",
            &numfmt::typed(*v),
            Diagnostic::new(format!(
                "N_* = {}: the e-folds before the end of inflation must be a finite number, {MIN_EFOLDS} or more",
                numfmt::typed(*v)
            ))
            .with_hint("the pivot usually leaves the horizon 50 to 60 e-folds before the end: efolds=[50, 55, 60]"),
        ));
    }
    Ok(list)
}

/// The warning slow roll adds when an N_* is below [`SLOW_ROLL_WARN_EFOLDS`]: `efold predict`
/// and [`predict`] both push it.
pub fn warn_slow_roll(rep: &mut Report) {
    let limit = SLOW_ROLL_WARN_EFOLDS;
    if let Some(p) = rep.predictions.iter().find(|p| p.n_star < limit) {
        rep.warnings.push(format!(
            "N_* = {} is below {limit}: slow roll is unreliable so close to the end of inflation (try --method exact)",
            p.n_star
        ));
    }
}

/// The fewest N_* the exact route takes: the modes around the pivot must freeze before the end.
pub fn min_exact_efolds(settings: &Settings) -> f64 {
    (1.0 / settings.k_stop).ln() + 2.0 * TILT_STEP + 1.0 + 4.0
}

/// `efold predict --format json` of `model`: one field's report, or for several fields the
/// exact multi-field prediction (or delta-N alone).
pub fn predict(model: &Model, req: &PredictRequest, config: &Config) -> Result<Value, ApiError> {
    if req.reheating.is_some() && req.efolds.is_some() {
        return Err(
            Diagnostic::new("efolds is given together with a reheating history, which fixes N_* itself")
                .with_hint("leave out efolds to have N_* from reheating, or the reheating to give N_*")
                .into(),
        );
    }
    let n_stars = n_stars(req.efolds.as_deref(), model, config)?;
    let data = req.data.clone().unwrap_or_else(DataSet::builtin);
    if model.n_fields() > 1 {
        return predict_several_fields(model, req, &n_stars, &data, config);
    }
    if req.route == Route::DeltaN {
        return Err(Diagnostic::new(format!(
            "method delta-n is for models of several fields; the model `{}` has one field",
            model.spec.name
        ))
        .with_hint("for one field, delta-N is the slow-roll computation: use method slow-roll (or exact for the exact spectrum)")
        .into());
    }
    let exact = (req.route == Route::Exact).then(Settings::default);
    if let (Some(settings), None) = (&exact, &req.reheating) {
        let min = min_exact_efolds(settings);
        if let Some(n) = n_stars.iter().find(|n| **n < min) {
            return Err(Diagnostic::new(format!(
                "N_* = {n} is too few for the exact method: it needs N_* of at least {:.2}",
                (min * 100.0).ceil() / 100.0
            ))
            .with_hint(format!(
                "the modes around the pivot must leave the horizon and freeze before the end: give efolds of {:.0} or more, or use slow roll",
                min.ceil()
            ))
            .into());
        }
    }
    let opts = crate::drivers::predict::Options {
        n_stars,
        branch: None,
        second_order: req.second_order,
        reheating: req.reheating,
        data,
        exact,
    };
    let mut rep = Prepared::new(model).predict(&opts, config)?;
    if req.route == Route::SlowRoll {
        warn_slow_roll(&mut rep);
    }
    Ok(serde_json::to_value(&rep).expect("serialisable report"))
}

/// [`predict`] on a model of several fields: the exact route with delta-N beside it (for at
/// most `MultiLimits::delta_n_max_fields` fields), or delta-N alone.
fn predict_several_fields(
    model: &Model,
    req: &PredictRequest,
    n_stars: &[f64],
    data: &DataSet,
    config: &Config,
) -> Result<Value, ApiError> {
    let refused = [(req.second_order, "second_order"), (req.reheating.is_some(), "reheat")];
    if let Some((_, option)) = refused.iter().find(|(given, _)| *given) {
        return Err(Diagnostic::new(format!(
            "{option} is an option of one-field models; the model `{}` has {} fields",
            model.spec.name,
            model.n_fields()
        ))
        .with_hint("a model of several fields starts where its [start] table says, and is predicted on the exact route with delta-N beside it (or by delta-N alone with method delta-n)")
        .into());
    }
    let mut space = field_space(model)?;
    let (start, velocity) = space.start()?;
    let extras_of = |fields: &mut dyn Iterator<Item = (&[f64], &[f64])>| -> Result<Vec<PivotExtras>, ApiError> {
        Ok(fields
            .map(|(phi, v)| pivot_extras(model, phi, v, config))
            .collect::<Result<_, _>>()?)
    };
    let text = if req.route == Route::DeltaN {
        let rep = predict_delta_n(&mut space, &start, Some(&velocity), n_stars, &MultiSettings::default())?;
        let extras = extras_of(
            &mut rep
                .predictions
                .iter()
                .map(|p| (p.fields_star.as_slice(), p.velocity_star.as_slice())),
        )?;
        crate::report::multi::json_delta_n(&model.spec.name, &rep, &extras, data.a_s())
    } else {
        let mut settings = MultiSettings::default();
        settings.delta_n = model.n_fields() <= settings.limits.delta_n_max_fields;
        let rep = multi_predict(&mut space, &start, Some(&velocity), n_stars, &settings)?;
        let extras = extras_of(
            &mut rep
                .predictions
                .iter()
                .map(|p| (p.fields_star.as_slice(), p.velocity_star.as_slice())),
        )?;
        crate::report::multi::json_with(&model.spec.name, &rep, &extras, data.a_s())
    };
    Ok(serde_json::from_str(&text).expect("the report's own JSON"))
}

/// The field space of a model of several fields; a model compiled without its geometry is an
/// error rather than a panic.
fn field_space(model: &Model) -> Result<ModelFieldSpace<'_>, ApiError> {
    ModelFieldSpace::new(model).ok_or_else(|| {
        ApiError::new(
            Stage::Model,
            Diagnostic::new(format!(
                "the model `{}` compiled without its field-space geometry",
                model.spec.name
            ))
            .with_hint("write the model with `fields = [...]`, a [metric] table and a [start] table")
            .render(None),
        )
    })
}

/// `efold inspect --format json` of `model`.
pub fn inspect(model: &Model, config: &Config) -> Result<Value, ApiError> {
    if model.n_fields() == 1 {
        let ins = inspect_one(model, config, None)?;
        return Ok(serde_json::to_value(&ins).expect("serialisable report"));
    }
    match inspect_multi(model, config) {
        Some(Ok(ins)) => Ok(crate::report::inspect_multi::json(&ins)),
        Some(Err(MultiInspectError::Analysis(e))) => Err(e.into()),
        Some(Err(MultiInspectError::Model(e))) => Err(e.into()),
        None => Err(ApiError::new(
            Stage::Model,
            Diagnostic::new(format!(
                "the model `{}` compiled without its field-space geometry",
                model.spec.name
            ))
            .render(None),
        )),
    }
}

/// `efold spectrum --format json` of `model` on the grid `k_mpc` (Mpc^-1, ascending, each
/// finite and above 0, at most `Limits::max_spectrum_points`), the pivot `n_star` e-folds
/// before the end.
pub fn spectrum(model: &Model, k_mpc: &[f64], n_star: f64, data: &DataSet, config: &Config) -> Result<Value, ApiError> {
    check_k_grid(k_mpc, config)?;
    n_stars(Some(&[n_star]), model, config)?;
    let k_star = data.pivot.k_mpc;
    let (k_min, k_max) = (k_mpc[0], k_mpc[k_mpc.len() - 1]);
    if model.n_fields() > 1 {
        let mut space = field_space(model)?;
        let (start, velocity) = space.start()?;
        let req = MultiSpectrumRequest {
            start: &start,
            velocity: &velocity,
            n_star,
            k_mpc,
            a_s: data.a_s(),
            k_star_mpc: k_star,
        };
        let sp = spectrum_multi(&mut space, &req, &Default::default())?;
        return Ok(serde_json::json!({ "model": model.spec.name, "spectrum": sp }));
    }
    let settings = Settings::default();
    // The largest k must still freeze before the end: N_* - ln(k/k_*) > ln(1/k_stop) + 1.
    let k_limit = k_star * (n_star - (1.0 / settings.k_stop).ln() - 1.5).exp();
    if k_max > k_limit {
        return Err(Diagnostic::new(format!(
            "k = {} Mpc^-1 exits too close to the end of inflation to freeze (at most {} for N_* = {})",
            numfmt::typed(k_max),
            numfmt::number(k_limit),
            numfmt::typed(n_star)
        ))
        .with_hint("lower the largest k, or raise efolds")
        .into());
    }
    let needed = n_star + (k_star / k_min).ln().max(0.0) + settings.k_start.ln() + 4.0;
    let prep = Prepared::new(model);
    let run = start_background(&prep, needed, &settings, None, data, config)?;
    let sp = spectrum_one(model, &run, n_star, k_mpc, data.a_s(), k_star, &settings)?;
    Ok(serde_json::json!({ "model": ModelSummary::of(model), "spectrum": sp }))
}

/// A grid of k: at least one value, at most `Limits::max_spectrum_points`, each finite and
/// above 0, ascending.
fn check_k_grid(k: &[f64], config: &Config) -> Result<(), ApiError> {
    let limit = config.limits.max_spectrum_points;
    if k.is_empty() || k.len() > limit {
        return Err(Diagnostic::new(format!(
            "{} values of k given; a spectrum takes 1 to {limit} (config::Limits::max_spectrum_points)",
            k.len()
        ))
        .with_hint("give a grid such as numpy.geomspace(1e-4, 1, 50)")
        .into());
    }
    if let Some(v) = k.iter().find(|v| !(v.is_finite() && **v > 0.0)) {
        return Err(ApiError::option(
            "k",
            &numfmt::typed(*v),
            Diagnostic::new(format!("k = {} is not a finite number above 0", numfmt::typed(*v)))
                .with_hint("give wavenumbers in Mpc^-1, each above 0"),
        ));
    }
    if let Some(i) = (1..k.len()).find(|&i| k[i] <= k[i - 1]) {
        return Err(Diagnostic::new(format!(
            "the k grid is not ascending: k[{i}] = {} follows {}",
            numfmt::typed(k[i]),
            numfmt::typed(k[i - 1])
        ))
        .with_hint("sort the grid and drop repeated values")
        .into());
    }
    Ok(())
}

/// The rows of `efold scan --format json` over `vary` (each axis as `--vary` writes it,
/// `NAME=LO:HI:COUNT[:log]`, at most two), every point of the grid, in parallel: one row per
/// point and N_*, a failed point keeping its rows with the error.
pub fn scan(
    model: &Model,
    vary: &[String],
    efolds: Option<&[f64]>,
    data: &DataSet,
    config: &Config,
) -> Result<Vec<JsonRow>, ApiError> {
    if vary.is_empty() || vary.len() > 2 {
        return Err(
            Diagnostic::new(format!("{} parameters varied; a scan varies one or two", vary.len()))
                .with_hint("give vary one or two names")
                .into(),
        );
    }
    let n_stars = n_stars(efolds, model, config)?;
    let limit = config.limits.max_axis_points;
    let default_count = 30;
    let axes: Vec<Axis> = if model.n_fields() > 1 {
        vary.iter()
            .map(|v| scan_multi::parse_axis(v, model, default_count, limit))
            .collect::<Result<_, _>>()
            .map_err(|e| ApiError::new(Stage::Input, e.render()))?
    } else {
        vary.iter()
            .map(|v| Axis::parse(v, &model.spec, default_count, limit))
            .collect::<Result<_, _>>()
            .map_err(|e| ApiError::from(e.diagnostic()))?
    };
    let max = config.limits.max_scan_points;
    if total_points(&axes).is_none_or(|n| n > max) {
        return Err(Diagnostic::new(format!(
            "the grid has more than {max} points (config::Limits::max_scan_points)"
        ))
        .with_hint("use fewer values per parameter")
        .into());
    }
    if model.n_fields() > 1 {
        let job = MultiScanJob {
            model,
            axes: &axes,
            n_stars: &n_stars,
            shard: None,
            config,
            progress: false,
        };
        let header = job.header();
        let predict_cols: Vec<String> = header[1 + axes.len()..header.len() - 1].to_vec();
        let rows = scan_multi::run(&job);
        return Ok(rows
            .iter()
            .map(|r| crate::report::scan_multi::json_row(r, &predict_cols))
            .collect());
    }
    let job = ScanJob {
        spec: &model.spec,
        axes: &axes,
        n_stars: &n_stars,
        data,
        shard: None,
        config,
        progress: false,
    };
    let mut rows = Vec::new();
    let done: Result<(), std::convert::Infallible> = crate::drivers::scan::run_chunks(&job, &mut |chunk| {
        rows.extend(chunk.iter().map(crate::report::scan::json_row));
        Ok(())
    });
    let Ok(()) = done;
    Ok(rows)
}

/// One column of a table: numbers (a missing or null cell is NaN, and the row's `error` cell
/// says why), or text (`None` where the cell is null; a column with no number in it, such as
/// `error` when no point failed, is text).
#[derive(Debug, Clone, PartialEq)]
pub enum Column {
    /// Every cell is an integer (the `point` index).
    Integers(Vec<i64>),
    /// Every present cell is a number.
    Numbers(Vec<f64>),
    /// At least one cell is text (or a boolean): each cell as its text.
    Texts(Vec<Option<String>>),
}

/// The rows of a table (flat JSON objects, as [`scan`] returns them or a spectrum's `rows`)
/// as columns, keys in the order of the row with the most keys.
pub fn columns<'a>(rows: impl IntoIterator<Item = &'a [(String, Value)]> + Clone) -> Vec<(String, Column)> {
    // The keys of the fullest row (a failed point's rows lack the prediction's), then any other.
    let fullest = rows.clone().into_iter().max_by_key(|r| r.len()).unwrap_or(&[]);
    let mut keys: Vec<String> = fullest.iter().map(|(k, _)| k.clone()).collect();
    for row in rows.clone() {
        for (k, _) in row {
            if !keys.contains(k) {
                keys.push(k.clone());
            }
        }
    }
    keys.into_iter()
        .map(|key| {
            let cells: Vec<Option<&Value>> = rows
                .clone()
                .into_iter()
                .map(|row| row.iter().find(|(k, _)| *k == key).map(|(_, v)| v))
                .collect();
            let numeric = cells
                .iter()
                .all(|c| matches!(c, None | Some(Value::Null | Value::Number(_))))
                && cells.iter().any(|c| matches!(c, Some(Value::Number(_))));
            let integers = cells.iter().all(|c| c.is_some_and(Value::is_i64));
            let column = if integers {
                Column::Integers(
                    cells
                        .iter()
                        .map(|c| c.and_then(Value::as_i64).unwrap_or_default())
                        .collect(),
                )
            } else if numeric {
                Column::Numbers(
                    cells
                        .iter()
                        .map(|c| c.and_then(Value::as_f64).unwrap_or(f64::NAN))
                        .collect(),
                )
            } else {
                Column::Texts(
                    cells
                        .iter()
                        .map(|c| match c {
                            None | Some(Value::Null) => None,
                            Some(Value::String(s)) => Some(s.clone()),
                            Some(v) => Some(v.to_string()),
                        })
                        .collect(),
                )
            };
            (key, column)
        })
        .collect()
}

/// What `efold eval` computed: the point, the parameters, the value and its derivatives.
#[derive(Debug, Clone, PartialEq)]
pub struct Evaluated {
    /// The expression as given.
    pub expression: String,
    /// The field's name.
    pub field: String,
    /// The point.
    pub x: f64,
    /// The parameters' names and values.
    pub params: Vec<(String, f64)>,
    /// The value, then derivatives 1..=order.
    pub derivatives: Vec<f64>,
    /// Warnings (derivatives of `abs`).
    pub warnings: Vec<String>,
}

impl Evaluated {
    /// `efold eval --format json`.
    pub fn json(&self) -> Value {
        let params: serde_json::Map<String, Value> = self
            .params
            .iter()
            .map(|(n, v)| (n.clone(), serde_json::json!(v)))
            .collect();
        serde_json::json!({
            "expression": self.expression,
            "field": self.field,
            "at": self.x,
            "params": params,
            "value": self.derivatives[0],
            "derivatives": &self.derivatives[1..],
            "warnings": self.warnings,
        })
    }
}

/// An expression of `field` and the parameters `params` (values already numbers), with its
/// derivatives in the field to `order`, at `field = x`; a value or derivative that is not finite
/// is an error naming the first subexpression at fault.
pub fn eval(
    expression: &str,
    field: &str,
    x: f64,
    params: &[(String, f64)],
    order: usize,
    config: &Config,
) -> Result<Evaluated, ApiError> {
    if order > MAX_ORDER {
        return Err(ApiError::option(
            "order",
            &order.to_string(),
            Diagnostic::new(format!("order {order} is above the highest supported, {MAX_ORDER}"))
                .with_hint(format!("use order 0 to {MAX_ORDER}")),
        ));
    }
    if !x.is_finite() {
        return Err(ApiError::option(
            "at",
            &numfmt::typed(x),
            Diagnostic::new("the point must be a finite number"),
        ));
    }
    if params.iter().any(|(n, _)| n == field) {
        return Err(Diagnostic::new(format!("`{field}` is both the field and a parameter"))
            .with_hint("rename the parameter")
            .into());
    }
    let names: Vec<&str> = params.iter().map(|(n, _)| n.as_str()).collect();
    let values: Vec<f64> = params.iter().map(|(_, v)| *v).collect();
    let scope = Scope::new(field, &names);
    let c = compile(&[("expression", expression)], &scope, &config.limits)?;
    let derivatives = c.tape.evaluator(&values).derivatives(x, order);
    let mut warnings = Vec::new();
    if c.tape.has_abs() && order > 0 {
        warnings.push(
            "`abs` is not differentiable where its argument is zero; derivatives there are undefined".to_string(),
        );
    }
    if let Some((k, v)) = derivatives.iter().enumerate().find(|(_, v)| !v.is_finite()) {
        let what = if k == 0 {
            "the value".to_string()
        } else {
            format!("derivative {k}")
        };
        let mut d = Diagnostic::new(format!(
            "{what} of the expression is {} at {field} = {}",
            numfmt::number(*v),
            numfmt::typed(x)
        ));
        if let Some((id, bad)) = c.graph.first_non_finite(c.roots[0], x, &values) {
            d = d.with_hint(format!("`{}` is {bad} there", c.graph.print(id)));
        } else if c.tape.has_abs() {
            d = d.with_hint("`abs` has no derivative where its argument is zero");
        }
        let d = d.with_hint("check the domain of log, sqrt, asin, acos, acosh, atanh, powers, and divisions by zero");
        return Err(ApiError::new(Stage::Analysis, d.render(None)));
    }
    Ok(Evaluated {
        expression: expression.to_string(),
        field: field.to_string(),
        x,
        params: params.to_vec(),
        derivatives,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn row(cells: &[(&str, Value)]) -> Vec<(String, Value)> {
        cells.iter().map(|(k, v)| (k.to_string(), v.clone())).collect()
    }

    #[test]
    fn columns_take_the_fullest_row_s_keys_and_type_each_column() {
        let failed = row(&[("point", json!(0)), ("n_star", json!(50.0)), ("error", json!("no end"))]);
        let full = row(&[
            ("point", json!(1)),
            ("n_star", json!(50.0)),
            ("n_s", json!(0.96)),
            ("verdict", json!("consistent")),
            ("error", Value::Null),
        ]);
        let rows = [failed, full];
        let cols = columns(rows.iter().map(Vec::as_slice));
        let keys: Vec<&str> = cols.iter().map(|(k, _)| k.as_str()).collect();
        assert_eq!(keys, ["point", "n_star", "n_s", "verdict", "error"]);
        assert_eq!(cols[0].1, Column::Integers(vec![0, 1]));
        assert_eq!(cols[1].1, Column::Numbers(vec![50.0, 50.0]));
        let Column::Numbers(n_s) = &cols[2].1 else {
            panic!("n_s is numeric")
        };
        assert!(n_s[0].is_nan() && n_s[1] == 0.96);
        assert_eq!(cols[3].1, Column::Texts(vec![None, Some("consistent".into())]));
        assert_eq!(cols[4].1, Column::Texts(vec![Some("no end".into()), None]));
    }

    #[test]
    fn an_unknown_method_is_drawn_with_a_caret_under_it() {
        let e = Route::from_name("fast").unwrap_err();
        assert_eq!(e.stage, Stage::Input);
        let lines: Vec<&str> = e.message.lines().collect();
        assert_eq!(lines[0], "error: unknown method `fast`");
        assert!(lines[2].ends_with("method = fast"), "{}", e.message);
        assert_eq!(lines[3].find('^'), lines[2].find("fast"));
    }

    #[test]
    fn a_field_named_as_a_built_in_or_not_a_name_is_refused() {
        for (field, message) in [("pi", "`pi` is a built-in name"), ("2x", "`2x` is not a valid name")] {
            let parts = ModelParts {
                potential: "1".into(),
                field: Some(field.into()),
                ..ModelParts::default()
            };
            let e = build_model(&parts, &Config::default()).unwrap_err();
            assert_eq!(e.stage, Stage::Input);
            assert!(e.message.contains(message), "{}", e.message);
            assert!(e.message.contains(&format!("field = {field}")), "{}", e.message);
        }
    }

    #[test]
    fn errors_of_a_model_from_strings_are_sorted_by_stage() {
        let build = |parts: ModelParts| Model::build(&ModelSpec::from_parts(&parts), &Config::default());
        let e = ApiError::from(
            build(ModelParts {
                potential: "phi^2 +".into(),
                ..ModelParts::default()
            })
            .unwrap_err(),
        );
        assert_eq!(e.stage, Stage::Expression);
        assert!(e.message.contains("--> potential:1:"), "{}", e.message);
        let e = ApiError::from(
            build(ModelParts {
                potential: "phi^2".into(),
                fields: vec!["x".into(), "y".into()],
                ..ModelParts::default()
            })
            .unwrap_err(),
        );
        assert_eq!(e.stage, Stage::Model, "{}", e.message);
    }
}
