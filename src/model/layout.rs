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
    };

    /// `n` fields with a diagonal metric; `None` for no fields.
    pub fn diagonal(n: usize) -> Option<Layout> {
        (n > 0).then_some(Layout {
            fields: n,
            shape: MetricShape::Diagonal,
        })
    }

    /// `n` fields with a full symmetric metric; `None` for no fields.
    pub fn full(n: usize) -> Option<Layout> {
        (n > 0).then_some(Layout {
            fields: n,
            shape: MetricShape::Full,
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

    /// How many outputs the tape has.
    #[inline]
    pub fn n_outputs(self) -> usize {
        match self.shape {
            MetricShape::Scalar => 4,
            _ => 1 + 2 * self.fields + self.n_components(),
        }
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
