//! [`FieldSpace`] for a compiled model of several fields: [`ModelFieldSpace`].
//!
//! One evaluation of the model's tape at the point gives V, d_a V, d_a d_b V, G_ab and the
//! first and second partials d_c G_ab, d_c d_d G_ab, all symbolic (the model's
//! [`crate::model::Layout`] with its geometry block). From them, with no finite differences:
//!
//! - G, checked positive definite by the exact Cholesky test of [`crate::model::Metric`], and
//!   G^ab from the factor;
//! - Gamma^a_bc = G^ad Gamma_dbc with Gamma_dbc = 1/2 (d_b G_dc + d_c G_db - d_d G_bc);
//! - d_e Gamma^a_bc = G^ad (d_e Gamma_dbc - (d_e G_dg) Gamma^g_bc), which is the product rule
//!   with d_e G^ad = -G^af (d_e G_fg) G^gd (own derivation: G^ad G_dg = delta^a_g);
//! - R^a_bcd = d_c Gamma^a_db - d_d Gamma^a_cb + Gamma^a_ce Gamma^e_db - Gamma^a_de Gamma^e_cb
//!   (the convention of [`super`]).
//!
//! Accuracy: exact up to rounding (no tolerance, no truncation): a few ulps of the inputs
//! times the condition number of G for G^-1 and everything built on it. Work per point
//! O(n^5) for n fields; the tape's outputs and the tensors' buffers are allocated once, in
//! [`ModelFieldSpace::new`] (the metric's check and inverse make small n x n matrices).

use super::{FieldSpace, Local};
use crate::analysis::error::{AnalysisError, ErrorKind};
use crate::language::tape::Evaluator;
use crate::model::{Layout, MetricError, Model};

/// The field space of a compiled model of several fields: evaluates [`Local`] at a point
/// from the model's tape.
///
/// ```
/// use efold::analysis::multi::{space::ModelFieldSpace, FieldSpace, Local};
/// use efold::config::Config;
/// use efold::model::{Model, ModelSpec};
/// let text = "fields = [\"x\", \"y\"]\npotential = \"x^2 + y^2\"\n\
///             [metric]\nx = \"1\"\ny = \"exp(2*x)\"\n[start]\nx = 1\ny = 0\n";
/// let model = Model::build(&ModelSpec::from_toml(text, "m.toml")?, &Config::default())?;
/// let mut space = ModelFieldSpace::new(&model).expect("two fields");
/// let mut at = Local::zeros(2);
/// space.local(&[0.5, 1.0], &mut at).unwrap();
/// assert_eq!(at.v, 1.25);
/// let gamma = -f64::exp(1.0); // Gamma^x_yy = -1/2 G^xx d_x G_yy = -e^(2x) (own derivation)
/// assert!((at.gamma(0, 1, 1) - gamma).abs() < 1e-15 * gamma.abs());
/// # Ok::<(), efold::model::ModelError>(())
/// ```
pub struct ModelFieldSpace<'m> {
    model: &'m Model,
    layout: Layout,
    ev: Evaluator<'m>,
    /// The tape's outputs at the last point.
    outputs: Vec<f64>,
    /// d_c G_ab at `(c * n + a) * n + b`.
    dg: Vec<f64>,
    /// d_c d_d G_ab at `((c * n + d) * n + a) * n + b`.
    ddg: Vec<f64>,
    /// Gamma_dbc (first index lowered) at `(d * n + b) * n + c`.
    gamma_low: Vec<f64>,
    /// d_e Gamma^a_bc at `((e * n + a) * n + b) * n + c`.
    dgamma: Vec<f64>,
    /// d_e Gamma_dbc - (d_e G_dg) Gamma^g_bc at `((e * n + d) * n + b) * n + c`.
    inner: Vec<f64>,
}

impl<'m> ModelFieldSpace<'m> {
    /// The field space of `model`; `None` for a model of one field (its tape has no geometry
    /// block).
    pub fn new(model: &'m Model) -> Option<ModelFieldSpace<'m>> {
        let layout = model.layout();
        if !layout.has_geometry() {
            return None;
        }
        let n = layout.fields();
        Some(ModelFieldSpace {
            model,
            layout,
            ev: model.evaluator(),
            outputs: vec![0.0; layout.n_outputs()],
            dg: vec![0.0; n * n * n],
            ddg: vec![0.0; n * n * n * n],
            gamma_low: vec![0.0; n * n * n],
            dgamma: vec![0.0; n * n * n * n],
            inner: vec![0.0; n * n * n * n],
        })
    }

    /// The model.
    pub fn model(&self) -> &'m Model {
        self.model
    }

    /// The start of the model's background: the `[start]` point and its velocity dphi^a/dN,
    /// the `[start.velocity]` given or else the slow-roll attractor's, -G^ab d_b V / V.
    pub fn start(&mut self) -> Result<(Vec<f64>, Vec<f64>), AnalysisError> {
        let phi = self
            .model
            .start()
            .expect("a model of several fields has a start")
            .to_vec();
        if let Some(v) = self.model.start_velocity() {
            return Ok((phi, v.to_vec()));
        }
        let mut at = Local::zeros(phi.len());
        self.local(&phi, &mut at)?;
        let pi = attractor_velocity(&at);
        Ok((phi, pi))
    }

    /// An error naming `what` at `phi` when `value` is not finite.
    fn finite(&self, phi: &[f64], what: impl FnOnce() -> String, value: f64) -> Result<f64, AnalysisError> {
        if value.is_finite() {
            return Ok(value);
        }
        Err(ErrorKind::FieldSpaceNotFinite {
            fields: self.model.field_names().to_vec(),
            point: phi.to_vec(),
            what: what(),
            value,
        }
        .into())
    }

    /// V, its gradient and Hessian, and the partials of the metric into `at` and the buffers,
    /// each checked finite.
    fn read_derivatives(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError> {
        let (n, l) = (self.layout.fields(), self.layout);
        let names = self.model.field_names();
        at.v = self.finite(phi, || "V".into(), self.outputs[l.v()])?;
        for a in 0..n {
            let i = l.grad(a).expect("a field");
            at.dv[a] = self.finite(phi, || format!("d_{} V", names[a]), self.outputs[i])?;
            for b in 0..n {
                let i = l.hessian(a, b).expect("a field");
                let what = || format!("d_{} d_{} V", names[a], names[b]);
                at.ddv[(a, b)] = self.finite(phi, what, self.outputs[i])?;
            }
        }
        for a in 0..n {
            for b in 0..n {
                for c in 0..n {
                    let first = l.metric_partial(a, b, c).map_or(0.0, |i| self.outputs[i]);
                    let what = || format!("d_{} G_{}{}", names[c], names[a], names[b]);
                    self.dg[(c * n + a) * n + b] = self.finite(phi, what, first)?;
                    for d in 0..n {
                        let second = l.metric_second_partial(a, b, c, d).map_or(0.0, |i| self.outputs[i]);
                        let what = || format!("d_{} d_{} G_{}{}", names[c], names[d], names[a], names[b]);
                        self.ddg[((c * n + d) * n + a) * n + b] = self.finite(phi, what, second)?;
                    }
                }
            }
        }
        Ok(())
    }

    /// Gamma_dbc, Gamma^a_bc and d_e Gamma^a_bc from G^-1 and the metric's partials.
    fn christoffel(&mut self, at: &mut Local) {
        let n = self.layout.fields();
        let dg = |c: usize, a: usize, b: usize| self.dg[(c * n + a) * n + b];
        for d in 0..n {
            for b in 0..n {
                for c in 0..n {
                    self.gamma_low[(d * n + b) * n + c] = 0.5 * (dg(b, d, c) + dg(c, d, b) - dg(d, b, c));
                }
            }
        }
        for a in 0..n {
            for b in 0..n {
                for c in 0..n {
                    let s: f64 = (0..n)
                        .map(|d| at.g_inv[(a, d)] * self.gamma_low[(d * n + b) * n + c])
                        .sum();
                    at.gamma[(a * n + b) * n + c] = s;
                }
            }
        }
        let ddg = |e: usize, c: usize, a: usize, b: usize| self.ddg[((e * n + c) * n + a) * n + b];
        // inner[e, d, b, c] = d_e Gamma_dbc - (d_e G_dg) Gamma^g_bc, then contracted with G^ad:
        // two passes of O(n^5) rather than one of O(n^6).
        for e in 0..n {
            for d in 0..n {
                for b in 0..n {
                    for c in 0..n {
                        let dlow = 0.5 * (ddg(e, b, d, c) + ddg(e, c, d, b) - ddg(e, d, b, c));
                        let turn: f64 = (0..n).map(|g| dg(e, d, g) * at.gamma[(g * n + b) * n + c]).sum();
                        self.inner[((e * n + d) * n + b) * n + c] = dlow - turn;
                    }
                }
            }
        }
        for e in 0..n {
            for a in 0..n {
                for b in 0..n {
                    for c in 0..n {
                        let s: f64 = (0..n)
                            .map(|d| at.g_inv[(a, d)] * self.inner[((e * n + d) * n + b) * n + c])
                            .sum();
                        self.dgamma[((e * n + a) * n + b) * n + c] = s;
                    }
                }
            }
        }
    }

    /// R^a_bcd from Gamma and its partials.
    fn riemann(&self, at: &mut Local) {
        let n = self.layout.fields();
        let gamma = |a: usize, b: usize, c: usize| at.gamma[(a * n + b) * n + c];
        let dgamma = |e: usize, a: usize, b: usize, c: usize| self.dgamma[((e * n + a) * n + b) * n + c];
        let mut riemann = std::mem::take(&mut at.riemann);
        for a in 0..n {
            for b in 0..n {
                for c in 0..n {
                    for d in 0..n {
                        let quadratic: f64 = (0..n)
                            .map(|e| gamma(a, c, e) * gamma(e, d, b) - gamma(a, d, e) * gamma(e, c, b))
                            .sum();
                        riemann[((a * n + b) * n + c) * n + d] = dgamma(c, a, d, b) - dgamma(d, a, c, b) + quadratic;
                    }
                }
            }
        }
        at.riemann = riemann;
    }
}

/// The slow-roll attractor's velocity at a point, dphi^a/dN = -G^ab d_b V / V.
pub fn attractor_velocity(at: &Local) -> Vec<f64> {
    let n = at.n();
    (0..n)
        .map(|a| -(0..n).map(|b| at.g_inv[(a, b)] * at.dv[b]).sum::<f64>() / at.v)
        .collect()
}

impl FieldSpace for ModelFieldSpace<'_> {
    fn n_fields(&self) -> usize {
        self.layout.fields()
    }

    fn field_names(&self) -> Vec<String> {
        self.model.field_names().to_vec()
    }

    fn local(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError> {
        let n = self.layout.fields();
        if phi.len() != n || at.n() != n {
            let given = if phi.len() != n { phi.len() } else { at.n() };
            return Err(ErrorKind::PointDimension { fields: n, given }.into());
        }
        self.ev.eval_at(phi);
        for (i, o) in self.outputs.iter_mut().enumerate() {
            *o = self.ev.output(i);
        }
        let names = self.model.field_names();
        let g = self.layout.metric().read(&self.outputs, phi).map_err(|e| match e {
            MetricError::NotFinite { a, b, value, .. } => ErrorKind::FieldSpaceNotFinite {
                fields: names.to_vec(),
                point: phi.to_vec(),
                what: format!("G_{}{}", names[a], names[b]),
                value,
            },
            MetricError::NotPositive { a, pivot, .. } => ErrorKind::MetricNotPositiveDefinite {
                fields: names.to_vec(),
                point: phi.to_vec(),
                row: a,
                pivot,
            },
            MetricError::MissingOutputs { .. } => unreachable!("the layout that compiled the tape reads it"),
        })?;
        at.g.copy_from(g.matrix());
        at.g_inv.copy_from(&g.inverse());
        self.read_derivatives(phi, at)?;
        self.christoffel(at);
        self.riemann(at);
        Ok(())
    }
}
