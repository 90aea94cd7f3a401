//! `spectrum`: the exact power spectra on a grid of k.

use crate::analysis::background::Settings;
use crate::cli::args::{SpectrumArgs, SpectrumFormat};
use crate::cli::check::{check_count, check_efolds_values, check_start, check_start_velocity};
use crate::cli::files::write_figure;
use crate::cli::load::{load_data, load_model};
use crate::cli::Failure;
use crate::config::Config;
use crate::diag::Diagnostic;
use crate::drivers::inspect::ModelSummary;
use crate::drivers::prepared::Prepared;
use crate::drivers::spectrum::{spectrum, start_background};
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
    let model = load_model(&a.model, "efold spectrum models/pole-order-2-quadratic.toml", config)?;
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
