//! One field: the exact background of [`crate::analysis::background`] run segment by segment
//! from any start ([`super::Flowing`]), the minimum the field settles in, and slow-roll n_s and
//! r at the pivots.

use super::{outcome_of, track, Ask, Flowing, Segment, StartResult, Stop, Velocity};
use crate::analysis::background::State;
use crate::analysis::error::{AnalysisError, ErrorKind};
use crate::analysis::single::domain::Interval;
use crate::config::BasinLimits;
use crate::language::tape::Evaluator;
use crate::model::{Layout, Model};
use crate::numerics::ode::{integrate, Options};
use crate::slowroll::SlowRoll;
use std::cell::{Cell, RefCell};

/// The one-field background of a model inside its domain, with the checkpoints of the
/// current run.
///
/// The state is (phi, p) with p = dchi/dt / sqrt(V_s) the canonical velocity in cosmic time,
/// scaled by the potential V_s at the start; N counts e-folds:
///
/// ```text
/// dphi/dN = p / (H sqrt(K)),   dp/dN = -3 p - V_chi / (V_s H),   H^2 = (p^2/2 + V/V_s) / 3,
/// eps_H = (p^2 / 2) / H^2
/// ```
///
/// (the Klein–Gordon and Friedmann equations, common practice, with t -> N by dN = H dt).
/// Unlike the form in pi = dchi/dN of [`crate::analysis::background`], which divides by V, these
/// stay regular where the field crosses a minimum with V = 0 and eps_H reaches 3.
pub struct SingleFlow<'m> {
    ev: RefCell<Evaluator<'m>>,
    out: Layout,
    iv: Interval,
    /// V_s.
    v_scale: f64,
    opts: Options,
    /// The tolerances of the run ([`BasinLimits::rtol`]) and of settling
    /// ([`BasinLimits::settle_rtol`]).
    fine: Options,
    coarse: Options,
    /// (N, state) at every accepted step of the current run, ascending.
    checkpoints: Vec<(f64, State)>,
    /// (phi, V) of the last right-hand side: the integrator's last stage is at the new
    /// point, where the event asks for eps_H next, so V is not evaluated twice.
    last_v: Cell<(f64, f64)>,
}

impl<'m> SingleFlow<'m> {
    /// For a model and its domain's interval, with the tolerances of `lim`.
    pub fn new(model: &'m Model, iv: Interval, lim: &BasinLimits) -> SingleFlow<'m> {
        let opts = |rtol: f64, event_tol: f64| Options {
            rtol,
            atol: 1e-3 * rtol,
            h_max: lim.h_max,
            max_steps: (lim.cap_efolds / lim.h_max) as usize * 20 + 100_000,
            event_tol,
        };
        SingleFlow {
            fine: opts(lim.rtol, 1e-13),
            // the crossings of settling only measure dips against `restart_efolds`
            coarse: opts(lim.settle_rtol, lim.settle_rtol),
            ev: RefCell::new(model.evaluator()),
            out: model.layout(),
            iv,
            v_scale: 1.0,
            opts: opts(lim.rtol, 1e-13),
            checkpoints: Vec::new(),
            last_v: Cell::new((f64::NAN, f64::NAN)),
        }
    }

    /// Forgets the checkpoints of the last run and sets V_s.
    pub fn reset(&mut self, v_scale: f64) {
        self.checkpoints.clear();
        self.v_scale = v_scale;
    }

    /// The state (phi, p) of a point with canonical velocity pi = dchi/dN (eps_H < 3).
    pub fn state_of(&self, phi: f64, pi: f64, v: f64) -> State {
        let eps = 0.5 * pi * pi;
        let h = (v / self.v_scale / (3.0 - eps)).sqrt();
        [phi, h * pi]
    }

    /// d(phi, p)/dN, or NaN outside the domain or where V < 0 (`left` records where).
    fn rhs(&self, y: &State, left: &Cell<Option<f64>>) -> State {
        if !self.iv.contains(y[0]) {
            if y[0].is_finite() {
                left.set(Some(y[0]));
            }
            return [f64::NAN; 2];
        }
        let mut ev = self.ev.borrow_mut();
        let v = ev.eval(y[0]);
        let (dv, sqrt_k) = (ev.output(self.out.dv()), ev.output(self.out.sqrt_k()));
        self.last_v.set((y[0], v));
        if !(v >= 0.0 && v.is_finite()) {
            if y[1].is_finite() {
                left.set(Some(y[0]));
            }
            return [f64::NAN; 2];
        }
        let p = y[1];
        let h = ((0.5 * p * p + v / self.v_scale) / 3.0).sqrt();
        [p / (h * sqrt_k), -3.0 * p - dv / (sqrt_k * self.v_scale * h)]
    }

    /// eps_H at a state, or NaN outside the domain.
    fn eps_at(&self, y: &State) -> f64 {
        if !self.iv.contains(y[0]) {
            return f64::NAN;
        }
        let (phi, v) = self.last_v.get();
        let v = if phi == y[0] {
            v
        } else {
            self.ev.borrow_mut().eval(y[0])
        };
        let kin = 0.5 * y[1] * y[1];
        3.0 * kin / (kin + v / self.v_scale)
    }
}

impl Flowing for SingleFlow<'_> {
    fn eps(&mut self, y: &[f64]) -> Result<f64, AnalysisError> {
        Ok(self.eps_at(&[y[0], y[1]]))
    }

    fn segment(&mut self, t0: f64, y0: &[f64], t_end: f64, inflating: bool) -> Result<Segment, Stop> {
        let left = Cell::new(None);
        let mut first = true;
        let start_sign = if inflating { -1.0 } else { 1.0 };
        let mut cps = std::mem::take(&mut self.checkpoints);
        let sol = integrate(
            |_, y: &State| self.rhs(y, &left),
            t0,
            [y0[0], y0[1]],
            t_end,
            &self.opts,
            |t, y| {
                if cps.last().is_none_or(|c| t > c.0) {
                    cps.push((t, *y));
                }
                if first {
                    first = false;
                    return Some(start_sign);
                }
                Some(self.eps_at(y) - 1.0)
            },
        );
        self.checkpoints = cps;
        match sol {
            Ok(s) => Ok(Segment {
                t: s.t,
                y: s.y.to_vec(),
                crossed: s.event,
            }),
            Err(e) => {
                let (t, y) = self.checkpoints.last().copied().unwrap_or((t0, [y0[0], y0[1]]));
                match left.get() {
                    Some(phi) => Err(Stop::Left(
                        ErrorKind::BasinLeftDomain { at: vec![phi], ran: t }.into(),
                        t,
                        y.to_vec(),
                    )),
                    None => Err(Stop::Failed(ErrorKind::BackgroundIntegration(e).into())),
                }
            }
        }
    }

    fn settling(&mut self, on: bool) {
        self.opts = if on { self.coarse } else { self.fine };
    }

    fn state_at(&mut self, n: f64) -> Result<Vec<f64>, AnalysisError> {
        let cps = &self.checkpoints;
        let i = cps.partition_point(|c| c.0 <= n).saturating_sub(1);
        let (n0, y0) = cps[i];
        if n0 == n {
            return Ok(y0.to_vec());
        }
        let left = Cell::new(None);
        let sol = integrate(|_, y: &State| self.rhs(y, &left), n0, y0, n, &self.fine, |_, _| None)
            .map_err(|e| AnalysisError::from(ErrorKind::BackgroundIntegration(e)))?;
        Ok(sol.y.to_vec())
    }
}

/// Everything one worker needs to run starts of a one-field model.
pub struct SingleBasin<'m> {
    model: &'m Model,
    flow: SingleFlow<'m>,
    ev: Evaluator<'m>,
    out: Layout,
}

impl<'m> SingleBasin<'m> {
    /// For a model and its domain's interval.
    pub fn new(model: &'m Model, iv: Interval, lim: &BasinLimits) -> SingleBasin<'m> {
        SingleBasin {
            model,
            flow: SingleFlow::new(model, iv, lim),
            ev: model.evaluator(),
            out: model.layout(),
        }
    }

    /// The canonical velocity pi = sqrt(K) dphi/dN of a start at phi.
    pub fn velocity(&mut self, phi: f64, v: Velocity) -> Result<f64, AnalysisError> {
        let pot = self.ev.eval(phi);
        let dv = self.ev.output(self.out.dv());
        let sqrt_k = self.ev.output(self.out.sqrt_k());
        if !(pot > 0.0 && pot.is_finite() && dv.is_finite() && sqrt_k.is_finite() && sqrt_k > 0.0) {
            return Err(ErrorKind::BasinStartNotUsable { at: vec![phi], v: pot }.into());
        }
        let pi = match v {
            Velocity::Rest => 0.0,
            Velocity::Attractor => -(dv / sqrt_k) / pot,
            Velocity::Kinetic { x, up } => {
                if dv == 0.0 && x > 0.0 {
                    return Err(ErrorKind::BasinNoGradient { at: vec![phi] }.into());
                }
                let down = -dv.signum();
                let s = if up { -down } else { down };
                s * (2.0 * Velocity::eps_of_ratio(x)).sqrt()
            }
        };
        let eps = 0.5 * pi * pi;
        if eps.is_nan() || eps >= 3.0 {
            return Err(super::hubble_negative(eps, &[phi]));
        }
        Ok(pi)
    }

    /// The state (phi, p) of a start in the variables of [`SingleFlow`] (V_s = V at the
    /// start): an error where there is none.
    pub fn start(&mut self, phi: f64, v: Velocity) -> Result<[f64; 2], AnalysisError> {
        self.checked_start(phi, v).map(|(y, _)| y)
    }

    /// The state of a start in the flow's variables, and V there (V_s of its run).
    fn checked_start(&mut self, phi: f64, v: Velocity) -> Result<([f64; 2], f64), AnalysisError> {
        if !self.flow.iv.contains(phi) {
            return Err(ErrorKind::BasinStartOutside {
                at: vec![phi],
                lo: vec![self.flow.iv.lo],
                hi: vec![self.flow.iv.hi],
            }
            .into());
        }
        let pi = self.velocity(phi, v)?;
        let pot = self.ev.eval(phi);
        self.flow.reset(pot);
        Ok((self.flow.state_of(phi, pi, pot), pot))
    }

    /// Runs one start (module docs of [`super`]); a start that cannot run is a row that says
    /// why.
    pub fn run(&mut self, phi: f64, v: Velocity, ask: &Ask<'_>) -> StartResult {
        match self.try_run(phi, v, ask) {
            Ok(r) => r,
            Err(e) => StartResult::failed(&e, ask.n_stars.len()),
        }
    }

    /// The run of one start by the e-fold rule ([`super::track`]); its checkpoints are kept
    /// until the next.
    pub fn track(&mut self, phi: f64, v: Velocity, lim: &BasinLimits) -> Result<super::Track, AnalysisError> {
        let (y0, _) = self.checked_start(phi, v)?;
        track(&mut self.flow, &y0, lim)
    }

    fn try_run(&mut self, phi: f64, v: Velocity, ask: &Ask<'_>) -> Result<StartResult, AnalysisError> {
        let t = self.track(phi, v, ask.limits)?;
        let outcome = outcome_of(&t, ask.need);
        let mut n_s = vec![None; ask.n_stars.len()];
        let mut r = vec![None; ask.n_stars.len()];
        if let (Some(n_end), true) = (t.n_end, outcome != super::Outcome::NeverEnds) {
            for (i, &ns) in ask.n_stars.iter().enumerate() {
                if ns > t.n_total() {
                    continue;
                }
                let y = self.flow.state_at(n_end - ns)?;
                let o = SlowRoll::at(&mut self.ev, y[0]).first_order();
                if o.n_s.is_finite() && o.r.is_finite() {
                    n_s[i] = Some(o.n_s);
                    r[i] = Some(o.r);
                }
            }
        }
        // after the end of inflation the field settles in a minimum, or leaves the domain
        // through its end where V is lowest there
        let minimum = t.n_end.and_then(|_| self.minimum_from(t.last[0]));
        Ok(StartResult {
            n_total: t.n_total(),
            n_inflating: t.n_inflating,
            outcome,
            end: vec![t.end[0]],
            minimum: minimum.map(|m| vec![m]),
            rolls_along: None,
            n_s,
            r,
            reason: t.left.map(|e| e.message),
        })
    }

    /// V' at phi (NaN outside the domain).
    fn slope(&mut self, phi: f64) -> f64 {
        if !self.flow.iv.contains(phi) {
            return f64::NAN;
        }
        self.ev.eval(phi);
        self.ev.output(self.out.dv())
    }

    /// The local minimum of V reached by walking downhill from phi: steps doubling until V'
    /// changes sign, then the zero of V' by Brent's method (to 1e-12 relative); the end of the
    /// domain if the walk reaches it first (a minimum at the end of the model's range).
    pub fn minimum_from(&mut self, phi: f64) -> Option<f64> {
        let d0 = self.slope(phi);
        if !d0.is_finite() {
            return None;
        }
        if d0 == 0.0 {
            return Some(phi);
        }
        let dir = -d0.signum();
        let mut h = 1e-6 * phi.abs().max(1e-3);
        let mut a = phi;
        for _ in 0..200 {
            let b = a + dir * h;
            let d = self.slope(b);
            if !d.is_finite() {
                let end = if dir < 0.0 { self.flow.iv.lo } else { self.flow.iv.hi };
                return (!self.flow.iv.contains(b) && end.is_finite()).then_some(end);
            }
            if d.signum() != d0.signum() || d == 0.0 {
                let (lo, hi) = if a < b { (a, b) } else { (b, a) };
                let mut f = |x: f64| self.slope(x);
                let tol = 1e-12 * phi.abs().max(1.0);
                return crate::numerics::roots::brent(&mut f, lo, hi, tol, 200)
                    .ok()
                    .map(|r| r.value);
            }
            a = b;
            h *= 2.0;
        }
        None
    }

    /// The model.
    pub fn model(&self) -> &'m Model {
        self.model
    }
}
