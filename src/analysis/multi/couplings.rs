//! Couplings in canonical variables at a point of the trajectory: the covariant derivatives of
//! V up to order 3 contracted with an orthonormal frame, in units of V.
//!
//! Frame: T^a = pi^a/|pi| the unit tangent (pi = dphi/dN). For two fields N is the unit normal
//! of [`super::trajectory::normal`], T turned by +90 degrees, N^a = (-T_1, T_0)/sqrt(det G)
//! (T_a = G_ab T^b). For n > 2 fields the normals N_1 .. N_{n-1} are the coordinate directions
//! e_0, e_1, ... made orthonormal against T and each other by Gram–Schmidt in the metric G (a
//! direction whose remainder is below [`crate::config::FRAME_GRAM_SCHMIDT_CUT`] of its length
//! is skipped); the couplings reported
//! are the documented subset with N = N_1, the first of them, and the frame's vectors are
//! reported with them.
//!
//! Derivatives (Gamma^a_bc and index order as in [`super`]):
//!
//! - V_;a = d_a V, V_;ab = d_a d_b V - Gamma^d_ab V_d (symmetric);
//! - V_;abc = D_c V_;ab = d_c V_;ab - Gamma^e_ca V_;eb - Gamma^e_cb V_;ae with
//!   d_c V_;ab = d_a d_b d_c V - (d_c Gamma^d_ab) V_d - Gamma^d_ab d_c d_d V, and
//!   d_c Gamma^a_bd = G^ae (d_c Gamma_ebd - (d_c G_ef) Gamma^f_bd) (as in [`super::space`]);
//! - V_;abc is symmetric in a, b; its part antisymmetric in b, c is fixed by the Riemann
//!   tensor (the Ricci identity) and does not vanish on a curved field space, so the reported
//!   third derivatives are those of
//!   the totally symmetrised tensor V_(;abc) = (V_;abc + V_;bca + V_;cab)/3 (the three places
//!   of the derivative index; V_;abc = V_;bac makes this the average over all six orders). On a
//!   flat field space it is V_;abc itself.
//!
//! Contractions: V_X = V_;a X^a, V_XY = V_;ab X^a Y^b, V_XYZ = V_(;abc) X^a Y^b Z^c, each
//! divided by V. The third partials of V are compiled on a tape of their own, once per call
//! (the model's main tape, evaluated at every integration step, does not carry them); every
//! number is exact up to rounding (symbolic derivatives, no differences).

use super::space::ModelFieldSpace;
use super::trajectory::normal;
use super::{FieldSpace, Local};
use crate::analysis::error::AnalysisError;
use crate::config::FRAME_GRAM_SCHMIDT_CUT;
use crate::language::tape::Tape;
use crate::model::Model;
use nalgebra::DVector;
use serde::Serialize;

/// The frame couplings at one point, in units of V (module docs).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[allow(non_snake_case)]
pub struct Couplings {
    /// V_T / V.
    pub V_T: f64,
    /// V_TT / V.
    pub V_TT: f64,
    /// V_TN / V.
    pub V_TN: f64,
    /// V_NN / V.
    pub V_NN: f64,
    /// V_TTT / V.
    pub V_TTT: f64,
    /// V_TTN / V.
    pub V_TTN: f64,
    /// V_TNN / V.
    pub V_TNN: f64,
    /// V_NNN / V.
    pub V_NNN: f64,
}

/// The couplings and the frame they are taken in.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FrameCouplings {
    /// The couplings.
    pub couplings: Couplings,
    /// T^a, field coordinates.
    pub tangent: Vec<f64>,
    /// N^a (N_1 for more than two fields), field coordinates.
    pub normal: Vec<f64>,
}

/// The covariant derivatives of V at a point: V_;a, V_;ab and the symmetrised V_(;abc) at
/// `(a * n + b) * n + c`.
#[derive(Debug, Clone, PartialEq)]
pub struct CovariantDerivatives {
    /// V.
    pub v: f64,
    /// V_;a.
    pub first: Vec<f64>,
    /// V_;ab, row by row (`a * n + b`).
    pub second: Vec<f64>,
    /// V_(;abc).
    pub third: Vec<f64>,
}

/// d_a d_b d_c V for a <= b <= c on a tape of its own, in that order.
fn third_partials(model: &Model, phi: &[f64]) -> Vec<f64> {
    let n = phi.len();
    let mut graph = model.compiled.graph.clone();
    let v = model.compiled.roots[model.layout().v()];
    let mut roots = Vec::new();
    for a in 0..n {
        let va = graph.partial(v, a);
        for b in a..n {
            let vab = graph.partial(va, b);
            for c in b..n {
                roots.push(graph.partial(vab, c));
            }
        }
    }
    let tape = Tape::compile(&graph, &roots);
    let mut ev = tape.evaluator(&model.params);
    ev.eval_at(phi);
    (0..roots.len()).map(|i| ev.output(i)).collect()
}

/// d_c Gamma^a_bd at `((c * n + a) * n + b) * n + d`, from the model's first and second
/// partials of G at `phi` and the Christoffel symbols in `l`.
fn christoffel_partials(model: &Model, phi: &[f64], l: &Local) -> Vec<f64> {
    let n = phi.len();
    let layout = model.layout();
    let mut ev = model.evaluator();
    ev.eval_at(phi);
    let dg = |a: usize, b: usize, c: usize| layout.metric_partial(a, b, c).map_or(0.0, |i| ev.output(i));
    let ddg =
        |a: usize, b: usize, c: usize, d: usize| layout.metric_second_partial(a, b, c, d).map_or(0.0, |i| ev.output(i));
    let mut out = vec![0.0; n * n * n * n];
    for c in 0..n {
        for a in 0..n {
            for b in 0..n {
                for d in 0..n {
                    let mut s = 0.0;
                    for e in 0..n {
                        // d_c Gamma_ebd = 1/2 (d_c d_b G_ed + d_c d_d G_eb - d_c d_e G_bd)
                        let dlow = 0.5 * (ddg(e, d, c, b) + ddg(e, b, c, d) - ddg(b, d, c, e));
                        let corr: f64 = (0..n).map(|f| dg(e, f, c) * l.gamma(f, b, d)).sum();
                        s += l.g_inv[(a, e)] * (dlow - corr);
                    }
                    out[((c * n + a) * n + b) * n + d] = s;
                }
            }
        }
    }
    out
}

/// The covariant derivatives of V up to order 3 at `phi` (module docs).
pub fn covariant_derivatives(model: &Model, phi: &[f64]) -> Result<CovariantDerivatives, AnalysisError> {
    let n = phi.len();
    let mut space = ModelFieldSpace::new(model).expect("a model of several fields has a field space");
    let mut l = Local::zeros(n);
    space.local(phi, &mut l)?;
    let w = l.covariant_hessian();
    let dgamma = christoffel_partials(model, phi, &l);
    let raw = third_partials(model, phi);
    let idx3 = |a: usize, b: usize, c: usize| {
        let mut s = [a, b, c];
        s.sort_unstable();
        // position of (s0 <= s1 <= s2) in the loop order of `third_partials`
        let mut k = 0;
        for i in 0..n {
            for j in i..n {
                for m in j..n {
                    if [i, j, m] == s {
                        return k;
                    }
                    k += 1;
                }
            }
        }
        unreachable!("indices are fields")
    };
    // T_abc = D_c V_;ab
    let mut t = vec![0.0; n * n * n];
    for a in 0..n {
        for b in 0..n {
            for c in 0..n {
                let mut d_c_w = raw[idx3(a, b, c)];
                for d in 0..n {
                    d_c_w -= dgamma[((c * n + d) * n + a) * n + b] * l.dv[d] + l.gamma(d, a, b) * l.ddv[(d, c)];
                }
                let conn: f64 = (0..n)
                    .map(|e| l.gamma(e, c, a) * w[(e, b)] + l.gamma(e, c, b) * w[(a, e)])
                    .sum();
                t[(a * n + b) * n + c] = d_c_w - conn;
            }
        }
    }
    let third = (0..n * n * n)
        .map(|i| {
            let (a, b, c) = (i / (n * n), (i / n) % n, i % n);
            (t[(a * n + b) * n + c] + t[(b * n + c) * n + a] + t[(c * n + a) * n + b]) / 3.0
        })
        .collect();
    Ok(CovariantDerivatives {
        v: l.v,
        first: l.dv.clone(),
        second: (0..n * n).map(|i| w[(i / n, i % n)]).collect(),
        third,
    })
}

/// The unit tangent and the normals of the frame at a point (module docs).
fn frame(l: &Local, pi: &[f64]) -> (Vec<f64>, Vec<Vec<f64>>) {
    let n = l.n();
    let g = |x: &[f64], y: &[f64]| {
        (DVector::from_column_slice(x).transpose() * &l.g * DVector::from_column_slice(y))[(0, 0)]
    };
    let norm = g(pi, pi).sqrt();
    let t: Vec<f64> = pi.iter().map(|p| p / norm).collect();
    if n == 2 {
        return (t.clone(), vec![normal(l, &t)]);
    }
    let mut basis = vec![t.clone()];
    for a in 0..n {
        let mut e = vec![0.0; n];
        e[a] = 1.0;
        let length = g(&e, &e).sqrt();
        for b in basis.clone() {
            let p = g(&e, &b);
            e.iter_mut().zip(&b).for_each(|(x, y)| *x -= p * y);
        }
        let rest = g(&e, &e).max(0.0).sqrt();
        if rest > FRAME_GRAM_SCHMIDT_CUT * length && basis.len() < n {
            basis.push(e.iter().map(|x| x / rest).collect());
        }
    }
    (t, basis[1..].to_vec())
}

/// The frame couplings of `model` at `phi` with velocity `pi` (module docs). An error where
/// the geometry at the point is not defined.
pub fn couplings(model: &Model, phi: &[f64], pi: &[f64]) -> Result<FrameCouplings, AnalysisError> {
    let n = phi.len();
    let d = covariant_derivatives(model, phi)?;
    let mut space = ModelFieldSpace::new(model).expect("a model of several fields has a field space");
    let mut l = Local::zeros(n);
    space.local(phi, &mut l)?;
    let (t, normals) = frame(&l, pi);
    let nn = normals[0].clone();
    let c1 = |x: &[f64]| (0..n).map(|a| d.first[a] * x[a]).sum::<f64>() / d.v;
    let c2 = |x: &[f64], y: &[f64]| (0..n * n).map(|i| d.second[i] * x[i / n] * y[i % n]).sum::<f64>() / d.v;
    let c3 = |x: &[f64], y: &[f64], z: &[f64]| {
        (0..n * n * n)
            .map(|i| d.third[i] * x[i / (n * n)] * y[(i / n) % n] * z[i % n])
            .sum::<f64>()
            / d.v
    };
    Ok(FrameCouplings {
        couplings: Couplings {
            V_T: c1(&t),
            V_TT: c2(&t, &t),
            V_TN: c2(&t, &nn),
            V_NN: c2(&nn, &nn),
            V_TTT: c3(&t, &t, &t),
            V_TTN: c3(&t, &t, &nn),
            V_TNN: c3(&t, &nn, &nn),
            V_NNN: c3(&nn, &nn, &nn),
        },
        tangent: t,
        normal: nn,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::Config;
    use crate::model::ModelSpec;

    fn build(text: &str) -> Model {
        Model::build(&ModelSpec::from_toml(text, "m.toml").unwrap(), &Config::default()).unwrap()
    }

    /// Three flat fields, V = x^3 + y z + 2: V_;abc = d_a d_b d_c V, only V_xxx = 6 (own
    /// derivation); T along x gives V_TTT/V = 6/V, and the Gram–Schmidt normals are y and z
    /// (x drops out against T).
    #[test]
    fn three_flat_fields_frame_and_third_derivative() {
        let m = build(
            "fields = [\"x\", \"y\", \"z\"]\npotential = \"x^3 + y*z + 2\"\n[metric]\nx = 1\ny = 1\nz = 1\n\
             [start]\nx = 1\ny = 1\nz = 1\n",
        );
        let f = couplings(&m, &[1.0, 0.5, 0.25], &[-2.0, 0.0, 0.0]).unwrap();
        let v = 1.0 + 0.125 + 2.0;
        assert_eq!(f.tangent, vec![-1.0, 0.0, 0.0]);
        assert_eq!(f.normal, vec![0.0, 1.0, 0.0]);
        assert!((f.couplings.V_TTT + 6.0 / v).abs() < 1e-14, "{f:?}");
        assert!((f.couplings.V_T + 3.0 / v).abs() < 1e-14, "{f:?}");
        assert!((f.couplings.V_NN).abs() < 1e-14, "{f:?}");
    }
}
