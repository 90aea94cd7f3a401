//! Several fields: what the multi-field background and perturbations need from a model, at a
//! point of field space. Reduced Planck units (M_p = 1); L = 1/2 G_ab dphi^a dphi^b - V.
//!
//! Index conventions (field indices count from 0, n = [`FieldSpace::n_fields`]):
//!
//! - Christoffel symbols Gamma^a_bc = 1/2 G^ad (d_b G_dc + d_c G_db - d_d G_bc), stored at
//!   `(a * n + b) * n + c`;
//! - the Riemann tensor in the convention of Misner, Thorne & Wheeler (1973),
//!   R^a_bcd = d_c Gamma^a_db - d_d Gamma^a_cb + Gamma^a_ce Gamma^e_db - Gamma^a_de Gamma^e_cb
//!   (positive on a sphere), stored at `((a * n + b) * n + c) * n + d`;
//! - the covariant Hessian V_;ab = d_a d_b V - Gamma^c_ab V_c.

pub mod alpha_eff;
pub mod at_pivot;
pub mod background;
pub mod closed_form;
pub mod couplings;
pub mod delta_n;
pub mod delta_n_route;
pub mod modes;
pub mod ode;
pub mod predict;
pub mod space;
pub mod trajectory;

use crate::analysis::error::AnalysisError;
use nalgebra::DMatrix;

/// The potential and the geometry of field space at one point.
#[derive(Debug, Clone, PartialEq)]
pub struct Local {
    /// V.
    pub v: f64,
    /// The gradient d_a V.
    pub dv: Vec<f64>,
    /// The second partial derivatives d_a d_b V (symmetric).
    pub ddv: DMatrix<f64>,
    /// The metric G_ab.
    pub g: DMatrix<f64>,
    /// Its inverse G^ab.
    pub g_inv: DMatrix<f64>,
    /// Gamma^a_bc at `(a * n + b) * n + c`.
    pub gamma: Vec<f64>,
    /// R^a_bcd at `((a * n + b) * n + c) * n + d`.
    pub riemann: Vec<f64>,
    /// `false` where the field space knows R^a_bcd to be zero everywhere by the metric's form
    /// (the tensor is then all zeros and the curvature terms can be skipped); `true` otherwise.
    pub curved: bool,
}

impl Local {
    /// Zeros for `n` fields.
    pub fn zeros(n: usize) -> Local {
        Local {
            v: 0.0,
            dv: vec![0.0; n],
            ddv: DMatrix::zeros(n, n),
            g: DMatrix::zeros(n, n),
            g_inv: DMatrix::zeros(n, n),
            gamma: vec![0.0; n * n * n],
            riemann: vec![0.0; n * n * n * n],
            curved: true,
        }
    }

    /// The number of fields.
    pub fn n(&self) -> usize {
        self.dv.len()
    }

    /// Gamma^a_bc.
    #[inline]
    pub fn gamma(&self, a: usize, b: usize, c: usize) -> f64 {
        let n = self.n();
        self.gamma[(a * n + b) * n + c]
    }

    /// R^a_bcd.
    #[inline]
    pub fn riemann(&self, a: usize, b: usize, c: usize, d: usize) -> f64 {
        let n = self.n();
        self.riemann[((a * n + b) * n + c) * n + d]
    }

    /// The covariant Hessian V_;ab = d_a d_b V - Gamma^c_ab V_c.
    pub fn covariant_hessian(&self) -> DMatrix<f64> {
        let n = self.n();
        DMatrix::from_fn(n, n, |a, b| {
            self.ddv[(a, b)] - (0..n).map(|c| self.gamma(c, a, b) * self.dv[c]).sum::<f64>()
        })
    }
}

/// A model's field space: evaluates [`Local`] at a point. Implemented for compiled models; a
/// closed-form implementation serves the tests.
pub trait FieldSpace {
    /// The number of fields.
    fn n_fields(&self) -> usize;
    /// The field names, in order.
    fn field_names(&self) -> Vec<String>;
    /// Fills `at` (made with [`Local::zeros`]) at the point `phi`: an error where V or the
    /// metric is not finite, or the metric is not positive definite.
    fn local(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError>;
    /// What the background needs of [`FieldSpace::local`]: V, d_a V, G, G^-1 and Gamma,
    /// exactly as `local` computes them; the Hessian and R^a_bcd of `at` may be left from an
    /// earlier point. By default the whole of `local`.
    fn local_background(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError> {
        self.local(phi, at)
    }
}
