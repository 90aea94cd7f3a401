//! Analyses: typed results about a compiled [`crate::model::Model`], never text.
//!
//! - [`single`]: machinery that only exists for one field (the canonical map, poles at the
//!   ends of an interval, asymptotics of V(chi), the domain and its branches).
//! - [`slowroll`]: slow-roll parameters, the end of inflation, e-folds and phi_*.
//! - [`background`]: the exact background in e-folds.
//! - [`perturbations`]: the Mukhanov–Sasaki modes on it.
//! - [`reheating`]: the e-fold count of the pivot scale after a reheating history.
//! - [`pivot`]: the observables at the pivot that every route reports.
//! - [`multi`]: several fields: the potential and the geometry of field space at a point.
//! - [`basin`]: basins of initial conditions, one field or several.

pub mod background;
pub mod basin;
pub mod error;
pub mod multi;
pub mod perturbations;
pub mod pivot;
pub mod reheating;
pub mod single;
pub mod slowroll;
