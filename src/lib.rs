//! efold: predictions of inflationary models from a potential V(phi) and a kinetic function
//! K(phi), for L = 1/2 K(phi) (d phi)^2 - V(phi) in reduced Planck units (M_p = 1).
//!
//! The pipeline, one stage a module:
//! [`syntax`] (text → spanned tree) → [`ir`] (hash-consed DAG, symbolic d/dphi) →
//! [`tape`] (compiled evaluator: f64 at one point or in batches, and Taylor jets) →
//! the commands in [`cli`].
//! Errors of every stage become a [`diag::Diagnostic`], drawn by one renderer.
#![warn(missing_docs)]
// Numerical recurrences read best with explicit indices (c[k] = sum a[j] b[k-j]).
#![allow(clippy::needless_range_loop)]

// The parser generated from grammar/expr.pest names `alloc` (pest is built without its `std`
// feature, which only adds a native-stack probe on every rule; efold bounds nesting before the
// parser runs).
extern crate alloc;

pub mod canonical;
pub mod cli;
pub mod compile;
pub mod config;
pub mod data;
pub mod diag;
pub mod exact;
pub mod fit;
pub mod golden;
pub mod inspect;
pub mod ir;
pub mod model;
pub mod numerics;
pub mod numfmt;
pub mod output;
pub mod plot;
pub mod predict;
pub mod reheating;
pub mod scan;
pub mod slowroll;
pub mod syntax;
pub mod tape;
