//! Drivers: each composes analyses into one command's result ([`predict`], [`inspect`],
//! [`spectrum`], [`scan`], [`fit`], [`golden`]).

pub mod fit;
pub mod golden;
pub mod inspect;
pub mod predict;
pub mod prepared;
pub mod scan;
pub mod spectrum;
