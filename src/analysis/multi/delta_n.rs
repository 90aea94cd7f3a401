//! Slow-roll delta-N (Sasaki & Stewart 1996; Lyth & Rodriguez 2005; from memory; as in
//! tests/reference/MULTIFIELD.md): N(phi) is the number of e-folds from phi, started on its own
//! attractor pi^a = -G^ab V_b/V, on the exact background to eps_H = 1. Its derivatives on the
//! flat slice at the pivot:
//!
//! - N_a, N_ab by central differences with steps of field distance h and h/2 (coordinate
//!   steps h/sqrt(G_aa)), Richardson-extrapolated (error O(h^4)); the error estimate is the
//!   largest difference between the extrapolated and the h/2 values (common practice);
//! - P_zeta = (H_*/2 pi)^2 G^ab N_a N_b, r = 8/(G^ab N_a N_b),
//!   n_s - 1 = -2 eps - 2/(N^a N_a) + 2 N^a N^b V_;ab/(V N^c N_c),
//!   f_NL = (5/6) N^a N^b N_;ab/(N^c N_c)^2 with N_;ab = N_ab - Gamma^c_ab N_c;
//!   H_* and eps from the exact background at the pivot.

use super::background::{eps_h, start_state, Flow};
use crate::analysis::error::AnalysisError;
use crate::config::MultiLimits;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;

/// N and its derivatives at a point.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DeltaN {
    /// N from the point (on its attractor) to the end.
    pub n: f64,
    /// N_a (coordinate derivatives).
    pub n_a: Vec<f64>,
    /// N_ab, row by row.
    pub n_ab: Vec<Vec<f64>>,
    /// Error estimate of N_a (largest component).
    pub error_n_a: f64,
    /// Error estimate of N_ab.
    pub error_n_ab: f64,
}

/// The observables of delta-N at the pivot.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DeltaNObservables {
    /// P_zeta for V as written.
    pub p_zeta: f64,
    /// r.
    pub r: f64,
    /// n_s.
    pub n_s: f64,
    /// f_NL.
    pub f_nl: f64,
}

/// e-folds from phi, on its own attractor, to eps_H = 1.
pub fn efolds_to_end(flow: &mut Flow<'_>, phi: &[f64], limits: &MultiLimits) -> Result<f64, AnalysisError> {
    let y0 = start_state(flow, phi, None)?;
    super::background::efolds_to_end(flow, &y0, limits)
}

/// N_a, N_ab at steps of field distance `h` (module docs).
fn derivatives(
    flow: &mut Flow<'_>,
    phi: &[f64],
    n0: f64,
    unit: &[f64],
    h: f64,
    limits: &MultiLimits,
) -> Result<(Vec<f64>, DMatrix<f64>), AnalysisError> {
    let n = phi.len();
    let mut at = |steps: &[(usize, f64)]| -> Result<f64, AnalysisError> {
        let mut p = phi.to_vec();
        for &(a, sgn) in steps {
            p[a] += sgn * h * unit[a];
        }
        efolds_to_end(flow, &p, limits)
    };
    let mut n_a = vec![0.0; n];
    let mut n_ab = DMatrix::zeros(n, n);
    for a in 0..n {
        let (np, nm) = (at(&[(a, 1.0)])?, at(&[(a, -1.0)])?);
        n_a[a] = (np - nm) / (2.0 * h * unit[a]);
        n_ab[(a, a)] = (np - 2.0 * n0 + nm) / (h * unit[a]).powi(2);
        for b in a + 1..n {
            let pp = at(&[(a, 1.0), (b, 1.0)])?;
            let pm = at(&[(a, 1.0), (b, -1.0)])?;
            let mp = at(&[(a, -1.0), (b, 1.0)])?;
            let mm = at(&[(a, -1.0), (b, -1.0)])?;
            let v = (pp - pm - mp + mm) / (4.0 * h * h * unit[a] * unit[b]);
            n_ab[(a, b)] = v;
            n_ab[(b, a)] = v;
        }
    }
    Ok((n_a, n_ab))
}

/// N, N_a and N_ab at phi (module docs): steps h = `limits.delta_n_step` and h/2.
pub fn delta_n(flow: &mut Flow<'_>, phi: &[f64], limits: &MultiLimits) -> Result<DeltaN, AnalysisError> {
    let n = phi.len();
    let n0 = efolds_to_end(flow, phi, limits)?;
    let l = flow.at(phi)?;
    let unit: Vec<f64> = (0..n).map(|a| 1.0 / l.g[(a, a)].sqrt()).collect();
    let h = limits.delta_n_step;
    let (a1, ab1) = derivatives(flow, phi, n0, &unit, h, limits)?;
    let (a2, ab2) = derivatives(flow, phi, n0, &unit, 0.5 * h, limits)?;
    let n_a: Vec<f64> = (0..n).map(|a| (4.0 * a2[a] - a1[a]) / 3.0).collect();
    let n_ab = (4.0 * &ab2 - ab1) / 3.0;
    let error_n_a = (0..n).map(|a| (n_a[a] - a2[a]).abs()).fold(0.0, f64::max);
    let error_n_ab = (&n_ab - &ab2).abs().max();
    Ok(DeltaN {
        n: n0,
        n_a,
        n_ab: (0..n).map(|a| (0..n).map(|b| n_ab[(a, b)]).collect()).collect(),
        error_n_a,
        error_n_ab,
    })
}

/// The observables at the pivot state y = (phi, pi) of the exact background.
pub fn observables(flow: &mut Flow<'_>, y: &[f64], d: &DeltaN) -> Result<DeltaNObservables, AnalysisError> {
    let n = d.n_a.len();
    let l = flow.at(&y[..n])?;
    let eps = eps_h(l, &y[n..]);
    let h2 = l.v / (3.0 - eps);
    let na = DVector::from_column_slice(&d.n_a);
    let nup = &l.g_inv * &na;
    let nn = na.dot(&nup);
    let hess_v = l.covariant_hessian();
    let hess_n = DMatrix::from_fn(n, n, |a, b| {
        d.n_ab[a][b] - (0..n).map(|c| l.gamma(c, a, b) * d.n_a[c]).sum::<f64>()
    });
    Ok(DeltaNObservables {
        p_zeta: h2 / (4.0 * std::f64::consts::PI * std::f64::consts::PI) * nn,
        r: 8.0 / nn,
        n_s: 1.0 - 2.0 * eps - 2.0 / nn + 2.0 * nup.dot(&(&hess_v * &nup)) / (l.v * nn),
        f_nl: 5.0 / 6.0 * nup.dot(&(&hess_n * &nup)) / (nn * nn),
    })
}
