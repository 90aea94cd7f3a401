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
