//! Drivers: each composes analyses into one command's result ([`predict`], [`inspect`],
//! [`spectrum`], [`scan`], [`fit`], [`golden`]), on one [`prepared::Prepared`] analysis of a
//! model that can be rebound to new parameter values without compiling again.

pub mod basin;
pub mod fit;
pub mod fit_multi;
pub mod golden;
pub mod inspect;
pub mod inspect_multi;
pub mod plane;
pub mod predict;
pub mod prepared;
pub mod scan;
pub mod scan_multi;
pub mod spectrum;
pub mod spectrum_multi;
