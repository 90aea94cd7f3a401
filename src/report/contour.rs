//! Contour lines of a function sampled on a rectangular grid, by marching squares.
//!
//! Each cell's four corners are classified above or below the level; the level crosses an
//! edge whose ends are on opposite sides, at the point of linear interpolation. A cell with
//! two crossings joins them; a saddle (two opposite corners above) is resolved by the value at
//! the centre, the mean of the corners (common practice). Cells with a corner that is not
//! finite are left out. Segments are joined into polylines through the edges they share, so a
//! line is one path; a closed contour ends at its first point.
//!
//! Accuracy: linear interpolation along cell edges, an error of order h^2 f''/f' in position
//! for grid spacing h.

use std::collections::HashMap;

/// Values z on the grid xs × ys: `z[j * xs.len() + i]` at `(xs[i], ys[j])`.
#[derive(Debug, Clone, PartialEq)]
pub struct Grid {
    /// The x coordinates, ascending.
    pub xs: Vec<f64>,
    /// The y coordinates, ascending.
    pub ys: Vec<f64>,
    /// The values, row by row (one row per y).
    pub z: Vec<f64>,
}

/// An edge of the grid: horizontal from (i, j) to (i + 1, j), or vertical from (i, j) to
/// (i, j + 1).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
enum Edge {
    H(usize, usize),
    V(usize, usize),
}

impl Grid {
    fn at(&self, i: usize, j: usize) -> f64 {
        self.z[j * self.xs.len() + i]
    }

    /// The crossing of `level` on an edge, by linear interpolation.
    fn crossing(&self, e: Edge, level: f64) -> (f64, f64) {
        let (a, b, p, q) = match e {
            Edge::H(i, j) => (
                self.at(i, j),
                self.at(i + 1, j),
                (self.xs[i], self.ys[j]),
                (self.xs[i + 1], self.ys[j]),
            ),
            Edge::V(i, j) => (
                self.at(i, j),
                self.at(i, j + 1),
                (self.xs[i], self.ys[j]),
                (self.xs[i], self.ys[j + 1]),
            ),
        };
        let t = if b == a {
            0.5
        } else {
            ((level - a) / (b - a)).clamp(0.0, 1.0)
        };
        (p.0 + t * (q.0 - p.0), p.1 + t * (q.1 - p.1))
    }

    /// The segments of one cell as pairs of edges.
    fn cell(&self, i: usize, j: usize, level: f64) -> Vec<(Edge, Edge)> {
        let c = [
            self.at(i, j),
            self.at(i + 1, j),
            self.at(i + 1, j + 1),
            self.at(i, j + 1),
        ];
        if c.iter().any(|v| !v.is_finite()) {
            return Vec::new();
        }
        let above = |k: usize| c[k] > level;
        let code = (0..4).fold(0, |acc, k| acc | (usize::from(above(k)) << k));
        // corners 0 = (i, j), 1 = (i+1, j), 2 = (i+1, j+1), 3 = (i, j+1); edges between them
        let (bottom, right, top, left) = (Edge::H(i, j), Edge::V(i + 1, j), Edge::H(i, j + 1), Edge::V(i, j));
        let centre_above = c.iter().sum::<f64>() / 4.0 > level;
        match code {
            0 | 15 => Vec::new(),
            1 | 14 => vec![(left, bottom)],
            2 | 13 => vec![(bottom, right)],
            3 | 12 => vec![(left, right)],
            4 | 11 => vec![(right, top)],
            6 | 9 => vec![(bottom, top)],
            7 | 8 => vec![(left, top)],
            // saddles: corners 0 and 2 on one side, 1 and 3 on the other
            5 if centre_above => vec![(left, top), (bottom, right)],
            5 => vec![(left, bottom), (right, top)],
            10 if centre_above => vec![(left, bottom), (right, top)],
            _ => vec![(left, top), (bottom, right)],
        }
    }

    /// The contour lines of `level`, each a polyline in (x, y).
    pub fn lines(&self, level: f64) -> Vec<Vec<(f64, f64)>> {
        let (nx, ny) = (self.xs.len(), self.ys.len());
        let mut segments: Vec<(Edge, Edge)> = Vec::new();
        for j in 0..ny.saturating_sub(1) {
            for i in 0..nx.saturating_sub(1) {
                segments.extend(self.cell(i, j, level));
            }
        }
        let mut by_edge: HashMap<Edge, Vec<usize>> = HashMap::new();
        for (k, (a, b)) in segments.iter().enumerate() {
            by_edge.entry(*a).or_default().push(k);
            by_edge.entry(*b).or_default().push(k);
        }
        let mut used = vec![false; segments.len()];
        let mut out = Vec::new();
        for first in 0..segments.len() {
            if used[first] {
                continue;
            }
            used[first] = true;
            let (a, b) = segments[first];
            let mut chain = std::collections::VecDeque::from([a, b]);
            // extend at the back, then at the front
            for back in [true, false] {
                loop {
                    let end = if back {
                        *chain.back().unwrap()
                    } else {
                        *chain.front().unwrap()
                    };
                    let next = by_edge[&end].iter().copied().find(|&k| !used[k]);
                    let Some(k) = next else { break };
                    used[k] = true;
                    let (p, q) = segments[k];
                    let other = if p == end { q } else { p };
                    if back {
                        chain.push_back(other);
                    } else {
                        chain.push_front(other);
                    }
                }
            }
            out.push(chain.into_iter().map(|e| self.crossing(e, level)).collect());
        }
        out
    }
}

/// About `count` contour levels between `lo` and `hi` (both excluded): evenly spaced, or
/// evenly in the logarithm when `log` (then lo > 0).
pub fn levels(lo: f64, hi: f64, count: usize, log: bool) -> Vec<f64> {
    if !(lo.is_finite() && hi.is_finite() && hi > lo) || count == 0 || (log && lo <= 0.0) {
        return Vec::new();
    }
    (1..=count)
        .map(|k| {
            let t = k as f64 / (count + 1) as f64;
            if log {
                (lo.ln() + t * (hi.ln() - lo.ln())).exp()
            } else {
                lo + t * (hi - lo)
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid(n: usize, f: impl Fn(f64, f64) -> f64) -> Grid {
        let xs: Vec<f64> = (0..n).map(|i| -1.0 + 2.0 * i as f64 / (n - 1) as f64).collect();
        let ys = xs.clone();
        let z = ys
            .iter()
            .flat_map(|&y| xs.iter().map(move |&x| (x, y)))
            .map(|(x, y)| f(x, y))
            .collect();
        Grid { xs, ys, z }
    }

    /// The circle x^2 + y^2 = 1/4 is one closed line, every point within the interpolation
    /// error of radius 1/2 (h = 0.05: |r - 1/2| < h^2 = 2.5e-3, own bound from the error of
    /// linear interpolation of r^2 across a cell).
    #[test]
    fn a_circle_is_one_closed_line() {
        let g = grid(41, |x, y| x * x + y * y);
        let lines = g.lines(0.25);
        assert_eq!(lines.len(), 1);
        let l = &lines[0];
        assert!(l.len() > 40, "{}", l.len());
        let (a, b) = (l[0], l[l.len() - 1]);
        assert!(
            (a.0 - b.0).abs() < 1e-15 && (a.1 - b.1).abs() < 1e-15,
            "closed: {a:?} {b:?}"
        );
        for (x, y) in l {
            assert!((x.hypot(*y) - 0.5).abs() < 2.5e-3, "{x} {y}");
        }
    }

    /// A plane z = x: the level 0.3 is the straight line x = 0.3, exactly (linear data).
    #[test]
    fn a_plane_gives_a_straight_line() {
        let g = grid(11, |x, _| x);
        let lines = g.lines(0.3);
        assert_eq!(lines.len(), 1);
        assert_eq!(lines[0].len(), 11);
        assert!(lines[0].iter().all(|(x, _)| (x - 0.3).abs() < 1e-15));
    }

    /// Cells with a corner that is not finite are left out; a level outside the data gives none.
    #[test]
    fn holes_and_empty_levels() {
        let g = grid(11, |x, y| if x > 0.5 { f64::NAN } else { x + y });
        for l in g.lines(0.0) {
            assert!(l.iter().all(|(x, _)| *x <= 0.6 + 1e-12));
        }
        assert!(g.lines(10.0).is_empty());
    }

    /// A saddle z = x y: the level 0 gives the two axes, crossing through the centre cells
    /// without a gap.
    #[test]
    fn saddle_gives_the_axes() {
        let g = grid(10, |x, y| x * y);
        let lines = g.lines(1e-9);
        let points: usize = lines.iter().map(Vec::len).sum();
        assert!(points >= 18, "{lines:?}");
        for l in &lines {
            for (x, y) in l {
                assert!(x.abs() < 0.12 || y.abs() < 0.12, "{x} {y}");
            }
        }
    }

    #[test]
    fn levels_linear_and_logarithmic() {
        assert_eq!(levels(0.0, 4.0, 3, false), vec![1.0, 2.0, 3.0]);
        let l = levels(1.0, 1e4, 3, true);
        assert!((l[0] - 10.0).abs() < 1e-12 && (l[2] - 1000.0).abs() < 1e-9, "{l:?}");
        assert!(levels(0.0, 1.0, 3, true).is_empty());
    }
}
