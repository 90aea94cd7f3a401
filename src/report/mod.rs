//! Reports: the one place that renders. The one number formatter ([`numfmt`]), figures
//! ([`plot`]), the atomic writer ([`output`]), and each command's result as text, CSV, JSON
//! and SVG ([`predict`], [`inspect`], [`spectrum`], [`scan`], [`fit`]).

pub mod fit;
pub mod inspect;
pub mod numfmt;
pub mod output;
pub mod plot;
pub mod predict;
pub mod scan;
pub mod spectrum;
