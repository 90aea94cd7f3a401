//! Numerical routines, generic over plain closures so that each can be tested on closed-form
//! functions without the compiler. Every routine states its tolerance, returns an error
//! estimate, and fails loudly with [`NumericError`] rather than returning a silent NaN.

pub mod elementary;
pub mod ode;
pub mod quad;
pub mod roots;

use std::fmt;

/// Why a numerical routine gave up.
#[derive(Debug, Clone, PartialEq)]
pub enum NumericError {
    /// The integrand or function was not finite at a point.
    NotFinite {
        /// Where.
        at: f64,
        /// What it returned.
        value: f64,
    },
    /// The tolerance was not reached within the iteration or subdivision cap.
    NoConvergence {
        /// What it was doing.
        what: &'static str,
        /// Best estimate so far.
        estimate: f64,
        /// Its error estimate.
        error: f64,
        /// Iterations or subdivisions used.
        iterations: usize,
    },
    /// A root finder's interval does not bracket a sign change.
    NoBracket {
        /// The interval.
        lo: f64,
        /// The interval.
        hi: f64,
    },
}

impl fmt::Display for NumericError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            NumericError::NotFinite { at, value } => write!(f, "the function is {value} at {at}"),
            NumericError::NoConvergence {
                what,
                estimate,
                error,
                iterations,
            } => write!(
                f,
                "{what} did not converge after {iterations} steps (estimate {estimate:e}, error {error:e})"
            ),
            NumericError::NoBracket { lo, hi } => {
                write!(f, "no sign change between {lo} and {hi}")
            }
        }
    }
}

impl std::error::Error for NumericError {}

/// A value with its estimated absolute error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Estimate {
    /// The value.
    pub value: f64,
    /// Estimated absolute error.
    pub error: f64,
}

/// The power of two 2^-e that brings `x` to [1, 2) in magnitude, e being the binary exponent of
/// `x`; 1 for zero, a non-finite `x`, or when 2^-e would not be a normal number.
///
/// Multiplying by it is exact (only the exponent changes), so quantities built from ratios of
/// values all scaled by it, such as V'/V or V' V''' / V^2, keep their bits, while the products
/// inside them can no longer underflow or overflow because V is tiny or huge.
pub fn pow2_normaliser(x: f64) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return 1.0;
    }
    let bits = x.abs().to_bits();
    let biased = (bits >> 52) as i64;
    // Subnormals: the exponent of the leading bit.
    let e = if biased == 0 {
        -1011 - bits.leading_zeros() as i64
    } else {
        biased - 1023
    };
    // 2^-e itself must be a normal number: for subnormal x and for |x| >= 2^1023 scale only as
    // far as stays exact.
    let inv = (-e).clamp(-1022, 1023);
    f64::from_bits(((inv + 1023) as u64) << 52)
}

#[cfg(test)]
mod tests {
    use super::pow2_normaliser;

    #[test]
    fn normaliser_brings_values_to_one_two() {
        for x in [1.0, 3.0, 1e-200, 1e200, -7.5e-300, 8.9e307, f64::MIN_POSITIVE, 2.2e-308] {
            let y = (x * pow2_normaliser(x)).abs();
            assert!((1.0..2.0).contains(&y), "{x}: {y}");
        }
        // A subnormal: brought up by 2^1023, the largest exact factor, and still finite.
        let tiny = 5e-324;
        assert_eq!(pow2_normaliser(tiny), 2f64.powi(1023));
        assert_eq!(pow2_normaliser(f64::MAX), 2f64.powi(-1022));
        assert_eq!(pow2_normaliser(0.0), 1.0);
        assert_eq!(pow2_normaliser(f64::NAN), 1.0);
        assert_eq!(pow2_normaliser(f64::INFINITY), 1.0);
        // Ratios keep their bits.
        let (a, b) = (0.123456789e-250, 3.3e-251);
        let s = pow2_normaliser(a);
        assert_eq!((a * s) / (b * s), a / b);
    }
}
