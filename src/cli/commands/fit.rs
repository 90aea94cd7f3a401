//! `fit`: parameters that reach target observables.

use crate::cli::args::{FitArgs, Format};
use crate::cli::check::check_efolds_values;
use crate::cli::load::{check_varied_used, load_data, load_model_any};
use crate::cli::Failure;
use crate::config::Config;
use crate::diag::Diagnostic;
use crate::drivers::fit::{fit, text, Target};
use crate::drivers::fit_multi;

/// `efold fit`: solves for the free parameters, from their values in the model; for a model of
/// several fields, on the exact multi-field route, parameters and start coordinates
/// (`start.FIELD`) alike.
pub(crate) fn fit_cmd(a: &FitArgs, config: &Config) -> Result<String, Failure> {
    check_efolds_values("--efolds", &[a.efolds])?;
    let model = load_model_any(
        &a.model,
        "efold fit models/pole-order-2-quadratic.toml --free alpha --target r=0.01",
        config,
    )?;
    check_varied_used("--free", &a.free, &model.spec, config)?;
    let data = load_data(&a.data, config)?;
    let targets = a
        .targets
        .iter()
        .map(|t| Target::parse(t))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| Failure::from(Diagnostic::new(e.to_string())))?;
    if model.n_fields() > 1 {
        let f = fit_multi::fit(&model, &a.free, &targets, a.efolds, config, &Default::default())?;
        return Ok(match a.format {
            Format::Json => format!("{}\n", serde_json::to_string_pretty(&f).expect("serialisable")),
            Format::Text => crate::report::fit_multi::text(&f),
        });
    }
    let f = fit(
        &model.spec,
        &a.free,
        &targets,
        a.efolds,
        &data,
        config,
        &Default::default(),
    )?;
    Ok(match a.format {
        Format::Json => format!("{}\n", serde_json::to_string_pretty(&f).expect("serialisable")),
        Format::Text => text(&f),
    })
}
