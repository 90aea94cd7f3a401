//! `predict`: n_s, r and the rest at each N_*.

use crate::cli::*;
use crate::config::Config;
use crate::diag::Diagnostic;

pub(crate) fn predict_cmd(a: &PredictArgs, config: &Config) -> Result<String, Failure> {
    check_efolds_count(&a.efolds, config)?;
    check_predict_flags(a)?;
    let model = load_model(&a.model, "efold predict models/pole-order-2-quadratic.toml", config)?;
    if let (Some(phi), Some(v)) = (a.start_phi, a.start_velocity) {
        check_start_velocity(&model, phi, v)?;
    }
    let data = match &a.data {
        Some(p) => crate::data::DataSet::load(p).map_err(Failure::from)?,
        None => crate::data::DataSet::builtin(),
    };
    let n_stars = if !a.efolds.is_empty() {
        a.efolds.clone()
    } else {
        model.spec.efolds.clone().unwrap_or_else(|| vec![50.0, 55.0, 60.0])
    };
    check_efolds_count(&n_stars, config)?;
    if a.efolds.is_empty() {
        check_efolds_values("the model's `efolds` setting", &n_stars)?;
    }
    let exact = (a.method == Method::Exact).then(|| crate::analysis::background::Settings {
        start: a.start_phi.map(|p| (p, a.start_velocity)),
        ..Default::default()
    });
    if let Some(settings) = &exact {
        let min = min_exact_efolds(settings);
        if let Some(n) = n_stars.iter().find(|n| **n < min).filter(|_| opts_fix_n_star(a)) {
            return Err(Diagnostic::new(format!(
                "N_* = {n} is too few for --method exact: it needs N_* of at least {:.2}",
                (min * 100.0).ceil() / 100.0
            ))
            .with_hint(format!(
                "the modes around the pivot must leave the horizon and freeze (k/aH = {:e}) before the end: give --efolds {:.0} or more, or use slow roll",
                settings.k_stop,
                min.ceil()
            ))
            .into());
        }
    }
    let opts = crate::drivers::predict::Options {
        n_stars,
        branch: a.branch,
        second_order: a.second_order,
        reheating: reheating_from(a)?,
        data,
        exact,
    };
    // One analysis for the prediction and the figure.
    let prep = crate::drivers::prepared::Prepared::new(&model);
    let mut rep = prep.predict(&opts, config)?;
    if a.method == Method::SlowRoll {
        let limit = crate::config::SLOW_ROLL_WARN_EFOLDS;
        if let Some(p) = rep.predictions.iter().find(|p| p.n_star < limit) {
            rep.warnings.push(format!(
                "N_* = {} is below {limit}: slow roll is unreliable so close to the end of inflation (try --method exact)",
                p.n_star
            ));
        }
    }
    if a.svg.is_some() || a.pdf.is_some() {
        let ins = prep.inspect(config, None)?;
        let mut marks = crate::drivers::inspect::FigureMarks::default();
        if let Some(p) = rep.predictions.first() {
            marks.points.push((p.phi_end, "end".to_string()));
        }
        for p in &rep.predictions {
            marks
                .points
                .push((p.phi_star, format!("$N$ = {}", crate::report::numfmt::typed(p.n_star))));
        }
        let svg = crate::drivers::inspect::figure(&model, &ins, &marks, config, a.figure_width)?;
        write_figure(&a.svg, &a.pdf, &svg)?;
    }
    Ok(match a.format {
        TableFormat::Json => format!("{}\n", serde_json::to_string_pretty(&rep).expect("serialisable report")),
        TableFormat::Csv => crate::drivers::predict::csv(&rep),
        TableFormat::Text => crate::drivers::predict::text(&rep),
    })
}
