//! Limits and tolerances, in one place, with documented defaults.
//!
//! Every stage that can be driven by hostile or merely large input takes its limits from here, so
//! that a limit is changed in one spot and named in one error message.

/// Limits on the expression language.
#[derive(Debug, Clone, PartialEq)]
pub struct Limits {
    /// Maximum length of one expression, in bytes. Default 10 000.
    pub max_len: usize,
    /// Maximum nesting of parentheses and function calls. Default 64: far beyond any real model
    /// (the shipped ones stay under 8), and well within a 2 MiB thread stack.
    pub max_nesting: usize,
    /// Maximum height of the syntax tree (a chain `x+x+...` or `2^2^...` counts one level per
    /// operator). Default 512.
    pub max_depth: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_len: 10_000,
            max_nesting: 64,
            max_depth: 512,
        }
    }
}

/// Everything configurable, grouped by stage.
#[derive(Debug, Clone, PartialEq)]
pub struct Config {
    /// Limits on the expression language.
    pub limits: Limits,
    /// Quadrature tolerance for the canonical map and e-fold integrals (default: relative
    /// 1e-12, at most 2000 subintervals).
    pub quad: crate::numerics::quad::Tolerance,
    /// When an e-fold integral cannot reach `quad.rel` because its integrand's own rounding is
    /// larger (close to a pole of K, 1 - phi^2/(6 alpha) keeps only a few digits), its result
    /// is still used if the estimated relative error is below this. Default 1e-9.
    pub quad_accept: f64,
    /// Beyond `quad_accept`, an e-fold or canonical-distance integral held back by its
    /// integrand's rounding is still used if its estimated relative error is below this, and
    /// the report says so with the accuracy reached (a pivot within a hair of a pole of K, where
    /// K itself keeps only a few digits). Default 1e-6.
    pub quad_rounding_limit: f64,
}

impl Default for Config {
    fn default() -> Self {
        Config {
            limits: Limits::default(),
            quad: crate::numerics::quad::Tolerance::default(),
            quad_accept: 1e-9,
            quad_rounding_limit: 1e-6,
        }
    }
}
