//! A fit of a model of several fields as text (the JSON is the result serialized): the lines
//! of a one-field fit ([`crate::report::fit`]), the fields at the pivot, and the predictions
//! the fit made.

use crate::drivers::fit_multi::MultiFitResult;
use crate::report::fit::PARAM_DIGITS;
use crate::report::numfmt;
use std::fmt::Write as _;

/// The fit as text: fitted values to [`PARAM_DIGITS`] significant digits, targets as typed,
/// reached values with digits enough to show their distance from the target, residuals in
/// scientific notation; then the fields at the pivot and n_s, r, alpha_s at the solution.
pub fn text(f: &MultiFitResult) -> String {
    let mut o = String::new();
    let _ = writeln!(
        o,
        "fit at N_* = {} in {} iterations ({} multi-field predictions; every scaled residual below {})",
        numfmt::typed(f.n_star),
        f.iterations,
        f.evaluations,
        numfmt::typed(f.tolerance)
    );
    for (k, v) in &f.parameters {
        let _ = writeln!(o, "  {k:<12} = {}", numfmt::number_digits(*v, PARAM_DIGITS));
    }
    let _ = writeln!(o, "targets");
    for (k, want) in &f.targets {
        let got = f.achieved[k];
        let digits = numfmt::digits_to_resolve(*want, got);
        let _ = writeln!(
            o,
            "  {k:<12} wanted {}  reached {}  scaled residual {}",
            numfmt::typed(*want),
            numfmt::row(&[got], digits).remove(0),
            numfmt::scientific(f.residuals[k], 3)
        );
    }
    let value = |x: f64| numfmt::row(&[x], numfmt::DEFAULT_DIGITS).remove(0);
    let _ = writeln!(o, "Jacobian condition number {}", numfmt::number(f.condition_number));
    let fields: Vec<String> = f
        .fields_star
        .iter()
        .map(|(k, v)| format!("{k} = {}", value(*v)))
        .collect();
    let _ = writeln!(o, "fields at the pivot: {}", fields.join(", "));
    let p = &f.prediction;
    let _ = writeln!(
        o,
        "at the solution: n_s = {}, r = {}, alpha_s = {} (exact multi-field route)",
        value(p.n_s),
        value(p.r),
        value(p.alpha_s)
    );
    o
}
