//! Several fields: the covariant background run segment by segment from any start
//! ([`super::Flowing`]), the minimum of V the field settles in (descent along -G^ab d_b V), the
//! direction it rolls along at the end of inflation, and n_s and r from slow-roll delta-N at
//! the pivots.
//!
//! The state is (phi^a, p^a) with p^a = dphi^a/dt / sqrt(V_s) (cosmic time, V_s the potential
//! at the start), N counting e-folds:
//!
//! ```text
//! dphi^a/dN = p^a / H,
//! dp^a/dN = -3 p^a - Gamma^a_bc p^b p^c / H - G^ab V_b / (V_s H),
//! H^2 = (G_ab p^a p^b / 2 + V / V_s) / 3,   eps_H = (G_ab p^a p^b / 2) / H^2
//! ```
//!
//! (the covariant Klein–Gordon and Friedmann equations, common practice; the form of
//! [`crate::analysis::multi::background`] with pi^a = dphi^a/dN = p^a / H, multiplied out so
//! that nothing divides by V, which vanishes where the field crosses a minimum).

use super::{outcome_of, track, Ask, Flowing, Segment, StartResult, Stop, Velocity};
use crate::analysis::error::{AnalysisError, ErrorKind};
use crate::analysis::multi::background::{attractor, eps_h, quad_form, Flow};
use crate::analysis::multi::delta_n::{delta_n, observables};
use crate::analysis::multi::ode::{integrate, Failure, Tolerances};
use crate::analysis::multi::space::ModelFieldSpace;
use crate::analysis::multi::{FieldSpace, Local};
use crate::config::{BasinLimits, MultiLimits};
use crate::model::Model;
use std::cell::RefCell;

/// One worker's multi-field background, with the checkpoints of the current run.
pub struct MultiBasin<'m> {
    space: ModelFieldSpace<'m>,
    n: usize,
    tol: Tolerances,
    multi: MultiLimits,
    /// V_s.
    v_scale: f64,
    /// The geometry at the last point evaluated.
    local: Local,
    /// (N, state) at every accepted step of the current run, ascending.
    checkpoints: Vec<(f64, Vec<f64>)>,
    /// The tolerances of the run and of settling (`tol` is one of them).
    fine: Tolerances,
    coarse: Tolerances,
}

/// The integrator's tolerances at relative tolerance `rtol`, with the caps of `lim`.
fn tolerances(lim: &BasinLimits, rtol: f64) -> Tolerances {
    Tolerances {
        rtol,
        atol: vec![1e-3 * rtol],
        h_max: lim.h_max,
        max_steps: (lim.cap_efolds / lim.h_max) as usize * 20 + 100_000,
    }
}

impl<'m> MultiBasin<'m> {
    /// For a model of several fields (None for one field), with the tolerances of `lim` and
    /// the delta-N settings of `multi`.
    pub fn new(model: &'m Model, lim: &BasinLimits, multi: MultiLimits) -> Option<MultiBasin<'m>> {
        let space = ModelFieldSpace::new(model)?;
        let n = space.n_fields();
        Some(MultiBasin {
            space,
            n,
            tol: tolerances(lim, lim.rtol),
            fine: tolerances(lim, lim.rtol),
            coarse: tolerances(lim, lim.settle_rtol),
            multi,
            v_scale: 1.0,
            local: Local::zeros(n),
            checkpoints: Vec::new(),
        })
    }

    /// The velocity pi^a = dphi^a/dN of a start at phi.
    pub fn velocity(&mut self, phi: &[f64], v: Velocity) -> Result<Vec<f64>, AnalysisError> {
        let n = self.n;
        let l = self.at(phi)?;
        if l.v.is_nan() || l.v <= 0.0 {
            return Err(ErrorKind::BasinStartNotUsable {
                at: phi.to_vec(),
                v: l.v,
            }
            .into());
        }
        let pi = match v {
            Velocity::Rest => vec![0.0; n],
            Velocity::Attractor => attractor(l),
            Velocity::Kinetic { x, up } => {
                let up_dir: Vec<f64> = (0..n)
                    .map(|a| (0..n).map(|b| l.g_inv[(a, b)] * l.dv[b]).sum::<f64>())
                    .collect();
                let norm = (0..n).map(|a| up_dir[a] * l.dv[a]).sum::<f64>().sqrt();
                if (norm.is_nan() || norm <= 0.0) && x > 0.0 {
                    return Err(ErrorKind::BasinNoGradient { at: phi.to_vec() }.into());
                }
                let speed = (2.0 * Velocity::eps_of_ratio(x)).sqrt();
                let s = if up { 1.0 } else { -1.0 };
                up_dir
                    .iter()
                    .map(|u| if norm > 0.0 { s * speed * u / norm } else { 0.0 })
                    .collect()
            }
        };
        let eps = eps_h(l, &pi);
        if eps.is_nan() || eps >= 3.0 {
            return Err(super::hubble_negative(eps, phi));
        }
        Ok(pi)
    }

    /// Runs one start; a start that cannot run is a row that says why.
    pub fn run(&mut self, phi: &[f64], v: Velocity, ask: &Ask<'_>) -> StartResult {
        match self.try_run(phi, v, ask) {
            Ok(r) => r,
            Err(e) => StartResult::failed(&e, ask.n_stars.len()),
        }
    }

    fn try_run(&mut self, phi: &[f64], v: Velocity, ask: &Ask<'_>) -> Result<StartResult, AnalysisError> {
        let pi = self.velocity(phi, v)?;
        let y0 = self.start_state(phi, &pi)?;
        let t = track(self, &y0, ask.limits)?;
        let n = self.n;
        let outcome = outcome_of(&t, ask.need);
        let mut n_s = vec![None; ask.n_stars.len()];
        let mut r = vec![None; ask.n_stars.len()];
        if let (Some(n_end), true) = (t.n_end, outcome != super::Outcome::NeverEnds) {
            for (i, &ns) in ask.n_stars.iter().enumerate() {
                if ns > t.n_total() {
                    continue;
                }
                let y = self.state_at(n_end - ns)?;
                let y = self.to_pi(&y)?;
                let mut flow = Flow::new(&mut self.space);
                let d = delta_n(&mut flow, &y[..n], &self.multi)?;
                let o = observables(&mut flow, &y, &d)?;
                if o.n_s.is_finite() && o.r.is_finite() {
                    n_s[i] = Some(o.n_s);
                    r[i] = Some(o.r);
                }
            }
        }
        let rolls_along = (t.n_end.is_some()).then(|| self.rolls_along(&t.end)).flatten();
        let minimum = if t.left.is_none() && t.n_end.is_some() {
            self.minimum_from(&t.last[..n])
        } else {
            None
        };
        Ok(StartResult {
            n_total: t.n_total(),
            n_inflating: t.n_inflating,
            outcome,
            end: t.end[..n].to_vec(),
            minimum,
            rolls_along,
            n_s,
            r,
            reason: t.left.map(|e| e.message),
        })
    }

    /// The geometry at phi, kept in the scratch.
    fn at(&mut self, phi: &[f64]) -> Result<&Local, AnalysisError> {
        self.space.local(phi, &mut self.local)?;
        Ok(&self.local)
    }

    /// The state (phi, p) of a start with velocity pi^a = dphi^a/dN (eps_H < 3), and V_s set to
    /// V at phi; the checkpoints of the last run are dropped.
    pub fn start_state(&mut self, phi: &[f64], pi: &[f64]) -> Result<Vec<f64>, AnalysisError> {
        self.checkpoints.clear();
        let l = self.at(phi)?;
        let h = (1.0 / (3.0 - eps_h(l, pi))).sqrt();
        self.v_scale = l.v;
        Ok([phi.to_vec(), pi.iter().map(|x| h * x).collect()].concat())
    }

    /// A state (phi, p) as (phi, pi) with pi = p / H, the form of the multi-field analyses.
    pub fn to_pi(&mut self, y: &[f64]) -> Result<Vec<f64>, AnalysisError> {
        let n = self.n;
        let v_s = self.v_scale;
        let l = self.at(&y[..n])?;
        let h = hubble(l, &y[n..], v_s);
        Ok([y[..n].to_vec(), y[n..].iter().map(|p| p / h).collect()].concat())
    }

    /// d(phi, p)/dN at a state (module docs), from the geometry at phi; an error where V < 0.
    fn rhs(&mut self, y: &[f64], dy: &mut [f64]) -> Result<(), AnalysisError> {
        let n = self.n;
        let v_s = self.v_scale;
        let l = self.at(&y[..n])?;
        if l.v.is_nan() || l.v < 0.0 {
            return Err(ErrorKind::BasinLeftDomain {
                at: y[..n].to_vec(),
                ran: f64::NAN,
            }
            .into());
        }
        let p = &y[n..];
        let h = hubble(l, p, v_s);
        for a in 0..n {
            let mut christoffel = 0.0;
            for b in 0..n {
                for c in 0..n {
                    christoffel += l.gamma(a, b, c) * p[b] * p[c];
                }
            }
            let grad = (0..n).map(|b| l.g_inv[(a, b)] * l.dv[b]).sum::<f64>() / v_s;
            dy[a] = p[a] / h;
            dy[n + a] = -3.0 * p[a] - (christoffel + grad) / h;
        }
        Ok(())
    }

    /// The field with the largest share pi^a G_ab pi^b of the kinetic energy at a state.
    pub fn rolls_along(&mut self, y: &[f64]) -> Option<usize> {
        let n = self.n;
        let mut flow = Flow::new(&mut self.space);
        let l = flow.at(&y[..n]).ok()?;
        let pi = &y[n..];
        (0..n)
            .map(|a| (a, pi[a] * (0..n).map(|b| l.g[(a, b)] * pi[b]).sum::<f64>()))
            .max_by(|p, q| p.1.total_cmp(&q.1))
            .map(|p| p.0)
    }

    /// The local minimum of V reached from phi by descent along -G^ab d_b V with a
    /// backtracking step (at most 2000 steps; stops when a step moves the field by less than
    /// 1e-12 (1 + |phi|)).
    pub fn minimum_from(&mut self, phi: &[f64]) -> Option<Vec<f64>> {
        let n = self.n;
        let mut flow = Flow::new(&mut self.space);
        let mut x = phi.to_vec();
        let mut step = 1.0;
        for _ in 0..2000 {
            let l = flow.at(&x).ok()?;
            let v0 = l.v;
            let d: Vec<f64> = (0..n)
                .map(|a| -(0..n).map(|b| l.g_inv[(a, b)] * l.dv[b]).sum::<f64>())
                .collect();
            let size = d.iter().map(|c| c * c).sum::<f64>().sqrt();
            if size == 0.0 {
                return Some(x);
            }
            let scale = 1.0 + x.iter().map(|c| c.abs()).fold(0.0, f64::max);
            let mut moved = false;
            for _ in 0..60 {
                let trial: Vec<f64> = (0..n).map(|a| x[a] + step * d[a] / size).collect();
                if flow.at(&trial).map(|l| l.v < v0).unwrap_or(false) {
                    x = trial;
                    moved = true;
                    break;
                }
                step *= 0.5;
            }
            if !moved || step < 1e-12 * scale {
                return Some(x);
            }
            step *= 2.0;
        }
        Some(x)
    }
}

/// H at a point with velocity p (module docs).
fn hubble(l: &crate::analysis::multi::Local, p: &[f64], v_s: f64) -> f64 {
    ((0.5 * quad_form(&l.g, p, p) + l.v / v_s) / 3.0).sqrt()
}

/// eps_H at a point with velocity p (module docs).
fn eps_of(l: &crate::analysis::multi::Local, p: &[f64], v_s: f64) -> f64 {
    let kin = 0.5 * quad_form(&l.g, p, p);
    3.0 * kin / (kin + l.v / v_s)
}

impl Flowing for MultiBasin<'_> {
    fn eps(&mut self, y: &[f64]) -> Result<f64, AnalysisError> {
        let n = self.n;
        let v_s = self.v_scale;
        let l = self.at(&y[..n])?;
        Ok(eps_of(l, &y[n..], v_s))
    }

    fn segment(&mut self, t0: f64, y0: &[f64], t_end: f64, inflating: bool) -> Result<Segment, Stop> {
        let n = self.n;
        let v_s = self.v_scale;
        let tol = self.tol.clone();
        let mut cps = std::mem::take(&mut self.checkpoints);
        let this = RefCell::new(self);
        let mut first = true;
        let start_sign = if inflating { -1.0 } else { 1.0 };
        let end = integrate(
            &mut |_: f64, y: &[f64], dy: &mut [f64]| this.borrow_mut().rhs(y, dy),
            t0,
            y0,
            t_end,
            &tol,
            &mut |_, y| {
                if first {
                    first = false;
                    return Some(start_sign);
                }
                // right after the right-hand side at y: the geometry is that of y
                let b = this.borrow();
                Some(eps_of(&b.local, &y[n..], v_s) - 1.0)
            },
            &mut |t, y| {
                if cps.last().is_none_or(|c| t > c.0) {
                    cps.push((t, y.to_vec()));
                }
            },
        );
        let me = this.into_inner();
        me.checkpoints = cps;
        match end {
            Ok(e) => Ok(Segment {
                t: e.t,
                y: e.y,
                crossed: e.event,
            }),
            Err(Failure::Rhs(e)) => {
                let (t, y) = me.checkpoints.last().cloned().unwrap_or((t0, y0.to_vec()));
                Err(Stop::Left(e, t, y))
            }
            Err(Failure::Numeric(e)) => Err(Stop::Failed(ErrorKind::BackgroundIntegration(e).into())),
        }
    }

    fn settling(&mut self, on: bool) {
        self.tol = if on { self.coarse.clone() } else { self.fine.clone() };
    }

    fn state_at(&mut self, n_at: f64) -> Result<Vec<f64>, AnalysisError> {
        let i = self.checkpoints.partition_point(|c| c.0 <= n_at).saturating_sub(1);
        let (n0, y0) = self.checkpoints[i].clone();
        if n0 == n_at {
            return Ok(y0);
        }
        let tol = self.fine.clone();
        let end = integrate(
            &mut |_: f64, y: &[f64], dy: &mut [f64]| self.rhs(y, dy),
            n0,
            &y0,
            n_at,
            &tol,
            &mut |_, _| None,
            &mut |_, _| {},
        )
        .map_err(crate::analysis::multi::background::failure)?;
        Ok(end.y)
    }
}
