//! Analyses: typed results about a compiled [`crate::model::Model`], never text.
//!
//! - [`single`]: machinery that only exists for one field (the canonical map, poles at the
//!   ends of an interval, asymptotics of V(chi), the domain and its branches).
//! - [`slowroll`]: slow-roll parameters, the end of inflation, e-folds and phi_*.
//! - [`exact`]: the exact background and Mukhanov–Sasaki modes.
//! - [`reheating`]: the e-fold count of the pivot scale after a reheating history.

pub mod exact;
pub mod reheating;
pub mod single;
pub mod slowroll;
