//! A fit's result as text (the JSON is the result serialized).

use crate::drivers::fit::FitResult;
use crate::report::numfmt;
use std::fmt::Write as _;

/// Significant digits of fitted parameter values in human output.
pub const PARAM_DIGITS: usize = crate::analysis::error::FIT_PARAM_DIGITS;

/// The fit as text: parameters to `PARAM_DIGITS` (12) significant digits, targets as typed, reached values with
/// enough digits to show how far they are from the target, residuals in scientific notation.
pub fn text(f: &FitResult) -> String {
    let mut o = String::new();
    let _ = writeln!(
        o,
        "fit at N_* = {} in {} iterations",
        numfmt::typed(f.n_star),
        f.iterations
    );
    for (k, v) in &f.parameters {
        let _ = writeln!(o, "  {k:<12} = {}", numfmt::number_digits(*v, PARAM_DIGITS));
    }
    let _ = writeln!(o, "targets");
    let cells: Vec<[String; 4]> = f
        .targets
        .iter()
        .map(|(k, want)| {
            let got = f.achieved[k];
            let digits = numfmt::digits_to_resolve(*want, got);
            [
                k.clone(),
                numfmt::typed(*want),
                numfmt::row(&[got], digits).remove(0),
                numfmt::scientific(f.residuals[k], 3),
            ]
        })
        .collect();
    let w: Vec<usize> = (0..3)
        .map(|j| {
            cells
                .iter()
                .map(|c| c[j].len())
                .max()
                .unwrap_or(0)
                .max(if j == 0 { 12 } else { 0 })
        })
        .collect();
    for [k, want, got, res] in &cells {
        let _ = writeln!(
            o,
            "  {k:<w0$} wanted {want:<w1$}  reached {got:<w2$}  scaled residual {res}",
            w0 = w[0],
            w1 = w[1],
            w2 = w[2]
        );
    }
    // computed values at the default digits, trailing zeros kept (they are not targets)
    let value = |x: f64| numfmt::row(&[x], numfmt::DEFAULT_DIGITS).remove(0);
    let _ = writeln!(o, "Jacobian condition number {}", numfmt::number(f.condition_number));
    let _ = writeln!(
        o,
        "at the solution: n_s = {}, r = {}, alpha_s = {}; scale on V for the observed A_s: {}",
        value(f.prediction.n_s),
        value(f.prediction.r),
        value(f.prediction.alpha_s),
        value(f.prediction.potential_scale)
    );
    o
}
