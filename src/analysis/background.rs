//! The exact background in e-folds, for L = 1/2 K (d phi)^2 - V, with the canonical velocity
//! pi = sqrt(K) dphi/dN (N counts e-folds forward in time). Reduced Planck units (M_p = 1).
//!
//! ```text
//! dphi/dN = pi / sqrt(K),   dpi/dN = -(3 - eps_H) (pi + V_chi / V),
//! eps_H = pi^2 / 2,   H^2 = V / (3 - eps_H),   V_chi = V_phi / sqrt(K).
//! ```

use crate::analysis::error::AnalysisError;
use crate::analysis::error::ErrorKind;
use crate::analysis::single::domain::Interval;
use crate::language::tape::Evaluator;
use crate::model::{Layout, Model};
use crate::numerics::ode::{integrate, Options as OdeOptions};
use serde::Serialize;

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
                event_tol: 1e-13,
            },
        }
    }
}

/// The background state: (phi, pi).
pub type State = [f64; 2];

/// The Hubble friction 3 - eps_H of the background's and the tensor modes' equations (M_p = 1).
pub fn friction(eps_h: f64) -> f64 {
    3.0 - eps_h
}

/// H^2 = V / (3 - eps_H), the Friedmann equation in e-folds (M_p = 1; common practice).
pub fn hubble_squared(v: f64, eps_h: f64) -> f64 {
    v / friction(eps_h)
}

/// The exact background's right-hand side, and what derives from it.
pub struct Background<'m> {
    ev: std::cell::RefCell<Evaluator<'m>>,
    /// The tape outputs of dV/dphi and sqrt(K), looked up once in the model's [`Layout`].
    dv: usize,
    sqrt_k: usize,
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
        let out: Layout = model.layout();
        Background {
            ev: std::cell::RefCell::new(model.evaluator()),
            dv: out.dv(),
            sqrt_k: out.sqrt_k(),
        }
    }

    /// V, eps_H, H and the derivatives at a state.
    pub fn point(&self, y: &State) -> Point {
        let mut ev = self.ev.borrow_mut();
        let v = ev.eval(y[0]);
        let (v1, s) = (ev.output(self.dv), ev.output(self.sqrt_k));
        let pi = y[1];
        let eps = 0.5 * pi * pi;
        let v_chi = v1 / s;
        Point {
            v,
            eps_h: eps,
            h: hubble_squared(v, eps).sqrt(),
            dphi: pi / s,
            dpi: -friction(eps) * (pi + v_chi / v),
        }
    }

    /// The right-hand side d(phi, pi)/dN at a state: the one the background, the states
    /// between checkpoints and the modes integrate.
    pub fn rhs(&self, y: &State) -> State {
        let p = self.point(y);
        [p.dphi, p.dpi]
    }

    /// The slow-roll attractor's velocity at phi: pi = -V_chi / V.
    pub fn attractor(&self, phi: f64) -> f64 {
        let mut ev = self.ev.borrow_mut();
        let v = ev.eval(phi);
        // V and V_phi scaled by the same exact power of two: the same bits, and no underflow
        // of sqrt(K) V for a tiny V.
        let f = crate::numerics::pow2_normaliser(v);
        -(ev.output(self.dv) * f) / (ev.output(self.sqrt_k) * (v * f))
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
        |_, y: &State| bg.rhs(y),
        0.0,
        start,
        n_max,
        &opts,
        |n, y| {
            checkpoints.push((n, *y));
            Some(0.5 * y[1] * y[1] - 1.0)
        },
    )
    .map_err(|e| AnalysisError::from(ErrorKind::BackgroundIntegration(e)))?;
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
    let sol = integrate(|_, y: &State| bg.rhs(y), n0, y0, n, &settings.ode, |_, _| None)
        .map_err(|e| AnalysisError::from(ErrorKind::BackgroundIntegration(e)))?;
    Ok(sol.y)
}

/// The domain's interval, asked for only when a start is given (`domain` of
/// [`start_with_room_in`]).
pub type DomainOf<'a> = &'a dyn Fn() -> Result<Interval, AnalysisError>;

/// A start given by the user must lie inside the domain (beyond a pole of K, or where K <= 0
/// or V is not finite, there is no background to integrate).
fn check_start(model: &Model, phi: f64, domain: DomainOf<'_>) -> Result<(), AnalysisError> {
    let iv = domain()?;
    if iv.contains(phi) {
        return Ok(());
    }
    Err(ErrorKind::StartOutsideDomain {
        field: model.field().to_string(),
        phi,
        lo: iv.lo,
        hi: iv.hi,
        lo_kind: iv.lo_kind,
        hi_kind: iv.hi_kind,
    }
    .into())
}

/// Starts the exact background on the slow-roll attractor with at least `n_needed` exact
/// e-folds before its end. `phi_at(N)` gives the slow-roll field value N e-folds before the
/// slow-roll end; where slow roll overestimates the e-folds (an ultra-slow-roll stretch is
/// crossed faster than slow roll says), the start moves up by the shortfall and tries again.
///
/// A start given in `settings` is checked against the domain that
/// [`crate::analysis::single::domain::find_domain`] finds; [`start_with_room_in`] takes a
/// domain already known.
pub fn start_with_room(
    model: &Model,
    n_needed: f64,
    settings: &Settings,
    phi_at: &mut dyn FnMut(f64) -> Result<f64, AnalysisError>,
) -> Result<(f64, Run), AnalysisError> {
    let domain = || crate::analysis::single::domain::find_domain(model, &mut model.evaluator()).map(|d| d.interval);
    start_with_room_in(model, &domain, n_needed, settings, phi_at)
}

/// [`start_with_room`] with the model's domain given: `domain()` returns its interval, and is
/// called only to check a start given in `settings`.
pub fn start_with_room_in(
    model: &Model,
    domain: DomainOf<'_>,
    n_needed: f64,
    settings: &Settings,
    phi_at: &mut dyn FnMut(f64) -> Result<f64, AnalysisError>,
) -> Result<(f64, Run), AnalysisError> {
    let bg = Background::new(model);
    if let Some((phi, velocity)) = settings.start {
        check_start(model, phi, domain)?;
        let pi = match velocity {
            Some(dphi) => {
                let mut ev = model.evaluator();
                ev.eval(phi);
                dphi * ev.output(model.layout().sqrt_k())
            }
            None => bg.attractor(phi),
        };
        let run = run_background(&bg, [phi, pi], 10_000.0, settings)?;
        return match run.n_end {
            Some(n) if n >= n_needed => Ok((phi, run)),
            Some(n) => Err(ErrorKind::StartTooFewEfolds {
                phi,
                available: n,
                needed: n_needed,
            }
            .into()),
            None => Err(ErrorKind::StartNeverEnds { phi }.into()),
        };
    }
    let mut ask = n_needed;
    for _ in 0..6 {
        let phi_start = phi_at(ask)?;
        let run = run_background(&bg, [phi_start, bg.attractor(phi_start)], 10_000.0, settings)?;
        match run.n_end {
            Some(n) if n >= n_needed => return Ok((phi_start, run)),
            Some(n) => ask += (n_needed - n) + 2.0,
            None => return Err(ErrorKind::ExactNeverEnds.into()),
        }
    }
    Err(ErrorKind::NoStart { needed: n_needed }.into())
}
