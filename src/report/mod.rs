//! Reports: the one number formatter ([`numfmt`]), figures ([`plot`]) and the atomic writer
//! ([`output`]).

pub mod numfmt;
pub mod output;
pub mod plot;
pub mod spectrum;
