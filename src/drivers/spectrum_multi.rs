//! The spectrum of a model of several fields: P_zeta, P_iso, P_cross and P_t at the end of
//! inflation on a grid of k, from the exact multi-field background and one Mukhanov–Sasaki
//! mode matrix per k ([`crate::analysis::multi::modes`]), with the potential scaled to the
//! observed A_s at the pivot.
//!
//! The pivot k_* leaves the horizon (k_* = aH) N_* e-folds before the end; a k in Mpc^-1
//! is the mode of ln k = ln k_* + ln(k/k_*). Scaling V by s leaves the background in e-folds
//! unchanged and multiplies H^2, so every power by s: the one factor s = A_s / P_zeta(k_*)
//! serves all four.

use crate::analysis::error::{AnalysisError, ErrorKind};
use crate::analysis::multi::background::{before_end, run, start_state, Flow, Run};
use crate::analysis::multi::modes::{crossing, mode};
use crate::analysis::multi::FieldSpace;
use crate::config::{MultiLimits, MULTI_SPECTRUM_FREEZE_EFOLDS};
use serde::Serialize;

/// One row of a multi-field spectrum, every power scaled by the same factor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MultiSpectrumRow {
    /// k in Mpc^-1.
    pub k_mpc: f64,
    /// P_zeta at the end of inflation.
    pub p_zeta: f64,
    /// P_iso (the part of the field perturbation normal to the trajectory, normalised as
    /// zeta).
    pub p_iso: f64,
    /// P_cross (two fields; else absent).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub p_cross: Option<f64>,
    /// P_t.
    pub p_t: f64,
    /// e-folds between the mode's crossing (k = aH) and the end of inflation.
    pub n_before_end: f64,
}

/// A multi-field spectrum on a grid of k.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MultiSpectrum {
    /// The field names, in order.
    pub fields: Vec<String>,
    /// The pivot's e-folds before the end.
    pub n_star: f64,
    /// k_* in Mpc^-1 (from the data set).
    pub k_star_mpc: f64,
    /// The factor on V that gives the observed A_s at the pivot.
    pub potential_scale: f64,
    /// e-folds from the start to the end of inflation.
    pub n_total: f64,
    /// The rows, in the order of the grid.
    pub rows: Vec<MultiSpectrumRow>,
}

/// What a multi-field spectrum is asked for.
#[derive(Debug, Clone, PartialEq)]
pub struct MultiSpectrumRequest<'a> {
    /// The background's start, the fields in field order.
    pub start: &'a [f64],
    /// Its velocity dphi^a/dN.
    pub velocity: &'a [f64],
    /// The pivot's e-folds before the end.
    pub n_star: f64,
    /// The grid, ascending, in Mpc^-1.
    pub k_mpc: &'a [f64],
    /// The observed A_s at the pivot.
    pub a_s: f64,
    /// k_* in Mpc^-1.
    pub k_star_mpc: f64,
}

/// The spectrum of `req` on `space`: the background once, then one mode per k in order.
pub fn spectrum_multi(
    space: &mut dyn FieldSpace,
    req: &MultiSpectrumRequest<'_>,
    limits: &MultiLimits,
) -> Result<MultiSpectrum, AnalysisError> {
    let k_min = req
        .k_mpc
        .iter()
        .copied()
        .reduce(f64::min)
        .ok_or_else(|| AnalysisError::from(ErrorKind::NoWavenumbers))?;
    if !(req.n_star.is_finite() && req.n_star > 0.0) {
        return Err(ErrorKind::BadEfolds { n_star: req.n_star }.into());
    }
    let fields = space.field_names();
    let mut flow = Flow::new(space);
    let y0 = start_state(&mut flow, req.start, Some(req.velocity))?;
    let bg = run(&mut flow, &y0, limits)?;
    // The lowest k starts at k/aH = k_start, ln(k_start) + ln(k_*/k_min) e-folds before the
    // pivot (k = aH there; aH grows by at most one e-fold per e-fold), with half an e-fold to
    // spare for the pivot's own mode.
    let needed = req.n_star + limits.k_start.ln() + (req.k_star_mpc / k_min).ln().max(0.0) + 0.5;
    if bg.n_end < needed {
        return Err(ErrorKind::MultiSpectrumTooFewEfolds {
            available: bg.n_end,
            needed,
            k_min_mpc: k_min,
            k_start: limits.k_start,
        }
        .into());
    }
    let y = before_end(&mut flow, &bg, req.n_star, needed, limits)?;
    let ln_k_star = (bg.n_end - req.n_star) + flow.ln_h(&y)?;
    let ln_k = |k: f64| ln_k_star + (k / req.k_star_mpc).ln();
    let n_before: Vec<f64> = req
        .k_mpc
        .iter()
        .map(|&k| exit_before_end(&mut flow, &bg, k, ln_k(k), limits))
        .collect::<Result<_, _>>()?;
    let pivot = mode(&mut flow, &bg, ln_k_star, limits)?;
    let scale = req.a_s / pivot.p_zeta;
    if !scale.is_finite() || scale <= 0.0 {
        return Err(ErrorKind::ScaleNotFinite { scale }.into());
    }
    let mut rows = Vec::with_capacity(req.k_mpc.len());
    for (&k, &n_before_end) in req.k_mpc.iter().zip(&n_before) {
        let m = mode(&mut flow, &bg, ln_k(k), limits)?;
        rows.push(MultiSpectrumRow {
            k_mpc: k,
            p_zeta: scale * m.p_zeta,
            p_iso: scale * m.p_iso,
            p_cross: m.p_cross.map(|c| scale * c),
            p_t: scale * m.p_t,
            n_before_end,
        });
    }
    check_rows(&rows)?;
    Ok(MultiSpectrum {
        fields,
        n_star: req.n_star,
        k_star_mpc: req.k_star_mpc,
        potential_scale: scale,
        n_total: bg.n_end,
        rows,
    })
}

/// The e-folds between the crossing of k (ln k on the run's scale) and the end: an error when
/// it never crosses or crosses fewer than [`MULTI_SPECTRUM_FREEZE_EFOLDS`] before the end.
fn exit_before_end(
    flow: &mut Flow<'_>,
    bg: &Run,
    k_mpc: f64,
    ln_k: f64,
    limits: &MultiLimits,
) -> Result<f64, AnalysisError> {
    let late = |n_before_end| ErrorKind::MultiSpectrumExitsLate {
        k_mpc,
        n_before_end,
        min_efolds: MULTI_SPECTRUM_FREEZE_EFOLDS,
    };
    let n_cross = match crossing(flow, bg, ln_k, 1.0, limits) {
        Ok((n, _)) => n,
        Err(e) if matches!(*e.kind, ErrorKind::ModeNeverReaches { .. }) => return Err(late(None).into()),
        Err(e) => return Err(e),
    };
    let n_before_end = bg.n_end - n_cross;
    if n_before_end < MULTI_SPECTRUM_FREEZE_EFOLDS {
        return Err(late(Some(n_before_end)).into());
    }
    Ok(n_before_end)
}

/// Every number of every row is finite.
fn check_rows(rows: &[MultiSpectrumRow]) -> Result<(), AnalysisError> {
    for r in rows {
        let numbers = [
            ("p_zeta", Some(r.p_zeta)),
            ("p_iso", Some(r.p_iso)),
            ("p_cross", r.p_cross),
            ("p_t", Some(r.p_t)),
        ];
        if let Some((key, Some(value))) = numbers.into_iter().find(|(_, x)| x.is_some_and(|x| !x.is_finite())) {
            return Err(ErrorKind::SpectrumNotFinite {
                key,
                value,
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
    use crate::analysis::multi::closed_form::{Diagonal, Metric1};

    /// A grid whose lowest k needs more e-folds than the run has says both numbers; a k that
    /// crosses after the end is refused before any mode runs.
    #[test]
    fn too_low_and_too_high_k_are_refused() {
        // Equal masses from (15, 12): 92.87 e-folds (tests/reference/multifield.json, model A).
        let mut s = Diagonal::quadratic([1.0, 1.0], Metric1::Flat);
        let limits = MultiLimits::default();
        let start = [15.0, 12.0];
        let velocity = [-15.0 / 184.5, -12.0 / 184.5];
        let mut req = MultiSpectrumRequest {
            start: &start,
            velocity: &velocity,
            n_star: 55.0,
            k_mpc: &[0.05 * (-40f64).exp(), 0.05],
            a_s: 2.1e-9,
            k_star_mpc: 0.05,
        };
        let e = spectrum_multi(&mut s, &req, &limits).unwrap_err();
        assert!(
            matches!(*e.kind, ErrorKind::MultiSpectrumTooFewEfolds { available, needed, .. }
                if (available - 92.87).abs() < 0.01 && (needed - (95.0 + 100f64.ln() + 0.5)).abs() < 1e-9),
            "{e:?}"
        );
        assert!(e.message.contains("needed by the lowest k"), "{}", e.message);
        let high = [0.05, 0.05 * 53f64.exp()];
        req.k_mpc = &high;
        let e = spectrum_multi(&mut s, &req, &limits).unwrap_err();
        assert!(matches!(*e.kind, ErrorKind::MultiSpectrumExitsLate { .. }), "{e:?}");
        assert!(
            e.message.contains("too late to freeze") || e.message.contains("never leaves"),
            "{}",
            e.message
        );
    }
}
