//! efold: predictions of inflationary models from a potential V(phi) and a kinetic function
//! K(phi), for L = 1/2 K(phi) (d phi)^2 - V(phi) in reduced Planck units (M_p = 1).
//!
//! The pipeline, one stage a folder:
//!
//! 1. [`language`]: text → [`syntax`] (spanned tree) → [`ir`] (hash-consed DAG, symbolic
//!    derivatives) → [`tape`] (compiled evaluator: f64 at one point or in batches, and Taylor
//!    jets).
//! 2. [`model`]: a model file or flags → parameters, compiled V and the field-space metric
//!    on one tape whose outputs a [`model::Layout`] names, the field's range.
//! 3. [`analysis`]: typed results about a model (the single-field canonical map, poles and
//!    branches, slow roll, the exact background and modes, reheating).
//! 4. [`drivers`]: one command's result composed from analyses (predict, inspect, spectrum,
//!    scan, fit, golden) on one prepared, re-bindable analysis of the model.
//! 5. [`report`]: numbers, text, figures and files (the one number formatter and the atomic
//!    writer).
//! 6. [`cli`]: arguments → drivers → reports; the binary is `cli::run` and an exit code.
//!    Beside it, [`api`]: the same commands for programs (the Python module), a built model
//!    and plain options in, the commands' JSON values out, errors sorted by stage.
//!
//! [`numerics`] (quadrature, roots, ODE) serves every stage; [`config`] holds every limit and
//! tolerance; errors of every stage become a [`diag::Diagnostic`], drawn by one renderer.
#![warn(missing_docs)]
// Numerical recurrences read best with explicit indices (c[k] = sum a[j] b[k-j]).
#![allow(clippy::needless_range_loop)]

// The parser generated from grammar/expr.pest names `alloc` (pest is built without its `std`
// feature, which only adds a native-stack probe on every rule; efold bounds nesting before the
// parser runs).
extern crate alloc;

pub mod analysis;
pub mod api;
pub mod cli;
pub mod config;
pub mod data;
pub mod diag;
pub mod drivers;
pub mod language;
pub mod model;
pub mod numerics;
pub mod report;

// Short paths to the stages' modules, kept from the flat layout.
pub use analysis::{reheating, slowroll};
pub use drivers::{fit, golden, inspect, predict, scan};
pub use language::{compile, ir, syntax, tape};
pub use report::{numfmt, output, plot};

/// The single-field analyses in one place, as the flat layout had them: the canonical map,
/// the domain, poles and asymptotes ([`analysis::single`]) and the analyses' error.
pub mod canonical {
    pub use crate::analysis::error::*;
    pub use crate::analysis::single::asymptote::*;
    pub use crate::analysis::single::canonical::*;
    pub use crate::analysis::single::domain::*;
    pub use crate::analysis::single::pole::*;
}

/// The exact route in one place, as the flat layout had it: the background
/// ([`analysis::background`]), the modes ([`analysis::perturbations`]) and the spectrum
/// ([`drivers::spectrum`], [`report::spectrum`]).
pub mod exact {
    pub use crate::analysis::background::*;
    pub use crate::analysis::perturbations::*;
    pub use crate::drivers::spectrum::*;
    pub use crate::report::spectrum::{csv, figure, text};
}
