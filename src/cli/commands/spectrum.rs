//! `spectrum`: the exact power spectra on a grid of k.

use crate::analysis::background::Settings;
use crate::analysis::multi::space::ModelFieldSpace;
use crate::cli::args::{SpectrumArgs, SpectrumFormat};
use crate::cli::check::{check_count, check_efolds_values, check_start, check_start_velocity};
use crate::cli::files::write_figure;
use crate::cli::load::{load_data, load_model_any};
use crate::cli::Failure;
use crate::config::Config;
use crate::diag::Diagnostic;
use crate::drivers::inspect::ModelSummary;
use crate::drivers::prepared::Prepared;
use crate::drivers::spectrum::{spectrum, start_background};
use crate::drivers::spectrum_multi::{spectrum_multi, MultiSpectrumRequest};
use crate::model::Model;
use crate::report::numfmt;
use crate::report::spectrum::{csv, figure, text};

/// `efold spectrum`: the exact spectra on a grid of k evenly spaced in ln k.
pub(crate) fn spectrum_cmd(a: &SpectrumArgs, config: &Config) -> Result<String, Failure> {
    check_count(
        "--points",
        a.points,
        config.limits.max_spectrum_points,
        "max_spectrum_points",
    )?;
    check_efolds_values("--efolds", &[a.efolds])?;
    check_start(a.start_phi, a.start_velocity)?;
    let model = load_model_any(&a.model, "efold spectrum models/pole-order-2-quadratic.toml", config)?;
    if model.n_fields() > 1 {
        return spectrum_several_fields(a, &model, config);
    }
    if let (Some(phi), Some(v)) = (a.start_phi, a.start_velocity) {
        check_start_velocity(&model, phi, v)?;
    }
    let data = load_data(&a.data, config)?;
    let settings = Settings {
        start: a.start_phi.map(|p| (p, a.start_velocity)),
        ..Default::default()
    };
    check_count(
        "--points",
        a.points,
        config.limits.max_spectrum_points,
        "max_spectrum_points",
    )?;
    let k_star = data.pivot.k_mpc;
    // The largest k must still freeze before the end: N_* - ln(k/k_*) > ln(1/k_stop) + 1.
    let k_limit = k_star * (a.efolds - (1.0 / settings.k_stop).ln() - 1.5).exp();
    let k_max = a.k_max.unwrap_or_else(|| k_limit.min(1e14));
    if !(a.k_min > 0.0 && k_max > a.k_min && a.points >= 2 && a.efolds > 0.0) {
        return Err(Diagnostic::new("the k range is empty or the point count below 2")
            .with_hint("give 0 < --k-min < --k-max and --points 2 or more")
            .into());
    }
    if k_max > k_limit {
        return Err(Diagnostic::new(format!(
            "--k-max {} Mpc^-1 exits too close to the end of inflation to freeze (at most {} for N_* = {})",
            numfmt::typed(k_max),
            numfmt::number(k_limit),
            numfmt::typed(a.efolds)
        ))
        .with_hint("lower --k-max, or raise --efolds")
        .into());
    }
    let needed = a.efolds + (k_star / a.k_min).ln().max(0.0) + settings.k_start.ln() + 4.0;
    let prep = Prepared::new(&model);
    let run = start_background(&prep, needed, &settings, a.branch, &data, config)?;
    let n = a.points;
    let ks: Vec<f64> = (0..n)
        .map(|i| (a.k_min.ln() + (k_max.ln() - a.k_min.ln()) * i as f64 / (n - 1) as f64).exp())
        .collect();
    let sp = spectrum(&model, &run, a.efolds, &ks, data.a_s(), k_star, &settings)?;
    if a.figure.wanted() {
        write_figure(&a.figure, &figure(&sp, &model.spec.name, a.figure.figure_width))?;
    }
    Ok(match a.format {
        SpectrumFormat::Json => {
            let obj = serde_json::json!({
                "model": ModelSummary::of(&model),
                "spectrum": sp,
            });
            format!("{}\n", serde_json::to_string_pretty(&obj).expect("serialisable"))
        }
        SpectrumFormat::Csv => csv(&sp),
        SpectrumFormat::Text => text(&sp, &model.spec.name),
    })
}

/// The grid of `points` k evenly spaced in ln k from `k_min` to `k_max`, its ends exactly
/// the values given.
fn k_grid(k_min: f64, k_max: f64, points: usize) -> Vec<f64> {
    (0..points)
        .map(|i| match i {
            0 => k_min,
            i if i == points - 1 => k_max,
            i => (k_min.ln() + (k_max.ln() - k_min.ln()) * i as f64 / (points - 1) as f64).exp(),
        })
        .collect()
}

/// `efold spectrum` on a model of several fields: the exact background from the model's start
/// and one Mukhanov–Sasaki mode matrix per k. The one-field options (a start given by flag, a
/// branch, figures) do not apply and are refused.
fn spectrum_several_fields(a: &SpectrumArgs, model: &Model, config: &Config) -> Result<String, Failure> {
    let refused = [
        (
            a.start_phi.is_some() || a.start_velocity.is_some(),
            "--start-phi / --start-velocity",
        ),
        (a.branch.is_some(), "--branch"),
        (a.figure.wanted(), "--svg / --pdf"),
    ];
    if let Some((_, flag)) = refused.iter().find(|(given, _)| *given) {
        return Err(Diagnostic::new(format!(
            "{flag} is an option of one-field models; the model `{}` has {} fields",
            model.spec.name,
            model.n_fields()
        ))
        .with_hint("a model of several fields starts where its [start] table says; its spectrum is written as text, CSV or JSON")
        .into());
    }
    let data = load_data(&a.data, config)?;
    let k_star = data.pivot.k_mpc;
    // Without --k-max: the k that crosses the horizon the freeze margin before the end, were
    // aH to grow by one e-fold per e-fold (it grows less, so the driver checks each k).
    let freeze = crate::config::MULTI_SPECTRUM_FREEZE_EFOLDS;
    let k_max = a
        .k_max
        .unwrap_or_else(|| (k_star * (a.efolds - freeze - 2.0).exp()).min(1e14));
    if !(a.k_min > 0.0 && k_max > a.k_min && a.points >= 2) {
        return Err(Diagnostic::new("the k range is empty or the point count below 2")
            .with_hint("give 0 < --k-min < --k-max and --points 2 or more")
            .into());
    }
    let ks = k_grid(a.k_min, k_max, a.points);
    let mut space = ModelFieldSpace::new(model).expect("a model of several fields has a field space");
    let (start, velocity) = space.start()?;
    let req = MultiSpectrumRequest {
        start: &start,
        velocity: &velocity,
        n_star: a.efolds,
        k_mpc: &ks,
        a_s: data.a_s(),
        k_star_mpc: k_star,
    };
    let sp = spectrum_multi(&mut space, &req, &Default::default())?;
    let name = &model.spec.name;
    Ok(match a.format {
        SpectrumFormat::Json => crate::report::spectrum_multi::json(&sp, name),
        SpectrumFormat::Csv => crate::report::spectrum_multi::csv(&sp),
        SpectrumFormat::Text => crate::report::spectrum_multi::text(&sp, name),
    })
}
