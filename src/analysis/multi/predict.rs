//! One entry point for the multi-field analyses: the background from a start, the trajectory,
//! and at each N_* the Mukhanov–Sasaki spectra around the pivot and the slow-roll delta-N.

use super::background::{before_end, run, start_state, Flow, Run};
use super::trajectory::{max_turn, profile, sample, stages, MaxTurn, Stage};
use super::{delta_n, modes, FieldSpace};
use crate::analysis::error::{AnalysisError, ErrorKind};
use crate::config::MultiLimits;
use serde::Serialize;

/// Settings of a multi-field prediction.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MultiSettings {
    /// Limits and tolerances.
    pub limits: MultiLimits,
    /// Compute the slow-roll delta-N (4 n^2 + 1 background runs per N_*). Default true.
    pub delta_n: bool,
}

impl Default for MultiSettings {
    fn default() -> Self {
        MultiSettings {
            limits: MultiLimits::default(),
            delta_n: true,
        }
    }
}

/// The prediction at one N_*.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MultiPrediction {
    /// e-folds between the pivot's exit and the end of inflation.
    pub n_star: f64,
    /// The fields at the pivot's exit, in field order.
    pub fields_star: Vec<f64>,
    /// dphi^a/dN at the pivot's exit.
    pub velocity_star: Vec<f64>,
    /// The fields at the end of inflation (eps_H = 1).
    pub fields_end: Vec<f64>,
    /// n_s of P_zeta at the end of inflation.
    pub n_s: f64,
    /// r = P_t/P_zeta at k_*.
    pub r: f64,
    /// dn_s/dln k.
    pub alpha_s: f64,
    /// The tensor tilt.
    pub n_t: f64,
    /// P_zeta at k_* at the end of inflation, for V as written.
    pub p_zeta: f64,
    /// P_iso at k_* at the end of inflation (the part of the field perturbation normal to
    /// the trajectory, normalised as zeta).
    pub p_iso: f64,
    /// P_cross (two fields).
    pub p_cross: Option<f64>,
    /// beta_iso = P_iso/(P_zeta + P_iso).
    pub beta_iso: f64,
    /// f_NL of delta-N.
    pub f_nl: Option<f64>,
    /// eps_H at the pivot.
    pub eps_h: f64,
    /// eta_perp/H at the pivot.
    pub turn_rate: f64,
    /// m_s^2/H^2 at the pivot (two fields).
    pub entropic_mass2: Option<f64>,
    /// e-folds from the start to the end of inflation.
    pub n_total: f64,
    /// n_s of delta-N.
    pub n_s_delta_n: Option<f64>,
    /// r of delta-N.
    pub r_delta_n: Option<f64>,
    /// P_zeta of delta-N.
    pub p_zeta_delta_n: Option<f64>,
    /// delta-N's derivatives.
    pub delta_n: Option<delta_n::DeltaN>,
}

/// A multi-field prediction: the trajectory and one [`MultiPrediction`] per N_*.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MultiReport {
    /// The field names, in order.
    pub fields: Vec<String>,
    /// e-folds from the start to the end of inflation.
    pub n_total: f64,
    /// The stretches along one direction.
    pub stages: Vec<Stage>,
    /// The largest turn.
    pub max_turn: MaxTurn,
    /// One per N_*, in the order asked.
    pub predictions: Vec<MultiPrediction>,
}

/// Checks the field count and the N_* list.
fn check(space: &dyn FieldSpace, n_stars: &[f64], limits: &MultiLimits) -> Result<(), AnalysisError> {
    let n = space.n_fields();
    if n > limits.max_fields {
        return Err(ErrorKind::MultiTooManyFields {
            n,
            max: limits.max_fields,
        }
        .into());
    }
    if n_stars.is_empty() {
        return Err(ErrorKind::NoEfolds.into());
    }
    if let Some(&bad) = n_stars.iter().find(|x| x.is_nan() || **x <= 0.0 || !x.is_finite()) {
        return Err(ErrorKind::BadEfolds { n_star: bad }.into());
    }
    Ok(())
}

/// Predicts from `start` (with `velocity` dphi^a/dN, or on the attractor) at each N_*.
pub fn predict(
    space: &mut dyn FieldSpace,
    start: &[f64],
    velocity: Option<&[f64]>,
    n_stars: &[f64],
    settings: &MultiSettings,
) -> Result<MultiReport, AnalysisError> {
    let (t, predictions) = along_trajectory(space, start, velocity, n_stars, settings, at_pivot)?;
    Ok(MultiReport {
        fields: t.fields,
        n_total: t.n_total,
        stages: t.stages,
        max_turn: t.max_turn,
        predictions,
    })
}

/// What every route reports of the background: the field names, its length, its stages and
/// its largest turn.
pub(crate) struct Summary {
    pub fields: Vec<String>,
    pub n_total: f64,
    pub stages: Vec<Stage>,
    pub max_turn: MaxTurn,
}

/// One route's prediction at one N_* on a background run.
pub(crate) type AtPivot<P> = fn(&mut Flow<'_>, &Run, f64, &MultiSettings) -> Result<P, AnalysisError>;

/// The part every multi-field route shares: the checks of the field count and the N_*, the
/// background from the start, its trajectory summary, and `each` at every N_* on it.
pub(crate) fn along_trajectory<P>(
    space: &mut dyn FieldSpace,
    start: &[f64],
    velocity: Option<&[f64]>,
    n_stars: &[f64],
    settings: &MultiSettings,
    each: AtPivot<P>,
) -> Result<(Summary, Vec<P>), AnalysisError> {
    let limits = &settings.limits;
    check(space, n_stars, limits)?;
    let fields = space.field_names();
    let mut flow = Flow::new(space);
    let y0 = start_state(&mut flow, start, velocity)?;
    let bg = run(&mut flow, &y0, limits)?;
    let samples = profile(&mut flow, &bg)?;
    let max_turn = max_turn(&mut flow, &bg, &samples, limits)?;
    let stages = stages(&mut flow, &bg, &samples, limits)?;
    let predictions = n_stars
        .iter()
        .map(|&n_star| each(&mut flow, &bg, n_star, settings))
        .collect::<Result<_, _>>()?;
    let summary = Summary {
        fields,
        n_total: bg.n_end,
        stages,
        max_turn,
    };
    Ok((summary, predictions))
}

/// The prediction at one N_*.
fn at_pivot(
    flow: &mut Flow<'_>,
    bg: &Run,
    n_star: f64,
    settings: &MultiSettings,
) -> Result<MultiPrediction, AnalysisError> {
    let limits = &settings.limits;
    let n = flow.n();
    // The lowest k of the stencil starts ln(k_start) + 2 steps (and a margin) before the pivot.
    let needed = n_star + limits.k_start.ln() + 2.0 * limits.tilt_step + 0.5;
    let y = before_end(flow, bg, n_star, needed, limits)?;
    let ln_k_star = (bg.n_end - n_star) + flow.ln_h(&y)?;
    let h = limits.tilt_step;
    let ln_ks: Vec<f64> = (-2..=2).map(|j| ln_k_star + j as f64 * h).collect();
    let spectra = modes::modes(flow, bg, &ln_ks, limits)?;
    let ln_s: [f64; 5] = std::array::from_fn(|i| spectra[i].p_zeta.ln());
    let ln_t: [f64; 5] = std::array::from_fn(|i| spectra[i].p_t.ln());
    let (ns1, alpha_s) = modes::stencil(&ln_s, h);
    let (n_t, _) = modes::stencil(&ln_t, h);
    let mid = spectra[2];
    let s = sample(flow, &y, n_star)?;
    let dn = if settings.delta_n {
        let d = delta_n::delta_n(flow, &y[..n], limits)?;
        Some((delta_n::observables(flow, &y, &d)?, d))
    } else {
        None
    };
    let p = MultiPrediction {
        n_star,
        fields_star: y[..n].to_vec(),
        velocity_star: y[n..].to_vec(),
        fields_end: bg.end[..n].to_vec(),
        n_s: 1.0 + ns1,
        r: mid.p_t / mid.p_zeta,
        alpha_s,
        n_t,
        p_zeta: mid.p_zeta,
        p_iso: mid.p_iso,
        p_cross: mid.p_cross,
        beta_iso: mid.p_iso / (mid.p_zeta + mid.p_iso),
        f_nl: dn.as_ref().map(|d| d.0.f_nl),
        eps_h: s.eps_h,
        turn_rate: s.turn_rate,
        entropic_mass2: s.entropic_mass2,
        n_total: bg.n_end,
        n_s_delta_n: dn.as_ref().map(|d| d.0.n_s),
        r_delta_n: dn.as_ref().map(|d| d.0.r),
        p_zeta_delta_n: dn.as_ref().map(|d| d.0.p_zeta),
        delta_n: dn.map(|d| d.1),
    };
    check_finite(&p)?;
    Ok(p)
}

/// Every number of a prediction is finite.
fn check_finite(p: &MultiPrediction) -> Result<(), AnalysisError> {
    let keys: [(&'static str, Option<f64>); 13] = [
        ("n_s", Some(p.n_s)),
        ("r", Some(p.r)),
        ("alpha_s", Some(p.alpha_s)),
        ("n_t", Some(p.n_t)),
        ("p_zeta", Some(p.p_zeta)),
        ("p_iso", Some(p.p_iso)),
        ("p_cross", p.p_cross),
        ("f_nl", p.f_nl),
        ("turn_rate", Some(p.turn_rate)),
        ("entropic_mass2", p.entropic_mass2),
        ("n_s_delta_n", p.n_s_delta_n),
        ("r_delta_n", p.r_delta_n),
        ("p_zeta_delta_n", p.p_zeta_delta_n),
    ];
    for (key, v) in keys {
        if let Some(value) = v.filter(|v| !v.is_finite()) {
            return Err(ErrorKind::MultiNotFinite {
                key,
                value,
                n_star: p.n_star,
            }
            .into());
        }
    }
    Ok(())
}
