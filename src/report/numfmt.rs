//! Numbers for people: the one formatter behind every human table and report line.
//!
//! Machine outputs (CSV, JSON) do not use this module: they keep full precision in Rust's
//! shortest round-trip form. Printing constants back in the expression language is
//! [`crate::language::ir::format_number`]'s job, not this module's.
//!
//! # The rule
//!
//! - **Significant digits, not fixed decimals.** The default is [`DEFAULT_DIGITS`] (6); a
//!   caller may ask for more (fit results) or fewer, up to [`MAX_DIGITS`].
//! - **One style per row.** Values that belong together (a `predict` row across its N_*
//!   columns, an `inspect --table` column) share one style, chosen by [`Style::for_row`]:
//!   fixed notation when every finite non-zero value lies in [[`FIXED_MIN`], [`FIXED_MAX`]),
//!   otherwise scientific for the whole row, with `digits - 1` decimals in the mantissa and the
//!   exponent unpadded (`1.23456e-5`).
//! - **Aligned decimals.** In fixed style the whole row gets the same number of decimals: enough
//!   for the requested significant digits of its smallest value, at most [`MAX_DECIMALS`].
//!   Trailing zeros are kept, so right-aligned values have aligned decimal points.
//! - **Special values.** `inf`, `-inf` and `nan` are spelled as such; zero is `0` padded to the
//!   row's decimals (`0.000000`, or `0.00000e0` in a scientific row), never `-0`.
//! - **Typed values come out as typed.** Grid points, k-min, targets, tolerances, N_* and
//!   parameter values from a file go through [`typed`]: the shortest representation that reads
//!   back to the same double (`0.1`, `1e-8`, `0.963`), fixed inside the fixed range and
//!   scientific outside it.
//! - **A lone value in running text** ([`number`], [`number_digits`]) follows the same rule as a
//!   row of one, then drops trailing zeros (`1.5`, not `1.50000`); tables never drop them.
//!
//! ```
//! use efold::numfmt::{row, typed, number};
//! // a row in the fixed range: one number of decimals for all, set by its smallest value
//! assert_eq!(row(&[0.960314, 0.0045883601], 6), ["0.96031400", "0.00458836"]);
//! // one value outside [1e-4, 1e6) turns the whole row scientific
//! assert_eq!(row(&[2.5, 1.23456e-5], 6), ["2.50000e0", "1.23456e-5"]);
//! assert_eq!(typed(0.963), "0.963");
//! assert_eq!(typed(1e-8), "1e-8");
//! assert_eq!(number(1.5000000001), "1.5");
//! assert_eq!(number(f64::NEG_INFINITY), "-inf");
//! ```

/// Significant digits when the caller does not ask for a number.
pub const DEFAULT_DIGITS: usize = 6;
/// The most significant digits a caller can get (a double holds 17).
pub const MAX_DIGITS: usize = 17;
/// Smallest magnitude printed in fixed notation.
pub const FIXED_MIN: f64 = 1e-4;
/// Magnitudes from here up are printed in scientific notation.
pub const FIXED_MAX: f64 = 1e6;
/// The most decimals a fixed-style row gets.
pub const MAX_DECIMALS: usize = 17;

/// How a row of values is printed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Style {
    /// Fixed notation with this many decimals.
    Fixed(usize),
    /// Scientific notation with this many decimals in the mantissa.
    Scientific(usize),
}

/// The decimal exponent of `a > 0` once rounded to `digits` significant digits (so that
/// 9.9999997 at 6 digits counts as 10).
fn exponent(a: f64, digits: usize) -> i32 {
    let s = format!("{:.*e}", digits.saturating_sub(1), a);
    s.rsplit('e').next().and_then(|e| e.parse().ok()).unwrap_or(0)
}

impl Style {
    /// The style of a row that should show `digits` significant digits of each value.
    ///
    /// ```
    /// use efold::numfmt::Style;
    /// assert_eq!(Style::for_row(&[50.0, 0.25], 6), Style::Fixed(6));
    /// assert_eq!(Style::for_row(&[1e15, 2e15], 4), Style::Scientific(3));
    /// assert_eq!(Style::for_row(&[0.0, f64::INFINITY], 6), Style::Fixed(0));
    /// ```
    pub fn for_row(values: &[f64], digits: usize) -> Style {
        let digits = digits.clamp(1, MAX_DIGITS);
        let mags = values.iter().filter(|v| v.is_finite() && **v != 0.0).map(|v| v.abs());
        let mut smallest = f64::INFINITY;
        for a in mags {
            if !(FIXED_MIN..FIXED_MAX).contains(&a) {
                return Style::Scientific(digits - 1);
            }
            smallest = smallest.min(a);
        }
        if smallest.is_infinite() {
            return Style::Fixed(0);
        }
        let decimals = (digits as i32 - 1 - exponent(smallest, digits)).max(0) as usize;
        Style::Fixed(decimals.min(MAX_DECIMALS))
    }

    /// One value in this style.
    ///
    /// ```
    /// use efold::numfmt::Style;
    /// assert_eq!(Style::Fixed(3).format(-0.0), "0.000");
    /// assert_eq!(Style::Scientific(2).format(-1.2341e-7), "-1.23e-7");
    /// assert_eq!(Style::Fixed(2).format(f64::NAN), "nan");
    /// ```
    pub fn format(self, x: f64) -> String {
        if let Some(s) = special(x) {
            return s;
        }
        // -0 and values that round to zero print without a sign.
        let unsign = |s: String| match s.strip_prefix('-') {
            Some(rest) if rest.bytes().all(|b| matches!(b, b'0' | b'.' | b'e')) => rest.to_string(),
            _ => s,
        };
        match self {
            Style::Fixed(d) => unsign(format!("{x:.d$}")),
            Style::Scientific(d) => unsign(format!("{x:.d$e}")),
        }
    }
}

fn special(x: f64) -> Option<String> {
    if x.is_nan() {
        Some("nan".into())
    } else if x.is_infinite() {
        Some(if x > 0.0 { "inf" } else { "-inf" }.into())
    } else {
        None
    }
}

/// A row of values that belong together, in one style (see the module docs).
///
/// ```
/// use efold::numfmt::row;
/// assert_eq!(row(&[2.41382995, 2.41698483, 0.0], 6), ["2.41383", "2.41698", "0.00000"]);
/// ```
pub fn row(values: &[f64], digits: usize) -> Vec<String> {
    let style = Style::for_row(values, digits);
    values.iter().map(|&x| style.format(x)).collect()
}

/// A row where some cells have no value (printed empty); the others share one style.
///
/// ```
/// use efold::numfmt::row_opt;
/// assert_eq!(row_opt(&[Some(0.5), None, Some(0.25)], 6), ["0.500000", "", "0.250000"]);
/// ```
pub fn row_opt(values: &[Option<f64>], digits: usize) -> Vec<String> {
    let present: Vec<f64> = values.iter().flatten().copied().collect();
    let style = Style::for_row(&present, digits);
    values
        .iter()
        .map(|v| v.map(|x| style.format(x)).unwrap_or_default())
        .collect()
}

/// A lone value in running text, with [`DEFAULT_DIGITS`] significant digits and trailing zeros
/// dropped.
///
/// ```
/// use efold::numfmt::number;
/// assert_eq!(number(2.449489742783178), "2.44949");
/// assert_eq!(number(1.2361234e-10), "1.23612e-10");
/// assert_eq!(number(2.0), "2");
/// assert_eq!(number(0.0), "0");
/// ```
pub fn number(x: f64) -> String {
    number_digits(x, DEFAULT_DIGITS)
}

/// A lone value in running text with `digits` significant digits, trailing zeros dropped.
///
/// ```
/// use efold::numfmt::number_digits;
/// assert_eq!(number_digits(2.565713367407, 12), "2.56571336741");
/// assert_eq!(number_digits(3.0e-12, 4), "3e-12");
/// ```
pub fn number_digits(x: f64, digits: usize) -> String {
    let s = Style::for_row(&[x], digits).format(x);
    if special(x).is_some() {
        return s;
    }
    let (mantissa, exp) = match s.find('e') {
        Some(i) => s.split_at(i),
        None => (s.as_str(), ""),
    };
    let mantissa = if mantissa.contains('.') {
        mantissa.trim_end_matches('0').trim_end_matches('.')
    } else {
        mantissa
    };
    format!("{mantissa}{exp}")
}

/// A value always in scientific notation with `digits` significant digits (residuals, relative
/// changes, uncertainties).
///
/// ```
/// use efold::numfmt::scientific;
/// assert_eq!(scientific(-1.0234e-11, 3), "-1.02e-11");
/// assert_eq!(scientific(1e-9, 2), "1.0e-9");
/// ```
pub fn scientific(x: f64, digits: usize) -> String {
    Style::Scientific(digits.clamp(1, MAX_DIGITS) - 1).format(x)
}

/// A value with a fixed number of decimals and an explicit sign, for quantities whose
/// precision is absolute (a pull in standard deviations).
///
/// ```
/// use efold::numfmt::signed_fixed;
/// assert_eq!(signed_fixed(0.4712, 2), "+0.47");
/// assert_eq!(signed_fixed(-1.0912, 2), "-1.09");
/// assert_eq!(signed_fixed(f64::INFINITY, 2), "inf");
/// ```
pub fn signed_fixed(x: f64, decimals: usize) -> String {
    special(x).unwrap_or_else(|| format!("{x:+.decimals$}"))
}

/// A value the user typed, as typed: the shortest representation that reads back to the same
/// double, fixed in [[`FIXED_MIN`], [`FIXED_MAX`]) and scientific outside.
///
/// ```
/// use efold::numfmt::typed;
/// assert_eq!(typed(0.1), "0.1");
/// assert_eq!(typed(55.0), "55");
/// assert_eq!(typed(1e-8), "1e-8");
/// assert_eq!(typed(2.5e10), "2.5e10");
/// ```
pub fn typed(x: f64) -> String {
    if let Some(s) = special(x) {
        return s;
    }
    if x == 0.0 {
        return "0".into();
    }
    if (FIXED_MIN..FIXED_MAX).contains(&x.abs()) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

/// An axis tick label: at most four decimals, trailing zeros dropped, within [1e-3, 1e4);
/// outside it two significant digits in scientific notation (`1.2e-4`, `5e6`), `.0` dropped.
///
/// ```
/// use efold::numfmt::tick;
/// assert_eq!(tick(0.25), "0.25");
/// assert_eq!(tick(-2.0), "-2");
/// assert_eq!(tick(0.00012), "1.2e-4");
/// assert_eq!(tick(5e6), "5e6");
/// assert_eq!(tick(0.0), "0");
/// ```
pub fn tick(v: f64) -> String {
    if v == 0.0 {
        return "0".to_string();
    }
    let a = v.abs();
    if !(1e-3..1e4).contains(&a) {
        let s = format!("{v:.1e}");
        return s.replace(".0e", "e");
    }
    let s = format!("{v:.4}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    s.to_string()
}

/// A JSON value for people: a number as [`typed`] (shortest round-trip form), anything else
/// as JSON.
///
/// ```
/// use efold::numfmt::json_value;
/// assert_eq!(json_value(&serde_json::json!(1.468e-10)), "1.468e-10");
/// assert_eq!(json_value(&serde_json::json!("excluded")), "\"excluded\"");
/// ```
pub fn json_value(v: &serde_json::Value) -> String {
    match v.as_f64() {
        Some(x) if v.is_number() => typed(x),
        _ => v.to_string(),
    }
}

/// Enough significant digits to tell `a` from `b` (two more than the digits they share), at
/// least [`DEFAULT_DIGITS`] and at most [`MAX_DIGITS`].
///
/// ```
/// use efold::numfmt::{digits_to_resolve, row};
/// let (want, got) = (0.963, 0.9629999999999898);
/// let d = digits_to_resolve(want, got);
/// assert_eq!(d, 15);
/// assert_eq!(row(&[got], d), ["0.962999999999990"]);
/// ```
pub fn digits_to_resolve(a: f64, b: f64) -> usize {
    let diff = (a - b).abs();
    let big = a.abs().max(b.abs());
    if !diff.is_finite() || diff == 0.0 || !big.is_finite() {
        return DEFAULT_DIGITS;
    }
    let shared = exponent(big, MAX_DIGITS) - exponent(diff, MAX_DIGITS);
    ((shared + 2).max(0) as usize).clamp(DEFAULT_DIGITS, MAX_DIGITS)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_choose_one_style() {
        // (values, digits, expected)
        let cases: [(&[f64], usize, &[&str]); 9] = [
            // all in range: fixed, decimals for 6 digits of the smallest
            (
                &[0.00458836, 0.00380738, 0.00321008],
                6,
                &["0.00458836", "0.00380738", "0.00321008"],
            ),
            (
                &[-0.00078749, -0.00065175, -0.0005483],
                6,
                &["-0.000787490", "-0.000651750", "-0.000548300"],
            ),
            // mixed magnitudes, one outside the range: scientific for all
            (&[1.0, 2.0e-5], 6, &["1.00000e0", "2.00000e-5"]),
            (&[8.4141e15, 8.0307e15], 6, &["8.41410e15", "8.03070e15"]),
            (&[999_999.0, 1.0e6], 3, &["1.00e6", "1.00e6"]),
            // zero and non-finite values do not decide the style
            (&[0.0, 0.5, f64::INFINITY], 3, &["0.000", "0.500", "inf"]),
            (&[0.0, 1e-7, f64::NAN], 2, &["0.0e0", "1.0e-7", "nan"]),
            // rounding to the requested digits moves the exponent (9.9999997 -> 10.0000)
            (&[9.9999997], 6, &["10.0000"]),
            // large rows in range get no decimals beyond what the digits need
            (&[123_456.7, 234_567.8], 6, &["123457", "234568"]),
        ];
        for (values, digits, want) in cases {
            assert_eq!(row(values, digits), want, "row {values:?} at {digits} digits");
        }
    }

    #[test]
    fn fixed_rows_align_their_decimal_points() {
        let cells = row(&[50.0, 2.41382995, 0.0123, -7.5], 6);
        let w = cells.iter().map(String::len).max().unwrap();
        let points: Vec<usize> = cells
            .iter()
            .map(|c| w - c.len() + c.find('.').expect("fixed style has a point"))
            .collect();
        assert!(points.windows(2).all(|p| p[0] == p[1]), "{cells:?}");
        // trailing zeros stay
        assert_eq!(cells[0], "50.0000000");
    }

    #[test]
    fn decimals_are_capped() {
        assert_eq!(Style::for_row(&[1e-4], MAX_DIGITS), Style::Fixed(MAX_DECIMALS));
        assert_eq!(Style::for_row(&[1.0], 40), Style::Fixed(MAX_DIGITS - 1));
    }

    #[test]
    fn typed_values_round_trip() {
        let cases = [
            (0.1, "0.1"),
            (1e-8, "1e-8"),
            (0.963, "0.963"),
            (0.9630, "0.963"),
            (60.0, "60"),
            (0.036, "0.036"),
            (1e-4, "0.0001"),
            (1e6, "1e6"),
            (-2.5e-12, "-2.5e-12"),
            (0.0, "0"),
            (f64::INFINITY, "inf"),
            (f64::NAN, "nan"),
        ];
        for (x, want) in cases {
            assert_eq!(typed(x), want);
            if x.is_finite() {
                assert_eq!(typed(x).parse::<f64>().unwrap(), x, "{want} reads back");
            }
        }
        // arbitrary doubles read back exactly
        for x in [
            1.0 / 3.0,
            2.0f64.sqrt() * 1e-7,
            std::f64::consts::PI * 1e9,
            0.00012345678901234,
        ] {
            assert_eq!(typed(x).parse::<f64>().unwrap(), x);
        }
    }

    #[test]
    fn special_values_are_spelled() {
        for style in [Style::Fixed(4), Style::Scientific(4)] {
            assert_eq!(style.format(f64::INFINITY), "inf");
            assert_eq!(style.format(f64::NEG_INFINITY), "-inf");
            assert_eq!(style.format(f64::NAN), "nan");
        }
        assert_eq!(number(f64::NAN), "nan");
        assert_eq!(Style::Fixed(2).format(-0.0001), "0.00");
        assert_eq!(Style::Fixed(0).format(0.0), "0");
    }

    #[test]
    fn lone_numbers_drop_trailing_zeros_only() {
        assert_eq!(number(1.5), "1.5");
        assert_eq!(number(100.0), "100");
        assert_eq!(number(1.0e-10), "1e-10");
        assert_eq!(number(-2.449489742783178), "-2.44949");
        assert_eq!(number(1234567.0), "1.23457e6");
    }

    #[test]
    fn numbers_print_in_shortest_round_trip_form() {
        for (x, s) in [
            (1.0, "1"),
            (1.01, "1.01"),
            (0.0048, "0.0048"),
            (1.468e-10, "1.468e-10"),
            (-2e20, "-2e20"),
        ] {
            assert_eq!(typed(x), s);
            assert_eq!(json_value(&serde_json::json!(x)), s);
            assert_eq!(s.parse::<f64>().unwrap(), x);
        }
        let x = 0.1 + 0.2;
        assert_eq!(typed(x).parse::<f64>().unwrap(), x);
    }

    #[test]
    fn drift_lines_show_old_and_new_apart() {
        let d = crate::drivers::golden::Drift::Leaf {
            at: crate::drivers::golden::At::NStar(55.0),
            path: "n_s".into(),
            old: Some(serde_json::json!(0.9638961170)),
            new: Some(serde_json::json!(0.9638961181)),
        };
        let line = d.to_string();
        assert!(line.starts_with("  N_* = 55: n_s "), "{line}");
        // digits enough to tell them apart, both in one style
        assert!(line.contains("0.9638961170 -> 0.9638961181"), "{line}");
        assert!(line.ends_with("(relative 1.1e-9)"), "{line}");
        let d = crate::drivers::golden::Drift::Leaf {
            at: crate::drivers::golden::At::NStar(55.0),
            path: "verdict".into(),
            old: Some(serde_json::json!("consistent")),
            new: Some(serde_json::json!("excluded")),
        };
        assert!(d.to_string().contains("\"consistent\" -> \"excluded\""));
    }

    #[test]
    fn resolving_digits_show_the_difference() {
        let (want, got) = (0.01, 0.009999999999785007);
        let d = digits_to_resolve(want, got);
        let s = &row(&[got], d)[0];
        assert_ne!(s.parse::<f64>().unwrap(), want, "{s} must differ from the target");
        assert_eq!(digits_to_resolve(1.0, 1.0), DEFAULT_DIGITS);
        assert_eq!(digits_to_resolve(1.0, 1.5), DEFAULT_DIGITS);
        assert_eq!(digits_to_resolve(1.0, 1.0 + f64::EPSILON), MAX_DIGITS);
    }
}
