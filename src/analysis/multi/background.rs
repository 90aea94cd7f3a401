//! The multi-field background in e-folds (N forward in time), covariantly in the field-space
//! metric G_ab, with pi^a = dphi^a/dN (reduced Planck units):
//!
//! ```text
//! eps_H = G_ab pi^a pi^b / 2,   H^2 = V / (3 - eps_H),
//! dpi^a/dN = -Gamma^a_bc pi^b pi^c - (3 - eps_H) (pi^a + G^ab V_b / V)
//! ```
//!
//! (the covariant equation D_N pi^a = -(3 - eps_H)(pi^a + G^ab V_b/V) written out; Sasaki &
//! Stewart 1996, in e-folds, from memory; as in tests/reference/MULTIFIELD.md). The state is
//! (phi^0..phi^{n-1}, pi^0..pi^{n-1}); inflation ends at eps_H = 1.

use super::ode::{integrate, integrate_extrapolated, End, Failure, Tolerances};
use super::{FieldSpace, Local};
use crate::analysis::error::{AnalysisError, ErrorKind};
use crate::config::MultiLimits;
use std::cell::RefCell;

/// eps_H = G_ab pi^a pi^b / 2 at a point.
pub fn eps_h(l: &Local, pi: &[f64]) -> f64 {
    0.5 * quad_form(&l.g, pi, pi)
}

/// u^a G_ab w^b.
pub fn quad_form(g: &nalgebra::DMatrix<f64>, u: &[f64], w: &[f64]) -> f64 {
    let n = u.len();
    let mut s = 0.0;
    for a in 0..n {
        for b in 0..n {
            s += u[a] * g[(a, b)] * w[b];
        }
    }
    s
}

/// G^ab V_b / V, the gradient flow's direction (no scaling: V and V_b of a point are used as
/// the field space gives them).
pub fn grad_over_v(l: &Local) -> Vec<f64> {
    let n = l.n();
    (0..n)
        .map(|a| (0..n).map(|b| l.g_inv[(a, b)] * l.dv[b]).sum::<f64>() / l.v)
        .collect()
}

/// The slow-roll attractor's velocity pi^a = -G^ab V_b / V.
pub fn attractor(l: &Local) -> Vec<f64> {
    grad_over_v(l).into_iter().map(|x| -x).collect()
}

/// dpi^a/dN at a point with velocity pi, written into `out`; returns eps_H.
pub fn acceleration(l: &Local, pi: &[f64], out: &mut [f64]) -> f64 {
    let n = l.n();
    let eps = eps_h(l, pi);
    let fr = 3.0 - eps;
    for a in 0..n {
        let grad = (0..n).map(|b| l.g_inv[(a, b)] * l.dv[b]).sum::<f64>() / l.v;
        let mut christoffel = 0.0;
        for b in 0..n {
            for c in 0..n {
                christoffel += l.gamma(a, b, c) * pi[b] * pi[c];
            }
        }
        out[a] = -christoffel - fr * (pi[a] + grad);
    }
    eps
}

/// A field space with its scratch [`Local`], shared by the closures of one integration.
pub struct Flow<'s> {
    /// The field space.
    pub space: &'s mut dyn FieldSpace,
    /// Scratch for [`FieldSpace::local`].
    pub local: Local,
}

impl<'s> Flow<'s> {
    /// For a field space.
    pub fn new(space: &'s mut dyn FieldSpace) -> Flow<'s> {
        let n = space.n_fields();
        Flow {
            space,
            local: Local::zeros(n),
        }
    }

    /// The number of fields.
    pub fn n(&self) -> usize {
        self.local.n()
    }

    /// Evaluates the geometry at phi into the scratch.
    pub fn at(&mut self, phi: &[f64]) -> Result<&Local, AnalysisError> {
        self.space.local(phi, &mut self.local)?;
        Ok(&self.local)
    }

    /// d(phi, pi)/dN at a state (phi, pi): returns eps_H. Evaluates what the background
    /// needs ([`FieldSpace::local_background`]); see [`Flow::rhs_full`].
    pub fn rhs(&mut self, y: &[f64], dy: &mut [f64]) -> Result<f64, AnalysisError> {
        let n = self.n();
        self.space.local_background(&y[..n], &mut self.local)?;
        dy[..n].copy_from_slice(&y[n..2 * n]);
        Ok(acceleration(&self.local, &y[n..2 * n], &mut dy[n..2 * n]))
    }

    /// [`Flow::rhs`] with the whole geometry evaluated (the Hessian and R^a_bcd, which the
    /// perturbations need) into [`Flow::local`].
    pub fn rhs_full(&mut self, y: &[f64], dy: &mut [f64]) -> Result<f64, AnalysisError> {
        let n = self.n();
        self.space.local(&y[..n], &mut self.local)?;
        dy[..n].copy_from_slice(&y[n..2 * n]);
        Ok(acceleration(&self.local, &y[n..2 * n], &mut dy[n..2 * n]))
    }

    /// eps_H at a state.
    pub fn eps(&mut self, y: &[f64]) -> Result<f64, AnalysisError> {
        let n = self.n();
        self.space.local_background(&y[..n], &mut self.local)?;
        Ok(eps_h(&self.local, &y[n..2 * n]))
    }

    /// eps_H at a state from the geometry of the last evaluation, which must have been at
    /// the same point: the integrator calls an event right after the right-hand side at the
    /// state it is given.
    pub fn eps_last(&self, y: &[f64]) -> f64 {
        let n = self.n();
        eps_h(&self.local, &y[n..2 * n])
    }

    /// ln H at a state.
    pub fn ln_h(&mut self, y: &[f64]) -> Result<f64, AnalysisError> {
        let eps = self.eps(y)?;
        Ok(0.5 * (self.local.v / (3.0 - eps)).ln())
    }
}

/// A background run: the start, the end of inflation and checkpoints (N, state) at every
/// accepted step (at most [`MultiLimits::bg_step`] apart).
#[derive(Debug, Clone, PartialEq)]
pub struct Run {
    /// The start state (N = 0).
    pub start: Vec<f64>,
    /// N at eps_H = 1.
    pub n_end: f64,
    /// The state there.
    pub end: Vec<f64>,
    /// Checkpoints (N, state), ascending, the last one the end.
    pub checkpoints: Vec<(f64, Vec<f64>)>,
}

/// The tolerances of the background: rtol, atol = 1e-3 rtol, steps of at most `bg_step`.
pub fn tolerances(limits: &MultiLimits) -> Tolerances {
    Tolerances {
        rtol: limits.bg_rtol,
        atol: vec![1e-3 * limits.bg_rtol],
        h_max: limits.bg_step,
        max_steps: (limits.max_efolds / limits.bg_step) as usize * 4 + 10_000,
    }
}

/// An integration failure as an analysis error: the field space's own error, or the
/// integrator's.
pub fn failure(f: Failure) -> AnalysisError {
    match f {
        Failure::Rhs(e) => e,
        Failure::Numeric(e) => ErrorKind::BackgroundIntegration(e).into(),
    }
}

/// The start state: phi with the given velocity dphi^a/dN, or the attractor's. Checks the
/// dimensions and that the start inflates (eps_H < 1).
pub fn start_state(flow: &mut Flow<'_>, phi: &[f64], velocity: Option<&[f64]>) -> Result<Vec<f64>, AnalysisError> {
    let n = flow.n();
    for (what, got) in [("start", Some(phi.len())), ("velocity", velocity.map(<[f64]>::len))] {
        if let Some(got) = got.filter(|&g| g != n) {
            return Err(ErrorKind::MultiDimension { what, got, expected: n }.into());
        }
    }
    let l = flow.at(phi)?;
    let pi = velocity.map_or_else(|| attractor(l), <[f64]>::to_vec);
    let eps = eps_h(l, &pi);
    if eps.is_nan() || eps >= 1.0 {
        return Err(ErrorKind::MultiStartNotInflating {
            eps_h: eps,
            at: phi.to_vec(),
        }
        .into());
    }
    Ok([phi, &pi[..]].concat())
}

/// Integrates from `start` to eps_H = 1, at most `limits.max_efolds` e-folds.
pub fn run(flow: &mut Flow<'_>, start: &[f64], limits: &MultiLimits) -> Result<Run, AnalysisError> {
    let flow = RefCell::new(flow);
    let mut checkpoints = Vec::new();
    let end = integrate(
        &mut |_: f64, y: &[f64], dy: &mut [f64]| flow.borrow_mut().rhs(y, dy).map(|_| ()),
        0.0,
        start,
        limits.max_efolds,
        &tolerances(limits),
        &mut |_, y| Some(flow.borrow().eps_last(y) - 1.0),
        &mut |n, y| checkpoints.push((n, y.to_vec())),
    )
    .map_err(failure)?;
    if !end.event {
        return Err(never_ends(&mut flow.borrow_mut(), &end)?);
    }
    checkpoints.retain(|c| c.0 < end.t);
    checkpoints.push((end.t, end.y.clone()));
    Ok(Run {
        start: start.to_vec(),
        n_end: end.t,
        end: end.y,
        checkpoints,
    })
}

/// The error of a run that reached its cap without eps_H = 1: how far it ran, eps_H and the
/// field point there.
fn never_ends(flow: &mut Flow<'_>, end: &End) -> Result<AnalysisError, AnalysisError> {
    let eps = flow.eps(&end.y)?;
    Ok(ErrorKind::MultiNeverEnds {
        ran: end.t,
        eps_h: eps,
        at: end.y[..end.y.len() / 2].to_vec(),
    }
    .into())
}

/// The e-folds from `start` to eps_H = 1 (at most `limits.max_efolds`), keeping no
/// checkpoints: extrapolation steps ([`super::ode::integrate_extrapolated`]) up to
/// `limits.free_step`.
pub fn efolds_to_end(flow: &mut Flow<'_>, start: &[f64], limits: &MultiLimits) -> Result<f64, AnalysisError> {
    let flow = RefCell::new(flow);
    let tol = Tolerances {
        h_max: limits.free_step,
        ..tolerances(limits)
    };
    let end = integrate_extrapolated(
        &mut |_: f64, y: &[f64], dy: &mut [f64]| flow.borrow_mut().rhs(y, dy).map(|_| ()),
        0.0,
        start,
        limits.max_efolds,
        &tol,
        &mut |_, y| Some(flow.borrow().eps_last(y) - 1.0),
    )
    .map_err(failure)?;
    if !end.event {
        return Err(never_ends(&mut flow.borrow_mut(), &end)?);
    }
    Ok(end.t)
}

/// The state at N (from the start), integrated from the nearest checkpoint below at the
/// background's tolerances.
pub fn state_at(flow: &mut Flow<'_>, run: &Run, n: f64, limits: &MultiLimits) -> Result<Vec<f64>, AnalysisError> {
    let i = run.checkpoints.partition_point(|c| c.0 <= n).saturating_sub(1);
    let (n0, y0) = &run.checkpoints[i];
    if *n0 == n {
        return Ok(y0.clone());
    }
    let end = integrate(
        &mut |_: f64, y: &[f64], dy: &mut [f64]| flow.rhs(y, dy).map(|_| ()),
        *n0,
        y0,
        n,
        &tolerances(limits),
        &mut |_, _| None,
        &mut |_, _| {},
    )
    .map_err(failure)?;
    Ok(end.y)
}

/// The state `n_before` e-folds before the end of inflation; an error when the run is
/// shorter than `needed` e-folds (for an N_* of `n_star`).
pub fn before_end(
    flow: &mut Flow<'_>,
    run: &Run,
    n_before: f64,
    needed: f64,
    limits: &MultiLimits,
) -> Result<Vec<f64>, AnalysisError> {
    if run.n_end < needed {
        return Err(ErrorKind::MultiTooFewEfolds {
            available: run.n_end,
            needed,
            n_star: n_before,
        }
        .into());
    }
    state_at(flow, run, run.n_end - n_before, limits)
}

#[cfg(test)]
mod tests {
    use super::super::closed_form::{Diagonal, Metric1};
    use super::*;

    /// Equal masses: the motion is radial and N_total is the one-field quadratic's from
    /// |phi| = sqrt(369), 92.8712595863 (tests/reference/multifield.json, model A).
    #[test]
    fn equal_masses_end_where_the_reference_ends() {
        let mut s = Diagonal::quadratic([1.0, 1.0], Metric1::Flat);
        let mut flow = Flow::new(&mut s);
        let limits = MultiLimits::default();
        let y0 = start_state(&mut flow, &[15.0, 12.0], None).unwrap();
        let r = run(&mut flow, &y0, &limits).unwrap();
        assert!((r.n_end - 92.8712595863).abs() < 1e-8, "{}", r.n_end);
        assert!((r.end[0] - 0.7881642336).abs() < 1e-9);
    }

    /// A start with no end within the cap says how far it ran.
    #[test]
    fn never_ending_is_an_error_with_the_distance() {
        let mut s = Diagonal::quadratic([1.0, 1.0], Metric1::Flat);
        let mut flow = Flow::new(&mut s);
        let limits = MultiLimits {
            max_efolds: 5.0,
            ..MultiLimits::default()
        };
        let y0 = start_state(&mut flow, &[15.0, 12.0], None).unwrap();
        let e = run(&mut flow, &y0, &limits).unwrap_err();
        match *e.kind {
            ErrorKind::MultiNeverEnds { ran, .. } => assert_eq!(ran, 5.0),
            ref k => panic!("{k:?}"),
        }
        assert!(e.message.contains("after 5 e-folds"), "{}", e.message);
    }

    /// The wrong number of components is refused.
    #[test]
    fn dimensions_are_checked() {
        let mut s = Diagonal::quadratic([1.0, 1.0], Metric1::Flat);
        let mut flow = Flow::new(&mut s);
        let e = start_state(&mut flow, &[1.0], None).unwrap_err();
        assert!(matches!(
            *e.kind,
            ErrorKind::MultiDimension {
                got: 1,
                expected: 2,
                ..
            }
        ));
        let e = start_state(&mut flow, &[1.0, 1.0], Some(&[1.0, 1.0, 0.0])).unwrap_err();
        assert!(matches!(*e.kind, ErrorKind::MultiDimension { what: "velocity", .. }));
        let e = start_state(&mut flow, &[1.0, 1.0], Some(&[1.0, 1.0])).unwrap_err();
        assert!(matches!(*e.kind, ErrorKind::MultiStartNotInflating { .. }));
    }
}
