//! What every route reports at the pivot: the observables at one N_*, shared by the slow-roll
//! prediction ([`crate::drivers::predict::Prediction`]) and the exact one
//! ([`crate::analysis::perturbations::ExactPoint`]).

use serde::Serialize;

/// The pivot's exit and the spectral observables there. Serialized as these seven keys, in
/// this order (a prediction's first keys).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AtPivot {
    /// e-folds between the pivot's exit and the end of inflation.
    pub n_star: f64,
    /// Field value at the pivot's exit.
    pub phi_star: f64,
    /// Field value at the end of inflation (eps_V = 1 in slow roll, eps_H = 1 on the exact
    /// route).
    pub phi_end: f64,
    /// Scalar spectral index.
    pub n_s: f64,
    /// Tensor-to-scalar ratio (P_t / P_R at the pivot on the exact route).
    pub r: f64,
    /// Running dn_s/dln k.
    pub alpha_s: f64,
    /// Tensor tilt.
    pub n_t: f64,
}
