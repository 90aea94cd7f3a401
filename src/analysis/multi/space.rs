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
use nalgebra::DMatrix;

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
    /// The background's part of the tape, and where each of its outputs goes in `outputs`.
    bg: Evaluator<'m>,
    bg_outputs: &'m [usize],
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
    /// What the metric's form makes zero, found once from the tape.
    form: Form,
    /// The lower Cholesky factor L of G at the last point, row by row, and L^-1.
    chol: Vec<f64>,
    chol_inv: Vec<f64>,
    /// The output of each G_ab, column-major as the matrices are stored.
    components: Vec<Option<usize>>,
    /// Whether every G_ab is the same at every point, and then G and G^-1 once computed.
    metric_fixed: bool,
    fixed_ready: bool,
    fixed_g: DMatrix<f64>,
    fixed_g_inv: DMatrix<f64>,
}

/// What the form of a metric makes zero at every point, as the tape shows it: an output that
/// does not depend on the fields and is zero at one point is zero everywhere.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Form {
    /// Every d_c G_ab is zero: Gamma and R^a_bcd vanish.
    Constant,
    /// G is diagonal and G_aa depends on phi^a alone: the only Christoffel symbols are
    /// Gamma^a_aa = d_a G_aa / (2 G_aa), and R^a_bcd = 0 (a product of one-field spaces,
    /// each flat by a change of its own coordinate; common practice).
    Separable,
    /// Anything else: the full computation.
    General,
}

impl Form {
    /// The form of `layout`'s metric on the evaluator's tape.
    fn of(layout: Layout, ev: &mut Evaluator<'_>) -> Form {
        let n = layout.fields();
        ev.eval_at(&vec![0.0; n]);
        let zero = |i: Option<usize>| i.is_none_or(|i| !ev.output_varies(i) && ev.output(i) == 0.0);
        let mut constant = true;
        let mut separable = true;
        for a in 0..n {
            for b in 0..n {
                if a != b && !zero(layout.component(a, b)) {
                    separable = false;
                }
                for c in 0..n {
                    let flat = zero(layout.metric_partial(a, b, c));
                    constant &= flat;
                    if !flat && (a != b || c != a) {
                        separable = false;
                    }
                }
            }
        }
        match (constant, separable) {
            (true, _) => Form::Constant,
            (false, true) => Form::Separable,
            (false, false) => Form::General,
        }
    }
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
        let mut ev = model.evaluator();
        let form = Form::of(layout, &mut ev);
        let components: Vec<Option<usize>> = (0..n * n).map(|k| layout.component(k % n, k / n)).collect();
        let metric_fixed = components.iter().flatten().all(|&i| !ev.output_varies(i));
        let (bg, bg_outputs) = model.background_evaluator()?;
        Some(ModelFieldSpace {
            model,
            layout,
            ev,
            bg,
            bg_outputs,
            outputs: vec![0.0; layout.n_outputs()],
            dg: vec![0.0; n * n * n],
            ddg: vec![0.0; n * n * n * n],
            gamma_low: vec![0.0; n * n * n],
            dgamma: vec![0.0; n * n * n * n],
            inner: vec![0.0; n * n * n * n],
            form,
            chol: vec![0.0; n * n],
            chol_inv: vec![0.0; n * n],
            components,
            metric_fixed,
            fixed_ready: false,
            fixed_g: DMatrix::zeros(n, n),
            fixed_g_inv: DMatrix::zeros(n, n),
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

    /// V and its gradient into `at`, each checked finite.
    fn read_gradient(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError> {
        let (n, l) = (self.layout.fields(), self.layout);
        at.v = self.outputs[l.v()];
        let mut finite = at.v.is_finite();
        for (a, dv) in at.dv.iter_mut().enumerate() {
            // A layout of several fields keeps d_a V at 1 + a (Layout::grad).
            debug_assert_eq!(l.grad(a), Some(1 + a));
            *dv = self.outputs[1 + a];
            finite &= dv.is_finite();
        }
        if finite {
            return Ok(());
        }
        let names = self.model.field_names();
        self.finite(phi, || "V".into(), at.v)?;
        for a in 0..n {
            let i = l.grad(a).expect("a field");
            self.finite(phi, || format!("d_{} V", names[a]), self.outputs[i])?;
        }
        Ok(())
    }

    /// The Hessian d_a d_b V into `at`, checked finite.
    fn read_hessian(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError> {
        let (n, l) = (self.layout.fields(), self.layout);
        let names = self.model.field_names();
        for a in 0..n {
            for b in 0..n {
                let i = l.hessian(a, b).expect("a field");
                let what = || format!("d_{} d_{} V", names[a], names[b]);
                at.ddv[(a, b)] = self.finite(phi, what, self.outputs[i])?;
            }
        }
        Ok(())
    }

    /// The metric's first partials d_c G_ab into their buffer (for a separable metric only
    /// the d_a G_aa it has), and with `second` the second partials too, each checked finite.
    fn read_metric_partials(&mut self, phi: &[f64], second: bool) -> Result<(), AnalysisError> {
        let (n, l) = (self.layout.fields(), self.layout);
        let names = self.model.field_names();
        for a in 0..n {
            for b in 0..n {
                for c in 0..n {
                    if self.form == Form::Separable && (a != b || c != a) {
                        self.dg[(c * n + a) * n + b] = 0.0;
                        continue;
                    }
                    let first = l.metric_partial(a, b, c).map_or(0.0, |i| self.outputs[i]);
                    let what = || format!("d_{} G_{}{}", names[c], names[a], names[b]);
                    self.dg[(c * n + a) * n + b] = self.finite(phi, what, first)?;
                    if !second {
                        continue;
                    }
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

    /// G and G^-1 into `at` from the tape's outputs, by a Cholesky factor kept in the scratch
    /// (no allocation); `false` where a component is not finite or a pivot is not positive,
    /// which [`Metric::read`](crate::model::Metric::read) then diagnoses.
    fn metric_in_place(&mut self, at: &mut Local) -> bool {
        if self.metric_fixed && self.fixed_ready {
            at.g.copy_from(&self.fixed_g);
            at.g_inv.copy_from(&self.fixed_g_inv);
            return true;
        }
        let mut finite = true;
        for (k, g) in at.g.as_mut_slice().iter_mut().enumerate() {
            // Column-major, as `components`.
            *g = self.components[k].map_or(0.0, |i| self.outputs[i]);
            finite &= g.is_finite();
        }
        if !finite {
            return false;
        }
        let ok = if self.form == Form::Constant || self.form == Form::Separable {
            Self::diagonal_inverse(at)
        } else {
            self.cholesky_inverse(at)
        };
        if ok && self.metric_fixed {
            self.fixed_g.copy_from(&at.g);
            self.fixed_g_inv.copy_from(&at.g_inv);
            self.fixed_ready = true;
        }
        ok
    }

    /// G^-1 of a diagonal G (a separable or constant metric whose off-diagonal entries are
    /// zero by its form), each G_aa checked positive; `false` where one is not.
    fn diagonal_inverse(at: &mut Local) -> bool {
        let n = at.n();
        if (0..n).any(|a| (0..n).any(|b| a != b && at.g[(a, b)] != 0.0)) {
            return false;
        }
        at.g_inv.fill(0.0);
        for a in 0..n {
            let g = at.g[(a, a)];
            if g.is_nan() || g <= 0.0 {
                return false;
            }
            at.g_inv[(a, a)] = 1.0 / g;
        }
        true
    }

    /// G^-1 by the Cholesky factor G = L L^T kept in the scratch; `false` where a pivot is not
    /// positive.
    fn cholesky_inverse(&mut self, at: &mut Local) -> bool {
        let n = at.n();
        let (l, li) = (&mut self.chol, &mut self.chol_inv);
        // G = L L^T, row by row (the test of Metric::read).
        for j in 0..n {
            let pivot = at.g[(j, j)] - (0..j).map(|k| l[j * n + k] * l[j * n + k]).sum::<f64>();
            if pivot.is_nan() || pivot <= 0.0 {
                return false;
            }
            let ljj = pivot.sqrt();
            l[j * n + j] = ljj;
            for i in j + 1..n {
                let s = at.g[(i, j)] - (0..j).map(|k| l[i * n + k] * l[j * n + k]).sum::<f64>();
                l[i * n + j] = s / ljj;
            }
        }
        // L^-1 (lower triangular) by forward substitution, then G^-1 = L^-T L^-1.
        for i in 0..n {
            li[i * n + i] = 1.0 / l[i * n + i];
            for j in 0..i {
                let s: f64 = (j..i).map(|k| l[i * n + k] * li[k * n + j]).sum();
                li[i * n + j] = -s / l[i * n + i];
            }
        }
        for a in 0..n {
            for b in 0..=a {
                let s: f64 = (a..n).map(|k| li[k * n + a] * li[k * n + b]).sum();
                at.g_inv[(a, b)] = s;
                at.g_inv[(b, a)] = s;
            }
        }
        true
    }

    /// Gamma_dbc and Gamma^a_bc from G^-1 and the metric's first partials.
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
    }

    /// d_e Gamma^a_bc from G^-1, Gamma and the metric's first and second partials.
    fn christoffel_derivative(&mut self, at: &Local) {
        let n = self.layout.fields();
        let dg = |c: usize, a: usize, b: usize| self.dg[(c * n + a) * n + b];
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
        self.check_dimension(phi, at)?;
        self.ev.eval_at(phi);
        for (i, o) in self.outputs.iter_mut().enumerate() {
            *o = self.ev.output(i);
        }
        self.background_from_outputs(phi, at)?;
        self.read_hessian(phi, at)?;
        if self.form == Form::General {
            self.read_metric_partials(phi, true)?;
            self.christoffel_derivative(at);
            self.riemann(at);
        } else {
            at.riemann.fill(0.0);
        }
        Ok(())
    }

    fn local_background(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError> {
        self.check_dimension(phi, at)?;
        self.bg.eval_at(phi);
        for (k, &i) in self.bg_outputs.iter().enumerate() {
            self.outputs[i] = self.bg.output(k);
        }
        self.background_from_outputs(phi, at)
    }
}

impl ModelFieldSpace<'_> {
    /// An error unless `phi` and `at` have one entry per field.
    fn check_dimension(&self, phi: &[f64], at: &Local) -> Result<(), AnalysisError> {
        let n = self.layout.fields();
        if phi.len() != n || at.n() != n {
            let given = if phi.len() != n { phi.len() } else { at.n() };
            return Err(ErrorKind::PointDimension { fields: n, given }.into());
        }
        Ok(())
    }

    /// V, d_a V, G, G^-1 and Gamma into `at` from the background's outputs in `outputs`.
    fn background_from_outputs(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError> {
        let n = self.layout.fields();
        if !self.metric_in_place(at) {
            self.metric_error(phi, at)?;
        }
        self.read_gradient(phi, at)?;
        at.curved = self.form == Form::General;
        match self.form {
            Form::Constant => at.gamma.fill(0.0),
            Form::Separable => {
                self.read_metric_partials(phi, false)?;
                at.gamma.fill(0.0);
                for a in 0..n {
                    at.gamma[(a * n + a) * n + a] = 0.5 * self.dg[(a * n + a) * n + a] / at.g[(a, a)];
                }
            }
            Form::General => {
                self.read_metric_partials(phi, false)?;
                self.christoffel(at);
            }
        }
        Ok(())
    }
}

impl ModelFieldSpace<'_> {
    /// The metric's own diagnosis where the in-place factor failed: a component that is not
    /// finite, or the Cholesky row whose pivot is not positive. (Should the metric's check
    /// pass after all, its G and G^-1 are used.)
    fn metric_error(&mut self, phi: &[f64], at: &mut Local) -> Result<(), AnalysisError> {
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
        Ok(())
    }
}
