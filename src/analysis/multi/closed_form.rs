//! Field spaces written out in closed form, for checks and benchmarks of the multi-field
//! analyses without a compiled model: sums of quadratic potentials on a product of one-field
//! metrics (flat, or the pole metric 1/(1 - u^2/(6 a))^2), and the Poincaré disk.
//!
//! Geometry (own derivation, as in tests/reference/MULTIFIELD.md): for G = diag(g_a(phi^a))
//! the only Christoffel symbols are Gamma^a_aa = g_a'/(2 g_a), and the space is flat (each
//! g_a is a change of the coordinate phi^a alone). On the disk G = e^{2w} delta with
//! w = ln(sqrt(6 alpha)/(1 - x^2 - y^2)), Gamma^a_bc = delta^a_b w_c + delta^a_c w_b -
//! delta_bc w_a, and the curvature is constant, R^a_bcd = K (delta^a_c G_bd - delta^a_d G_bc)
//! with K = -2/(3 alpha) (checked against tests/reference/geometry.json in the tests).

use super::{FieldSpace, Local};
use crate::analysis::error::{AnalysisError, ErrorKind, RangeDefect};

/// The metric of one field of a product space.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Metric1 {
    /// g = 1.
    Flat,
    /// g = 1/(1 - u^2/(6 a))^2 with this a: a pole at |u| = sqrt(6 a).
    Pole(f64),
}

impl Metric1 {
    /// (g, g'/(2 g)) at u, or `None` at or beyond the pole.
    fn at(self, u: f64) -> Option<(f64, f64)> {
        match self {
            Metric1::Flat => Some((1.0, 0.0)),
            Metric1::Pole(a) => {
                let w = 1.0 - u * u / (6.0 * a);
                (w > 0.0).then(|| (1.0 / (w * w), u / (3.0 * a) / w))
            }
        }
    }
}

/// V = sum_a c_a (phi^a)^2 on G = diag(g_a(phi^a)).
#[derive(Debug, Clone, PartialEq)]
pub struct Diagonal {
    /// The coefficients c_a.
    pub c: Vec<f64>,
    /// Each field's metric.
    pub metric: Vec<Metric1>,
}

impl Diagonal {
    /// V = sum m_a^2 (phi^a)^2 / 2 with each field's metric the same.
    pub fn quadratic<const N: usize>(m2: [f64; N], metric: Metric1) -> Diagonal {
        Diagonal {
            c: m2.iter().map(|m| 0.5 * m).collect(),
            metric: vec![metric; N],
        }
    }
}

impl FieldSpace for Diagonal {
    fn n_fields(&self) -> usize {
        self.c.len()
    }

    fn field_names(&self) -> Vec<String> {
        (0..self.c.len()).map(|a| format!("phi{a}")).collect()
    }

    fn local(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError> {
        let n = self.c.len();
        at.v = 0.0;
        // Only the Gamma^a_aa are written below: the rest of `at` (made with `Local::zeros`)
        // stays zero, R^a_bcd included (the space is flat).
        for a in 0..n {
            let Some((g, half_log_slope)) = self.metric[a].at(phi[a]) else {
                return Err(ErrorKind::BadInRange {
                    field: format!("phi{a}"),
                    at: phi[a],
                    defect: RangeDefect::KNotFinite(f64::INFINITY),
                }
                .into());
            };
            at.v += self.c[a] * phi[a] * phi[a];
            at.dv[a] = 2.0 * self.c[a] * phi[a];
            for b in 0..n {
                let d = if a == b { 1.0 } else { 0.0 };
                at.ddv[(a, b)] = 2.0 * self.c[a] * d;
                at.g[(a, b)] = g * d;
                at.g_inv[(a, b)] = d / g;
            }
            at.gamma[(a * n + a) * n + a] = half_log_slope;
        }
        Ok(())
    }
}

/// The Poincaré disk G = 6 alpha (dx^2 + dy^2)/(1 - x^2 - y^2)^2 with V = x^2 + y^2.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Disk {
    /// alpha.
    pub alpha: f64,
}

impl FieldSpace for Disk {
    fn n_fields(&self) -> usize {
        2
    }

    fn field_names(&self) -> Vec<String> {
        vec!["x".into(), "y".into()]
    }

    fn local(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError> {
        let (x, y) = (phi[0], phi[1]);
        let q = 1.0 - x * x - y * y;
        if q <= 0.0 {
            return Err(ErrorKind::BadInRange {
                field: "x".into(),
                at: x,
                defect: RangeDefect::KNotFinite(f64::INFINITY),
            }
            .into());
        }
        let e2w = 6.0 * self.alpha / (q * q);
        let dw = [2.0 * x / q, 2.0 * y / q];
        let k = -2.0 / (3.0 * self.alpha);
        at.v = x * x + y * y;
        at.dv.copy_from_slice(&[2.0 * x, 2.0 * y]);
        for a in 0..2 {
            for b in 0..2 {
                let d = |i: usize, j: usize| if i == j { 1.0 } else { 0.0 };
                at.ddv[(a, b)] = 2.0 * d(a, b);
                at.g[(a, b)] = e2w * d(a, b);
                at.g_inv[(a, b)] = d(a, b) / e2w;
                for c in 0..2 {
                    at.gamma[(a * 2 + b) * 2 + c] = d(a, b) * dw[c] + d(a, c) * dw[b] - d(b, c) * dw[a];
                    for e in 0..2 {
                        at.riemann[((a * 2 + b) * 2 + c) * 2 + e] =
                            k * (d(a, c) * e2w * d(b, e) - d(a, e) * e2w * d(b, c));
                    }
                }
            }
        }
        Ok(())
    }
}
