//! The Mukhanov–Sasaki equations for the scalar and tensor modes on the exact background
//! ([`crate::analysis::background`]). Reduced Planck units (M_p = 1).
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

use crate::analysis::background::{friction, state_at, Background, Run, Settings, State};
use crate::analysis::error::AnalysisError;
use crate::analysis::error::ErrorKind;
use crate::analysis::pivot::AtPivot;
use crate::model::Model;
use crate::numerics::ode::integrate;
use serde::Serialize;
use std::f64::consts::PI;

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
    let m = Mode {
        bg,
        pivot,
        kappa,
        k: kappa * pivot.h, // a_* = 1
    };
    // Find where k/aH = k_start along the background (it decreases with N during inflation).
    let n_hi = run.n_end.unwrap_or_else(|| run.checkpoints.last().map_or(0.0, |c| c.0));
    let (n_i, y_i) = m.find(run, settings.k_start, settings)?;
    let n_cross = m.find(run, 1.0, settings)?.0;
    let start = m.bunch_davies_start(n_i, &y_i);
    // Integrate to one e-fold before the stop, then on to the stop, to check the freeze.
    let (n_prev, y_prev, steps_a) = m.leg(n_i, start, n_hi, settings.k_stop * std::f64::consts::E, settings)?;
    let (_, y_stop, steps_b) = m.leg(n_prev, y_prev, n_hi, settings.k_stop, settings)?;
    let steps = steps_a + steps_b;
    let (p_s, p_t) = m.power(&y_stop);
    let (p_s_prev, _) = m.power(&y_prev);
    let drift = ((p_s - p_s_prev) / p_s).abs();
    if drift > settings.freeze_tol {
        return Err(ErrorKind::NotFrozen {
            kappa,
            drift,
            allowed: settings.freeze_tol,
        }
        .into());
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

/// One mode on a background: k = kappa a_* H_* with a_* = 1.
struct Mode<'a, 'm> {
    bg: &'a Background<'m>,
    pivot: Pivot,
    kappa: f64,
    k: f64,
}

impl Mode<'_, '_> {
    /// k/aH at (N, state).
    fn k_over_ah(&self, n: f64, y: &State) -> f64 {
        self.k * (self.pivot.n - n).exp() / self.bg.point(y).h
    }

    /// (N, state) where k/aH falls to `target`, located on the background run.
    fn find(&self, run: &Run, target: f64, settings: &Settings) -> Result<(f64, State), AnalysisError> {
        let idx = run.checkpoints.iter().position(|(n, y)| self.k_over_ah(*n, y) < target);
        let Some(j) = idx else {
            return Err(ErrorKind::ModeNeverReaches {
                kappa: self.kappa,
                k_over_ah: target,
            }
            .into());
        };
        if j == 0 {
            return Err(ErrorKind::StartsTooLate {
                kappa: self.kappa,
                k_over_ah: target,
            }
            .into());
        }
        let (n0, y0) = run.checkpoints[j - 1];
        let (n1, _) = run.checkpoints[j];
        let sol = integrate(
            |_, y: &State| self.bg.rhs(y),
            n0,
            y0,
            n1,
            &settings.ode,
            |n, y| Some(self.k_over_ah(n, y) - target),
        )
        .map_err(|e| AnalysisError::from(ErrorKind::ModeBackground(e)))?;
        Ok((sol.t, sol.y))
    }

    /// The mode's state (phi, pi, R, R', h, h') at (n_i, y_i), deep inside the horizon.
    fn bunch_davies_start(&self, n_i: f64, y_i: &State) -> [f64; 10] {
        let k = self.k;
        let p = self.bg.point(y_i);
        let a = (n_i - self.pivot.n).exp();
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
        [y_i[0], y_i[1], r.0, r.1, dr.0, dr.1, h.0, h.1, dh.0, dh.1]
    }

    /// The right-hand side of the background and both modes in e-folds.
    fn rhs(&self, n: f64, y: &[f64; 10]) -> [f64; 10] {
        let st = [y[0], y[1]];
        let p = self.bg.point(&st);
        let q = self.k * (self.pivot.n - n).exp() / p.h;
        let q2 = q * q;
        let eps2 = 2.0 * p.dpi / y[1];
        let fr = 3.0 + eps2 - p.eps_h;
        let ft = friction(p.eps_h);
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
    }

    /// Integrates from (n0, y0) until k/aH falls to `target` (at most to `n_hi` + 10):
    /// (N, state, steps).
    fn leg(
        &self,
        n0: f64,
        y0: [f64; 10],
        n_hi: f64,
        target: f64,
        settings: &Settings,
    ) -> Result<(f64, [f64; 10], usize), AnalysisError> {
        let sol = integrate(
            |n, y: &[f64; 10]| self.rhs(n, y),
            n0,
            y0,
            n_hi + 10.0,
            &settings.ode,
            |n, y| Some(self.k_over_ah(n, &[y[0], y[1]]) - target),
        )
        .map_err(|e| {
            AnalysisError::from(ErrorKind::ModeIntegration {
                kappa: self.kappa,
                error: e,
            })
        })?;
        if !sol.event {
            return Err(ErrorKind::ModeExitsLate {
                kappa: self.kappa,
                k_over_ah: target,
            }
            .into());
        }
        Ok((sol.t, sol.y, sol.steps))
    }

    /// (P_R, P_t) of a frozen state.
    fn power(&self, y: &[f64; 10]) -> (f64, f64) {
        let k = self.k;
        // k scales as sqrt(V): for a tiny or huge overall scale of V, k^3 underflows or
        // overflows while k^3 |R|^2 (which scales as V) does not. Then k |R|^2 is formed first.
        let c = k.powi(3) / (2.0 * PI * PI);
        let (rs, rt) = (y[2] * y[2] + y[3] * y[3], y[6] * y[6] + y[7] * y[7]);
        if c.is_normal() {
            (c * rs, 2.0 * c * rt)
        } else {
            let kk = k * k / (2.0 * PI * PI);
            ((k * rs) * kk, 2.0 * (k * rt) * kk)
        }
    }
}

/// H and N at the pivot, `n_star` e-folds before the end of a run.
pub fn pivot(bg: &Background<'_>, run: &Run, n_star: f64, settings: &Settings) -> Result<Pivot, AnalysisError> {
    let n_end = run
        .n_end
        .ok_or_else(|| AnalysisError::from(ErrorKind::ExactNeverEndsAtPivot))?;
    let n = n_end - n_star;
    if n <= 0.0 {
        return Err(ErrorKind::ExactTooFewEfolds {
            available: n_end,
            n_star,
        }
        .into());
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

/// The exact observables at one N_*: phi_end at eps_H = 1, n_s and the running from the
/// spectrum, r = P_t / P_R at the pivot; the fields of [`AtPivot`] read through it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ExactPoint {
    /// N_*, phi_*, phi_end and the observables.
    pub at: AtPivot,
    /// Extras.
    pub extras: ExactExtras,
}

impl std::ops::Deref for ExactPoint {
    type Target = AtPivot;
    fn deref(&self) -> &AtPivot {
        &self.at
    }
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
    let n_end = run
        .n_end
        .ok_or_else(|| AnalysisError::from(ErrorKind::ExactNeverEnds))?;
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
            at: AtPivot {
                n_star,
                phi_star: y[0],
                phi_end: end[0],
                n_s: 1.0 + ns1,
                r: modes[2].p_t / modes[2].p_s,
                alpha_s: run_s,
                n_t: nt,
            },
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
