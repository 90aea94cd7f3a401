//! The expression language: text → [`syntax`] (spanned tree, printable back to source) →
//! [`ir`] (hash-consed DAG with symbolic partial derivatives) → [`tape`] (compiled evaluator:
//! f64 at a point in field space, batches, Taylor jets). [`compile`] runs the three in order.

pub mod compile;
pub mod ir;
pub mod syntax;
pub mod tape;
