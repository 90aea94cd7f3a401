//! Which output of a model's tape holds which quantity: the [`Layout`].
//!
//! A model compiles V, its gradient and the components of its field-space metric G_ab onto
//! one tape (L = 1/2 G_ab dphi^a dphi^b - V); the layout names each output so that no stage
//! counts indices itself. It is two small numbers (the number of fields and the metric's
//! [`MetricShape`]) and every position follows from them:
//!
//! | shape              | outputs, in tape order                                            |
//! |--------------------|-------------------------------------------------------------------|
//! | one field (scalar) | V, K, sqrt(K), dV/dphi                                             |
//! | n fields, diagonal | V, dV/dphi^a (n), G_aa (n), sqrt(G_aa) (n)                         |
//! | n fields, full     | V, dV/dphi^a (n), G_ab for a <= b (n(n+1)/2, row by row), sqrt(G_aa) (n) |
//!
//! The one-field layout is the common case and keeps the order the tape has always had, so
//! `layout.k()` is output 1. Field indices a, b count from 0.
//!
//! A model of several fields compiles its geometry too ([`Layout::with_geometry`]): after the
//! outputs above, in this order,
//!
//! | block            | outputs                                                                  |
//! |------------------|--------------------------------------------------------------------------|
//! | Hessian of V     | d_a d_b V for a <= b, row by row (n(n+1)/2)                               |
//! | first partials   | d_c G_ab: for each stored component (in the order above), c = 0..n-1      |
//! | second partials  | d_c d_d G_ab: for each stored component, c <= d row by row (n(n+1)/2 each) |
//!
//! so that the Christoffel symbols and the Riemann tensor need no finite differences.
//!
//! ```
//! use efold::model::{Layout, MetricShape};
//! let one = Layout::ONE_FIELD;
//! assert_eq!((one.v(), one.k(), one.sqrt_k(), one.dv()), (0, 1, 2, 3));
//! let two = Layout::full(2).unwrap();
//! assert_eq!(two.shape(), MetricShape::Full);
//! assert_eq!(two.component(1, 0), two.component(0, 1)); // G_ab stored once per pair
//! assert_eq!(two.n_outputs(), 1 + 2 + 3 + 2);
//! ```

use super::metric::Metric;

/// The form of a model's field-space metric G_ab.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum MetricShape {
    /// One field: G = K(phi), compiled with sqrt(K) beside it.
    Scalar,
    /// G_ab = 0 for a != b: one output G_aa per field.
    Diagonal,
    /// Any symmetric G_ab: one output per pair a <= b.
    Full,
}

/// Names a model's tape outputs: V, dV/dphi^a and the metric's components (see the module
/// documentation for the order). Copy and two words large.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Layout {
    fields: usize,
    shape: MetricShape,
    geometry: bool,
}

impl Default for Layout {
    fn default() -> Layout {
        Layout::ONE_FIELD
    }
}

impl Layout {
    /// One field with a scalar kinetic function K(phi): outputs V, K, sqrt(K), dV/dphi.
    pub const ONE_FIELD: Layout = Layout {
        fields: 1,
        shape: MetricShape::Scalar,
        geometry: false,
    };

    /// `n` fields with a diagonal metric; `None` for no fields.
    pub fn diagonal(n: usize) -> Option<Layout> {
        (n > 0).then_some(Layout {
            fields: n,
            shape: MetricShape::Diagonal,
            geometry: false,
        })
    }

    /// `n` fields with a full symmetric metric; `None` for no fields.
    pub fn full(n: usize) -> Option<Layout> {
        (n > 0).then_some(Layout {
            fields: n,
            shape: MetricShape::Full,
            geometry: false,
        })
    }

    /// The number of fields.
    #[inline]
    pub fn fields(self) -> usize {
        self.fields
    }

    /// The metric's form.
    #[inline]
    pub fn shape(self) -> MetricShape {
        self.shape
    }

    /// How many metric components the tape holds: 1, n or n(n+1)/2.
    #[inline]
    pub fn n_components(self) -> usize {
        match self.shape {
            MetricShape::Scalar => 1,
            MetricShape::Diagonal => self.fields,
            MetricShape::Full => self.fields * (self.fields + 1) / 2,
        }
    }

    /// The same layout followed by the geometry block (the Hessian of V, the first and second
    /// partials of every stored metric component; see the module documentation). The scalar
    /// one-field layout has none: it is returned unchanged.
    pub fn with_geometry(self) -> Layout {
        Layout {
            geometry: self.shape != MetricShape::Scalar,
            ..self
        }
    }

    /// Whether the tape holds the geometry block.
    #[inline]
    pub fn has_geometry(self) -> bool {
        self.geometry
    }

    /// Outputs before the geometry block.
    #[inline]
    fn n_base(self) -> usize {
        match self.shape {
            MetricShape::Scalar => 4,
            _ => 1 + 2 * self.fields + self.n_components(),
        }
    }

    /// n(n+1)/2: the number of pairs a <= b.
    #[inline]
    fn n_pairs(self) -> usize {
        self.fields * (self.fields + 1) / 2
    }

    /// The index of the pair (a, b), a <= b, row by row.
    #[inline]
    fn pair(self, a: usize, b: usize) -> usize {
        let (a, b) = (a.min(b), a.max(b));
        a * (2 * self.fields - a + 1) / 2 + (b - a)
    }

    /// How many outputs the tape has.
    #[inline]
    pub fn n_outputs(self) -> usize {
        let geometry = if self.geometry {
            let c = self.n_components();
            self.n_pairs() + c * self.fields + c * self.n_pairs()
        } else {
            0
        };
        self.n_base() + geometry
    }

    /// The index of a stored metric component among the stored ones (0..n_components), or
    /// `None` where the component is zero by the metric's form.
    #[inline]
    fn component_rank(self, a: usize, b: usize) -> Option<usize> {
        self.component(a, b).map(|i| i - (1 + self.fields))
    }

    /// The output holding d_a d_b V (the same as d_b d_a V); `None` without the geometry block
    /// or for an index that is not a field.
    #[inline]
    pub fn hessian(self, a: usize, b: usize) -> Option<usize> {
        (self.geometry && a < self.fields && b < self.fields).then(|| self.n_base() + self.pair(a, b))
    }

    /// The output holding d_c G_ab; `None` without the geometry block, for an index that is not
    /// a field, or where G_ab is zero by the metric's form.
    #[inline]
    pub fn metric_partial(self, a: usize, b: usize, c: usize) -> Option<usize> {
        if !self.geometry || c >= self.fields {
            return None;
        }
        let rank = self.component_rank(a, b)?;
        Some(self.n_base() + self.n_pairs() + rank * self.fields + c)
    }

    /// The output holding d_c d_d G_ab (symmetric in c, d); `None` as for
    /// [`Layout::metric_partial`].
    #[inline]
    pub fn metric_second_partial(self, a: usize, b: usize, c: usize, d: usize) -> Option<usize> {
        if !self.geometry || c >= self.fields || d >= self.fields {
            return None;
        }
        let rank = self.component_rank(a, b)?;
        let first = self.n_base() + self.n_pairs() + self.n_components() * self.fields;
        Some(first + rank * self.n_pairs() + self.pair(c, d))
    }

    /// The output holding V.
    #[inline]
    pub fn v(self) -> usize {
        0
    }

    /// The output holding dV/dphi^a, for a field index `a`.
    #[inline]
    pub fn grad(self, a: usize) -> Option<usize> {
        match self.shape {
            MetricShape::Scalar => (a == 0).then_some(3),
            _ => (a < self.fields).then_some(1 + a),
        }
    }

    /// The output holding G_ab (the same as G_ba). `None` when `a` or `b` is not a field index,
    /// or when the component is zero by the metric's form (off the diagonal of a diagonal
    /// metric).
    #[inline]
    pub fn component(self, a: usize, b: usize) -> Option<usize> {
        let n = self.fields;
        if a >= n || b >= n {
            return None;
        }
        let (a, b) = (a.min(b), a.max(b));
        let first = 1 + n;
        match self.shape {
            MetricShape::Scalar => Some(1),
            MetricShape::Diagonal => (a == b).then_some(first + a),
            // Row a of the upper triangle starts after rows 0..a, of n, n-1, ... entries.
            MetricShape::Full => Some(first + a * (2 * n - a + 1) / 2 + (b - a)),
        }
    }

    /// The output holding sqrt(G_aa), for a field index `a`.
    #[inline]
    pub fn sqrt_diagonal(self, a: usize) -> Option<usize> {
        match self.shape {
            MetricShape::Scalar => (a == 0).then_some(2),
            _ => (a < self.fields).then_some(1 + self.fields + self.n_components() + a),
        }
    }

    /// The output holding dV/dphi of the first field: for one field, the slope.
    #[inline]
    pub fn dv(self) -> usize {
        self.grad(0).unwrap_or(0)
    }

    /// The output holding G_00: for one field, K.
    #[inline]
    pub fn k(self) -> usize {
        self.component(0, 0).unwrap_or(0)
    }

    /// The output holding sqrt(G_00): for one field, sqrt(K).
    #[inline]
    pub fn sqrt_k(self) -> usize {
        self.sqrt_diagonal(0).unwrap_or(0)
    }

    /// The kinetic part, located on the tape through this layout.
    pub fn metric(self) -> Metric {
        Metric::of(self)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every output of a layout is named exactly once, and the names cover 0..n_outputs.
    fn assert_a_partition(l: Layout) {
        let n = l.fields();
        let mut seen = vec![0u32; l.n_outputs()];
        seen[l.v()] += 1;
        for a in 0..n {
            seen[l.grad(a).unwrap()] += 1;
            seen[l.sqrt_diagonal(a).unwrap()] += 1;
            for b in a..n {
                if let Some(i) = l.component(a, b) {
                    seen[i] += 1;
                }
            }
        }
        assert!(seen.iter().all(|&c| c == 1), "{l:?}: {seen:?}");
        assert_eq!(l.grad(n), None);
        assert_eq!(l.component(n, 0), None);
        assert_eq!(l.sqrt_diagonal(n), None);
    }

    #[test]
    fn the_one_field_layout_is_the_order_the_tape_has_always_had() {
        let l = Layout::ONE_FIELD;
        assert_eq!((l.v(), l.k(), l.sqrt_k(), l.dv()), (0, 1, 2, 3));
        assert_eq!((l.n_outputs(), l.n_components(), l.fields()), (4, 1, 1));
        assert_eq!(Layout::default(), l);
        assert_a_partition(l);
    }

    /// With the geometry block too, every output is named exactly once.
    #[test]
    fn geometry_blocks_name_every_output_once() {
        for n in 1..=4 {
            for l in [Layout::diagonal(n).unwrap(), Layout::full(n).unwrap()] {
                let base = l.n_outputs();
                let g = l.with_geometry();
                assert!(g.has_geometry() && !l.has_geometry());
                let mut seen = vec![0u32; g.n_outputs()];
                for a in 0..n {
                    for b in a..n {
                        seen[g.hessian(a, b).unwrap()] += 1;
                        assert_eq!(g.hessian(a, b), g.hessian(b, a));
                        for c in 0..n {
                            if let Some(i) = g.metric_partial(a, b, c) {
                                seen[i] += 1;
                            }
                            for d in c..n {
                                if let Some(i) = g.metric_second_partial(a, b, c, d) {
                                    seen[i] += 1;
                                    assert_eq!(g.metric_second_partial(b, a, d, c), Some(i));
                                }
                            }
                        }
                    }
                }
                assert!(seen[..base].iter().all(|&c| c == 0));
                assert!(seen[base..].iter().all(|&c| c == 1), "{g:?}: {seen:?}");
                assert_eq!(g.component(0, 0), l.component(0, 0));
                assert_eq!(l.hessian(0, 0), None);
            }
        }
        assert_eq!(Layout::ONE_FIELD.with_geometry(), Layout::ONE_FIELD);
    }

    #[test]
    fn n_field_layouts_name_every_output_once() {
        for n in 1..=5 {
            let d = Layout::diagonal(n).unwrap();
            assert_eq!(d.n_outputs(), 1 + 3 * n);
            assert_eq!(d.component(0, n - 1).is_none(), n > 1);
            assert_a_partition(d);
            let f = Layout::full(n).unwrap();
            assert_eq!(f.n_outputs(), 1 + 2 * n + n * (n + 1) / 2);
            for a in 0..n {
                for b in 0..n {
                    assert_eq!(f.component(a, b), f.component(b, a));
                }
            }
            assert_a_partition(f);
        }
        assert_eq!(Layout::diagonal(0), None);
        assert_eq!(Layout::full(0), None);
        // Two fields, full: V, dV/dphi^0, dV/dphi^1, G_00, G_01, G_11, sqrt(G_00), sqrt(G_11).
        let f = Layout::full(2).unwrap();
        assert_eq!(
            [f.component(0, 0), f.component(0, 1), f.component(1, 1)],
            [Some(3), Some(4), Some(5)]
        );
        assert_eq!([f.sqrt_diagonal(0), f.sqrt_diagonal(1)], [Some(6), Some(7)]);
    }
}
