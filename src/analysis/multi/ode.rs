//! The Dormand–Prince 5(4) pair of [`crate::numerics::ode`] on a state of any length (the
//! multi-field background has 2n components, the modes 2n + 4n^2 + 4), with a right-hand side
//! that may fail (a field space that refuses a point), a weight per component for the error
//! control, a callback at each accepted step (the checkpoints) and the location of a sign
//! change of an event function by Brent's method on single steps.
//!
//! Tolerance: the local error of each step is kept below `atol_i + rtol |y_i|` on every
//! component; the step's error estimate is the embedded fourth-order difference (Dormand &
//! Prince, J. Comput. Appl. Math. 6, 19 (1980); coefficients as in Hairer, Nørsett & Wanner,
//! *Solving Ordinary Differential Equations I*, table 5.2).

use crate::analysis::error::AnalysisError;
use crate::numerics::roots::brent;
use crate::numerics::NumericError;

/// Tolerances and caps of one integration.
#[derive(Debug, Clone, PartialEq)]
pub struct Tolerances {
    /// Relative tolerance per step.
    pub rtol: f64,
    /// Absolute tolerance per component (one value for all if its length is 1).
    pub atol: Vec<f64>,
    /// Largest step.
    pub h_max: f64,
    /// Cap on steps (accepted and rejected).
    pub max_steps: usize,
}

/// Where an integration stopped.
#[derive(Debug, Clone, PartialEq)]
pub struct End {
    /// The final time.
    pub t: f64,
    /// The state there.
    pub y: Vec<f64>,
    /// True if the event stopped it before `t_end`.
    pub event: bool,
    /// Accepted steps.
    pub steps: usize,
    /// The largest error estimate of an accepted step relative to its tolerance (at most 1).
    pub error_ratio: f64,
}

/// Why an integration failed.
#[derive(Debug, Clone, PartialEq)]
pub enum Failure {
    /// The right-hand side refused a state.
    Rhs(AnalysisError),
    /// The integrator gave up.
    Numeric(NumericError),
}

/// A right-hand side: dy/dt written into the last argument.
pub trait Rhs {
    /// dy/dt at (t, y).
    fn eval(&mut self, t: f64, y: &[f64], dy: &mut [f64]) -> Result<(), AnalysisError>;
}

impl<F: FnMut(f64, &[f64], &mut [f64]) -> Result<(), AnalysisError>> Rhs for F {
    fn eval(&mut self, t: f64, y: &[f64], dy: &mut [f64]) -> Result<(), AnalysisError> {
        self(t, y, dy)
    }
}

const C: [f64; 6] = [0.0, 1.0 / 5.0, 3.0 / 10.0, 4.0 / 5.0, 8.0 / 9.0, 1.0];
const A: [[f64; 5]; 6] = [
    [0.0; 5],
    [1.0 / 5.0, 0.0, 0.0, 0.0, 0.0],
    [3.0 / 40.0, 9.0 / 40.0, 0.0, 0.0, 0.0],
    [44.0 / 45.0, -56.0 / 15.0, 32.0 / 9.0, 0.0, 0.0],
    [
        19372.0 / 6561.0,
        -25360.0 / 2187.0,
        64448.0 / 6561.0,
        -212.0 / 729.0,
        0.0,
    ],
    [
        9017.0 / 3168.0,
        -355.0 / 33.0,
        46732.0 / 5247.0,
        49.0 / 176.0,
        -5103.0 / 18656.0,
    ],
];
const B: [f64; 6] = [
    35.0 / 384.0,
    0.0,
    500.0 / 1113.0,
    125.0 / 192.0,
    -2187.0 / 6784.0,
    11.0 / 84.0,
];
const E: [f64; 7] = [
    71.0 / 57600.0,
    0.0,
    -71.0 / 16695.0,
    71.0 / 1920.0,
    -17253.0 / 339200.0,
    22.0 / 525.0,
    -1.0 / 40.0,
];

/// The stages of one step, kept between steps (no allocation per step).
struct Work {
    k: [Vec<f64>; 7],
    tmp: Vec<f64>,
    y5: Vec<f64>,
    err: Vec<f64>,
}

impl Work {
    fn new(d: usize) -> Work {
        Work {
            k: std::array::from_fn(|_| vec![0.0; d]),
            tmp: vec![0.0; d],
            y5: vec![0.0; d],
            err: vec![0.0; d],
        }
    }

    /// One step of size h from (t, y) with k[0] = f(t, y): y5, k[6] = f(t + h, y5), err.
    fn step(&mut self, f: &mut dyn Rhs, t: f64, y: &[f64], h: f64) -> Result<(), AnalysisError> {
        let d = y.len();
        for s in 1..6 {
            for i in 0..d {
                let mut acc = 0.0;
                for j in 0..s {
                    acc += A[s][j] * self.k[j][i];
                }
                self.tmp[i] = y[i] + h * acc;
            }
            let (_, tail) = self.k.split_at_mut(s);
            f.eval(t + C[s] * h, &self.tmp, &mut tail[0])?;
        }
        for i in 0..d {
            let mut acc = 0.0;
            for j in 0..6 {
                acc += B[j] * self.k[j][i];
            }
            self.y5[i] = y[i] + h * acc;
        }
        f.eval(t + h, &self.y5, &mut self.k[6])?;
        for i in 0..d {
            let mut acc = 0.0;
            for j in 0..7 {
                acc += E[j] * self.k[j][i];
            }
            self.err[i] = h * acc;
        }
        Ok(())
    }
}

/// Integrates dy/dt = f from (t0, y0) to t_end (either direction). `on_step(t, y)` is called
/// at the start and after each accepted step; `event(t, y)` may return a value whose sign
/// change between two accepted steps stops the integration at its zero (located to 1e-13 of
/// the step). `event` is always called right after `f` was evaluated at the same (t, y), so
/// it may reuse what `f` computed there. Fails on a state that is not finite, a step below rounding, or the step cap.
pub fn integrate(
    f: &mut dyn Rhs,
    t0: f64,
    y0: &[f64],
    t_end: f64,
    tol: &Tolerances,
    event: &mut dyn FnMut(f64, &[f64]) -> Option<f64>,
    on_step: &mut dyn FnMut(f64, &[f64]),
) -> Result<End, Failure> {
    let d = y0.len();
    let atol = |i: usize| if tol.atol.len() == 1 { tol.atol[0] } else { tol.atol[i] };
    let dir = if t_end >= t0 { 1.0 } else { -1.0 };
    let (mut t, mut y) = (t0, y0.to_vec());
    let mut w = Work::new(d);
    f.eval(t, &y, &mut w.k[0]).map_err(Failure::Rhs)?;
    let mut h = dir * tol.h_max.min((t_end - t0).abs()).clamp(1e-12, 1e-3);
    let mut g_prev = event(t, &y);
    on_step(t, &y);
    let (mut steps, mut rejected, mut worst) = (0usize, 0usize, 0.0f64);
    while (t_end - t) * dir > 0.0 {
        if steps + rejected >= tol.max_steps {
            return Err(Failure::Numeric(NumericError::NoConvergence {
                what: "Runge-Kutta integration (step cap)",
                estimate: t,
                error: h.abs(),
                iterations: steps + rejected,
            }));
        }
        if (t + h - t_end) * dir > 0.0 {
            h = t_end - t;
        }
        w.step(f, t, &y, h).map_err(Failure::Rhs)?;
        let mut norm = 0.0f64;
        for i in 0..d {
            let sc = atol(i) + tol.rtol * y[i].abs().max(w.y5[i].abs());
            norm = norm.max((w.err[i] / sc).abs());
        }
        if !norm.is_finite() || w.y5.iter().any(|v| !v.is_finite()) {
            h *= 0.25;
            rejected += 1;
            if h.abs() < 1e-14 * t.abs().max(1.0) {
                return Err(Failure::Numeric(NumericError::NotFinite { at: t, value: f64::NAN }));
            }
            continue;
        }
        if norm <= 1.0 {
            let t_new = t + h;
            let g_new = event(t_new, &w.y5);
            if let (Some(a), Some(b)) = (g_prev, g_new) {
                if a.signum() != b.signum() && b != a {
                    return locate(f, &mut w, (t, &y), h, event, (steps + 1, worst.max(norm)));
                }
            }
            g_prev = g_new;
            t = t_new;
            std::mem::swap(&mut y, &mut w.y5);
            w.k.swap(0, 6);
            steps += 1;
            worst = worst.max(norm);
            on_step(t, &y);
        } else {
            rejected += 1;
        }
        let factor = if norm == 0.0 {
            5.0
        } else {
            (0.9 * norm.powf(-0.2)).clamp(0.2, 5.0)
        };
        h = dir * (h.abs() * factor).min(tol.h_max);
        if h.abs() < 1e-15 * t.abs().max(1.0) {
            return Err(Failure::Numeric(NumericError::NoConvergence {
                what: "Runge-Kutta integration (step below rounding)",
                estimate: t,
                error: h.abs(),
                iterations: steps,
            }));
        }
    }
    Ok(End {
        t,
        y,
        event: false,
        steps,
        error_ratio: worst,
    })
}

/// The zero of the event inside the accepted step from (t, y) of size h: single steps from
/// (t, y) (k[0] holds f(t, y)) searched by Brent's method.
fn locate(
    f: &mut dyn Rhs,
    w: &mut Work,
    (t, y): (f64, &[f64]),
    h: f64,
    event: &mut dyn FnMut(f64, &[f64]) -> Option<f64>,
    (steps, worst): (usize, f64),
) -> Result<End, Failure> {
    let mut failed = None;
    let r = brent(
        |s| match w.step(f, t, y, s) {
            Ok(()) => event(t + s, &w.y5).unwrap_or(f64::NAN),
            Err(e) => {
                failed = Some(e);
                f64::NAN
            }
        },
        0.0,
        h,
        1e-13 * h.abs().max(1e-300),
        200,
    );
    if let Some(e) = failed {
        return Err(Failure::Rhs(e));
    }
    let r = r.map_err(Failure::Numeric)?;
    w.step(f, t, y, r.value).map_err(Failure::Rhs)?;
    Ok(End {
        t: t + r.value,
        y: w.y5.clone(),
        event: true,
        steps,
        error_ratio: worst,
    })
}

/// The column (from 0) of [`GBS`] from which a step may stop early, and the scaled error
/// estimate below which it does: 3 (order 8) and 1e-2, a hundredth of the tolerance.
const GBS_EARLY_COLUMN: usize = 3;
const GBS_EARLY_ERROR: f64 = 1e-2;

/// The substep counts of [`gbs_step`]: 2, 4, ..., 16 (eight columns, error of order 2 x 8).
const GBS: [usize; 8] = [2, 4, 6, 8, 10, 12, 14, 16];

/// One Gragg–Bulirsch–Stoer step of size h from (t, y): the modified midpoint rule with each
/// substep count of [`GBS`], extrapolated to zero step in h^2 by Aitken–Neville (Hairer,
/// Nørsett & Wanner, *Solving Ordinary Differential Equations I*, II.9). Returns the most
/// extrapolated state and its error estimate (its difference from the entry one order below)
/// scaled by the tolerances. A step whose estimate is already below [`GBS_EARLY_ERROR`] from
/// column [`GBS_EARLY_COLUMN`] on stops there.
fn gbs_step(f: &mut dyn Rhs, t: f64, y: &[f64], h: f64, tol: &Tolerances) -> Result<(Vec<f64>, f64), AnalysisError> {
    let d = y.len();
    let atol = |i: usize| if tol.atol.len() == 1 { tol.atol[0] } else { tol.atol[i] };
    let (mut dy, mut z0, mut z1, mut z2, mut f0) =
        (vec![0.0; d], vec![0.0; d], vec![0.0; d], vec![0.0; d], vec![0.0; d]);
    f.eval(t, y, &mut f0)?;
    let mut prev: Vec<Vec<f64>> = Vec::new();
    let mut err = f64::INFINITY;
    for (j, &m) in GBS.iter().enumerate() {
        let hs = h / m as f64;
        z0.copy_from_slice(y);
        for i in 0..d {
            z1[i] = y[i] + hs * f0[i];
        }
        for s in 1..m {
            f.eval(t + s as f64 * hs, &z1, &mut dy)?;
            for i in 0..d {
                z2[i] = z0[i] + 2.0 * hs * dy[i];
            }
            std::mem::swap(&mut z0, &mut z1);
            std::mem::swap(&mut z1, &mut z2);
        }
        f.eval(t + h, &z1, &mut dy)?;
        let mut cur: Vec<Vec<f64>> = vec![(0..d).map(|i| 0.5 * (z1[i] + z0[i] + hs * dy[i])).collect()];
        for k in 1..=j {
            let ratio = (m as f64 / GBS[j - k] as f64).powi(2) - 1.0;
            let next: Vec<f64> = (0..d)
                .map(|i| cur[k - 1][i] + (cur[k - 1][i] - prev[k - 1][i]) / ratio)
                .collect();
            cur.push(next);
        }
        if j > 0 {
            err = 0.0;
            for i in 0..d {
                let sc = atol(i) + tol.rtol * y[i].abs().max(cur[j][i].abs());
                err = err.max(((cur[j][i] - cur[j - 1][i]) / sc).abs());
            }
        }
        prev = cur;
        // Converged well inside the tolerance from order 8 on (a step the largest step
        // bounds, not the error): the columns left would not change the result.
        if j >= GBS_EARLY_COLUMN && err <= GBS_EARLY_ERROR {
            break;
        }
    }
    Ok((prev.pop().unwrap_or_default(), err))
}

/// [`integrate`] with Gragg–Bulirsch–Stoer steps (the modified midpoint rule with 2, 4, ...,
/// 16 substeps extrapolated in h^2, error of order 16): far fewer steps at tight tolerances
/// on smooth problems (the modes outside the horizon). The same contract: `event` right after
/// `f` at the same state, its zero located by Brent's method (to 1e-13 of the step). The
/// step's error estimate, scaled by the tolerances, is kept below 1; `End::error_ratio` is
/// the largest accepted.
pub fn integrate_extrapolated(
    f: &mut dyn Rhs,
    t0: f64,
    y0: &[f64],
    t_end: f64,
    tol: &Tolerances,
    event: &mut dyn FnMut(f64, &[f64]) -> Option<f64>,
) -> Result<End, Failure> {
    let mut dy = vec![0.0; y0.len()];
    let dir = if t_end >= t0 { 1.0 } else { -1.0 };
    let (mut t, mut y) = (t0, y0.to_vec());
    f.eval(t, &y, &mut dy).map_err(Failure::Rhs)?;
    let mut g_prev = event(t, &y);
    let mut h = dir * tol.h_max.min((t_end - t0).abs()).clamp(1e-12, 1e-2);
    let (mut steps, mut tries, mut worst) = (0usize, 0usize, 0.0f64);
    while (t_end - t) * dir > 0.0 {
        tries += 1;
        if tries >= tol.max_steps {
            return Err(Failure::Numeric(NumericError::NoConvergence {
                what: "extrapolation integration (step cap)",
                estimate: t,
                error: h.abs(),
                iterations: tries,
            }));
        }
        if (t + h - t_end) * dir > 0.0 {
            h = t_end - t;
        }
        let (y_new, err) = gbs_step(f, t, &y, h, tol).map_err(Failure::Rhs)?;
        let finite = err.is_finite() && y_new.iter().all(|v| v.is_finite());
        if finite && err <= 1.0 {
            f.eval(t + h, &y_new, &mut dy).map_err(Failure::Rhs)?;
            let g_new = event(t + h, &y_new);
            if let (Some(a), Some(b)) = (g_prev, g_new) {
                if a.signum() != b.signum() && b != a {
                    return locate_extrapolated(f, (t, &y), h, tol, event, (steps + 1, worst.max(err)));
                }
            }
            (t, y, g_prev) = (t + h, y_new, g_new);
            steps += 1;
            worst = worst.max(err);
        }
        let factor = if !finite {
            0.25
        } else if err == 0.0 {
            4.0
        } else {
            (0.94 * (0.65 / err).powf(1.0 / 15.0)).clamp(0.2, 4.0)
        };
        h = dir * (h.abs() * factor).min(tol.h_max);
        if h.abs() < 1e-15 * t.abs().max(1.0) {
            return Err(Failure::Numeric(NumericError::NoConvergence {
                what: "extrapolation integration (step below rounding)",
                estimate: t,
                error: h.abs(),
                iterations: steps,
            }));
        }
    }
    Ok(End {
        t,
        y,
        event: false,
        steps,
        error_ratio: worst,
    })
}

/// The zero of the event inside the accepted extrapolation step from (t, y) of size h.
fn locate_extrapolated(
    f: &mut dyn Rhs,
    (t, y): (f64, &[f64]),
    h: f64,
    tol: &Tolerances,
    event: &mut dyn FnMut(f64, &[f64]) -> Option<f64>,
    (steps, worst): (usize, f64),
) -> Result<End, Failure> {
    let mut failed = None;
    let mut dy = vec![0.0; y.len()];
    let mut at = |s: f64| -> Result<Vec<f64>, AnalysisError> {
        let (ys, _) = gbs_step(f, t, y, s, tol)?;
        f.eval(t + s, &ys, &mut dy)?;
        Ok(ys)
    };
    let r = brent(
        |s| match at(s) {
            Ok(ys) => event(t + s, &ys).unwrap_or(f64::NAN),
            Err(e) => {
                failed = Some(e);
                f64::NAN
            }
        },
        0.0,
        h,
        1e-13 * h.abs().max(1e-300),
        200,
    );
    if let Some(e) = failed {
        return Err(Failure::Rhs(e));
    }
    let r = r.map_err(Failure::Numeric)?;
    let ys = at(r.value).map_err(Failure::Rhs)?;
    Ok(End {
        t: t + r.value,
        y: ys,
        event: true,
        steps,
        error_ratio: worst,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tol(rtol: f64) -> Tolerances {
        Tolerances {
            rtol,
            atol: vec![1e-300],
            h_max: 1.0,
            max_steps: 100_000,
        }
    }

    /// y' = y cos t: y = exp(sin t) (closed form), to the tolerance.
    #[test]
    fn closed_form_to_tolerance() {
        let mut f = |t: f64, y: &[f64], dy: &mut [f64]| {
            dy[0] = y[0] * t.cos();
            Ok(())
        };
        let r = integrate(&mut f, 0.0, &[1.0], 5.0, &tol(1e-10), &mut |_, _| None, &mut |_, _| {}).unwrap();
        let exact = 5f64.sin().exp();
        assert!(((r.y[0] - exact) / exact).abs() < 1e-8, "{r:?}");
    }

    /// The same with extrapolation steps, to a tighter tolerance in far fewer steps.
    #[test]
    fn extrapolation_to_tolerance() {
        let mut f = |t: f64, y: &[f64], dy: &mut [f64]| {
            dy[0] = y[0] * t.cos();
            Ok(())
        };
        let r = integrate_extrapolated(&mut f, 0.0, &[1.0], 5.0, &tol(1e-12), &mut |_, _| None).unwrap();
        let exact = 5f64.sin().exp();
        assert!(((r.y[0] - exact) / exact).abs() < 1e-10, "{r:?}");
        assert!(r.steps < 60, "{}", r.steps);
        let mut g = |_: f64, _: &[f64], dy: &mut [f64]| {
            dy[0] = 1.0;
            Ok(())
        };
        let r = integrate_extrapolated(&mut g, 0.0, &[0.0], 5.0, &tol(1e-10), &mut |_, y| Some(y[0] - 0.7)).unwrap();
        assert!(r.event && (r.t - 0.7).abs() < 1e-12, "{r:?}");
    }

    /// The event y = 0.7 on y' = 1, located to 1e-12.
    #[test]
    fn event_located() {
        let mut f = |_: f64, _: &[f64], dy: &mut [f64]| {
            dy[0] = 1.0;
            Ok(())
        };
        let r = integrate(
            &mut f,
            0.0,
            &[0.0],
            5.0,
            &tol(1e-10),
            &mut |_, y| Some(y[0] - 0.7),
            &mut |_, _| {},
        )
        .unwrap();
        assert!(r.event && (r.t - 0.7).abs() < 1e-12, "{r:?}");
    }
}
