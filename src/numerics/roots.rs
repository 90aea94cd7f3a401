//! Root finding: Brent's method on a bracket, and a safeguarded Newton iteration that keeps
//! a bracket and falls back to bisection.
//!
//! ```
//! use efold::numerics::roots::brent;
//! let root = brent(|x| x * x - 2.0, 0.0, 2.0, 1e-15, 200)?;
//! assert!((root.value - 2f64.sqrt()).abs() < 1e-15);
//! # Ok::<(), efold::numerics::NumericError>(())
//! ```

use super::{Estimate, NumericError};

/// Brent's method (R. P. Brent, *Algorithms for Minimization without Derivatives*, 1973,
/// ch. 4): a root of `f` in `[a, b]`, where `f(a)` and `f(b)` differ in sign. Stops when the
/// bracket is narrower than `xtol` (absolute, plus 2 ulps of the root); the returned error is
/// the final bracket's half-width.
pub fn brent(
    mut f: impl FnMut(f64) -> f64,
    a: f64,
    b: f64,
    xtol: f64,
    max_iter: usize,
) -> Result<Estimate, NumericError> {
    let check = |x: f64, v: f64| {
        if v.is_finite() {
            Ok(v)
        } else {
            Err(NumericError::NotFinite { at: x, value: v })
        }
    };
    let (mut a, mut b) = (a, b);
    let mut fa = check(a, f(a))?;
    let mut fb = check(b, f(b))?;
    if fa == 0.0 {
        return Ok(Estimate { value: a, error: 0.0 });
    }
    if fb == 0.0 {
        return Ok(Estimate { value: b, error: 0.0 });
    }
    if fa.signum() == fb.signum() {
        return Err(NumericError::NoBracket { lo: a, hi: b });
    }
    let (mut c, mut fc) = (a, fa);
    let mut d = b - a;
    let mut e = d;
    for _ in 0..max_iter {
        if fb.signum() == fc.signum() {
            c = a;
            fc = fa;
            d = b - a;
            e = d;
        }
        if fc.abs() < fb.abs() {
            a = b;
            b = c;
            c = a;
            fa = fb;
            fb = fc;
            fc = fa;
        }
        let tol = 2.0 * f64::EPSILON * b.abs() + 0.5 * xtol;
        let m = 0.5 * (c - b);
        if m.abs() <= tol || fb == 0.0 {
            return Ok(Estimate {
                value: b,
                error: m.abs(),
            });
        }
        if e.abs() >= tol && fa.abs() > fb.abs() {
            // Inverse quadratic interpolation, or the secant step.
            let s = fb / fa;
            let (mut p, mut q);
            if a == c {
                p = 2.0 * m * s;
                q = 1.0 - s;
            } else {
                let qa = fa / fc;
                let r = fb / fc;
                p = s * (2.0 * m * qa * (qa - r) - (b - a) * (r - 1.0));
                q = (qa - 1.0) * (r - 1.0) * (s - 1.0);
            }
            if p > 0.0 {
                q = -q;
            } else {
                p = -p;
            }
            if 2.0 * p < (3.0 * m * q - (tol * q).abs()).min((e * q).abs()) {
                e = d;
                d = p / q;
            } else {
                d = m;
                e = m;
            }
        } else {
            d = m;
            e = m;
        }
        a = b;
        fa = fb;
        b += if d.abs() > tol { d } else { tol.copysign(m) };
        fb = check(b, f(b))?;
    }
    Err(NumericError::NoConvergence {
        what: "Brent root finder",
        estimate: b,
        error: (c - b).abs(),
        iterations: max_iter,
    })
}

/// Newton's method kept inside the bracket `[lo, hi]` (where `f` changes sign): a step that
/// leaves the bracket, or does not halve the residual, is replaced by bisection. `fdf` returns
/// the value and the derivative. Stops when the step is below `xtol`.
pub fn safeguarded_newton(
    mut fdf: impl FnMut(f64) -> (f64, f64),
    lo: f64,
    hi: f64,
    x0: f64,
    xtol: f64,
    max_iter: usize,
) -> Result<Estimate, NumericError> {
    let (mut lo, mut hi) = (lo.min(hi), lo.max(hi));
    let (flo, fhi) = (fdf(lo).0, fdf(hi).0);
    if !flo.is_finite() || !fhi.is_finite() {
        return Err(NumericError::NotFinite {
            at: if flo.is_finite() { hi } else { lo },
            value: if flo.is_finite() { fhi } else { flo },
        });
    }
    if flo == 0.0 {
        return Ok(Estimate { value: lo, error: 0.0 });
    }
    if fhi == 0.0 {
        return Ok(Estimate { value: hi, error: 0.0 });
    }
    if flo.signum() == fhi.signum() {
        return Err(NumericError::NoBracket { lo, hi });
    }
    let rising = fhi > 0.0;
    let mut x = x0.clamp(lo, hi);
    let mut last_step = hi - lo;
    for _ in 0..max_iter {
        let (fx, dfx) = fdf(x);
        if !fx.is_finite() {
            return Err(NumericError::NotFinite { at: x, value: fx });
        }
        if fx == 0.0 {
            return Ok(Estimate { value: x, error: 0.0 });
        }
        if (fx > 0.0) == rising {
            hi = x;
        } else {
            lo = x;
        }
        let newton = x - fx / dfx;
        let step_ok = dfx != 0.0 && newton > lo && newton < hi && (newton - x).abs() < 0.5 * last_step.abs();
        let next = if step_ok { newton } else { 0.5 * (lo + hi) };
        last_step = next - x;
        x = next;
        if last_step.abs() <= xtol + 2.0 * f64::EPSILON * x.abs() || hi - lo <= xtol {
            return Ok(Estimate {
                value: x,
                error: last_step.abs().min(hi - lo),
            });
        }
    }
    Err(NumericError::NoConvergence {
        what: "safeguarded Newton",
        estimate: x,
        error: hi - lo,
        iterations: max_iter,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn brent_finds_roots_and_refuses_bad_brackets() {
        let r = brent(|x| x.cos() - x, 0.0, 1.0, 1e-15, 100).unwrap();
        // the Dottie number, cos x = x (a classical constant, from memory: 0.7390851332151607)
        assert!((r.value - 0.739_085_133_215_160_7).abs() < 2e-16);
        assert!(matches!(
            brent(|x| x * x + 1.0, -1.0, 1.0, 1e-12, 100),
            Err(NumericError::NoBracket { .. })
        ));
        assert!(matches!(
            brent(|x| 1.0 / x, -1.0, 1.0, 1e-12, 100),
            Err(NumericError::NotFinite { .. }) | Ok(_)
        ));
    }

    #[test]
    fn newton_stays_in_its_bracket() {
        // atan has a Newton iteration that diverges from x0 = 2 without safeguards.
        let r = safeguarded_newton(|x| (x.atan(), 1.0 / (1.0 + x * x)), -3.0, 5.0, 2.0, 1e-15, 100).unwrap();
        assert!(r.value.abs() < 1e-15);
        let r = safeguarded_newton(|x| (x.exp() - 3.0, x.exp()), 0.0, 2.0, 0.1, 1e-15, 100).unwrap();
        assert!((r.value - 3f64.ln()).abs() < 1e-15);
    }
}
