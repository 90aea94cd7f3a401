//! The spectrum: P_zeta(k) and P_t(k) of the exact Mukhanov–Sasaki modes on a log grid of k,
//! with the potential scaled to the observed amplitude at the pivot.

use crate::analysis::background::{state_at, Background, Run, Settings};
use crate::analysis::error::AnalysisError;
use crate::analysis::error::ErrorKind;
use crate::analysis::perturbations::{mode, pivot};
use crate::config::Config;
use crate::data::DataSet;
use crate::drivers::predict::Options;
use crate::drivers::prepared::Prepared;
use crate::model::Model;
#[cfg(test)]
use crate::report::spectrum::text;
use serde::Serialize;
use std::f64::consts::PI;

/// One row of a spectrum.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SpectrumRow {
    /// k in Mpc^-1.
    pub k_mpc: f64,
    /// P_zeta (= P_R), with the potential scaled to the observed A_s at the pivot.
    pub p_zeta: f64,
    /// P_t, scaled alike.
    pub p_t: f64,
    /// The first-order slow-roll estimate V/(24 pi^2 eps_V) where the mode crosses (k = aH).
    pub p_zeta_slow_roll: f64,
    /// e-folds between the mode's crossing and the end of inflation.
    pub n_before_end: f64,
    /// Relative change of P over the mode's last e-fold (freeze check).
    pub drift: f64,
}

/// A spectrum on a log grid of k, with the pivot `n_star` e-folds before the exact end.
#[derive(Debug, Clone, Serialize)]
pub struct Spectrum {
    /// The pivot's e-folds before the end.
    pub n_star: f64,
    /// k_* in Mpc^-1 (from the data file).
    pub k_star_mpc: f64,
    /// The factor on the user's V that gives the observed A_s at the pivot.
    pub potential_scale: f64,
    /// Total e-folds of the exact background.
    pub n_total: f64,
    /// The rows, ascending in k.
    pub rows: Vec<SpectrumRow>,
    /// The row with the largest P_zeta.
    pub peak: SpectrumRow,
    /// The row with the largest slow-roll estimate (where slow roll puts the peak).
    pub peak_slow_roll: SpectrumRow,
}

/// Starts the exact background for a spectrum with at least `n_needed` e-folds before its end
/// ([`crate::analysis::background::start_with_room_in`]): on the slow-roll attractor where the
/// slow-roll prediction on `branch` (the default choice when `None`) puts the field that many
/// e-folds before the end, or at the start given in `settings`, checked against the domain.
/// Every prediction it asks for reuses the prepared domain and branches.
pub fn start_background(
    prep: &Prepared<'_>,
    n_needed: f64,
    settings: &Settings,
    branch: Option<usize>,
    data: &DataSet,
    config: &Config,
) -> Result<Run, AnalysisError> {
    let mut opts = Options {
        n_stars: Vec::new(),
        branch,
        data: data.clone(),
        ..Default::default()
    };
    let mut phi_at = |n: f64| -> Result<f64, AnalysisError> {
        opts.n_stars = vec![n];
        Ok(prep.predict(&opts, config)?.predictions[0].phi_star)
    };
    let domain = || prep.interval();
    let (_, run) =
        crate::analysis::background::start_with_room_in(prep.model(), &domain, n_needed, settings, &mut phi_at)?;
    Ok(run)
}

/// Computes P_zeta(k) and P_t(k) for `k_mpc` (Mpc^-1), modes in parallel.
pub fn spectrum(
    model: &Model,
    run: &Run,
    n_star: f64,
    k_mpc: &[f64],
    a_s: f64,
    k_star_mpc: f64,
    settings: &Settings,
) -> Result<Spectrum, AnalysisError> {
    use rayon::prelude::*;
    let bg = Background::new(model);
    let n_end = run
        .n_end
        .ok_or_else(|| AnalysisError::from(ErrorKind::ExactNeverEnds))?;
    let piv = pivot(&bg, run, n_star, settings)?;
    let pivot_mode = mode(&bg, run, piv, 1.0, settings)?;
    let scale = a_s / pivot_mode.p_s;
    let rows: Vec<SpectrumRow> = k_mpc
        .par_iter()
        .map(|&k| {
            let bg = Background::new(model);
            let m = mode(&bg, run, piv, k / k_star_mpc, settings)?;
            let y = state_at(&bg, run, m.n_cross, settings)?;
            let mut ev = model.evaluator();
            let sr = crate::analysis::slowroll::SlowRoll::at(&mut ev, y[0]);
            Ok(SpectrumRow {
                k_mpc: k,
                p_zeta: scale * m.p_s,
                p_t: scale * m.p_t,
                p_zeta_slow_roll: scale * sr.v / (24.0 * PI * PI * sr.eps_v),
                n_before_end: n_end - m.n_cross,
                drift: m.drift,
            })
        })
        .collect::<Result<_, AnalysisError>>()?;
    check_rows(&rows, scale)?;
    let peak = *rows
        .iter()
        .max_by(|a, b| a.p_zeta.total_cmp(&b.p_zeta))
        .ok_or_else(|| AnalysisError::from(ErrorKind::NoWavenumbers))?;
    let peak_slow_roll = *rows
        .iter()
        .max_by(|a, b| a.p_zeta_slow_roll.total_cmp(&b.p_zeta_slow_roll))
        .expect("rows are not empty");
    Ok(Spectrum {
        n_star,
        k_star_mpc,
        potential_scale: scale,
        n_total: n_end,
        rows,
        peak,
        peak_slow_roll,
    })
}

/// The spectrum as an aligned table, with the peak (or a warning that the largest value is at
/// an end of the grid).
/// The last check on a spectrum: every number of every row, and the scale, must be finite (a
/// NaN or an overflow is an error naming the quantity and the mode, never a `null`).
fn check_rows(rows: &[SpectrumRow], scale: f64) -> Result<(), AnalysisError> {
    if !scale.is_finite() {
        return Err(ErrorKind::ScaleNotFinite { scale }.into());
    }
    for r in rows {
        let numbers = [
            ("p_zeta", r.p_zeta),
            ("p_t", r.p_t),
            ("p_zeta_slow_roll", r.p_zeta_slow_roll),
            ("n_before_end", r.n_before_end),
            ("drift", r.drift),
        ];
        if let Some((key, x)) = numbers.into_iter().find(|(_, x)| !x.is_finite()) {
            return Err(ErrorKind::SpectrumNotFinite {
                key,
                value: x,
                k_mpc: r.k_mpc,
                n_before_end: r.n_before_end,
            }
            .into());
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A made-up spectrum on a grid k = 1, 10, 100 whose P_zeta values are given.
    fn spectrum_with(p_zeta: [f64; 3], p_slow: [f64; 3]) -> Spectrum {
        let rows: Vec<SpectrumRow> = (0..3)
            .map(|i| SpectrumRow {
                k_mpc: 10f64.powi(i as i32),
                p_zeta: p_zeta[i],
                p_t: 1e-11,
                p_zeta_slow_roll: p_slow[i],
                n_before_end: 50.0 - 2.0 * i as f64,
                drift: 1e-9,
            })
            .collect();
        let top = |g: &dyn Fn(&SpectrumRow) -> f64| *rows.iter().max_by(|a, b| g(a).total_cmp(&g(b))).unwrap();
        Spectrum {
            n_star: 55.0,
            k_star_mpc: 0.05,
            potential_scale: 1.2e-10,
            n_total: 70.0,
            peak: top(&|r| r.p_zeta),
            peak_slow_roll: top(&|r| r.p_zeta_slow_roll),
            rows,
        }
    }

    #[test]
    fn a_peak_inside_the_grid_is_called_a_peak() {
        let t = text(&spectrum_with([1e-9, 3e-9, 2e-9], [1e-9, 2e-9, 4e-9]), "m");
        assert!(t.contains("\npeak     P_zeta = 3e-9 at k = 10 Mpc^-1"), "{t}");
        // slow roll's largest value is at the last row: no peak claimed there
        assert!(
            t.contains("largest slow-roll P_zeta (4e-9) is at the upper end of the k grid"),
            "{t}"
        );
        assert!(t.contains("raise --k-max"), "{t}");
    }

    #[test]
    fn a_maximum_at_an_end_of_the_grid_is_not_called_a_peak() {
        let t = text(&spectrum_with([1e-9, 2e-9, 3e-9], [1e-9, 2e-9, 3e-9]), "m");
        assert!(!t.contains("\npeak"), "{t}");
        assert!(
            t.contains("the largest P_zeta (3e-9) is at the upper end of the k grid"),
            "{t}"
        );
        assert!(t.contains("the true peak may lie beyond k_max; raise --k-max"), "{t}");
        assert!(
            t.contains("slow roll: its largest P_zeta (3e-9) is at the upper end too"),
            "{t}"
        );
        let t = text(&spectrum_with([3e-9, 2e-9, 1e-9], [1e-9, 3e-9, 2e-9]), "m");
        assert!(
            t.contains("at the lower end of the k grid") && t.contains("lower --k-min"),
            "{t}"
        );
        assert!(t.contains("slow roll puts its peak at k = 10 Mpc^-1"), "{t}");
    }

    #[test]
    fn every_spectrum_column_has_its_own_title() {
        let t = text(&spectrum_with([1e-9, 3e-9, 2e-9], [1e-9, 2e-9, 4e-9]), "m");
        let header = t.lines().find(|l| l.contains("k [Mpc^-1]")).unwrap();
        let titles: Vec<&str> = header.split("  ").map(str::trim).filter(|s| !s.is_empty()).collect();
        assert_eq!(
            titles,
            [
                "k [Mpc^-1]",
                "P_zeta",
                "P_t",
                "P_zeta (slow roll)",
                "N to end [e-folds]"
            ]
        );
    }

    #[test]
    fn a_non_finite_spectrum_row_is_an_error() {
        let row = SpectrumRow {
            k_mpc: 0.05,
            p_zeta: 2.1e-9,
            p_t: 1e-11,
            p_zeta_slow_roll: 2.0e-9,
            n_before_end: 55.0,
            drift: 1e-7,
        };
        assert!(check_rows(&[row], 1e-10).is_ok());
        let bad = SpectrumRow {
            p_zeta_slow_roll: f64::INFINITY,
            ..row
        };
        let e = check_rows(&[row, bad], 1e-10).unwrap_err();
        assert!(
            e.message
                .starts_with("p_zeta_slow_roll is not a finite number (inf) for the mode k = 0.05"),
            "{}",
            e.message
        );
        assert!(check_rows(&[row], f64::NAN).is_err());
    }
}
