//! Reports: the one place that renders. The one number formatter ([`numfmt`]), figures
//! ([`plot`]), the atomic writer ([`output`]), and each command's result as text, CSV, JSON
//! and SVG ([`predict`], [`inspect`], [`spectrum`], [`scan`], [`fit`]).

pub mod basin;
pub mod contour;
pub mod fit;
pub mod fit_multi;
pub mod inspect;
pub mod inspect_multi;
pub mod multi;
pub mod numfmt;
pub mod output;
pub mod plot;
pub mod predict;
pub mod scan;
pub mod scan_multi;
pub mod spectrum;
pub mod spectrum_multi;

/// The parameters for people, `name = value`: a value written as a plain number as typed,
/// one computed from an expression to the default significant digits.
pub fn params_text(m: &crate::drivers::inspect::ModelSummary) -> Vec<String> {
    m.params
        .iter()
        .enumerate()
        .map(|(i, (k, v))| {
            if m.params_typed.get(i).copied().unwrap_or(false) {
                format!("{k} = {}", numfmt::typed(*v))
            } else {
                format!("{k} = {}", numfmt::number(*v))
            }
        })
        .collect()
}
