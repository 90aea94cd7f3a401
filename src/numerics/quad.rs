//! Quadrature: adaptive Gauss–Kronrod (7/15 points) for smooth integrands, and the
//! double-exponential (tanh-sinh) rule for integrands singular at an endpoint.
//!
//! ```
//! use efold::numerics::quad::{gauss_kronrod, Tolerance};
//! let est = gauss_kronrod(|x| x.exp(), 0.0, 1.0, &Tolerance::default())?;
//! assert!((est.value - (1f64.exp() - 1.0)).abs() < 1e-14);
//! assert!(est.error < 1e-12);
//! # Ok::<(), efold::numerics::NumericError>(())
//! ```

use super::{Estimate, NumericError};

/// Requested accuracy: the routines stop when the estimated error is below
/// `max(abs, rel * |integral|)`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tolerance {
    /// Relative tolerance. Default 1e-12.
    pub rel: f64,
    /// Absolute tolerance. Default 1e-300 (in effect, relative only).
    pub abs: f64,
    /// Cap on subintervals (Gauss–Kronrod) or halvings of the step (tanh-sinh). Default 2000.
    pub max_steps: usize,
}

impl Default for Tolerance {
    fn default() -> Self {
        Tolerance {
            rel: 1e-12,
            abs: 1e-300,
            max_steps: 2000,
        }
    }
}

// Kronrod 15-point nodes (positive half, descending) and weights, with the weights of the
// embedded 7-point Gauss rule at the odd nodes: the standard constants of Piessens et al.,
// QUADPACK (Springer 1983). Checked in the tests by exact integration of x^k, k <= 22.
const XGK: [f64; 8] = [
    0.991_455_371_120_812_6,
    0.949_107_912_342_758_5,
    0.864_864_423_359_769_1,
    0.741_531_185_599_394_4,
    0.586_087_235_467_691_1,
    0.405_845_151_377_397_2,
    0.207_784_955_007_898_5,
    0.0,
];
const WGK: [f64; 8] = [
    0.022_935_322_010_529_22,
    0.063_092_092_629_978_55,
    0.104_790_010_322_250_2,
    0.140_653_259_715_525_9,
    0.169_004_726_639_267_9,
    0.190_350_578_064_785_4,
    0.204_432_940_075_298_9,
    0.209_482_141_084_727_8,
];
const WG: [f64; 4] = [
    0.129_484_966_168_869_7,
    0.279_705_391_489_276_7,
    0.381_830_050_505_118_9,
    0.417_959_183_673_469_4,
];

/// One 15-point Kronrod panel on [a, b]: (integral, error estimate, rounding floor of that
/// estimate), or the first non-finite integrand value. The integrand is called once, on all 15
/// nodes: the centre, then the pairs c - dx, c + dx from the outermost in.
fn kronrod_panel(f: &mut impl FnMut(&[f64], &mut [f64]), a: f64, b: f64) -> Result<(f64, f64, f64), NumericError> {
    let c = 0.5 * (a + b);
    let h = 0.5 * (b - a);
    let mut xs = [c; 15];
    for j in 0..7 {
        let dx = h * XGK[j];
        xs[1 + 2 * j] = c - dx;
        xs[2 + 2 * j] = c + dx;
    }
    let mut ys = [0.0; 15];
    f(&xs, &mut ys);
    if let Some(i) = ys.iter().position(|v| !v.is_finite()) {
        return Err(NumericError::NotFinite {
            at: xs[i],
            value: ys[i],
        });
    }
    let fc = ys[0];
    let mut k = WGK[7] * fc;
    let mut g = WG[3] * fc;
    let mut fv = [(0.0, 0.0); 7];
    for j in 0..7 {
        let (f1, f2) = (ys[1 + 2 * j], ys[2 + 2 * j]);
        fv[j] = (f1, f2);
        k += WGK[j] * (f1 + f2);
        if j % 2 == 1 {
            g += WG[j / 2] * (f1 + f2);
        }
    }
    // QUADPACK's error estimate: |K - G| scaled by the integrand's variation on the panel.
    let mean = 0.5 * k;
    let mut asc = WGK[7] * (fc - mean).abs();
    for j in 0..7 {
        asc += WGK[j] * ((fv[j].0 - mean).abs() + (fv[j].1 - mean).abs());
    }
    let (k, asc) = (k * h, asc * h.abs());
    let diff = ((k - g * h).abs()).max(0.0);
    let mut err = diff;
    if asc != 0.0 && diff != 0.0 {
        err = asc * (200.0 * diff / asc).powf(1.5).min(1.0);
    }
    // Not below what rounding allows.
    let floor = 50.0 * f64::EPSILON * asc.max(k.abs());
    err = err.max(floor);
    Ok((k, err, floor))
}

/// Adaptive Gauss–Kronrod: bisects the panel with the largest error until the total error
/// estimate meets the tolerance, or until every panel's error is at the level of rounding in
/// its integrand (then the tolerance asked for is below what double precision can deliver
/// for this integrand, and the rounding-limited error estimate is returned). Requires a
/// finite interval and a finite integrand on it.
pub fn gauss_kronrod(mut f: impl FnMut(f64) -> f64, a: f64, b: f64, tol: &Tolerance) -> Result<Estimate, NumericError> {
    gauss_kronrod_batch(
        |xs, ys| {
            for (x, y) in xs.iter().zip(ys.iter_mut()) {
                *y = f(*x);
            }
        },
        a,
        b,
        tol,
    )
}

/// [`gauss_kronrod`] with an integrand that takes the 15 nodes of a panel at once,
/// `f(xs, ys)` writing `ys[i] = f(xs[i])`: for integrands evaluated in batches
/// ([`crate::language::tape::Evaluator::eval_batch`]).
///
/// ```
/// use efold::numerics::quad::{gauss_kronrod_batch, Tolerance};
/// let est = gauss_kronrod_batch(
///     |xs, ys| xs.iter().zip(ys.iter_mut()).for_each(|(x, y)| *y = x.exp()),
///     0.0,
///     1.0,
///     &Tolerance::default(),
/// )?;
/// assert!((est.value - (1f64.exp() - 1.0)).abs() < 1e-14);
/// # Ok::<(), efold::numerics::NumericError>(())
/// ```
pub fn gauss_kronrod_batch(
    mut f: impl FnMut(&[f64], &mut [f64]),
    a: f64,
    b: f64,
    tol: &Tolerance,
) -> Result<Estimate, NumericError> {
    if a == b {
        return Ok(Estimate { value: 0.0, error: 0.0 });
    }
    let (v, e, fl) = kronrod_panel(&mut f, a, b)?;
    // (a, b, value, error, rounding floor, stalled): a small-error panel whose halves together
    // were no better than it is stalled on the integrand's own rounding noise and is not
    // split again.
    let mut panels: Vec<(f64, f64, f64, f64, f64, bool)> = vec![(a, b, v, e, fl, false)];
    let (mut total, mut err) = (v, e);
    let mut steps = 1;
    loop {
        if err <= tol.abs.max(tol.rel * total.abs()) || panels.iter().all(|p| p.3 <= p.4) {
            break;
        }
        let pick = panels
            .iter()
            .enumerate()
            .filter(|p| !p.1 .5)
            .max_by(|x, y| x.1 .3.total_cmp(&y.1 .3))
            .map(|p| p.0);
        let Some(i) = pick.filter(|_| steps < tol.max_steps) else {
            // Every panel left to split is stalled (or the cap is reached): the tolerance is
            // below what this integrand's rounding allows.
            let value: f64 = panels.iter().map(|p| p.2).sum();
            let error: f64 = panels.iter().map(|p| p.3).sum();
            return Err(NumericError::NoConvergence {
                what: "adaptive quadrature",
                estimate: value,
                error,
                iterations: steps,
            });
        };
        let (pa, pb, pv, pe, _, _) = panels.swap_remove(i);
        let m = 0.5 * (pa + pb);
        if m <= pa.min(pb) || m >= pa.max(pb) {
            // The panel cannot be split further in double precision.
            panels.push((pa, pb, pv, pe, 0.0, true));
            continue;
        }
        let (v1, e1, f1) = kronrod_panel(&mut f, pa, m)?;
        let (v2, e2, f2) = kronrod_panel(&mut f, m, pb)?;
        // No progress on a panel whose error is already tiny beside the integral: noise.
        // (An under-resolved feature can also fail to improve at first, but its error is
        // large then, so it keeps being split.)
        let stalled = e1 + e2 >= 0.99 * pe && pe <= 1e-9 * total.abs();
        total += v1 + v2 - pv;
        err += e1 + e2 - pe;
        panels.push((pa, m, v1, e1, f1, stalled));
        panels.push((m, pb, v2, e2, f2, stalled));
        steps += 1;
    }
    // Re-sum to shed the drift of the running totals.
    let value: f64 = panels.iter().map(|p| p.2).sum();
    let error: f64 = panels.iter().map(|p| p.3).sum();
    Ok(Estimate { value, error })
}

/// Double-exponential (tanh-sinh) quadrature on [a, b], for integrands that may be singular
/// (integrably) at either endpoint. `f` receives `(x, distance to the nearer endpoint, signed
/// toward the interior)` so that it can evaluate near an endpoint without cancellation:
/// for x near b the second argument is `b - x`, computed accurately; near a it is `x - a`.
///
/// Halves the step until two successive estimates agree to the tolerance.
pub fn tanh_sinh(
    mut f: impl FnMut(f64, f64) -> f64,
    a: f64,
    b: f64,
    tol: &Tolerance,
) -> Result<Estimate, NumericError> {
    if a == b {
        return Ok(Estimate { value: 0.0, error: 0.0 });
    }
    let half = 0.5 * (b - a);
    let pi2 = std::f64::consts::FRAC_PI_2;
    // Nodes t = k h with |t| <= 4.5: the outermost lie about 1e-61 (relative) from the
    // endpoints, so a singularity as strong as d^(-1/2) loses under 1e-30 of its integral.
    let t_max = 4.5;
    let mut node = |t: f64| -> Result<f64, NumericError> {
        let s = pi2 * t.sinh();
        let c = pi2 * t.cosh();
        // 1 - tanh(s) = 2 / (1 + e^{2s}), accurate for large s; weight = c / cosh^2(s).
        let cosh_s = s.cosh();
        let w = c / (cosh_s * cosh_s);
        if w == 0.0 {
            return Ok(0.0);
        }
        let one_minus = 2.0 / (1.0 + (2.0 * s).exp()); // 1 - tanh(s)
        let (x, d) = if s >= 0.0 {
            let d = half * one_minus; // distance from b
            (b - d, d)
        } else {
            let one_plus = 2.0 / (1.0 + (-2.0 * s).exp()); // 1 + tanh(s)
            let d = half * one_plus; // distance from a
            (a + d, d)
        };
        if d == 0.0 {
            return Ok(0.0);
        }
        let v = f(x, d);
        if !v.is_finite() {
            return Err(NumericError::NotFinite { at: x, value: v });
        }
        Ok(v * w)
    };
    let mut h = 0.5;
    let mut sum = node(0.0)?;
    let mut k = 1;
    while (k as f64) * h <= t_max {
        let t = k as f64 * h;
        sum += node(t)? + node(-t)?;
        k += 1;
    }
    let mut estimate = sum * h * half;
    let mut steps = 1;
    loop {
        // Add the midpoints of the current grid: nodes at odd multiples of h/2.
        h *= 0.5;
        let mut k = 1;
        while (k as f64) * h <= t_max {
            let t = k as f64 * h;
            sum += node(t)? + node(-t)?;
            k += 2;
        }
        let next = sum * h * half;
        let error = (next - estimate).abs();
        steps += 1;
        // The error of the previous level bounds the square of the new one (quadratic
        // convergence): accept when the difference is within tolerance.
        if error <= tol.abs.max(tol.rel * next.abs()) {
            return Ok(Estimate {
                value: next,
                error: error.max(f64::EPSILON * next.abs()),
            });
        }
        if steps >= tol.max_steps.min(12) {
            return Err(NumericError::NoConvergence {
                what: "double-exponential quadrature",
                estimate: next,
                error,
                iterations: steps,
            });
        }
        estimate = next;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The Kronrod rule integrates polynomials of degree <= 22 exactly on one panel (degree
    /// 3n + 1 for the n = 7 Gauss rule; Piessens et al., QUADPACK, 1983), the Gauss rule those
    /// of degree <= 13: a check of every constant above.
    #[test]
    fn constants_integrate_polynomials_exactly() {
        for deg in 0..=22 {
            let (k, _, _) = kronrod_panel(
                &mut |xs: &[f64], ys: &mut [f64]| xs.iter().zip(ys.iter_mut()).for_each(|(x, y)| *y = x.powi(deg)),
                -1.0,
                1.0,
            )
            .unwrap();
            let exact = if deg % 2 == 1 { 0.0 } else { 2.0 / (deg as f64 + 1.0) };
            assert!((k - exact).abs() < 1e-15, "degree {deg}: {k} vs {exact}");
        }
        let gauss_sum: f64 = 2.0 * WG[..3].iter().sum::<f64>() + WG[3];
        assert!((gauss_sum - 2.0).abs() < 1e-15);
    }

    #[test]
    fn smooth_integrals_meet_the_tolerance() {
        let tol = Tolerance::default();
        // integral of 1/(1+x^2) on [0, 10] = atan(10) (closed form).
        let e = gauss_kronrod(|x| 1.0 / (1.0 + x * x), 0.0, 10.0, &tol).unwrap();
        assert!((e.value - 10f64.atan()).abs() < 1e-13, "{e:?}");
        // a sharp peak: integral of 1/(1e-6 + x^2) on [-1, 1] = 2 atan(1e3)/1e-3.
        let e = gauss_kronrod(|x| 1.0 / (1e-6 + x * x), -1.0, 1.0, &tol).unwrap();
        let exact = 2.0 * (1e3f64).atan() / 1e-3;
        assert!(((e.value - exact) / exact).abs() < 1e-12, "{e:?}");
        assert!(e.error < 1e-11 * exact);
        // reversed limits change the sign.
        let e = gauss_kronrod(|x| x * x, 1.0, 0.0, &tol).unwrap();
        assert!((e.value + 1.0 / 3.0).abs() < 1e-15);
    }

    #[test]
    fn endpoint_singularities() {
        let tol = Tolerance::default();
        // integral of 1/sqrt(d) near both ends of [0, 1]: 1/sqrt(x) integrates to 2.
        let e = tanh_sinh(|x, _| 1.0 / x.sqrt(), 0.0, 1.0, &tol).unwrap();
        assert!((e.value - 2.0).abs() < 1e-12, "{e:?}");
        // integral of 1/sqrt(1 - x^2) on [-1, 1] = pi, using the accurate distance.
        let e = tanh_sinh(
            |x, d| 1.0 / (d * (2.0 - d)).sqrt() * if x.abs() <= 1.0 { 1.0 } else { f64::NAN },
            -1.0,
            1.0,
            &tol,
        )
        .unwrap();
        assert!((e.value - std::f64::consts::PI).abs() < 1e-12, "{e:?}");
    }

    #[test]
    fn failures_are_loud() {
        let e = gauss_kronrod(|x| 1.0 / x, -1.0, 1.0, &Tolerance::default());
        assert!(matches!(e, Err(NumericError::NotFinite { .. })), "{e:?}");
        let tight = Tolerance {
            max_steps: 3,
            ..Tolerance::default()
        };
        let e = gauss_kronrod(|x| (1.0 / (x + 1e-3)).sin(), 0.0, 1.0, &tight);
        assert!(matches!(e, Err(NumericError::NoConvergence { .. })), "{e:?}");
    }
}
