//! The slow-roll delta-N route alone (`efold predict --method delta-n` on a model of several
//! fields): the exact background from the start, the trajectory's summary, and at each N_*
//! the derivatives of N (see [`super::delta_n`]) and their observables, with no
//! Mukhanov–Sasaki modes.
//!
//! The pivot state is the one the exact route uses (the same background, the same
//! [`super::background::before_end`]), so the numbers here are those of the exact route's
//! `delta_n` object to rounding. Only the pivot itself must lie after the start: the modes'
//! margin of the exact route is not needed.

use super::background::{before_end, Flow, Run};
use super::delta_n::{delta_n, observables, DeltaN, DeltaNObservables};
use super::predict::{along_trajectory, MultiSettings};
use super::trajectory::{sample, MaxTurn, Stage};
use super::FieldSpace;
use crate::analysis::error::{AnalysisError, ErrorKind};
use serde::Serialize;

/// The delta-N prediction at one N_*.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DeltaNPrediction {
    /// e-folds between the pivot's exit and the end of inflation.
    pub n_star: f64,
    /// The fields at the pivot, in field order.
    pub fields_star: Vec<f64>,
    /// dphi^a/dN at the pivot.
    pub velocity_star: Vec<f64>,
    /// The fields at the end of inflation (eps_H = 1).
    pub fields_end: Vec<f64>,
    /// eps_H at the pivot.
    pub eps_h: f64,
    /// eta_perp/H at the pivot.
    pub turn_rate: f64,
    /// m_s^2/H^2 at the pivot (two fields).
    pub entropic_mass2: Option<f64>,
    /// e-folds from the start to the end of inflation.
    pub n_total: f64,
    /// n_s, r, P_zeta and f_NL of delta-N.
    pub observables: DeltaNObservables,
    /// N and its derivatives at the pivot.
    pub delta_n: DeltaN,
}

/// The delta-N route's report: the trajectory and one [`DeltaNPrediction`] per N_*.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DeltaNReport {
    /// The field names, in order.
    pub fields: Vec<String>,
    /// e-folds from the start to the end of inflation.
    pub n_total: f64,
    /// The stretches along one direction.
    pub stages: Vec<Stage>,
    /// The largest turn.
    pub max_turn: MaxTurn,
    /// One per N_*, in the order asked.
    pub predictions: Vec<DeltaNPrediction>,
}

/// Predicts by delta-N alone from `start` (with `velocity` dphi^a/dN, or on the attractor) at
/// each N_*. The field-count limit of delta-N beside the exact route
/// ([`crate::config::MultiLimits::delta_n_max_fields`]) does not apply; `max_fields` does.
pub fn predict_delta_n(
    space: &mut dyn FieldSpace,
    start: &[f64],
    velocity: Option<&[f64]>,
    n_stars: &[f64],
    settings: &MultiSettings,
) -> Result<DeltaNReport, AnalysisError> {
    let (t, predictions) = along_trajectory(space, start, velocity, n_stars, settings, at_pivot)?;
    Ok(DeltaNReport {
        fields: t.fields,
        n_total: t.n_total,
        stages: t.stages,
        max_turn: t.max_turn,
        predictions,
    })
}

/// The delta-N prediction at one N_*.
fn at_pivot(
    flow: &mut Flow<'_>,
    bg: &Run,
    n_star: f64,
    settings: &MultiSettings,
) -> Result<DeltaNPrediction, AnalysisError> {
    let limits = &settings.limits;
    let n = flow.n();
    let y = before_end(flow, bg, n_star, n_star, limits)?;
    let s = sample(flow, &y, n_star)?;
    let d = delta_n(flow, &y[..n], limits)?;
    let o = observables(flow, &y, &d)?;
    let named = [("n_s", o.n_s), ("r", o.r), ("p_zeta", o.p_zeta), ("f_nl", o.f_nl)];
    if let Some(&(key, value)) = named.iter().find(|(_, v)| !v.is_finite()) {
        return Err(ErrorKind::MultiNotFinite { key, value, n_star }.into());
    }
    Ok(DeltaNPrediction {
        n_star,
        fields_star: y[..n].to_vec(),
        velocity_star: y[n..].to_vec(),
        fields_end: bg.end[..n].to_vec(),
        eps_h: s.eps_h,
        turn_rate: s.turn_rate,
        entropic_mass2: s.entropic_mass2,
        n_total: bg.n_end,
        observables: o,
        delta_n: d,
    })
}
