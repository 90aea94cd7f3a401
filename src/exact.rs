//! Beyond slow roll: the exact background in e-folds and the Mukhanov–Sasaki equations for the
//! scalar and tensor modes. Reduced Planck units (M_p = 1).
//!
//! Background, for L = 1/2 K (d phi)^2 - V, with the canonical velocity pi = sqrt(K) dphi/dN
//! (N counts e-folds forward in time):
//!
//! ```text
//! dphi/dN = pi / sqrt(K),   dpi/dN = -(3 - eps_H) (pi + V_chi / V),
//! eps_H = pi^2 / 2,   H^2 = V / (3 - eps_H),   V_chi = V_phi / sqrt(K).
//! ```
//!
//! Modes, with R the comoving curvature perturbation and h a tensor polarisation,
//! eps_1 = eps_H, eps_2 = d ln eps_1 / dN = 2 (dpi/dN) / pi:
//!
//! ```text
//! R'' + (3 + eps_2 - eps_1) R' + (k/aH)^2 R = 0,     h'' + (3 - eps_1) h' + (k/aH)^2 h = 0,
//! ```
//!
//! from the Mukhanov–Sasaki equation v'' + (k^2 - z''/z) v = 0 in conformal time with
//! v = z R, z = a dchi/dN, and its tensor analogue v_t = a h / 2. Bunch–Davies initial
//! conditions v = exp(-i k tau)/sqrt(2k) deep inside the horizon; P_R = k^3 |R|^2 / (2 pi^2),
//! P_t = 2 k^3 |h|^2 / (2 pi^2) (two polarisations) once frozen.
//!
//! Wavenumbers are measured against the pivot: a = 1 when the pivot exits, k = kappa a_* H_*,
//! so kappa = k / k_*.

use crate::canonical::AnalysisError;
use crate::model::{Model, OUT_SQRT_K, OUT_V};
use crate::numerics::ode::{integrate, Options as OdeOptions};
use crate::slowroll::fail;
use crate::tape::Evaluator;
use serde::Serialize;
use std::f64::consts::PI;

/// Settings of the exact solver, with their defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Settings {
    /// Modes start when k/aH reaches this (deep inside the horizon). Default 200.
    pub k_start: f64,
    /// Modes stop when k/aH falls to this (far outside). Default 1e-4: the frozen amplitude
    /// is reached up to O((k/aH)^2).
    pub k_stop: f64,
    /// The largest relative change of P allowed over the last e-fold before the stop: the
    /// check that the amplitude has frozen. Default 1e-5.
    pub freeze_tol: f64,
    /// Integrator tolerances for the modes and the background.
    pub ode: OdeOptions,
}

impl Default for Settings {
    fn default() -> Self {
        Settings {
            k_start: 200.0,
            k_stop: 1e-4,
            freeze_tol: 1e-5,
            ode: OdeOptions {
                rtol: 1e-10,
                atol: 1e-300,
                h_max: 0.05,
                max_steps: 500_000,
            },
        }
    }
}

/// The background state: (phi, pi).
pub type State = [f64; 2];

/// The exact background's right-hand side, and what derives from it.
pub struct Background<'m> {
    ev: std::cell::RefCell<Evaluator<'m>>,
}

/// Derived quantities at a point of the background.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Point {
    /// V.
    pub v: f64,
    /// eps_H = pi^2 / 2.
    pub eps_h: f64,
    /// H.
    pub h: f64,
    /// dphi/dN.
    pub dphi: f64,
    /// dpi/dN.
    pub dpi: f64,
}

impl<'m> Background<'m> {
    /// For a model.
    pub fn new(model: &'m Model) -> Background<'m> {
        Background {
            ev: std::cell::RefCell::new(model.evaluator()),
        }
    }

    /// V, eps_H, H and the derivatives at a state.
    pub fn point(&self, y: &State) -> Point {
        let mut ev = self.ev.borrow_mut();
        ev.eval_jet(y[0], 1);
        let (v, v1) = {
            let j = ev.jet_output(OUT_V);
            (j[0], j[1])
        };
        let s = ev.jet_output(OUT_SQRT_K)[0];
        let pi = y[1];
        let eps = 0.5 * pi * pi;
        let v_chi = v1 / s;
        Point {
            v,
            eps_h: eps,
            h: (v / (3.0 - eps)).sqrt(),
            dphi: pi / s,
            dpi: -(3.0 - eps) * (pi + v_chi / v),
        }
    }

    /// The slow-roll attractor's velocity at phi: pi = -V_chi / V.
    pub fn attractor(&self, phi: f64) -> f64 {
        let mut ev = self.ev.borrow_mut();
        ev.eval_jet(phi, 1);
        let j = ev.jet_output(OUT_V);
        let s = ev.jet_output(OUT_SQRT_K)[0];
        -j[1] / (s * j[0])
    }
}

/// A background run: where it started, the exact end (eps_H = 1), and checkpoints (N, state)
/// at every accepted step for restarting the modes.
#[derive(Debug, Clone)]
pub struct Run {
    /// The starting state (N = 0).
    pub start: State,
    /// N at the end of inflation (eps_H = 1), if it ends.
    pub n_end: Option<f64>,
    /// Checkpoints (N, state), ascending in N.
    pub checkpoints: Vec<(f64, State)>,
}

/// Integrates the background from `start` until eps_H = 1 or `n_max` e-folds.
pub fn run_background(
    bg: &Background<'_>,
    start: State,
    n_max: f64,
    settings: &Settings,
) -> Result<Run, AnalysisError> {
    let mut checkpoints = vec![(0.0, start)];
    let opts = OdeOptions {
        h_max: 0.05,
        ..settings.ode
    };
    let sol = integrate(
        |_, y: &State| {
            let p = bg.point(y);
            [p.dphi, p.dpi]
        },
        0.0,
        start,
        n_max,
        &opts,
        |n, y| {
            checkpoints.push((n, *y));
            Some(0.5 * y[1] * y[1] - 1.0)
        },
    )
    .map_err(|e| {
        fail(
            format!("the background integration failed: {e}"),
            &["check the potential along the trajectory"],
        )
    })?;
    checkpoints.retain(|c| c.0 <= sol.t);
    Ok(Run {
        start,
        n_end: sol.event.then_some(sol.t),
        checkpoints,
    })
}

/// The background state at N, integrated from the nearest checkpoint below.
pub fn state_at(bg: &Background<'_>, run: &Run, n: f64, settings: &Settings) -> Result<State, AnalysisError> {
    let i = run.checkpoints.partition_point(|c| c.0 <= n).saturating_sub(1);
    let (n0, y0) = run.checkpoints[i];
    if n0 == n {
        return Ok(y0);
    }
    let sol = integrate(
        |_, y: &State| {
            let p = bg.point(y);
            [p.dphi, p.dpi]
        },
        n0,
        y0,
        n,
        &settings.ode,
        |_, _| None,
    )
    .map_err(|e| {
        fail(
            format!("the background integration failed: {e}"),
            &["check the potential along the trajectory"],
        )
    })?;
    Ok(sol.y)
}

/// One mode's frozen power, scalar and tensor, with the freeze check.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ModePower {
    /// k / k_*.
    pub kappa: f64,
    /// P_R.
    pub p_s: f64,
    /// P_t.
    pub p_t: f64,
    /// N (from the run's start) where k = aH.
    pub n_cross: f64,
    /// Relative change of P_R over the last e-fold before the stop.
    pub drift: f64,
    /// Integrator steps taken.
    pub steps: usize,
}

/// The pivot: N (from the run's start) where it exits, and H there.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Pivot {
    /// N of the pivot's exit.
    pub n: f64,
    /// H at that moment.
    pub h: f64,
}

/// Solves one mode, kappa = k / k_*.
pub fn mode(
    bg: &Background<'_>,
    run: &Run,
    pivot: Pivot,
    kappa: f64,
    settings: &Settings,
) -> Result<ModePower, AnalysisError> {
    let k = kappa * pivot.h; // a_* = 1
    let k_over_ah = |n: f64, y: &State| k * (pivot.n - n).exp() / bg.point(y).h;
    // Find where k/aH = k_start along the background (it decreases with N during inflation).
    let n_hi = run.n_end.unwrap_or_else(|| run.checkpoints.last().map_or(0.0, |c| c.0));
    let find = |target: f64| -> Result<(f64, State), AnalysisError> {
        let idx = run.checkpoints.iter().position(|(n, y)| k_over_ah(*n, y) < target);
        let Some(j) = idx else {
            return Err(fail(
                format!("the mode k/k_* = {kappa:e} never reaches k/aH = {target:e} before the end of inflation"),
                &["ask for a smaller k, or fewer e-folds"],
            ));
        };
        if j == 0 {
            return Err(fail(
                format!("the background starts too late for k/k_* = {kappa:e} (k/aH is already below {target:e})"),
                &["ask for a larger k, or start the background earlier"],
            ));
        }
        let (n0, y0) = run.checkpoints[j - 1];
        let (n1, _) = run.checkpoints[j];
        let sol = integrate(
            |_, y: &State| {
                let p = bg.point(y);
                [p.dphi, p.dpi]
            },
            n0,
            y0,
            n1,
            &settings.ode,
            |n, y| Some(k_over_ah(n, y) - target),
        )
        .map_err(|e| fail(format!("background integration failed: {e}"), &[]))?;
        Ok((sol.t, sol.y))
    };
    let (n_i, y_i) = find(settings.k_start)?;
    let n_cross = find(1.0)?.0;
    let p = bg.point(&y_i);
    let a = (n_i - pivot.n).exp();
    let q = k / (a * p.h);
    let eps2 = 2.0 * p.dpi / y_i[1];
    let zn = 1.0 + 0.5 * eps2; // z'/z in e-folds
                               // Bunch–Davies with the first two terms of the Hankel asymptotic series, x = -k tau:
                               // v = C(x)/sqrt(2k), C = 1 + i mu/(2x) - mu(mu - 2)/(8x^2), mu = z''/z tau^2, with
                               // -tau = 1/((1 - eps) aH) and z''/z = (aH)^2 ((z'/z)^2 + (1 - eps) z'/z) (eps_2 eps_3 left out).
    let one_m = 1.0 - p.eps_h;
    let x = q / one_m;
    let mu_s = (zn * zn + one_m * zn) / (one_m * one_m);
    let mu_t = (1.0 + one_m) / (one_m * one_m);
    let sqrt2k = (2.0 * k).sqrt();
    // returns (v, dv/dN) as (re, im) pairs
    let bunch_davies = |mu: f64| -> ((f64, f64), (f64, f64)) {
        let c = (1.0 - mu * (mu - 2.0) / (8.0 * x * x), mu / (2.0 * x));
        let dc = (mu * (mu - 2.0) / (4.0 * x * x * x), -mu / (2.0 * x * x));
        // dv/dN = (dv/dtau)/(aH) = -(k/aH) (i C + C')/sqrt(2k) ... with dx/dtau = -k
        let ic_plus_dc = (-c.1 + dc.0, c.0 + dc.1);
        let v = (c.0 / sqrt2k, c.1 / sqrt2k);
        let dv = (-q * ic_plus_dc.0 / sqrt2k, -q * ic_plus_dc.1 / sqrt2k);
        (v, dv)
    };
    let z = a * y_i[1];
    let (v, dv) = bunch_davies(mu_s);
    let r = (v.0 / z, v.1 / z);
    let dr = (dv.0 / z - r.0 * zn, dv.1 / z - r.1 * zn);
    let (vt, dvt) = bunch_davies(mu_t);
    let h = (2.0 * vt.0 / a, 2.0 * vt.1 / a);
    let dh = (2.0 * dvt.0 / a - h.0, 2.0 * dvt.1 / a - h.1);
    let start = [y_i[0], y_i[1], r.0, r.1, dr.0, dr.1, h.0, h.1, dh.0, dh.1];
    let rhs = |n: f64, y: &[f64; 10]| -> [f64; 10] {
        let st = [y[0], y[1]];
        let p = bg.point(&st);
        let q = k * (pivot.n - n).exp() / p.h;
        let q2 = q * q;
        let eps2 = 2.0 * p.dpi / y[1];
        let fr = 3.0 + eps2 - p.eps_h;
        let ft = 3.0 - p.eps_h;
        [
            p.dphi,
            p.dpi,
            y[4],
            y[5],
            -fr * y[4] - q2 * y[2],
            -fr * y[5] - q2 * y[3],
            y[8],
            y[9],
            -ft * y[8] - q2 * y[6],
            -ft * y[9] - q2 * y[7],
        ]
    };
    // Integrate to one e-fold before the stop, then on to the stop, to check the freeze.
    let leg = |n0: f64, y0: [f64; 10], target: f64| -> Result<(f64, [f64; 10], usize), AnalysisError> {
        let sol = integrate(rhs, n0, y0, n_hi + 10.0, &settings.ode, |n, y| {
            Some(k_over_ah(n, &[y[0], y[1]]) - target)
        })
        .map_err(|e| fail(format!("the mode k/k_* = {kappa:e} failed to integrate: {e}"), &[]))?;
        if !sol.event {
            return Err(fail(
                format!("the mode k/k_* = {kappa:e} does not reach k/aH = {target:e} before inflation ends"),
                &["the mode exits too close to the end of inflation: ask for smaller k"],
            ));
        }
        Ok((sol.t, sol.y, sol.steps))
    };
    let (n_prev, y_prev, steps_a) = leg(n_i, start, settings.k_stop * std::f64::consts::E)?;
    let (_, y_stop, steps_b) = leg(n_prev, y_prev, settings.k_stop)?;
    let steps = steps_a + steps_b;
    let power = |y: &[f64; 10]| {
        let c = k.powi(3) / (2.0 * PI * PI);
        (c * (y[2] * y[2] + y[3] * y[3]), 2.0 * c * (y[6] * y[6] + y[7] * y[7]))
    };
    let (p_s, p_t) = power(&y_stop);
    let (p_s_prev, _) = power(&y_prev);
    Ok(ModePower {
        kappa,
        p_s,
        p_t,
        n_cross,
        drift: ((p_s - p_s_prev) / p_s).abs(),
        steps,
    })
}

/// H and N at the pivot, `n_star` e-folds before the end of a run.
pub fn pivot(bg: &Background<'_>, run: &Run, n_star: f64, settings: &Settings) -> Result<Pivot, AnalysisError> {
    let n_end = run.n_end.ok_or_else(|| {
        fail(
            "inflation does not end in the exact background (eps_H never reaches 1)".to_string(),
            &["the slow-roll end of inflation was not confirmed by the exact solution"],
        )
    })?;
    let n = n_end - n_star;
    if n <= 0.0 {
        return Err(fail(
            format!("the exact background gives only {n_end:.3} e-folds from its start, fewer than N_* = {n_star}"),
            &["start the background earlier"],
        ));
    }
    let y = state_at(bg, run, n, settings)?;
    Ok(Pivot { n, h: bg.point(&y).h })
}

/// Spectral index, running and tensor tilt from ln P on five points kappa = exp(j h),
/// j = -2..2 (five-point stencils, error O(h^4)).
pub fn tilts(ln_p: &[f64; 5], h: f64) -> (f64, f64) {
    let d1 = (ln_p[0] - 8.0 * ln_p[1] + 8.0 * ln_p[3] - ln_p[4]) / (12.0 * h);
    let d2 = (-ln_p[0] + 16.0 * ln_p[1] - 30.0 * ln_p[2] + 16.0 * ln_p[3] - ln_p[4]) / (12.0 * h * h);
    (d1, d2)
}
