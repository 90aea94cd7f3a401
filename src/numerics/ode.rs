//! An adaptive Runge–Kutta integrator: the Dormand–Prince 5(4) pair (Dormand & Prince, J. Comput.
//! Appl. Math. 6, 19 (1980); coefficients as tabulated in Hairer, Nørsett & Wanner, *Solving
//! Ordinary Differential Equations I*, 2nd ed., Springer 1993, table 5.2), with local error
//! control on every component (`atol + rtol |y|`) and location of a sign change of an event
//! function by Brent's method over single steps from the last accepted point.
//!
//! ```
//! use efold::numerics::ode::{Options, integrate};
//! // y' = -y from 0 to 1: y(1) = exp(-1)
//! let r = integrate(|_, y: &[f64; 1]| [-y[0]], 0.0, [1.0], 1.0, &Options::default(), |_, _| None)?;
//! assert!((r.y[0] - (-1f64).exp()).abs() < 1e-10);
//! # Ok::<(), efold::numerics::NumericError>(())
//! ```

use super::roots::brent;
use super::NumericError;

/// Tolerances and caps.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Options {
    /// Relative tolerance per step. Default 1e-10.
    pub rtol: f64,
    /// Absolute tolerance per step. Default 1e-14.
    pub atol: f64,
    /// Largest step. Default 0.1 (in e-folds, for the solvers of this crate).
    pub h_max: f64,
    /// Cap on steps. Default 200 000.
    pub max_steps: usize,
    /// Tolerance of an event's location, relative to the step that holds it. Default 1e-13.
    pub event_tol: f64,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            rtol: 1e-10,
            atol: 1e-14,
            h_max: 0.1,
            max_steps: 200_000,
            event_tol: 1e-13,
        }
    }
}

/// Where the integration stopped.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Solution<const D: usize> {
    /// The final time.
    pub t: f64,
    /// The state there.
    pub y: [f64; D],
    /// True if an event stopped it before `t_end`.
    pub event: bool,
    /// Accepted steps.
    pub steps: usize,
    /// Rejected steps.
    pub rejected: usize,
}

const C2: f64 = 1.0 / 5.0;
const C3: f64 = 3.0 / 10.0;
const C4: f64 = 4.0 / 5.0;
const C5: f64 = 8.0 / 9.0;
const A21: f64 = 1.0 / 5.0;
const A31: f64 = 3.0 / 40.0;
const A32: f64 = 9.0 / 40.0;
const A41: f64 = 44.0 / 45.0;
const A42: f64 = -56.0 / 15.0;
const A43: f64 = 32.0 / 9.0;
const A51: f64 = 19372.0 / 6561.0;
const A52: f64 = -25360.0 / 2187.0;
const A53: f64 = 64448.0 / 6561.0;
const A54: f64 = -212.0 / 729.0;
const A61: f64 = 9017.0 / 3168.0;
const A62: f64 = -355.0 / 33.0;
const A63: f64 = 46732.0 / 5247.0;
const A64: f64 = 49.0 / 176.0;
const A65: f64 = -5103.0 / 18656.0;
const B1: f64 = 35.0 / 384.0;
const B3: f64 = 500.0 / 1113.0;
const B4: f64 = 125.0 / 192.0;
const B5: f64 = -2187.0 / 6784.0;
const B6: f64 = 11.0 / 84.0;
// error coefficients: b - b* (fifth minus fourth order)
const E1: f64 = 71.0 / 57600.0;
const E3: f64 = -71.0 / 16695.0;
const E4: f64 = 71.0 / 1920.0;
const E5: f64 = -17253.0 / 339200.0;
const E6: f64 = 22.0 / 525.0;
const E7: f64 = -1.0 / 40.0;

fn axpy<const D: usize>(y: &[f64; D], h: f64, terms: &[(f64, &[f64; D])]) -> [f64; D] {
    let mut out = *y;
    for (c, k) in terms {
        for i in 0..D {
            out[i] += h * c * k[i];
        }
    }
    out
}

/// One Dormand–Prince step from (t, y) with derivative k1 = f(t, y): the fifth-order result,
/// its derivative there (first-same-as-last), and the error estimate.
fn step<const D: usize>(
    f: &mut impl FnMut(f64, &[f64; D]) -> [f64; D],
    t: f64,
    y: &[f64; D],
    k1: &[f64; D],
    h: f64,
) -> ([f64; D], [f64; D], [f64; D]) {
    let k2 = f(t + C2 * h, &axpy(y, h, &[(A21, k1)]));
    let k3 = f(t + C3 * h, &axpy(y, h, &[(A31, k1), (A32, &k2)]));
    let k4 = f(t + C4 * h, &axpy(y, h, &[(A41, k1), (A42, &k2), (A43, &k3)]));
    let k5 = f(
        t + C5 * h,
        &axpy(y, h, &[(A51, k1), (A52, &k2), (A53, &k3), (A54, &k4)]),
    );
    let k6 = f(
        t + h,
        &axpy(y, h, &[(A61, k1), (A62, &k2), (A63, &k3), (A64, &k4), (A65, &k5)]),
    );
    let y5 = axpy(y, h, &[(B1, k1), (B3, &k3), (B4, &k4), (B5, &k5), (B6, &k6)]);
    let k7 = f(t + h, &y5);
    let mut err = [0.0; D];
    for i in 0..D {
        err[i] = h * (E1 * k1[i] + E3 * k3[i] + E4 * k4[i] + E5 * k5[i] + E6 * k6[i] + E7 * k7[i]);
    }
    (y5, k7, err)
}

/// Integrates y' = f(t, y) from t0 to t_end (either direction). After each accepted step,
/// `event(t, y)` may return a value whose sign change from the previous step stops the
/// integration at the zero, located by Brent's method on single steps (to
/// `opts.event_tol` of the step in t).
/// Fails on a non-finite state, a step below rounding, or the step cap.
pub fn integrate<const D: usize>(
    mut f: impl FnMut(f64, &[f64; D]) -> [f64; D],
    t0: f64,
    y0: [f64; D],
    t_end: f64,
    opts: &Options,
    mut event: impl FnMut(f64, &[f64; D]) -> Option<f64>,
) -> Result<Solution<D>, NumericError> {
    let dir = if t_end >= t0 { 1.0 } else { -1.0 };
    let (mut t, mut y) = (t0, y0);
    let mut k1 = f(t, &y);
    let mut h = dir * opts.h_max.min((t_end - t0).abs()).clamp(1e-12, 1e-3);
    let mut g_prev = event(t, &y);
    let (mut steps, mut rejected) = (0, 0);
    while (t_end - t) * dir > 0.0 {
        if steps + rejected >= opts.max_steps {
            return Err(NumericError::NoConvergence {
                what: "Runge-Kutta integration (step cap)",
                estimate: t,
                error: h.abs(),
                iterations: steps + rejected,
            });
        }
        if (t + h - t_end) * dir > 0.0 {
            h = t_end - t;
        }
        let (y_new, k_new, err) = step(&mut f, t, &y, &k1, h);
        let mut norm = 0.0f64;
        for i in 0..D {
            let sc = opts.atol + opts.rtol * y[i].abs().max(y_new[i].abs());
            norm = norm.max((err[i] / sc).abs());
        }
        if !norm.is_finite() || y_new.iter().any(|v| !v.is_finite()) {
            h *= 0.25;
            rejected += 1;
            if h.abs() < 1e-14 * t.abs().max(1.0) {
                return Err(NumericError::NotFinite { at: t, value: f64::NAN });
            }
            continue;
        }
        if norm <= 1.0 {
            let t_new = t + h;
            let g_new = event(t_new, &y_new);
            if let (Some(a), Some(b)) = (g_prev, g_new) {
                if a.signum() != b.signum() && b != a {
                    // locate the event inside this step: single steps from (t, y)
                    let (t_a, y_a, k_a) = (t, y, k1);
                    let mut g_at = |s: f64| -> f64 {
                        let (ys, _, _) = step(&mut f, t_a, &y_a, &k_a, s);
                        event(t_a + s, &ys).unwrap_or(f64::NAN)
                    };
                    let r = brent(&mut g_at, 0.0, h, opts.event_tol * h.abs().max(1e-300), 200)?;
                    let (ys, _, _) = step(&mut f, t_a, &y_a, &k_a, r.value);
                    return Ok(Solution {
                        t: t_a + r.value,
                        y: ys,
                        event: true,
                        steps: steps + 1,
                        rejected,
                    });
                }
            }
            g_prev = g_new;
            t = t_new;
            y = y_new;
            k1 = k_new;
            steps += 1;
        } else {
            rejected += 1;
        }
        // standard step-size controller, exponent 1/5 with safety 0.9, change within [0.2, 5]
        let factor = if norm == 0.0 {
            5.0
        } else {
            (0.9 * norm.powf(-0.2)).clamp(0.2, 5.0)
        };
        h = dir * (h.abs() * factor).min(opts.h_max);
        if h.abs() < 1e-15 * t.abs().max(1.0) {
            return Err(NumericError::NoConvergence {
                what: "Runge-Kutta integration (step below rounding)",
                estimate: t,
                error: h.abs(),
                iterations: steps,
            });
        }
    }
    Ok(Solution {
        t,
        y,
        event: false,
        steps,
        rejected,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The harmonic oscillator y'' = -y over 10 periods: y = cos t exactly.
    #[test]
    fn oscillator_to_tolerance() {
        let opts = Options {
            h_max: 1.0,
            ..Options::default()
        };
        let t_end = 20.0 * std::f64::consts::PI;
        let r = integrate(
            |_, y: &[f64; 2]| [y[1], -y[0]],
            0.0,
            [1.0, 0.0],
            t_end,
            &opts,
            |_, _| None,
        )
        .unwrap();
        assert!((r.y[0] - 1.0).abs() < 1e-8 && r.y[1].abs() < 1e-8, "{r:?}");
    }

    /// Event location: y' = 1 from 0, stop where y = 0.7.
    #[test]
    fn event_located() {
        let r = integrate(
            |_, _y: &[f64; 1]| [1.0],
            0.0,
            [0.0],
            5.0,
            &Options::default(),
            |_, y| Some(y[0] - 0.7),
        )
        .unwrap();
        assert!(r.event && (r.t - 0.7).abs() < 1e-12, "{r:?}");
    }

    /// Fifth order: halving the tolerance's step scale reduces the global error accordingly;
    /// y' = y cos t, y = exp(sin t).
    #[test]
    fn order_of_accuracy() {
        let f = |t: f64, y: &[f64; 1]| [y[0] * t.cos()];
        let exact = 5f64.sin().exp();
        let mut last = f64::INFINITY;
        for rtol in [1e-6, 1e-8, 1e-10, 1e-12] {
            let opts = Options {
                rtol,
                atol: 1e-300,
                h_max: 1.0,
                ..Options::default()
            };
            let r = integrate(f, 0.0, [1.0], 5.0, &opts, |_, _| None).unwrap();
            let err = (r.y[0] - exact).abs() / exact;
            assert!(err < 100.0 * rtol, "rtol {rtol}: error {err:e}");
            assert!(err < last);
            last = err;
        }
    }
}
