//! `predict`: n_s, r and the rest at each N_*.

use crate::analysis::background::Settings;
use crate::analysis::multi::at_pivot::{pivot_extras, PivotExtras};
use crate::analysis::multi::delta_n_route::predict_delta_n;
use crate::analysis::multi::predict::{predict as multi_predict, MultiSettings};
use crate::analysis::multi::space::ModelFieldSpace;
use crate::cli::args::{Method, PredictArgs, TableFormat};
use crate::cli::check::{
    check_efolds_count, check_predict_flags, check_start_velocity, min_exact_efolds, opts_fix_n_star, reheating_from,
};
use crate::cli::files::write_figure;
use crate::cli::load::{checked_n_stars, load_data, load_model_any};
use crate::cli::Failure;
use crate::config::Config;
use crate::diag::Diagnostic;
use crate::drivers::inspect::{figure, FigureMarks};
use crate::drivers::predict::{csv, text, Options, Report};
use crate::drivers::prepared::Prepared;
use crate::model::Model;
use crate::report::{multi, numfmt};

/// `efold predict`: the observables at each N_*, with the figure of V if asked for.
pub(crate) fn predict_cmd(a: &PredictArgs, config: &Config) -> Result<String, Failure> {
    check_efolds_count(&a.efolds.efolds, config)?;
    check_predict_flags(a)?;
    let model = load_model_any(&a.model, "efold predict models/pole-order-2-quadratic.toml", config)?;
    if model.n_fields() > 1 {
        return predict_several_fields(a, &model, config);
    }
    if a.method == Method::DeltaN {
        return Err(Diagnostic::new(format!(
            "--method delta-n is for models of several fields; the model `{}` has one field",
            model.spec.name
        ))
        .with_hint("for one field, delta-N is the slow-roll computation: use `--method slow-roll` (or `--method exact` for the exact spectrum)")
        .into());
    }
    if let (Some(phi), Some(v)) = (a.start_phi, a.start_velocity) {
        check_start_velocity(&model, phi, v)?;
    }
    let data = load_data(&a.data, config)?;
    let n_stars = checked_n_stars(&a.efolds.efolds, &model.spec, config)?;
    let exact = (a.method == Method::Exact).then(|| Settings {
        start: a.start_phi.map(|p| (p, a.start_velocity)),
        ..Default::default()
    });
    if let Some(settings) = &exact {
        check_exact_efolds(a, settings, &n_stars)?;
    }
    let opts = Options {
        n_stars,
        branch: a.branch,
        second_order: a.second_order,
        reheating: reheating_from(a)?,
        data,
        exact,
    };
    // One analysis for the prediction and the figure.
    let prep = Prepared::new(&model);
    let mut rep = prep.predict(&opts, config)?;
    if a.method == Method::SlowRoll {
        crate::api::warn_slow_roll(&mut rep);
    }
    if a.figure.wanted() {
        write_potential_figure(a, &prep, &rep, config)?;
    }
    Ok(match a.format {
        TableFormat::Json => format!("{}\n", serde_json::to_string_pretty(&rep).expect("serialisable report")),
        TableFormat::Csv => csv(&rep),
        TableFormat::Text => text(&rep),
    })
}

/// The exact route needs room after the pivot: an N_* from `--efolds` or the model below
/// [`min_exact_efolds`] is refused (one from reheating is checked by the matching itself).
fn check_exact_efolds(a: &PredictArgs, settings: &Settings, n_stars: &[f64]) -> Result<(), Failure> {
    let min = min_exact_efolds(settings);
    let Some(n) = n_stars.iter().find(|n| **n < min).filter(|_| opts_fix_n_star(a)) else {
        return Ok(());
    };
    Err(Diagnostic::new(format!(
        "N_* = {n} is too few for --method exact: it needs N_* of at least {:.2}",
        (min * 100.0).ceil() / 100.0
    ))
    .with_hint(format!(
        "the modes around the pivot must leave the horizon and freeze (k/aH = {:e}) before the end: give --efolds {:.0} or more, or use slow roll",
        settings.k_stop,
        min.ceil()
    ))
    .into())
}

/// The figure of V with the end of inflation and the pivot at each N_* marked.
fn write_potential_figure(a: &PredictArgs, prep: &Prepared<'_>, rep: &Report, config: &Config) -> Result<(), Failure> {
    let ins = prep.inspect(config, None)?;
    let mut marks = FigureMarks::default();
    if let Some(p) = rep.predictions.first() {
        marks.points.push((p.phi_end, "end".to_string()));
    }
    for p in &rep.predictions {
        marks
            .points
            .push((p.phi_star, format!("$N$ = {}", numfmt::typed(p.n_star))));
    }
    let svg = figure(prep.model(), &ins, &marks, config, a.figure.figure_width)?;
    write_figure(&a.figure, &svg)
}

/// `efold predict` on a model of several fields: the exact background from the model's start,
/// the Mukhanov–Sasaki mode matrix at each N_* and the slow-roll delta-N beside it. The
/// one-field options (branches, second order, reheating, a start given by flag, figures) do not
/// apply and are refused.
fn predict_several_fields(a: &PredictArgs, model: &Model, config: &Config) -> Result<String, Failure> {
    let refused = [
        (a.branch.is_some(), "--branch"),
        (a.second_order, "--second-order"),
        (
            a.start_phi.is_some() || a.start_velocity.is_some(),
            "--start-phi / --start-velocity",
        ),
        (reheating_from(a)?.is_some(), "--reheat"),
        (a.figure.wanted(), "--svg / --pdf"),
    ];
    if let Some((_, flag)) = refused.iter().find(|(given, _)| *given) {
        return Err(Diagnostic::new(format!(
            "{flag} is an option of one-field models; the model `{}` has {} fields",
            model.spec.name,
            model.n_fields()
        ))
        .with_hint("a model of several fields starts where its [start] table says, and is predicted on the exact route with delta-N beside it (or by delta-N alone with --method delta-n)")
        .into());
    }
    let data = load_data(&a.data, config)?;
    let n_stars = checked_n_stars(&a.efolds.efolds, &model.spec, config)?;
    let mut space = ModelFieldSpace::new(model).expect("a model of several fields has a field space");
    let (start, velocity) = space.start()?;
    if a.method == Method::DeltaN {
        // delta-N alone: the limit on delta-N beside the exact route does not apply.
        let rep = predict_delta_n(&mut space, &start, Some(&velocity), &n_stars, &MultiSettings::default())?;
        let extras: Vec<PivotExtras> = rep
            .predictions
            .iter()
            .map(|p| pivot_extras(model, &p.fields_star, &p.velocity_star, config))
            .collect::<Result<_, _>>()?;
        return Ok(match a.format {
            TableFormat::Json => multi::json_delta_n(&model.spec.name, &rep, &extras, data.a_s()),
            TableFormat::Csv => multi::csv_delta_n(&rep),
            TableFormat::Text => multi::text_delta_n(&model.spec.name, &rep, &extras),
        });
    }
    let mut settings = MultiSettings::default();
    settings.delta_n = model.n_fields() <= settings.limits.delta_n_max_fields;
    let rep = multi_predict(&mut space, &start, Some(&velocity), &n_stars, &settings)?;
    let extras: Vec<PivotExtras> = rep
        .predictions
        .iter()
        .map(|p| pivot_extras(model, &p.fields_star, &p.velocity_star, config))
        .collect::<Result<_, _>>()?;
    Ok(match a.format {
        TableFormat::Json => multi::json_with(&model.spec.name, &rep, &extras, data.a_s()),
        TableFormat::Csv => multi::csv(&rep),
        TableFormat::Text => multi::text_with(&model.spec.name, &rep, &extras),
    })
}
