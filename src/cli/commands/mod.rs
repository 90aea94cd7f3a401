//! One module a command: each turns its arguments into the text to print.

pub(crate) mod basin;
pub(crate) mod docs;
pub(crate) mod eval;
pub(crate) mod fit;
pub(crate) mod golden;
pub(crate) mod inspect;
pub(crate) mod predict;
pub(crate) mod scan;
pub(crate) mod spectrum;
pub(crate) mod watch;
