//! What a prediction of several fields reports at each pivot beside its spectra: the
//! effective alpha along the motion ([`super::alpha_eff`]) and the couplings in the frame of
//! the trajectory ([`super::couplings`]).

use super::alpha_eff::{alpha_eff, AlphaEff};
use super::couplings::{couplings, FrameCouplings};
use crate::analysis::error::AnalysisError;
use crate::config::Config;
use crate::model::Model;
use serde::Serialize;

/// The geometry of the model around one pivot.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PivotExtras {
    /// The effective alpha along the direction of motion.
    pub alpha_eff: AlphaEff,
    /// The covariant derivatives of V in the frame (T, N), in units of V.
    pub couplings: FrameCouplings,
}

/// [`PivotExtras`] at the pivot `phi` with velocity dphi^a/dN `velocity`.
pub fn pivot_extras(
    model: &Model,
    phi: &[f64],
    velocity: &[f64],
    config: &Config,
) -> Result<PivotExtras, AnalysisError> {
    Ok(PivotExtras {
        alpha_eff: alpha_eff(model, phi, velocity, config),
        couplings: couplings(model, phi, velocity)?,
    })
}
