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

use crate::analysis::single::canonical::AnalysisError;
use crate::analysis::slowroll::fail;
use crate::language::tape::Evaluator;
use crate::model::{Model, OUT_DV, OUT_SQRT_K};
use crate::numerics::ode::{integrate, Options as OdeOptions};
use serde::Serialize;
use std::f64::consts::PI;

/// Settings of the exact solver, with their defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Settings {
    /// Modes start when k/aH reaches this (deep inside the horizon). Default 100; the initial
    /// conditions carry the first two terms of the Hankel asymptotic series, so the start
    /// changes P by well under 1e-5 (tested against 1000).
    pub k_start: f64,
    /// Modes stop when k/aH falls to this (far outside). Default 1e-4: the frozen amplitude
    /// is reached up to O((k/aH)^2).
    pub k_stop: f64,
    /// The largest relative change of P allowed over the last e-fold before the stop: the
    /// check that the amplitude has frozen. Default 1e-5.
    pub freeze_tol: f64,
    /// Integrator tolerances for the modes and the background.
    pub ode: OdeOptions,
    /// Start the background here, (phi, dphi/dN), instead of on the slow-roll attractor well
    /// before the pivot; dphi/dN `None` takes the attractor's velocity at phi.
    pub start: Option<(f64, Option<f64>)>,
}

impl Default for Settings {
    fn default() -> Self {
        Settings {
            k_start: 100.0,
            k_stop: 1e-4,
            freeze_tol: 1e-5,
            start: None,
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
        let v = ev.eval(y[0]);
        let (v1, s) = (ev.output(OUT_DV), ev.output(OUT_SQRT_K));
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
        let v = ev.eval(phi);
        // V and V_phi scaled by the same exact power of two: the same bits, and no underflow
        // of sqrt(K) V for a tiny V.
        let f = crate::numerics::pow2_normaliser(v);
        -(ev.output(OUT_DV) * f) / (ev.output(OUT_SQRT_K) * (v * f))
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
                format!(
                    "the mode k/k_* = {} never reaches k/aH = {} before the end of inflation",
                    crate::report::numfmt::number(kappa),
                    crate::report::numfmt::typed(target)
                ),
                &["ask for a smaller k, or fewer e-folds"],
            ));
        };
        if j == 0 {
            return Err(fail(
                format!(
                    "the background starts too late for k/k_* = {} (k/aH is already below {})",
                    crate::report::numfmt::number(kappa),
                    crate::report::numfmt::typed(target)
                ),
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
        .map_err(|e| {
            fail(
                format!(
                    "the mode k/k_* = {} failed to integrate: {e}",
                    crate::report::numfmt::number(kappa)
                ),
                &[],
            )
        })?;
        if !sol.event {
            return Err(fail(
                format!(
                    "the mode k/k_* = {} does not reach k/aH = {} before inflation ends",
                    crate::report::numfmt::number(kappa),
                    crate::report::numfmt::typed(target)
                ),
                &["the mode exits too close to the end of inflation: ask for smaller k"],
            ));
        }
        Ok((sol.t, sol.y, sol.steps))
    };
    let (n_prev, y_prev, steps_a) = leg(n_i, start, settings.k_stop * std::f64::consts::E)?;
    let (_, y_stop, steps_b) = leg(n_prev, y_prev, settings.k_stop)?;
    let steps = steps_a + steps_b;
    // k scales as sqrt(V): for a tiny or huge overall scale of V, k^3 underflows or overflows
    // while k^3 |R|^2 (which scales as V) does not. Then k |R|^2 is formed first.
    let c = k.powi(3) / (2.0 * PI * PI);
    let c_normal = c.is_normal();
    let power = |y: &[f64; 10]| {
        let (rs, rt) = (y[2] * y[2] + y[3] * y[3], y[6] * y[6] + y[7] * y[7]);
        if c_normal {
            (c * rs, 2.0 * c * rt)
        } else {
            let kk = k * k / (2.0 * PI * PI);
            ((k * rs) * kk, 2.0 * (k * rt) * kk)
        }
    };
    let (p_s, p_t) = power(&y_stop);
    let (p_s_prev, _) = power(&y_prev);
    let drift = ((p_s - p_s_prev) / p_s).abs();
    if drift > settings.freeze_tol {
        return Err(fail(
            format!(
                "the mode k/k_* = {} has not frozen: P changed by {} over its last e-fold (allowed {})",
                crate::report::numfmt::number(kappa),
                crate::report::numfmt::scientific(drift, 2),
                crate::report::numfmt::typed(settings.freeze_tol)
            ),
            &["stop the modes further outside the horizon (a smaller k/aH at the stop)"],
        ));
    }
    Ok(ModePower {
        kappa,
        p_s,
        p_t,
        n_cross,
        drift,
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
            format!(
                "the exact background gives only {} e-folds from its start, fewer than N_* = {}",
                crate::report::numfmt::number(n_end),
                crate::report::numfmt::typed(n_star)
            ),
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

/// What the exact route adds to a prediction at one N_*.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ExactExtras {
    /// Total e-folds of the exact background from its start to its end.
    pub n_total: f64,
    /// phi at eps_V = 1 (the slow-roll end), beside `phi_end` (eps_H = 1).
    pub phi_end_slow_roll: f64,
    /// phi_* of the slow-roll route at the same N_*.
    pub phi_star_slow_roll: f64,
    /// n_s of the slow-roll route (first order, or second with --second-order).
    pub n_s_slow_roll: f64,
    /// r of the slow-roll route.
    pub r_slow_roll: f64,
    /// Hubble-flow parameters at the pivot's exit, from the exact background.
    pub eps_1: f64,
    /// eps_2 = d ln eps_1 / dN.
    pub eps_2: f64,
    /// eps_3 = d ln eps_2 / dN.
    pub eps_3: f64,
    /// n_s from the second-order formulas with these eps_i.
    pub n_s_second_order: f64,
    /// r from the second-order formulas.
    pub r_second_order: f64,
    /// n_t from the second-order formulas.
    pub n_t_second_order: f64,
    /// P_R at the pivot for the potential as written.
    pub p_s_unscaled: f64,
    /// The largest relative change of P over the last e-fold before the stop (freeze check).
    pub freeze_drift: f64,
}

/// The exact observables at one N_*.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ExactPoint {
    /// N_*.
    pub n_star: f64,
    /// phi at the pivot's exit.
    pub phi_star: f64,
    /// phi at eps_H = 1.
    pub phi_end: f64,
    /// n_s from the spectrum.
    pub n_s: f64,
    /// r = P_t / P_R at the pivot.
    pub r: f64,
    /// dn_s / dln k.
    pub alpha_s: f64,
    /// n_t.
    pub n_t: f64,
    /// Extras.
    pub extras: ExactExtras,
}

/// Step in ln k of the five-point stencils for the tilts.
pub const TILT_STEP: f64 = 0.05;

/// Exact observables for each N_*: the background starts on the slow-roll attractor at the
/// slow-roll field value `phi_start` (enough e-folds before the end for every mode), runs to
/// eps_H = 1, and the modes around each pivot give the tilts.
pub fn observe(
    model: &Model,
    run: &Run,
    n_stars: &[f64],
    settings: &Settings,
) -> Result<Vec<ExactPoint>, AnalysisError> {
    let bg = Background::new(model);
    let run = run.clone();
    let n_end = run.n_end.ok_or_else(|| {
        fail(
            "inflation does not end in the exact background: eps_H never reaches 1".to_string(),
            &["slow roll found an end (eps_V = 1) that the exact solution does not reach"],
        )
    })?;
    let end = *run.checkpoints.last().map(|c| &c.1).expect("a run has checkpoints");
    let mut out = Vec::new();
    for &n_star in n_stars {
        let piv = pivot(&bg, &run, n_star, settings)?;
        let modes: Vec<ModePower> = (-2..=2)
            .map(|j| mode(&bg, &run, piv, (j as f64 * TILT_STEP).exp(), settings))
            .collect::<Result<_, _>>()?;
        let ln_s: [f64; 5] = std::array::from_fn(|i| modes[i].p_s.ln());
        let ln_t: [f64; 5] = std::array::from_fn(|i| modes[i].p_t.ln());
        let (ns1, run_s) = tilts(&ln_s, TILT_STEP);
        let (nt, _) = tilts(&ln_t, TILT_STEP);
        let y = state_at(&bg, &run, piv.n, settings)?;
        let flow = |n: f64| -> Result<(f64, f64), AnalysisError> {
            let y = state_at(&bg, &run, n, settings)?;
            let p = bg.point(&y);
            Ok((p.eps_h, 2.0 * p.dpi / y[1]))
        };
        let (e1, e2) = flow(piv.n)?;
        let d = 1e-3;
        let (_, e2m) = flow(piv.n - d)?;
        let (_, e2p) = flow(piv.n + d)?;
        let e3 = ((e2p.abs()).ln() - (e2m.abs()).ln()) / (2.0 * d);
        let second = crate::analysis::slowroll::second_order_from_flow(e1, e2, e2 * e3);
        let (ns2, r2, nt2) = (second.n_s, second.r, second.n_t);
        out.push(ExactPoint {
            n_star,
            phi_star: y[0],
            phi_end: end[0],
            n_s: 1.0 + ns1,
            r: modes[2].p_t / modes[2].p_s,
            alpha_s: run_s,
            n_t: nt,
            extras: ExactExtras {
                n_total: n_end,
                phi_end_slow_roll: f64::NAN,
                phi_star_slow_roll: f64::NAN,
                n_s_slow_roll: f64::NAN,
                r_slow_roll: f64::NAN,
                eps_1: e1,
                eps_2: e2,
                eps_3: e3,
                n_s_second_order: ns2,
                r_second_order: r2,
                n_t_second_order: nt2,
                p_s_unscaled: modes[2].p_s,
                freeze_drift: modes.iter().map(|m| m.drift).fold(0.0, f64::max),
            },
        });
    }
    Ok(out)
}

/// One row of a spectrum.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SpectrumRow {
    /// k in Mpc^-1.
    pub k_mpc: f64,
    /// P_zeta (= P_R), with the potential scaled to the observed A_s at the pivot.
    pub p_zeta: f64,
    /// P_t, scaled alike.
    pub p_t: f64,
    /// The first-order slow-roll estimate V/(24 pi^2 eps_V) where the mode crosses (k = aH).
    pub p_zeta_slow_roll: f64,
    /// e-folds between the mode's crossing and the end of inflation.
    pub n_before_end: f64,
    /// Relative change of P over the mode's last e-fold (freeze check).
    pub drift: f64,
}

/// A spectrum on a log grid of k, with the pivot `n_star` e-folds before the exact end.
#[derive(Debug, Clone, Serialize)]
pub struct Spectrum {
    /// The pivot's e-folds before the end.
    pub n_star: f64,
    /// k_* in Mpc^-1 (from the data file).
    pub k_star_mpc: f64,
    /// The factor on the user's V that gives the observed A_s at the pivot.
    pub potential_scale: f64,
    /// Total e-folds of the exact background.
    pub n_total: f64,
    /// The rows, ascending in k.
    pub rows: Vec<SpectrumRow>,
    /// The row with the largest P_zeta.
    pub peak: SpectrumRow,
    /// The row with the largest slow-roll estimate (where slow roll puts the peak).
    pub peak_slow_roll: SpectrumRow,
}

/// Computes P_zeta(k) and P_t(k) for `k_mpc` (Mpc^-1), modes in parallel.
pub fn spectrum(
    model: &Model,
    run: &Run,
    n_star: f64,
    k_mpc: &[f64],
    a_s: f64,
    k_star_mpc: f64,
    settings: &Settings,
) -> Result<Spectrum, AnalysisError> {
    use rayon::prelude::*;
    let bg = Background::new(model);
    let n_end = run.n_end.ok_or_else(|| {
        fail(
            "inflation does not end in the exact background: eps_H never reaches 1".to_string(),
            &["slow roll found an end (eps_V = 1) that the exact solution does not reach"],
        )
    })?;
    let piv = pivot(&bg, run, n_star, settings)?;
    let pivot_mode = mode(&bg, run, piv, 1.0, settings)?;
    let scale = a_s / pivot_mode.p_s;
    let rows: Vec<SpectrumRow> = k_mpc
        .par_iter()
        .map(|&k| {
            let bg = Background::new(model);
            let m = mode(&bg, run, piv, k / k_star_mpc, settings)?;
            let y = state_at(&bg, run, m.n_cross, settings)?;
            let mut ev = model.evaluator();
            let sr = crate::analysis::slowroll::SlowRoll::at(&mut ev, y[0]);
            Ok(SpectrumRow {
                k_mpc: k,
                p_zeta: scale * m.p_s,
                p_t: scale * m.p_t,
                p_zeta_slow_roll: scale * sr.v / (24.0 * PI * PI * sr.eps_v),
                n_before_end: n_end - m.n_cross,
                drift: m.drift,
            })
        })
        .collect::<Result<_, AnalysisError>>()?;
    check_rows(&rows, scale)?;
    let peak = *rows
        .iter()
        .max_by(|a, b| a.p_zeta.total_cmp(&b.p_zeta))
        .ok_or_else(|| fail("no wavenumbers asked for".to_string(), &["give --points 2 or more"]))?;
    let peak_slow_roll = *rows
        .iter()
        .max_by(|a, b| a.p_zeta_slow_roll.total_cmp(&b.p_zeta_slow_roll))
        .expect("rows are not empty");
    Ok(Spectrum {
        n_star,
        k_star_mpc,
        potential_scale: scale,
        n_total: n_end,
        rows,
        peak,
        peak_slow_roll,
    })
}

/// Where a row with the largest value sits in the grid: `Some("lower")` or `Some("upper")` when
/// it is the first or last row (the true maximum may lie outside the grid), `None` inside.
fn grid_end(rows: &[SpectrumRow], at: &SpectrumRow) -> Option<&'static str> {
    if rows.len() < 2 {
        return None;
    }
    if rows.first().is_some_and(|r| r.k_mpc == at.k_mpc) {
        Some("lower")
    } else if rows.last().is_some_and(|r| r.k_mpc == at.k_mpc) {
        Some("upper")
    } else {
        None
    }
}

/// What to say when the largest value is at an end of the k grid.
fn at_grid_end(what: &str, end: &str, row: &SpectrumRow, value: f64) -> String {
    use crate::report::numfmt::number;
    let side = if end == "upper" {
        "beyond k_max; raise --k-max"
    } else {
        "below k_min; lower --k-min"
    };
    format!(
        "the largest {what} ({}) is at the {end} end of the k grid (k = {} Mpc^-1, {} e-folds before the end): the true peak may lie {side}",
        number(value),
        number(row.k_mpc),
        number(row.n_before_end)
    )
}

/// The spectrum as an aligned table, with the peak (or a warning that the largest value is at
/// an end of the grid).
/// The last check on a spectrum: every number of every row, and the scale, must be finite (a
/// NaN or an overflow is an error naming the quantity and the mode, never a `null`).
fn check_rows(rows: &[SpectrumRow], scale: f64) -> Result<(), AnalysisError> {
    if !scale.is_finite() {
        return Err(fail(
            format!("the factor on V that gives the observed A_s is not a finite number ({scale})"),
            &["P_zeta at the pivot is zero or not finite: check the potential"],
        ));
    }
    for r in rows {
        let numbers = [
            ("p_zeta", r.p_zeta),
            ("p_t", r.p_t),
            ("p_zeta_slow_roll", r.p_zeta_slow_roll),
            ("n_before_end", r.n_before_end),
            ("drift", r.drift),
        ];
        if let Some((key, x)) = numbers.into_iter().find(|(_, x)| !x.is_finite()) {
            return Err(fail(
                format!(
                    "{key} is not a finite number ({x}) for the mode k = {} Mpc^-1, {} e-folds before the end",
                    crate::report::numfmt::number(r.k_mpc),
                    crate::report::numfmt::number(r.n_before_end)
                ),
                &["V or K is not smooth enough where this mode crosses the horizon, or the numbers leave double precision"],
            ));
        }
    }
    Ok(())
}

/// The spectrum as an aligned table, with the peak.
pub fn text(sp: &Spectrum, name: &str) -> String {
    use crate::report::numfmt::{self, number, typed};
    use std::fmt::Write as _;
    let mut o = String::new();
    let _ = writeln!(o, "model    {name}");
    let _ = writeln!(
        o,
        "pivot    k_* = {} Mpc^-1 exits {} e-folds before the end (eps_H = 1); {} e-folds in all",
        typed(sp.k_star_mpc),
        typed(sp.n_star),
        number(sp.n_total)
    );
    let _ = writeln!(
        o,
        "scale    V multiplied by {} to give the observed A_s at the pivot\n",
        number(sp.potential_scale)
    );
    // One style per column, right-aligned under its title.
    let d = numfmt::DEFAULT_DIGITS;
    let column = |g: &dyn Fn(&SpectrumRow) -> f64| numfmt::row(&sp.rows.iter().map(g).collect::<Vec<_>>(), d);
    let cols = [
        ("k [Mpc^-1]", column(&|r| r.k_mpc)),
        ("P_zeta", column(&|r| r.p_zeta)),
        ("P_t", column(&|r| r.p_t)),
        ("P_zeta (slow roll)", column(&|r| r.p_zeta_slow_roll)),
        ("N to end [e-folds]", column(&|r| r.n_before_end)),
    ];
    let widths: Vec<usize> = cols
        .iter()
        .map(|(h, c)| c.iter().map(String::len).chain([h.len()]).max().unwrap_or(0))
        .collect();
    let header: Vec<String> = cols.iter().zip(&widths).map(|((h, _), w)| format!("{h:>w$}")).collect();
    let _ = writeln!(o, "{}", header.join("  "));
    for i in 0..sp.rows.len() {
        let cells: Vec<String> = cols
            .iter()
            .zip(&widths)
            .map(|((_, c), w)| format!("{:>w$}", c[i]))
            .collect();
        let _ = writeln!(o, "{}", cells.join("  "));
    }
    let p = &sp.peak;
    let _ = writeln!(o);
    match grid_end(&sp.rows, p) {
        Some(end) => {
            let _ = writeln!(o, "maximum  {}", at_grid_end("P_zeta", end, p, p.p_zeta));
        }
        None => {
            let _ = writeln!(
                o,
                "peak     P_zeta = {} at k = {} Mpc^-1, {} e-folds before the end; slow roll there: {} (x{})",
                number(p.p_zeta),
                number(p.k_mpc),
                number(p.n_before_end),
                number(p.p_zeta_slow_roll),
                number(p.p_zeta / p.p_zeta_slow_roll)
            );
        }
    }
    let q = &sp.peak_slow_roll;
    match grid_end(&sp.rows, q) {
        Some(end) if grid_end(&sp.rows, p) == Some(end) => {
            let _ = writeln!(
                o,
                "         slow roll: its largest P_zeta ({}) is at the {end} end too",
                number(q.p_zeta_slow_roll)
            );
        }
        Some(end) => {
            let _ = writeln!(
                o,
                "         slow roll: {}",
                at_grid_end("slow-roll P_zeta", end, q, q.p_zeta_slow_roll)
            );
        }
        None => {
            let _ = writeln!(
                o,
                "         slow roll puts its peak at k = {} Mpc^-1 ({} e-folds before the end) with P_zeta = {}; exact there: {}",
                number(q.k_mpc),
                number(q.n_before_end),
                number(q.p_zeta_slow_roll),
                number(q.p_zeta)
            );
        }
    }
    o
}

/// The spectrum as CSV: a header and one row per k.
pub fn csv(sp: &Spectrum) -> String {
    let mut o = String::from("k_mpc,p_zeta,p_t,p_zeta_slow_roll,n_before_end,drift\n");
    for r in &sp.rows {
        o.push_str(&format!(
            "{:e},{:e},{:e},{:e},{:e},{:e}\n",
            r.k_mpc, r.p_zeta, r.p_t, r.p_zeta_slow_roll, r.n_before_end, r.drift
        ));
    }
    o
}

/// Both spectra against log10 k, with the slow-roll estimate dashed.
pub fn figure(sp: &Spectrum, name: &str, width_pt: f64) -> String {
    use crate::report::plot::{Panel, Series};
    let pts = |g: &dyn Fn(&SpectrumRow) -> f64| sp.rows.iter().map(|r| (r.k_mpc.log10(), g(r))).collect::<Vec<_>>();
    let panel = Panel {
        title: "power spectra".into(),
        x_label: "log_{10} $k$ [Mpc^{-1}]".into(),
        y_label: "$P$".into(),
        log_y: true,
        series: vec![
            Series {
                name: "$P$_$\\zeta$".into(),
                points: pts(&|r| r.p_zeta),
                color: "#1f5fa8".into(),
                dashed: false,
            },
            Series {
                name: "$P$_t".into(),
                points: pts(&|r| r.p_t),
                color: "#b03030".into(),
                dashed: false,
            },
            Series {
                name: "$P$_$\\zeta$, slow roll".into(),
                points: pts(&|r| r.p_zeta_slow_roll),
                color: "#555555".into(),
                dashed: true,
            },
        ],
        ..Panel::default()
    };
    crate::report::plot::render(name, &[panel], width_pt)
}

/// A start given by the user must lie inside the domain (beyond a pole of K, or where K <= 0
/// or V is not finite, there is no background to integrate).
fn check_start(model: &Model, phi: f64) -> Result<(), AnalysisError> {
    let domain = crate::analysis::single::canonical::find_domain(model, &mut model.evaluator())?;
    let iv = domain.interval;
    if iv.contains(phi) {
        return Ok(());
    }
    let f = model.field();
    let n = crate::report::numfmt::number;
    Err(fail(
        format!(
            "the start {f} = {} lies outside the domain {} < {f} < {} (lower end: {}; upper end: {})",
            n(phi),
            n(iv.lo),
            n(iv.hi),
            iv.lo_kind.words(),
            iv.hi_kind.words()
        ),
        &[
            "start inside the domain, on the branch you want (`efold inspect` shows the domain)",
            "or leave out --start-phi to start on the slow-roll attractor",
        ],
    ))
}

/// Starts the exact background on the slow-roll attractor with at least `n_needed` exact
/// e-folds before its end. `phi_at(N)` gives the slow-roll field value N e-folds before the
/// slow-roll end; where slow roll overestimates the e-folds (an ultra-slow-roll stretch is
/// crossed faster than slow roll says), the start moves up by the shortfall and tries again.
pub fn start_with_room(
    model: &Model,
    n_needed: f64,
    settings: &Settings,
    phi_at: &mut dyn FnMut(f64) -> Result<f64, AnalysisError>,
) -> Result<(f64, Run), AnalysisError> {
    let bg = Background::new(model);
    if let Some((phi, velocity)) = settings.start {
        check_start(model, phi)?;
        let pi = match velocity {
            Some(dphi) => {
                let mut ev = model.evaluator();
                ev.eval(phi);
                dphi * ev.output(OUT_SQRT_K)
            }
            None => bg.attractor(phi),
        };
        let run = run_background(&bg, [phi, pi], 10_000.0, settings)?;
        return match run.n_end {
            Some(n) if n >= n_needed => Ok((phi, run)),
            Some(n) => Err(fail(
                format!(
                    "starting at phi = {} gives {} e-folds before the end, fewer than the {} needed",
                    crate::report::numfmt::typed(phi),
                    crate::report::numfmt::number(n),
                    crate::report::numfmt::number(n_needed)
                ),
                &["start further up the potential, or ask for fewer e-folds or a smaller k range"],
            )),
            None => Err(fail(
                format!(
                    "starting at phi = {}, inflation does not end (eps_H never reaches 1)",
                    crate::report::numfmt::typed(phi)
                ),
                &["check the start and the potential"],
            )),
        };
    }
    let mut ask = n_needed;
    for _ in 0..6 {
        let phi_start = phi_at(ask)?;
        let run = run_background(&bg, [phi_start, bg.attractor(phi_start)], 10_000.0, settings)?;
        match run.n_end {
            Some(n) if n >= n_needed => return Ok((phi_start, run)),
            Some(n) => ask += (n_needed - n) + 2.0,
            None => {
                return Err(fail(
                    "inflation does not end in the exact background: eps_H never reaches 1".to_string(),
                    &["slow roll found an end (eps_V = 1) that the exact solution does not reach"],
                ))
            }
        }
    }
    Err(fail(
        format!(
            "could not start the exact background {} e-folds before its end",
            crate::report::numfmt::number(n_needed)
        ),
        &["ask for fewer e-folds, or a smaller k range"],
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A made-up spectrum on a grid k = 1, 10, 100 whose P_zeta values are given.
    fn spectrum_with(p_zeta: [f64; 3], p_slow: [f64; 3]) -> Spectrum {
        let rows: Vec<SpectrumRow> = (0..3)
            .map(|i| SpectrumRow {
                k_mpc: 10f64.powi(i as i32),
                p_zeta: p_zeta[i],
                p_t: 1e-11,
                p_zeta_slow_roll: p_slow[i],
                n_before_end: 50.0 - 2.0 * i as f64,
                drift: 1e-9,
            })
            .collect();
        let top = |g: &dyn Fn(&SpectrumRow) -> f64| *rows.iter().max_by(|a, b| g(a).total_cmp(&g(b))).unwrap();
        Spectrum {
            n_star: 55.0,
            k_star_mpc: 0.05,
            potential_scale: 1.2e-10,
            n_total: 70.0,
            peak: top(&|r| r.p_zeta),
            peak_slow_roll: top(&|r| r.p_zeta_slow_roll),
            rows,
        }
    }

    #[test]
    fn a_peak_inside_the_grid_is_called_a_peak() {
        let t = text(&spectrum_with([1e-9, 3e-9, 2e-9], [1e-9, 2e-9, 4e-9]), "m");
        assert!(t.contains("\npeak     P_zeta = 3e-9 at k = 10 Mpc^-1"), "{t}");
        // slow roll's largest value is at the last row: no peak claimed there
        assert!(
            t.contains("largest slow-roll P_zeta (4e-9) is at the upper end of the k grid"),
            "{t}"
        );
        assert!(t.contains("raise --k-max"), "{t}");
    }

    #[test]
    fn a_maximum_at_an_end_of_the_grid_is_not_called_a_peak() {
        let t = text(&spectrum_with([1e-9, 2e-9, 3e-9], [1e-9, 2e-9, 3e-9]), "m");
        assert!(!t.contains("\npeak"), "{t}");
        assert!(
            t.contains("the largest P_zeta (3e-9) is at the upper end of the k grid"),
            "{t}"
        );
        assert!(t.contains("the true peak may lie beyond k_max; raise --k-max"), "{t}");
        assert!(
            t.contains("slow roll: its largest P_zeta (3e-9) is at the upper end too"),
            "{t}"
        );
        let t = text(&spectrum_with([3e-9, 2e-9, 1e-9], [1e-9, 3e-9, 2e-9]), "m");
        assert!(
            t.contains("at the lower end of the k grid") && t.contains("lower --k-min"),
            "{t}"
        );
        assert!(t.contains("slow roll puts its peak at k = 10 Mpc^-1"), "{t}");
    }

    #[test]
    fn every_spectrum_column_has_its_own_title() {
        let t = text(&spectrum_with([1e-9, 3e-9, 2e-9], [1e-9, 2e-9, 4e-9]), "m");
        let header = t.lines().find(|l| l.contains("k [Mpc^-1]")).unwrap();
        let titles: Vec<&str> = header.split("  ").map(str::trim).filter(|s| !s.is_empty()).collect();
        assert_eq!(
            titles,
            [
                "k [Mpc^-1]",
                "P_zeta",
                "P_t",
                "P_zeta (slow roll)",
                "N to end [e-folds]"
            ]
        );
    }

    #[test]
    fn a_non_finite_spectrum_row_is_an_error() {
        let row = SpectrumRow {
            k_mpc: 0.05,
            p_zeta: 2.1e-9,
            p_t: 1e-11,
            p_zeta_slow_roll: 2.0e-9,
            n_before_end: 55.0,
            drift: 1e-7,
        };
        assert!(check_rows(&[row], 1e-10).is_ok());
        let bad = SpectrumRow {
            p_zeta_slow_roll: f64::INFINITY,
            ..row
        };
        let e = check_rows(&[row, bad], 1e-10).unwrap_err();
        assert!(
            e.message
                .starts_with("p_zeta_slow_roll is not a finite number (inf) for the mode k = 0.05"),
            "{}",
            e.message
        );
        assert!(check_rows(&[row], f64::NAN).is_err());
    }
}
