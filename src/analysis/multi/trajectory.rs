//! Along the multi-field trajectory: eps_H, the turn rate, the entropic mass, the largest turn
//! and the stages (stretches along one direction).
//!
//! Definitions:
//!
//! - turn rate eta_perp/H = |D_N T|, T = pi/|pi| the unit tangent (common practice); D_N T is
//!   the part of D_N pi normal to T over |pi| (own step), with D_N pi = -(3 - eps_H)(pi +
//!   G^-1 dV/V) from the equation of motion, so no numerical derivative enters;
//! - entropic mass m_s^2/H^2 (two fields) = s_a M^a_b s^b, the flat-gauge mass matrix of
//!   [`super::modes`] projected on the unit normal s (s^a = (-T_1, T_0)/sqrt(det G), T_a =
//!   G_ab T^b, as in tests/reference/MULTIFIELD.md). The pi pi and V pi terms of M vanish on s,
//!   so it is s^a V_;ab s^b/H^2 - R_acdb s^a pi^c pi^d s^b = V_ss/H^2 + eps_H R on two fields
//!   (R the scalar curvature; Renaux-Petel & Turzynski 2016, from memory). The -(eta_perp/H)^2
//!   of the super-horizon effective mass is not included.

use super::background::{acceleration, eps_h, quad_form, state_at, Flow, Run};
use super::Local;
use crate::analysis::error::AnalysisError;
use crate::config::MultiLimits;
use nalgebra::DMatrix;
use serde::Serialize;

/// The trajectory at one point.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Sample {
    /// e-folds before the end of inflation.
    pub n_before_end: f64,
    /// eps_H.
    pub eps_h: f64,
    /// eta_perp/H.
    pub turn_rate: f64,
    /// m_s^2/H^2 (two fields), else `None`.
    pub entropic_mass2: Option<f64>,
}

/// The largest turn rate of a trajectory.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MaxTurn {
    /// eta_perp/H there.
    pub turn_rate: f64,
    /// e-folds before the end (to 1e-7).
    pub n_before_end: f64,
    /// The field point, in field order.
    pub fields: Vec<f64>,
}

/// Below this largest eta_perp/H a trajectory is reported as running straight: 1e-10, far
/// above the rounding of a trajectory kept on a line of symmetry (some 1e-16) and far below
/// any turn that moves an observable.
pub const STRAIGHT_TURN: f64 = 1e-10;

/// A stretch of the trajectory whose turn rate stays below [`MultiLimits::stage_turn`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stage {
    /// e-folds before the end where it begins.
    pub from_n_before_end: f64,
    /// e-folds before the end where it ends.
    pub to_n_before_end: f64,
    /// Its length in e-folds.
    pub efolds: f64,
    /// The unit tangent in its middle, in the orthonormal frame of the Cholesky factor of G
    /// (G = L L^T, components L^T T).
    pub direction: Vec<f64>,
}

/// The unit tangent T^a and |pi|.
pub fn tangent(l: &Local, pi: &[f64]) -> (Vec<f64>, f64) {
    let norm = quad_form(&l.g, pi, pi).sqrt();
    (pi.iter().map(|p| p / norm).collect(), norm)
}

/// eta_perp/H = |D_N T| at a point with velocity pi.
pub fn turn_rate(l: &Local, pi: &[f64]) -> f64 {
    let n = l.n();
    // D_N pi: the acceleration without its Christoffel term.
    let mut dpi = vec![0.0; n];
    acceleration(l, pi, &mut dpi);
    for a in 0..n {
        for b in 0..n {
            for c in 0..n {
                dpi[a] += l.gamma(a, b, c) * pi[b] * pi[c];
            }
        }
    }
    let (t, norm) = tangent(l, pi);
    let along = quad_form(&l.g, &t, &dpi);
    let perp: Vec<f64> = (0..n).map(|a| dpi[a] - t[a] * along).collect();
    quad_form(&l.g, &perp, &perp).max(0.0).sqrt() / norm
}

/// The unit normal s^a of two fields: T turned by +90 degrees, s^a = (-T_1, T_0)/sqrt(det G).
pub fn normal(l: &Local, t: &[f64]) -> Vec<f64> {
    let tl = &l.g * nalgebra::DVector::from_column_slice(t);
    let det = l.g.determinant();
    vec![-tl[1] / det.sqrt(), tl[0] / det.sqrt()]
}

/// The orthonormal-frame components L^T u of a vector (G = L L^T), if G is positive definite.
pub fn in_frame(l: &Local, u: &[f64]) -> Option<Vec<f64>> {
    let c = l.g.clone().cholesky()?;
    let lt = c.l().transpose();
    Some(
        (&lt * nalgebra::DVector::from_column_slice(u))
            .iter()
            .copied()
            .collect(),
    )
}

/// m_s^2/H^2 = s_a M^a_b s^b for two fields (module docs), given M^a_b/H^2.
pub fn entropic_mass2(l: &Local, pi: &[f64], mass: &DMatrix<f64>) -> Option<f64> {
    if l.n() != 2 {
        return None;
    }
    let (t, _) = tangent(l, pi);
    let s = normal(l, &t);
    let ms = mass * nalgebra::DVector::from_column_slice(&s);
    Some(quad_form(&l.g, &s, ms.as_slice()))
}

/// The trajectory at a state (phi, pi), `n_before_end` e-folds before the end.
pub fn sample(flow: &mut Flow<'_>, y: &[f64], n_before_end: f64) -> Result<Sample, AnalysisError> {
    let n = flow.n();
    let l = flow.at(&y[..n])?;
    let pi = &y[n..];
    let eps = eps_h(l, pi);
    let h2 = l.v / (3.0 - eps);
    let m = super::modes::mass_matrix(l, pi, eps, h2);
    Ok(Sample {
        n_before_end,
        eps_h: eps,
        turn_rate: turn_rate(l, pi),
        entropic_mass2: entropic_mass2(l, pi, &m),
    })
}

/// The trajectory at every checkpoint of a run.
pub fn profile(flow: &mut Flow<'_>, run: &Run) -> Result<Vec<Sample>, AnalysisError> {
    run.checkpoints
        .iter()
        .map(|(n, y)| sample(flow, y, run.n_end - n))
        .collect()
}

/// The largest turn rate: the largest at the checkpoints, refined by golden-section search
/// between its neighbours (to 1e-7 e-folds).
pub fn max_turn(
    flow: &mut Flow<'_>,
    run: &Run,
    samples: &[Sample],
    limits: &MultiLimits,
) -> Result<MaxTurn, AnalysisError> {
    let n = flow.n();
    let i = (0..samples.len())
        .max_by(|&a, &b| samples[a].turn_rate.total_cmp(&samples[b].turn_rate))
        .unwrap_or(0);
    let lo = run.checkpoints[i.saturating_sub(1)].0;
    let hi = run.checkpoints[(i + 1).min(run.checkpoints.len() - 1)].0;
    let mut rate_at = |nn: f64| -> Result<(f64, Vec<f64>), AnalysisError> {
        let y = state_at(flow, run, nn, limits)?;
        let l = flow.at(&y[..n])?;
        Ok((turn_rate(l, &y[n..]), y))
    };
    let g = 0.5 * (5f64.sqrt() - 1.0);
    let (mut a, mut b) = (lo, hi);
    let (mut c, mut d) = (b - g * (b - a), a + g * (b - a));
    let (mut fc, mut fd) = (rate_at(c)?.0, rate_at(d)?.0);
    while b - a > 1e-7 {
        if fc > fd {
            b = d;
            (d, fd) = (c, fc);
            c = b - g * (b - a);
            fc = rate_at(c)?.0;
        } else {
            a = c;
            (c, fc) = (d, fd);
            d = a + g * (b - a);
            fd = rate_at(d)?.0;
        }
    }
    let best = 0.5 * (a + b);
    let (rate, y) = rate_at(best)?;
    // The checkpoint itself wins when the maximum sits at an end of the trajectory.
    if samples[i].turn_rate > rate {
        return Ok(MaxTurn {
            turn_rate: samples[i].turn_rate,
            n_before_end: samples[i].n_before_end,
            fields: run.checkpoints[i].1[..n].to_vec(),
        });
    }
    Ok(MaxTurn {
        turn_rate: rate,
        n_before_end: run.n_end - best,
        fields: y[..n].to_vec(),
    })
}

/// The stages: maximal stretches of checkpoints with turn rate below `limits.stage_turn`, at
/// least `limits.stage_min_efolds` long, from the start toward the end.
pub fn stages(
    flow: &mut Flow<'_>,
    run: &Run,
    samples: &[Sample],
    limits: &MultiLimits,
) -> Result<Vec<Stage>, AnalysisError> {
    let n = flow.n();
    let mut out = Vec::new();
    let mut i = 0;
    while i < samples.len() {
        if samples[i].turn_rate >= limits.stage_turn {
            i += 1;
            continue;
        }
        let j = (i..samples.len())
            .find(|&j| samples[j].turn_rate >= limits.stage_turn)
            .unwrap_or(samples.len());
        let (from, to) = (samples[i].n_before_end, samples[j - 1].n_before_end);
        if from - to >= limits.stage_min_efolds {
            let y = &run.checkpoints[(i + j - 1) / 2].1;
            let l = flow.at(&y[..n])?;
            let (t, _) = tangent(l, &y[n..]);
            out.push(Stage {
                from_n_before_end: from,
                to_n_before_end: to,
                efolds: from - to,
                direction: in_frame(l, &t).unwrap_or(t),
            });
        }
        i = j;
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::super::closed_form::{Diagonal, Disk, Metric1};
    use super::super::FieldSpace;
    use super::*;

    /// Flat space, V = (x^2 + y^2)/2 at (1, 0): moving along the gradient does not turn;
    /// moving across it with pi = (0, 0.1) turns at eta_perp/H = (3 - eps) |G^-1 dV/V| / |pi|
    /// = (3 - 0.005) 2 / 0.1 (own derivation: all of D_N pi but its -(3 - eps) pi part is
    /// normal to T).
    #[test]
    fn turn_rate_of_closed_forms() {
        let mut s = Diagonal::quadratic([1.0, 1.0], Metric1::Flat);
        let mut l = Local::zeros(2);
        s.local(&[1.0, 0.0], &mut l).unwrap();
        assert!(turn_rate(&l, &[-0.2, 0.0]).abs() < 1e-15);
        let want = (3.0 - 0.005) * 2.0 / 0.1;
        assert!((turn_rate(&l, &[0.0, 0.1]) - want).abs() < 1e-12 * want);
    }

    /// On the Poincaré disk (alpha = 1) the curvature part of the entropic mass is eps R with
    /// R = -4/3 (tests/reference/geometry.json, `Ricci_scalar_symbolic` = -4/(3 alpha)).
    #[test]
    fn entropic_mass_carries_eps_times_the_scalar_curvature() {
        let mut s = Disk { alpha: 1.0 };
        let mut l = Local::zeros(2);
        s.local(&[0.3, -0.2], &mut l).unwrap();
        let pi = [-0.01, 0.02];
        let eps = eps_h(&l, &pi);
        let h2 = l.v / (3.0 - eps);
        let m = super::super::modes::mass_matrix(&l, &pi, eps, h2);
        let (t, _) = tangent(&l, &pi);
        let sn = normal(&l, &t);
        let v_ss = quad_form(&l.covariant_hessian(), &sn, &sn) / h2;
        let curvature = entropic_mass2(&l, &pi, &m).unwrap() - v_ss;
        assert!((curvature - eps * (-4.0 / 3.0)).abs() < 1e-12, "{curvature} {eps}");
        // s is a unit vector normal to T.
        assert!((quad_form(&l.g, &sn, &sn) - 1.0).abs() < 1e-14 && quad_form(&l.g, &sn, &t).abs() < 1e-14);
    }
}
