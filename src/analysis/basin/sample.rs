//! Where the starts of a basin lie: a grid (the axes of `efold scan`, over fields and X) or
//! random samples from a small counter-based generator, reproducible bit for bit whatever the
//! shard or the number of threads.

/// SplitMix64 (a 64-bit counter passed through a fixed mixing function; constants as
/// published with the generator, from memory): the k-th output of seed s is
/// `mix(s + (k + 1) * 0x9E3779B97F4A7C15)`, so any sample can be drawn without the ones before
/// it. Its outputs pass the common statistical batteries (from memory), far more than a
/// uniform sampling of initial conditions needs.
pub fn splitmix64(seed: u64, k: u64) -> u64 {
    let mut z = seed.wrapping_add(k.wrapping_add(1).wrapping_mul(0x9E37_79B9_7F4A_7C15));
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// A uniform number in [0, 1) from the top 53 bits of a 64-bit word.
pub fn unit(word: u64) -> f64 {
    (word >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
}

/// One sampled coordinate: a field or X, its range and whether it is sampled in the logarithm.
#[derive(Debug, Clone, PartialEq)]
pub struct Range {
    /// The field's name, or `X` for the kinetic ratio.
    pub name: String,
    /// Lower end.
    pub lo: f64,
    /// Upper end.
    pub hi: f64,
    /// Uniform in log10.
    pub log: bool,
}

impl Range {
    /// The value at `u` in [0, 1].
    pub fn at(&self, u: f64) -> f64 {
        if self.log {
            10f64.powf(self.lo.log10() + (self.hi.log10() - self.lo.log10()) * u)
        } else {
            self.lo + (self.hi - self.lo) * u
        }
    }
}

/// How the starts are placed.
#[derive(Debug, Clone, PartialEq)]
pub enum Plan {
    /// Every combination of the axes' values, the first axis slowest.
    Grid(Vec<crate::drivers::scan::Axis>),
    /// `count` uniform samples in the ranges from `seed`.
    Random {
        /// The ranges.
        ranges: Vec<Range>,
        /// How many samples.
        count: usize,
        /// The seed.
        seed: u64,
    },
}

impl Plan {
    /// The number of points (None when a grid's product overflows).
    pub fn len(&self) -> Option<usize> {
        match self {
            Plan::Grid(axes) => crate::drivers::scan::total_points(axes),
            Plan::Random { count, .. } => Some(*count),
        }
    }

    /// True when there are no points.
    pub fn is_empty(&self) -> bool {
        self.len() == Some(0)
    }

    /// The coordinates' names, in order.
    pub fn names(&self) -> Vec<String> {
        match self {
            Plan::Grid(axes) => axes.iter().map(|a| a.name.clone()).collect(),
            Plan::Random { ranges, .. } => ranges.iter().map(|r| r.name.clone()).collect(),
        }
    }

    /// The coordinates of point `i`, in the order of [`Plan::names`]. Sample i of a random
    /// plan takes the generator's outputs i d .. i d + d - 1 for d coordinates.
    pub fn point(&self, i: usize) -> Vec<f64> {
        match self {
            Plan::Grid(axes) => {
                let mut rest = i;
                let mut out = vec![0.0; axes.len()];
                for (j, a) in axes.iter().enumerate().rev() {
                    out[j] = a.values[rest % a.values.len()];
                    rest /= a.values.len();
                }
                out
            }
            Plan::Random { ranges, seed, .. } => {
                let d = ranges.len() as u64;
                ranges
                    .iter()
                    .enumerate()
                    .map(|(j, r)| r.at(unit(splitmix64(*seed, i as u64 * d + j as u64))))
                    .collect()
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splitmix64_gives_its_published_first_outputs() {
        // seed 1234567: the first outputs of the reference generator (from memory of its
        // published test vector: 6457827717110365317, 3203168211198807973)
        assert_eq!(splitmix64(1234567, 0), 6457827717110365317);
        assert_eq!(splitmix64(1234567, 1), 3203168211198807973);
    }

    #[test]
    fn uniform_samples_fill_the_range_evenly() {
        // mean 1/2 and variance 1/12 of U(0,1) (common practice), to 3 sigma of 1e5 draws
        let n = 100_000;
        let xs: Vec<f64> = (0..n).map(|k| unit(splitmix64(42, k))).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n as f64;
        assert!((mean - 0.5).abs() < 3.0 * (1.0 / 12.0 / n as f64).sqrt(), "{mean}");
        assert!((var - 1.0 / 12.0).abs() < 1e-3, "{var}");
        assert!(xs.iter().all(|&x| (0.0..1.0).contains(&x)));
    }

    #[test]
    fn a_grid_runs_the_last_axis_fastest() {
        let a = crate::drivers::scan::Axis::new("x", 0.0, 1.0, 2, false).unwrap();
        let b = crate::drivers::scan::Axis::new("X", 1.0, 100.0, 3, true).unwrap();
        let p = Plan::Grid(vec![a, b]);
        assert_eq!(p.len(), Some(6));
        assert_eq!(p.point(0), vec![0.0, 1.0]);
        assert_eq!(p.point(1), vec![0.0, 10.0]);
        assert_eq!(p.point(5), vec![1.0, 100.0]);
    }
}
