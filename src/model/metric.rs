//! The kinetic part of a model as a field-space metric G_ab, in L = 1/2 G_ab dphi^a dphi^b - V.
//!
//! A [`Metric`] says which tape outputs hold the components (located through the model's
//! [`Layout`]); [`Metric::read`] turns one point's outputs into a [`MetricValue`], a small
//! symmetric matrix, after checking that it is positive definite. One field is the scalar
//! case G = K(phi): the value holds K and sqrt(K) exactly as the tape computes them.
//!
//! The check is exact, with no tolerance: a Cholesky factorisation G = L L^T whose pivots
//! (the squares of L's diagonal) must all be finite and positive; the first that is not names
//! the failure ([`MetricError`]). A value is therefore never built from a NaN.
//!
//! ```
//! use efold::config::Config;
//! use efold::model::{Model, ModelSpec};
//! let model = Model::build(&ModelSpec::inline("phi^2", Some("1 + phi^2")), &Config::default())?;
//! let mut ev = model.evaluator();
//! let g = model.metric().at(&mut ev, 2.0).unwrap();
//! assert_eq!((g.k(), g.determinant()), (5.0, 5.0));
//! assert_eq!(g.sqrt_k(), 5f64.sqrt());
//! assert!(model.metric().at(&mut ev, f64::NAN).is_err()); // K is NaN there
//! # Ok::<(), efold::model::ModelError>(())
//! ```

use super::layout::{Layout, MetricShape};
use crate::diag::Diagnostic;
use crate::language::tape::Evaluator;
use nalgebra::{Cholesky, DMatrix, Dyn};
use std::fmt;

/// Where a model's metric components sit among its tape's outputs.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Metric {
    /// One field, G = K(phi): the outputs of K and of sqrt(K).
    Scalar {
        /// The output holding K.
        k: usize,
        /// The output holding sqrt(K).
        sqrt_k: usize,
    },
    /// G_ab = 0 for a != b.
    Diagonal {
        /// The output of G_aa, for each field a.
        components: Vec<usize>,
        /// The output of sqrt(G_aa), for each field a.
        sqrt: Vec<usize>,
    },
    /// Any symmetric G_ab, each pair once.
    Full {
        /// The number of fields n.
        fields: usize,
        /// The outputs of G_ab for a <= b, row by row: G_00, G_01, ..., G_0(n-1), G_11, ...
        components: Vec<usize>,
        /// The output of sqrt(G_aa), for each field a.
        sqrt: Vec<usize>,
    },
}

/// A metric evaluated at one point: positive definite, every component finite.
#[derive(Debug, Clone)]
pub struct MetricValue {
    g: DMatrix<f64>,
    sqrt_diagonal: Vec<f64>,
    factor: Cholesky<f64, Dyn>,
}

/// Why a metric has no value at a point.
#[derive(Debug, Clone, PartialEq)]
pub enum MetricError {
    /// The component G_ab is not a finite number there.
    NotFinite {
        /// The point (the tape's input values).
        point: Vec<f64>,
        /// The component's row.
        a: usize,
        /// The component's column.
        b: usize,
        /// Its value: NaN or infinite.
        value: f64,
    },
    /// The metric is not positive definite there: the Cholesky pivot of row `a` (G_aa less
    /// the rows before it; G_00 itself for a = 0, K for one field) is not positive.
    NotPositive {
        /// The point (the tape's input values).
        point: Vec<f64>,
        /// The row whose pivot failed.
        a: usize,
        /// The pivot: zero, negative or NaN.
        pivot: f64,
    },
    /// The outputs given are fewer than the metric names (a tape of another layout).
    MissingOutputs {
        /// How many outputs there are.
        have: usize,
        /// How many the metric's layout needs.
        need: usize,
    },
}

impl Metric {
    /// The metric of a layout, its components located through it.
    pub fn of(layout: Layout) -> Metric {
        let n = layout.fields();
        let sqrt = (0..n).filter_map(|a| layout.sqrt_diagonal(a)).collect();
        match layout.shape() {
            MetricShape::Scalar => Metric::Scalar {
                k: layout.k(),
                sqrt_k: layout.sqrt_k(),
            },
            MetricShape::Diagonal => Metric::Diagonal {
                components: (0..n).filter_map(|a| layout.component(a, a)).collect(),
                sqrt,
            },
            MetricShape::Full => Metric::Full {
                fields: n,
                components: (0..n)
                    .flat_map(|a| (a..n).map(move |b| (a, b)))
                    .filter_map(|(a, b)| layout.component(a, b))
                    .collect(),
                sqrt,
            },
        }
    }

    /// The number of fields.
    pub fn fields(&self) -> usize {
        match self {
            Metric::Scalar { .. } => 1,
            Metric::Diagonal { components, .. } => components.len(),
            Metric::Full { fields, .. } => *fields,
        }
    }

    /// The largest output index the metric reads.
    fn last_output(&self) -> usize {
        match self {
            Metric::Scalar { k, sqrt_k } => *k.max(sqrt_k),
            Metric::Diagonal { components, sqrt } | Metric::Full { components, sqrt, .. } => {
                components.iter().chain(sqrt).copied().max().unwrap_or(0)
            }
        }
    }

    /// The metric at `point` from all of that point's tape `outputs`, checked to be finite and
    /// positive definite. `point` only names the place in an error.
    pub fn read(&self, outputs: &[f64], point: &[f64]) -> Result<MetricValue, MetricError> {
        let need = self.last_output() + 1;
        if outputs.len() < need {
            return Err(MetricError::MissingOutputs {
                have: outputs.len(),
                need,
            });
        }
        self.read_with(|i| outputs[i], point)
    }

    /// Evaluates the tape at `phi` (a one-input tape) and reads the metric there.
    ///
    /// # Panics
    ///
    /// If the evaluator's tape has fewer outputs than the metric names, as
    /// [`Evaluator::output`] does for an index out of range: an evaluator of the model whose
    /// [`Layout`] made the metric always has them.
    pub fn at(&self, ev: &mut Evaluator<'_>, phi: f64) -> Result<MetricValue, MetricError> {
        ev.eval(phi);
        self.read_with(|i| ev.output(i), &[phi])
    }

    /// The metric from the outputs `output(i)` it names.
    fn read_with(&self, output: impl Fn(usize) -> f64, point: &[f64]) -> Result<MetricValue, MetricError> {
        let n = self.fields();
        let mut g = DMatrix::zeros(n, n);
        let sqrt_diagonal = match self {
            Metric::Scalar { k, sqrt_k } => {
                g[(0, 0)] = output(*k);
                vec![output(*sqrt_k)]
            }
            Metric::Diagonal { components, sqrt } => {
                for (a, &i) in components.iter().enumerate() {
                    g[(a, a)] = output(i);
                }
                sqrt.iter().map(|&i| output(i)).collect()
            }
            Metric::Full { components, sqrt, .. } => {
                let pairs = (0..n).flat_map(|a| (a..n).map(move |b| (a, b)));
                for ((a, b), &i) in pairs.zip(components) {
                    g[(a, b)] = output(i);
                    g[(b, a)] = output(i);
                }
                sqrt.iter().map(|&i| output(i)).collect()
            }
        };
        MetricValue::new(g, sqrt_diagonal, point)
    }
}

impl MetricValue {
    /// Checks `g` (symmetric) and factorises it.
    fn new(g: DMatrix<f64>, sqrt_diagonal: Vec<f64>, point: &[f64]) -> Result<MetricValue, MetricError> {
        let n = g.nrows();
        for a in 0..n {
            for b in a..n {
                let value = g[(a, b)];
                if !value.is_finite() {
                    let point = point.to_vec();
                    return Err(MetricError::NotFinite { point, a, b, value });
                }
            }
        }
        let l = cholesky(&g).map_err(|(a, pivot)| MetricError::NotPositive {
            point: point.to_vec(),
            a,
            pivot,
        })?;
        Ok(MetricValue {
            g,
            sqrt_diagonal,
            factor: Cholesky::pack_dirty(l),
        })
    }

    /// The number of fields.
    pub fn fields(&self) -> usize {
        self.g.nrows()
    }

    /// The matrix G_ab.
    pub fn matrix(&self) -> &DMatrix<f64> {
        &self.g
    }

    /// The component G_ab (zero off the diagonal of a diagonal metric).
    pub fn component(&self, a: usize, b: usize) -> f64 {
        self.g[(a, b)]
    }

    /// G_00: for one field, K as the tape computes it.
    pub fn k(&self) -> f64 {
        self.g[(0, 0)]
    }

    /// sqrt(G_aa) as the tape computes it.
    pub fn sqrt_diagonal(&self, a: usize) -> f64 {
        self.sqrt_diagonal[a]
    }

    /// sqrt(G_00): for one field, sqrt(K) as the tape computes it.
    pub fn sqrt_k(&self) -> f64 {
        self.sqrt_diagonal[0]
    }

    /// det G (positive): K itself for one field, from the Cholesky factor otherwise.
    pub fn determinant(&self) -> f64 {
        match self.fields() {
            1 => self.k(),
            _ => self.factor.determinant(),
        }
    }

    /// The inverse metric G^ab: 1/K for one field, from the Cholesky factor otherwise.
    pub fn inverse(&self) -> DMatrix<f64> {
        match self.fields() {
            1 => DMatrix::from_element(1, 1, 1.0 / self.k()),
            _ => self.factor.inverse(),
        }
    }
}

/// The lower Cholesky factor L of a symmetric `g` (G = L L^T), or the first row whose pivot
/// is not positive, with that pivot.
fn cholesky(g: &DMatrix<f64>) -> Result<DMatrix<f64>, (usize, f64)> {
    let n = g.nrows();
    let mut l = DMatrix::zeros(n, n);
    for j in 0..n {
        let pivot = g[(j, j)] - (0..j).map(|k| l[(j, k)] * l[(j, k)]).sum::<f64>();
        // A NaN pivot fails too.
        if pivot.is_nan() || pivot <= 0.0 {
            return Err((j, pivot));
        }
        let ljj = pivot.sqrt();
        l[(j, j)] = ljj;
        for i in j + 1..n {
            let s = g[(i, j)] - (0..j).map(|k| l[(i, k)] * l[(j, k)]).sum::<f64>();
            l[(i, j)] = s / ljj;
        }
    }
    Ok(l)
}

/// A point as `phi = x` for one input, `(x0, x1, ...)` for several.
fn show_point(point: &[f64]) -> String {
    match point {
        [x] => format!("phi = {x}"),
        _ => {
            let xs: Vec<String> = point.iter().map(|x| x.to_string()).collect();
            format!("({})", xs.join(", "))
        }
    }
}

impl fmt::Display for MetricError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            MetricError::NotFinite { point, a, b, value } => write!(
                f,
                "the kinetic metric is not finite at {}: G_{a}{b} = {value}",
                show_point(point)
            ),
            MetricError::NotPositive { point, a: 0, pivot } => write!(
                f,
                "the kinetic metric is not positive at {}: G_00 = {pivot}",
                show_point(point)
            ),
            MetricError::NotPositive { point, a, pivot } => write!(
                f,
                "the kinetic metric is not positive definite at {}: the pivot of G_{a}{a} is {pivot} \
                 (the leading {n}x{n} minor is not positive)",
                show_point(point),
                n = a + 1
            ),
            MetricError::MissingOutputs { have, need } => {
                write!(f, "the metric reads {need} tape outputs, the tape has {have}")
            }
        }
    }
}

impl std::error::Error for MetricError {}

impl MetricError {
    /// The error in words, with a hint, for the renderer of [`crate::diag`].
    pub fn diagnostic(&self) -> Diagnostic {
        let d = Diagnostic::new(self.to_string());
        match self {
            MetricError::MissingOutputs { .. } => {
                d.with_hint("read the outputs with the layout of the model that compiled the tape")
            }
            _ => d.with_hint(
                "the kinetic part must be positive (for one field, K(phi) > 0): \
                 restrict the field with `range = [lo, hi]` in [settings], or change the kinetic term",
            ),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::{Config, Limits};
    use crate::language::compile::lower_into;
    use crate::language::ir::{Graph, Scope};
    use crate::language::tape::Tape;
    use crate::model::{Model, ModelSpec};

    /// A tape over one input `t` whose outputs are the given expressions, in order: a curve
    /// t -> phi(t) through field space, with the components along it written out.
    fn tape_of(exprs: &[&str]) -> Tape {
        let mut g = Graph::new(Scope::new("t", &[]));
        let roots: Vec<_> = exprs
            .iter()
            .map(|e| lower_into(&mut g, "test", e, &Limits::default()).unwrap().1)
            .collect();
        Tape::compile(&g, &roots)
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-14 * (1.0 + b.abs())
    }

    #[test]
    fn the_scalar_metric_is_k_and_sqrt_k_as_the_tape_has_them() {
        let spec = ModelSpec::inline("phi^2", Some("1 + phi^2/3"));
        let model = Model::build(&spec, &Config::default()).unwrap();
        let (layout, metric) = (model.layout(), model.metric());
        assert_eq!(metric, Metric::Scalar { k: 1, sqrt_k: 2 });
        let mut ev = model.evaluator();
        for phi in [-2.0, 0.0, 0.3, 7.5] {
            let g = metric.at(&mut ev, phi).unwrap();
            ev.eval(phi);
            // Bit for bit the outputs every stage reads today.
            assert_eq!(g.k().to_bits(), ev.output(layout.k()).to_bits());
            assert_eq!(g.sqrt_k().to_bits(), ev.output(layout.sqrt_k()).to_bits());
            let k = 1.0 + phi * phi / 3.0;
            assert!(close(g.k(), k), "{phi}");
            assert_eq!((g.determinant(), g.inverse()[(0, 0)]), (g.k(), 1.0 / g.k()));
        }
    }

    #[test]
    fn a_kinetic_function_that_is_not_positive_or_not_finite_is_a_typed_error() {
        let model = Model::build(&ModelSpec::inline("phi^2", Some("1 - phi^2")), &Config::default()).unwrap();
        let mut ev = model.evaluator();
        let e = model.metric().at(&mut ev, 2.0).unwrap_err();
        assert_eq!(
            e,
            MetricError::NotPositive {
                point: vec![2.0],
                a: 0,
                pivot: -3.0
            }
        );
        assert_eq!(
            e.to_string(),
            "the kinetic metric is not positive at phi = 2: G_00 = -3"
        );
        assert!(model.metric().at(&mut ev, 1.0).is_err(), "K = 0 is not positive");
        let model = Model::build(&ModelSpec::inline("phi^2", Some("1/phi")), &Config::default()).unwrap();
        let mut ev = model.evaluator();
        match model.metric().at(&mut ev, 0.0).unwrap_err() {
            MetricError::NotFinite {
                point,
                a: 0,
                b: 0,
                value,
            } => {
                assert_eq!(point, vec![0.0]);
                assert!(value.is_infinite());
            }
            other => panic!("{other:?}"),
        }
        let model = Model::build(&ModelSpec::inline("phi^2", Some("log(phi)")), &Config::default()).unwrap();
        let mut ev = model.evaluator();
        let e = model.metric().at(&mut ev, -1.0).unwrap_err();
        assert!(
            matches!(e, MetricError::NotFinite { value, .. } if value.is_nan()),
            "{e:?}"
        );
        let d = e.diagnostic().render(None);
        assert!(d.contains("G_00 = NaN") && d.contains("range = [lo, hi]"), "{d}");
    }

    /// A two-field diagonal metric along a curve: G = diag(1 + t^2, exp(t)).
    /// det = G_00 G_11 and G^aa = 1/G_aa (common practice: a diagonal matrix).
    #[test]
    fn a_diagonal_metric_along_a_curve() {
        let layout = Layout::diagonal(2).unwrap();
        // V, dV/dphi^0, dV/dphi^1, G_00, G_11, sqrt(G_00), sqrt(G_11).
        let tape = tape_of(&["t", "1", "1", "1 + t^2", "exp(t)", "sqrt(1 + t^2)", "exp(t/2)"]);
        assert_eq!(tape.n_outputs(), layout.n_outputs());
        let metric = layout.metric();
        let mut ev = tape.evaluator(&[]);
        for t in [-1.5, 0.0, 0.4, 2.0] {
            let g = metric.at(&mut ev, t).unwrap();
            let (g00, g11) = (1.0 + t * t, f64::exp(t));
            assert_eq!(g.fields(), 2);
            assert!(close(g.component(0, 0), g00) && close(g.component(1, 1), g11));
            assert_eq!((g.component(0, 1), g.component(1, 0)), (0.0, 0.0));
            assert!(close(g.determinant(), g00 * g11), "{t}");
            let inv = g.inverse();
            assert!(close(inv[(0, 0)], 1.0 / g00) && close(inv[(1, 1)], 1.0 / g11), "{t}");
            assert!(inv[(0, 1)].abs() < 1e-15);
            assert!(close(g.sqrt_diagonal(1), (t / 2.0).exp()));
        }
        // G_11 = t - 1 turns negative below t = 1: the pivot of row 1 is G_11 itself.
        let tape = tape_of(&["t", "1", "1", "1", "t - 1", "1", "1"]);
        let mut ev = tape.evaluator(&[]);
        assert!(metric.at(&mut ev, 3.0).is_ok());
        let e = metric.at(&mut ev, 0.5).unwrap_err();
        assert_eq!(
            e,
            MetricError::NotPositive {
                point: vec![0.5],
                a: 1,
                pivot: -0.5
            }
        );
        assert!(e.to_string().contains("the pivot of G_11 is -0.5"), "{e}");
    }

    /// A full two-field metric along a curve: G_00 = 2 + cos t, G_01 = sin t, G_11 = 2 - cos t,
    /// so det G = 4 - cos^2 t - sin^2 t = 3 (own derivation), and the inverse is the adjugate
    /// over the determinant, G^-1 = [[G_11, -G_01], [-G_01, G_00]] / det (common practice).
    #[test]
    fn a_full_metric_along_a_curve_against_the_two_by_two_inverse() {
        let layout = Layout::full(2).unwrap();
        // V, dV/dphi^0, dV/dphi^1, G_00, G_01, G_11, sqrt(G_00), sqrt(G_11).
        let tape = tape_of(&[
            "t^2",
            "0",
            "0",
            "2 + cos(t)",
            "sin(t)",
            "2 - cos(t)",
            "sqrt(2 + cos(t))",
            "sqrt(2 - cos(t))",
        ]);
        let metric = layout.metric();
        assert_eq!(metric.fields(), 2);
        let mut ev = tape.evaluator(&[]);
        for t in [-3.0, -0.7, 0.0, 1.0, 2.5, 10.0] {
            let g = metric.at(&mut ev, t).unwrap();
            let (g00, g01, g11) = (2.0 + t.cos(), t.sin(), 2.0 - t.cos());
            assert_eq!((g.component(0, 1), g.component(1, 0)), (g01, g01));
            let det = g00 * g11 - g01 * g01;
            assert!(close(det, 3.0));
            assert!(close(g.determinant(), det), "{t}: {}", g.determinant());
            let inv = g.inverse();
            let want = [[g11 / det, -g01 / det], [-g01 / det, g00 / det]];
            for a in 0..2 {
                for b in 0..2 {
                    assert!(close(inv[(a, b)], want[a][b]), "{t} ({a}, {b}): {}", inv[(a, b)]);
                }
            }
            assert_eq!(g.sqrt_k(), g.sqrt_diagonal(0));
        }
    }

    /// G = [[1, t], [t, 1]] is positive definite for |t| < 1 only. The second Cholesky pivot is
    /// the Schur complement G_11 - G_01^2 / G_00 = det G / G_00 = 1 - t^2 (common practice).
    #[test]
    fn a_full_metric_that_stops_being_positive_definite_names_the_failing_row() {
        let metric = Layout::full(2).unwrap().metric();
        let tape = tape_of(&["0", "0", "0", "1", "t", "1", "1", "1"]);
        let mut ev = tape.evaluator(&[]);
        for t in [-0.9, 0.0, 0.5, 0.99] {
            let g = metric.at(&mut ev, t).unwrap();
            assert!(close(g.determinant(), 1.0 - t * t), "{t}");
        }
        for t in [1.0, -2.0, 3.0] {
            match metric.at(&mut ev, t).unwrap_err() {
                MetricError::NotPositive { point, a: 1, pivot } => {
                    assert_eq!(point, vec![t]);
                    assert!(close(pivot, 1.0 - t * t), "{t}: {pivot}");
                }
                other => panic!("{t}: {other:?}"),
            }
        }
        // A negative G_00 fails at the first row, whatever G_11 is.
        let tape = tape_of(&["0", "0", "0", "-1", "0", "5", "1", "1"]);
        let e = metric.at(&mut tape.evaluator(&[]), 0.0).unwrap_err();
        assert!(matches!(e, MetricError::NotPositive { a: 0, .. }), "{e:?}");
        // An infinite off-diagonal component is named as such, not passed on.
        let tape = tape_of(&["0", "0", "0", "1", "1/t", "1", "1", "1"]);
        let e = metric.at(&mut tape.evaluator(&[]), 0.0).unwrap_err();
        assert!(matches!(e, MetricError::NotFinite { a: 0, b: 1, .. }), "{e:?}");
        assert!(e.to_string().contains("G_01 = inf"), "{e}");
    }

    /// Three fields, full and constant: G = [[4, 1, 0], [1, 3, 1], [0, 1, 2]]. By cofactors
    /// along the first row, det G = 4 (3*2 - 1) - 1 (1*2 - 0) = 18 (own derivation); the
    /// inverse times G is the identity.
    #[test]
    fn a_three_field_metric_is_read_row_by_row() {
        let layout = Layout::full(3).unwrap();
        // V, three slopes, G_00 G_01 G_02 G_11 G_12 G_22, three square roots.
        let tape = tape_of(&[
            "0", "0", "0", "0", "4", "1", "0", "3", "1", "2", "2", "sqrt(3)", "sqrt(2)",
        ]);
        assert_eq!(tape.n_outputs(), layout.n_outputs());
        let g = layout.metric().at(&mut tape.evaluator(&[]), 0.0).unwrap();
        let want = [[4.0, 1.0, 0.0], [1.0, 3.0, 1.0], [0.0, 1.0, 2.0]];
        for a in 0..3 {
            for b in 0..3 {
                assert_eq!(g.component(a, b), want[a][b]);
            }
        }
        assert!(close(g.determinant(), 18.0), "{}", g.determinant());
        let eye = g.inverse() * g.matrix();
        for a in 0..3 {
            for b in 0..3 {
                let id = if a == b { 1.0 } else { 0.0 };
                assert!((eye[(a, b)] - id).abs() < 1e-15, "({a}, {b}): {}", eye[(a, b)]);
            }
        }
        assert_eq!(g.sqrt_diagonal(2), 2f64.sqrt());
    }

    #[test]
    fn outputs_of_another_layout_are_refused() {
        let metric = Layout::full(2).unwrap().metric();
        let e = metric.read(&[1.0, 2.0, 3.0, 4.0], &[0.0]).unwrap_err();
        assert_eq!(e, MetricError::MissingOutputs { have: 4, need: 8 });
        assert!(Metric::of(Layout::ONE_FIELD)
            .read(&[1.0, 1.0, 1.0, 0.0], &[0.0])
            .is_ok());
    }
}
