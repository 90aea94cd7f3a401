//! Basins of initial conditions: the exact background from any start (a field point and a
//! velocity), through a kinetic-dominated phase if there is one, to the end of inflation; how
//! many e-folds it inflates, how it ends, and n_s and r at each N_*.
//!
//! The velocity at the start is the slow-roll attractor's, zero, or set by the ratio of
//! kinetic to potential energy X = rho_kin / V along minus (down) or plus (up) the gradient.
//! With the canonical velocity pi = dchi/dN, rho_kin = H^2 pi^2 / 2 and eps_H = pi^2 / 2, and
//! H^2 = V / (3 - eps_H) (common practice), so
//!
//! ```text
//! X = H^2 pi^2 / (2 V) = eps_H / (3 - eps_H),   hence   eps_H = 3 X / (1 + X)
//! ```
//!
//! (derived here from the Friedmann equation): X = 0 is rest, X -> inf kinetic domination
//! (eps_H -> 3); any finite X keeps H^2 > 0 where V > 0.
//!
//! # The e-fold rule
//!
//! A stretch of inflation is an interval with eps_H < 1. The run follows the background from
//! the start; when eps_H rises through 1 (a candidate end) it goes on for
//! [`BasinLimits::settle_efolds`] more e-folds. If eps_H falls below 1 again there and stays
//! below for [`BasinLimits::restart_efolds`] e-folds, inflation has restarted (a second
//! plateau or shelf) and the run continues; shorter dips are the turning points of the
//! oscillation about a minimum and do not count. Then
//!
//! - `n_total` is N from the first time eps_H drops below 1 (or the start, if it inflates
//!   there) to the last candidate end, the end of inflation;
//! - `n_inflating` is the sum of the lengths of the stretches counted up to that end;
//! - the end point is the field at the end of inflation; the final minimum is found by
//!   descending V from where the run stops.
//!
//! A run that has not ended within [`BasinLimits::cap_efolds`] never ends (stuck on a plateau
//! or at a hilltop); a run that reaches a point where V <= 0, V or the metric is not finite, or
//! the field leaves the model's domain, leaves the domain.
//!
//! # Observables
//!
//! For every N_* within `n_total` the pivot is the state N_* e-folds before the end on the
//! exact background. One field: n_s and r of potential slow roll at the pivot's field value
//! ([`crate::slowroll::SlowRoll`], first order). Several fields: the slow-roll delta-N route
//! ([`crate::analysis::multi::delta_n`]) at the pivot's field point, which takes 4 n^2 + 1
//! short background runs, far cheaper than the mode matrix for thousands of starts.

pub mod multi;
pub mod sample;
pub mod single;

use crate::analysis::error::{AnalysisError, ErrorKind};
pub use crate::config::BasinLimits;
use serde::Serialize;

/// The initial velocity of a start.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Velocity {
    /// The slow-roll attractor's at the start: dchi/dN = -V_chi / V (or -G^ab V_b / V).
    Attractor,
    /// At rest.
    Rest,
    /// Kinetic over potential energy `x`, along minus the gradient (`up` false) or plus it.
    Kinetic {
        /// X = rho_kin / V.
        x: f64,
        /// Up the gradient.
        up: bool,
    },
}

impl Velocity {
    /// eps_H of this velocity when it is set by X: 3 X / (1 + X) (module docs).
    pub fn eps_of_ratio(x: f64) -> f64 {
        if x.is_infinite() {
            3.0
        } else {
            3.0 * x / (1.0 + x)
        }
    }
}

/// How a start ends.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// At least the e-folds asked for (`--need`).
    Enough,
    /// Inflation ends with fewer.
    TooFew,
    /// No end within the cap on e-folds.
    NeverEnds,
    /// The background reaches a point outside the model's domain.
    LeavesDomain,
    /// The start could not be run (its row says why).
    Failed,
}

impl Outcome {
    /// Every outcome, in report order.
    pub const ALL: [Outcome; 5] = [
        Outcome::Enough,
        Outcome::TooFew,
        Outcome::NeverEnds,
        Outcome::LeavesDomain,
        Outcome::Failed,
    ];

    /// The name used in tables.
    pub fn name(self) -> &'static str {
        match self {
            Outcome::Enough => "enough",
            Outcome::TooFew => "too_few",
            Outcome::NeverEnds => "never_ends",
            Outcome::LeavesDomain => "leaves_domain",
            Outcome::Failed => "failed",
        }
    }
}

/// One integration segment: where it stopped, and whether eps_H crossed 1 there.
#[derive(Debug, Clone, PartialEq)]
pub struct Segment {
    /// N where it stopped.
    pub t: f64,
    /// The state there.
    pub y: Vec<f64>,
    /// True when eps_H = 1 stopped it (before the segment's end).
    pub crossed: bool,
}

/// Why a segment stopped early.
#[derive(Debug, Clone, PartialEq)]
pub enum Stop {
    /// The background left the domain (why, and the last state inside).
    Left(AnalysisError, f64, Vec<f64>),
    /// The integrator failed.
    Failed(AnalysisError),
}

/// A background that can be run segment by segment: one field or several.
pub trait Flowing {
    /// eps_H at a state.
    fn eps(&mut self, y: &[f64]) -> Result<f64, AnalysisError>;
    /// Integrates from (t0, y0) toward `t_end`, stopping where eps_H - 1 changes sign;
    /// `inflating` says which side of 1 eps_H starts on. Keeps a checkpoint at every step.
    fn segment(&mut self, t0: f64, y0: &[f64], t_end: f64, inflating: bool) -> Result<Segment, Stop>;
    /// The state at N (within the run), from the nearest checkpoint below.
    fn state_at(&mut self, n: f64) -> Result<Vec<f64>, AnalysisError>;
    /// Runs the segments that follow at [`BasinLimits::settle_rtol`] (`true`) or at
    /// [`BasinLimits::rtol`] (`false`, the state of a new run).
    fn settling(&mut self, on: bool);
}

/// What the e-fold rule finds along one run (module docs).
#[derive(Debug, Clone, PartialEq)]
pub struct Track {
    /// N when eps_H first fell below 1 (None: it never did).
    pub n_begin: Option<f64>,
    /// N at the end of inflation (None: none within the cap).
    pub n_end: Option<f64>,
    /// e-folds with eps_H < 1 up to the end.
    pub n_inflating: f64,
    /// N where the run stopped.
    pub n_last: f64,
    /// The state at the end of inflation (at the cap, if none).
    pub end: Vec<f64>,
    /// The state where the run stopped.
    pub last: Vec<f64>,
    /// The state when eps_H first fell below 1 (the start, if it inflates there).
    pub begin: Option<Vec<f64>>,
    /// Why it stopped early: it left the domain (with the reason).
    pub left: Option<AnalysisError>,
}

impl Track {
    /// n_total: from the first eps_H < 1 to the end, or to where the run stopped if it did
    /// not end (0 if it never inflates).
    pub fn n_total(&self) -> f64 {
        match (self.n_begin, self.n_end) {
            (Some(b), Some(e)) => e - b,
            (Some(b), None) => self.n_last - b,
            _ => 0.0,
        }
    }
}

/// Where the tracker is.
struct Cursor {
    t: f64,
    y: Vec<f64>,
    stretch_start: f64,
}

/// Follows a run from `y0` by the e-fold rule (module docs).
pub fn track(f: &mut dyn Flowing, y0: &[f64], lim: &BasinLimits) -> Result<Track, AnalysisError> {
    f.settling(false);
    let eps0 = f.eps(y0)?;
    let mut inside = eps0 < 1.0;
    let mut c = Cursor {
        t: 0.0,
        y: y0.to_vec(),
        stretch_start: 0.0,
    };
    let mut out = Track {
        n_begin: inside.then_some(0.0),
        n_end: None,
        n_inflating: 0.0,
        n_last: 0.0,
        end: y0.to_vec(),
        last: y0.to_vec(),
        begin: inside.then(|| y0.to_vec()),
        left: None,
    };
    let cap = lim.cap_efolds;
    loop {
        let result = match (inside, out.n_end) {
            (true, _) => f.segment(c.t, &c.y, cap, true).map(|s| {
                out.n_inflating += s.t - c.stretch_start;
                out.end = s.y.clone();
                // at the cap inside a stretch it never ends; else it settles
                out.n_end = s.crossed.then_some(s.t);
                inside = !s.crossed;
                let more = s.crossed;
                (s, more)
            }),
            (false, None) => f.segment(c.t, &c.y, cap, false).map(|s| {
                if s.crossed {
                    out.n_begin.get_or_insert(s.t);
                    out.begin.get_or_insert_with(|| s.y.clone());
                    c.stretch_start = s.t;
                    inside = true;
                }
                let more = s.crossed;
                if !more {
                    out.end = s.y.clone();
                }
                (s, more)
            }),
            (false, Some(n_end)) => settle(f, &mut c, n_end, lim).map(|(s, restarted)| {
                if restarted {
                    // the restarted stretch counts: back to the run's tolerance
                    f.settling(false);
                    inside = true;
                    out.n_end = None;
                }
                let more = restarted || s.t < (n_end + lim.settle_efolds).min(cap);
                (s, more)
            }),
        };
        match result {
            Ok((s, more)) => {
                c.t = s.t;
                c.y = s.y;
                out.last = c.y.clone();
                out.n_last = c.t;
                if !more || c.t >= cap {
                    return Ok(out);
                }
            }
            Err(Stop::Left(why, t, y)) => {
                if inside {
                    out.n_inflating += t - c.stretch_start;
                }
                if out.n_end.is_none() {
                    out.end = y.clone();
                }
                out.last = y;
                out.n_last = t;
                out.left = Some(why);
                return Ok(out);
            }
            Err(Stop::Failed(e)) => return Err(e),
        }
    }
}

/// After a candidate end at `n_end`: runs until `n_end + settle` or a dip below eps_H = 1; a
/// dip that lasts `restart_efolds` is a restart (true), a shorter one is an oscillation.
fn settle(f: &mut dyn Flowing, c: &mut Cursor, n_end: f64, lim: &BasinLimits) -> Result<(Segment, bool), Stop> {
    f.settling(true);
    let until = (n_end + lim.settle_efolds).min(lim.cap_efolds);
    let s = f.segment(c.t, &c.y, until, false)?;
    if !s.crossed {
        return Ok((s, false));
    }
    let dip = s.t;
    let probe = f.segment(dip, &s.y, (dip + lim.restart_efolds).min(lim.cap_efolds), true)?;
    if probe.crossed {
        return Ok((probe, false));
    }
    c.stretch_start = dip;
    Ok((probe, true))
}

/// The result of one start.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StartResult {
    /// n_total by the e-fold rule (module docs).
    pub n_total: f64,
    /// e-folds with eps_H < 1.
    pub n_inflating: f64,
    /// How it ends.
    pub outcome: Outcome,
    /// The field at the end of inflation (at the cap, or where it left the domain).
    pub end: Vec<f64>,
    /// The minimum of V the field settles in, if found.
    pub minimum: Option<Vec<f64>>,
    /// Several fields: the field that carries most of the kinetic energy at the end of
    /// inflation (the direction it rolls along).
    pub rolls_along: Option<usize>,
    /// n_s at each N_* (None where the run has fewer e-folds).
    pub n_s: Vec<Option<f64>>,
    /// r at each N_*.
    pub r: Vec<Option<f64>>,
    /// Why the start failed or left the domain.
    pub reason: Option<String>,
}

impl StartResult {
    /// A start that could not be run.
    pub fn failed(e: &AnalysisError, n_stars: usize) -> StartResult {
        StartResult {
            n_total: 0.0,
            n_inflating: 0.0,
            outcome: Outcome::Failed,
            end: Vec::new(),
            minimum: None,
            rolls_along: None,
            n_s: vec![None; n_stars],
            r: vec![None; n_stars],
            reason: Some(e.message.clone()),
        }
    }
}

/// The outcome of a track: left, never ends, or enough / too few against `need`.
pub fn outcome_of(t: &Track, need: f64) -> Outcome {
    if t.left.is_some() && t.n_end.is_none() {
        Outcome::LeavesDomain
    } else if t.n_end.is_none() {
        Outcome::NeverEnds
    } else if t.n_total() >= need {
        Outcome::Enough
    } else {
        Outcome::TooFew
    }
}

/// What one start needs besides its point and velocity.
#[derive(Debug, Clone, Copy)]
pub struct Ask<'a> {
    /// e-folds for the outcome `enough`.
    pub need: f64,
    /// N_* values.
    pub n_stars: &'a [f64],
    /// Limits and tolerances.
    pub limits: &'a BasinLimits,
}

/// The error of a velocity that gives eps_H >= 3 (H^2 = V / (3 - eps_H) <= 0).
pub fn hubble_negative(eps_h: f64, at: &[f64]) -> AnalysisError {
    ErrorKind::BasinHubbleNegative { eps_h, at: at.to_vec() }.into()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A background whose eps_H - 1 changes sign at given N (its state is N itself): the
    /// e-fold rule on a schedule known exactly.
    struct Schedule {
        /// eps_H at N = 0 is above 1 when `starts_above`.
        starts_above: bool,
        /// The N where eps_H - 1 changes sign, ascending.
        crossings: Vec<f64>,
    }

    impl Flowing for Schedule {
        fn eps(&mut self, y: &[f64]) -> Result<f64, AnalysisError> {
            let before = self.crossings.iter().filter(|&&c| c <= y[0]).count();
            let above = self.starts_above ^ (before % 2 == 1);
            Ok(if above { 2.0 } else { 0.5 })
        }
        fn segment(&mut self, t0: f64, _: &[f64], t_end: f64, _: bool) -> Result<Segment, Stop> {
            match self.crossings.iter().find(|&&c| c > t0 && c <= t_end) {
                Some(&c) => Ok(Segment {
                    t: c,
                    y: vec![c],
                    crossed: true,
                }),
                None => Ok(Segment {
                    t: t_end,
                    y: vec![t_end],
                    crossed: false,
                }),
            }
        }
        fn state_at(&mut self, n: f64) -> Result<Vec<f64>, AnalysisError> {
            Ok(vec![n])
        }
        fn settling(&mut self, _: bool) {}
    }

    fn run(starts_above: bool, crossings: &[f64]) -> Track {
        let mut s = Schedule {
            starts_above,
            crossings: crossings.to_vec(),
        };
        track(&mut s, &[0.0], &BasinLimits::default()).unwrap()
    }

    #[test]
    fn the_efold_rule_counts_from_the_first_fall_to_the_last_end() {
        // kination until 1.5, inflation to 61.5, then oscillation dips (0.4 e-fold) that do
        // not count: n_total = 60, n_inflating = 60
        let t = run(true, &[1.5, 61.5, 62.0, 62.4, 63.0, 63.3]);
        assert_eq!((t.n_begin, t.n_end), (Some(1.5), Some(61.5)));
        assert_eq!(t.n_total(), 60.0);
        assert_eq!(t.n_inflating, 60.0);
        // a restart lasting 3.5 e-folds after a pause of 0.5: it counts, and the gap does not
        let t = run(true, &[1.5, 41.5, 42.0, 45.5]);
        assert_eq!(t.n_end, Some(45.5));
        assert_eq!(t.n_total(), 44.0);
        assert_eq!(t.n_inflating, 43.5);
        // a second stretch after the settling window (1 e-fold) is not looked for
        assert_eq!(run(false, &[10.0, 13.0, 20.0]).n_end, Some(10.0));
        // inflating from the start, and never ending within the cap
        let t = run(false, &[]);
        assert_eq!((t.n_begin, t.n_end), (Some(0.0), None));
        assert_eq!(t.n_total(), BasinLimits::default().cap_efolds);
        // never inflating
        let t = run(true, &[]);
        assert_eq!((t.n_begin, t.n_total()), (None, 0.0));
    }

    #[test]
    fn the_energy_split_gives_eps_h() {
        // derived in the module docs: eps_H = 3X/(1+X); X = eps/(3 - eps) inverts it
        for x in [0.0, 1e-3, 0.5, 1.0, 10.0, 1e6] {
            let eps = Velocity::eps_of_ratio(x);
            assert!((eps / (3.0 - eps) - x).abs() <= 1e-9 * x.max(1.0), "X = {x}");
        }
        assert_eq!(Velocity::eps_of_ratio(f64::INFINITY), 3.0);
        // X = 1/2 is the end of inflation's energy split: eps_H = 1
        assert!((Velocity::eps_of_ratio(0.5) - 1.0).abs() < 1e-15);
    }
}
