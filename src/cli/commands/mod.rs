//! One module a command.

mod eval;
mod fit;
mod golden;
mod inspect;
mod predict;
mod scan;
mod spectrum;
mod watch;

pub(crate) use eval::*;
pub(crate) use fit::*;
pub(crate) use golden::*;
pub(crate) use inspect::*;
pub(crate) use predict::*;
pub(crate) use scan::*;
pub(crate) use spectrum::*;
pub(crate) use watch::*;
