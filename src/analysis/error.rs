//! The analyses' error: what went wrong as a typed [`ErrorKind`] carrying its numbers, with
//! its own message and hints, turned into a [`crate::diag::Diagnostic`] by the one renderer.
//!
//! Numbers inside messages are written by [`crate::report::numfmt`]: `number` for computed
//! values, `typed` for values the user gave, `scientific` for small relative changes.

use crate::analysis::single::domain::EndKind;
use crate::numerics::NumericError;
use crate::report::numfmt::{number, scientific, typed};
use std::fmt;

/// A failure of an analysis, with a diagnosis: the kind with its data, and the message and
/// hints it gives (filled from the kind).
#[derive(Debug, Clone, PartialEq)]
pub struct AnalysisError {
    /// What went wrong, with its numbers (boxed: a `Result` of an analysis stays small).
    pub kind: Box<ErrorKind>,
    /// What went wrong, in words (the kind's [`fmt::Display`]).
    pub message: String,
    /// How to fix or what it means ([`ErrorKind::hints`]).
    pub hints: Vec<String>,
}

impl AnalysisError {
    /// As a diagnostic.
    pub fn diagnostic(&self) -> crate::diag::Diagnostic {
        let mut d = crate::diag::Diagnostic::new(self.message.clone());
        for h in &self.hints {
            d = d.with_hint(h.clone());
        }
        d
    }
}

impl From<ErrorKind> for AnalysisError {
    fn from(kind: ErrorKind) -> Self {
        AnalysisError {
            message: kind.to_string(),
            hints: kind.hints(),
            kind: Box::new(kind),
        }
    }
}

impl fmt::Display for AnalysisError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for AnalysisError {}

impl From<NumericError> for AnalysisError {
    fn from(e: NumericError) -> Self {
        ErrorKind::Numerical(e).into()
    }
}

/// What is wrong at a point inside a range the user gave.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum RangeDefect {
    /// K = 0.
    KZero,
    /// K < 0 (its value).
    KNegative(f64),
    /// K is infinite or NaN (its value).
    KNotFinite(f64),
    /// V is NaN.
    VNotReal,
    /// V is infinite (its value).
    VNotFinite(f64),
}

/// One target of a fit that was not reached, for [`ErrorKind::FitNoSolution`].
#[derive(Debug, Clone, PartialEq)]
pub struct Miss {
    /// The observable's name (`n_s`, `r`, ...).
    pub observable: &'static str,
    /// The value reached at the best point.
    pub reached: f64,
    /// The value wanted.
    pub wanted: f64,
    /// The scaled residual there.
    pub residual: f64,
}

/// `NAME = VALUE, ..., gives OBSERVABLE = ... (wanted ..., scaled residual ...); ...`: the best
/// point of a fit and what it reaches there.
fn fit_best(at: &[(String, f64)], misses: &[Miss]) -> String {
    let at: Vec<String> = at
        .iter()
        .map(|(k, v)| format!("{k} = {}", crate::report::numfmt::number_digits(*v, FIT_PARAM_DIGITS)))
        .collect();
    let parts: Vec<String> = misses
        .iter()
        .map(|m| {
            format!(
                "{} = {} (wanted {}, scaled residual {})",
                m.observable,
                crate::report::numfmt::number(m.reached),
                crate::report::numfmt::typed(m.wanted),
                crate::report::numfmt::scientific(m.residual, 3)
            )
        })
        .collect();
    format!("{}, gives {}", at.join(", "), parts.join("; "))
}

/// Why an analysis failed, with the numbers that say so. Each kind has its message
/// ([`fmt::Display`]) and its hints ([`ErrorKind::hints`]).
#[derive(Debug, Clone, PartialEq)]
pub enum ErrorKind {
    /// A numerical routine gave up.
    Numerical(NumericError),

    // --- Field space (several fields).
    /// V, one of its derivatives, or a metric component or one of its partials is not a finite
    /// number at a point of field space.
    FieldSpaceNotFinite {
        /// The fields' names.
        fields: Vec<String>,
        /// The point.
        point: Vec<f64>,
        /// What is not finite (`V`, `d_x V`, `G_xy`, `d_x G_yy`, ...).
        what: String,
        /// Its value.
        value: f64,
    },
    /// The field-space metric is not positive definite (or singular) at a point: the Cholesky
    /// pivot of a row is not positive.
    MetricNotPositiveDefinite {
        /// The fields' names.
        fields: Vec<String>,
        /// The point.
        point: Vec<f64>,
        /// The row whose pivot failed (a field index).
        row: usize,
        /// The pivot: zero, negative or NaN.
        pivot: f64,
    },
    /// A point of field space with the wrong number of coordinates.
    PointDimension {
        /// The number of fields.
        fields: usize,
        /// The number of coordinates given.
        given: usize,
    },

    // --- The domain.
    /// No interval of field space has K > 0 with V finite.
    NoDomain,
    /// K has a pole (`pole`) or a zero inside the given range.
    KSingularInRange {
        /// The field's name.
        field: String,
        /// Where.
        at: f64,
        /// A pole of K (else a zero).
        pole: bool,
    },
    /// K <= 0, K not finite or V not finite at a point inside the given range.
    BadInRange {
        /// The field's name.
        field: String,
        /// Where.
        at: f64,
        /// What is wrong there.
        defect: RangeDefect,
    },

    // --- Branches and slow roll.
    /// V is constant on the domain.
    NoBranch,
    /// `--branch` asked for a branch that does not exist.
    NoSuchBranch {
        /// The branch asked for (1-based).
        asked: usize,
        /// How many there are.
        count: usize,
    },
    /// The branch runs into a pole of K.
    RollsIntoPole {
        /// The field's name.
        field: String,
        /// The branch's top.
        top: f64,
        /// The pole at its bottom.
        pole: f64,
    },
    /// The model's `start` side of the minimum of V holds no branch (the minimum is at that
    /// end of a given range).
    NoBranchOnStartSide {
        /// The field's name.
        field: String,
        /// The start is above the minimum (else below).
        above: bool,
        /// The minimum of V, if there is one.
        minimum: Option<f64>,
    },
    /// A prepared analysis whose last rebinding failed: the build's message.
    Rebound {
        /// What the model's build said.
        message: String,
    },
    /// V falls through zero after an inflating stretch before eps_V reaches 1.
    NegativeBeforeEnd {
        /// The field's name.
        field: String,
        /// Where V is negative.
        at: f64,
    },
    /// V <= 0 near the top of the branch.
    NegativeAtTop {
        /// The field's name.
        field: String,
        /// Where V <= 0.
        at: f64,
        /// The branch's top.
        top: f64,
        /// The branch's bottom.
        bottom: f64,
    },
    /// eps_V >= 1 everywhere on the branch: no slow-roll region.
    NoSlowRoll {
        /// The field's name.
        field: String,
        /// The branch's top.
        top: f64,
        /// The branch's bottom.
        bottom: f64,
    },
    /// eps_V stays below 1 down to the bottom of the branch.
    NeverEnds {
        /// The field's name.
        field: String,
        /// The branch's top.
        top: f64,
        /// The branch's bottom.
        bottom: f64,
    },
    /// The e-fold integral is lost to rounding near the branch top (a pole of K).
    RoundingNearTop {
        /// The field's name.
        field: String,
        /// The branch's top.
        top: f64,
        /// The distance of the pivot from it.
        distance: f64,
        /// The relative error left.
        error: f64,
        /// The relative error allowed.
        allowed: f64,
    },
    /// The e-fold integral failed between two field values.
    EfoldIntegral {
        /// The field's name.
        field: String,
        /// From.
        from: f64,
        /// To.
        to: f64,
        /// Why.
        error: NumericError,
    },
    /// The branch gives fewer e-folds than asked.
    TooFewEfolds {
        /// The field's name.
        field: String,
        /// The e-folds available.
        available: f64,
        /// The e-folds asked for.
        asked: f64,
        /// The end of inflation.
        end: f64,
        /// The branch's top.
        top: f64,
    },
    /// Newton–bisection for phi_* did not converge.
    PhiStarNoConvergence {
        /// The N_* asked for.
        n_star: f64,
    },
    /// An N_* of the list is not a positive number.
    BadEfolds {
        /// The value.
        n_star: f64,
    },
    /// The list of N_* is empty.
    NoEfolds,
    /// A number of a prediction is not finite.
    PredictionNotFinite {
        /// The report key.
        key: &'static str,
        /// Its value.
        value: f64,
        /// N_*.
        n_star: f64,
        /// The field's name.
        field: String,
        /// phi_*.
        phi_star: f64,
    },
    /// A number of an inspection is not finite.
    InspectionNotFinite {
        /// The report key.
        key: String,
        /// Its value.
        value: f64,
        /// The field's name.
        field: String,
    },

    // --- Reheating.
    /// The reheating matching refused its assumptions.
    Matching(crate::analysis::reheating::MatchingError),
    /// The matching gives an N_* that is not positive.
    MatchingBadEfolds {
        /// The N_* it gives.
        n_star: f64,
    },
    /// The matching's fixed-point iteration did not converge.
    MatchingNoConvergence,

    // --- The exact background.
    /// The background integration failed.
    BackgroundIntegration(NumericError),
    /// `--start-phi` lies outside the domain.
    StartOutsideDomain {
        /// The field's name.
        field: String,
        /// The start.
        phi: f64,
        /// The domain's lower end.
        lo: f64,
        /// The domain's upper end.
        hi: f64,
        /// What the lower end is.
        lo_kind: EndKind,
        /// What the upper end is.
        hi_kind: EndKind,
    },
    /// The given start has too few e-folds before the end.
    StartTooFewEfolds {
        /// The start.
        phi: f64,
        /// The e-folds it gives.
        available: f64,
        /// The e-folds needed.
        needed: f64,
    },
    /// From the given start, inflation does not end.
    StartNeverEnds {
        /// The start.
        phi: f64,
    },
    /// The exact background never reaches eps_H = 1 (after slow roll found an end).
    ExactNeverEnds,
    /// The exact background never reaches eps_H = 1 (at the pivot).
    ExactNeverEndsAtPivot,
    /// The exact background gives fewer e-folds than N_*.
    ExactTooFewEfolds {
        /// The e-folds it gives.
        available: f64,
        /// N_*.
        n_star: f64,
    },
    /// No start on the attractor with enough e-folds was found.
    NoStart {
        /// The e-folds needed.
        needed: f64,
    },
    /// Slow roll cannot give the exact solver the e-folds it needs before the end.
    NoRoomForExact {
        /// The e-folds needed.
        needed: f64,
        /// Why slow roll failed.
        cause: Box<ErrorKind>,
    },

    // --- The modes.
    /// The mode never reaches k/aH = target before the end of inflation.
    ModeNeverReaches {
        /// k / k_*.
        kappa: f64,
        /// The k/aH it should reach.
        k_over_ah: f64,
    },
    /// The background starts when the mode is already below k/aH = target.
    StartsTooLate {
        /// k / k_*.
        kappa: f64,
        /// The k/aH at which the mode should start.
        k_over_ah: f64,
    },
    /// The background integration toward a mode's start failed.
    ModeBackground(NumericError),
    /// A mode's integration failed.
    ModeIntegration {
        /// k / k_*.
        kappa: f64,
        /// Why.
        error: NumericError,
    },
    /// A mode does not reach its stop before inflation ends.
    ModeExitsLate {
        /// k / k_*.
        kappa: f64,
        /// The k/aH of the stop.
        k_over_ah: f64,
    },
    /// A mode's power still changes at the stop.
    NotFrozen {
        /// k / k_*.
        kappa: f64,
        /// The relative change over the last e-fold.
        drift: f64,
        /// The change allowed.
        allowed: f64,
    },
    /// The factor on V for the observed A_s is not finite.
    ScaleNotFinite {
        /// The factor.
        scale: f64,
    },
    /// A number of a spectrum row is not finite.
    SpectrumNotFinite {
        /// The column.
        key: &'static str,
        /// Its value.
        value: f64,
        /// The mode's k in Mpc^-1.
        k_mpc: f64,
        /// e-folds before the end where it crosses.
        n_before_end: f64,
    },
    /// No wavenumbers were asked for.
    NoWavenumbers,

    // --- Fits.
    /// No free parameter or no target.
    FitEmpty,
    /// More free parameters than targets.
    FitNotUnique {
        /// Free parameters.
        free: usize,
        /// Targets.
        targets: usize,
    },
    /// The model does not build (the model error's message).
    FitModel {
        /// The model error's message.
        message: String,
    },
    /// `--free` names no parameter of the model.
    FitUnknownFree {
        /// The name.
        name: String,
    },
    /// The model does not predict at the start of the fit.
    FitStart {
        /// Why (the point's message).
        cause: String,
    },
    /// The Jacobian could not be formed during the iteration.
    FitJacobian {
        /// Why (the point's message).
        cause: String,
    },
    /// The Jacobian could not be formed at the solution.
    FitJacobianAtSolution {
        /// Why (the point's message).
        cause: String,
    },
    /// No parameter values reproduce the targets.
    FitNoSolution {
        /// The best point found: (name, value) of each free parameter.
        at: Vec<(String, f64)>,
        /// Each target there.
        misses: Vec<Miss>,
    },
    /// A fit of a model of several fields used its budget of predictions before it reached
    /// the targets.
    FitBudget {
        /// Predictions made (the budget, `config::MultiFitSettings::max_evaluations`).
        evaluations: usize,
        /// The best point found: (name, value) of each free parameter.
        at: Vec<(String, f64)>,
        /// Each target there.
        misses: Vec<Miss>,
    },
    /// `--free` names neither a parameter nor a start coordinate of a model of several fields.
    FitUnknownFreeSeveral {
        /// The name.
        name: String,
        /// The model's fields.
        fields: Vec<String>,
        /// The model's parameters.
        params: Vec<String>,
    },

    // --- Several fields.
    /// More fields than the multi-field analyses take.
    MultiTooManyFields {
        /// The model's fields.
        n: usize,
        /// The limit ([`crate::config::MultiLimits::max_fields`]).
        max: usize,
    },
    /// A start point or velocity with the wrong number of components.
    MultiDimension {
        /// What was given (`start`, `velocity`).
        what: &'static str,
        /// Its components.
        got: usize,
        /// The model's fields.
        expected: usize,
    },
    /// The multi-field background never reaches eps_H = 1 within the cap on e-folds.
    MultiNeverEnds {
        /// The e-folds it ran.
        ran: f64,
        /// eps_H where it stopped.
        eps_h: f64,
        /// The field point where it stopped.
        at: Vec<f64>,
    },
    /// The multi-field background gives fewer e-folds than an N_* (with room for its modes).
    MultiTooFewEfolds {
        /// The e-folds from the start to the end of inflation.
        available: f64,
        /// The e-folds needed before the end.
        needed: f64,
        /// The N_* asked for.
        n_star: f64,
    },
    /// A multi-field spectrum's lowest k would have to start inside the horizon before the
    /// background starts.
    MultiSpectrumTooFewEfolds {
        /// The e-folds from the start to the end of inflation.
        available: f64,
        /// The e-folds the lowest k needs before the end.
        needed: f64,
        /// The lowest k, in Mpc^-1.
        k_min_mpc: f64,
        /// k/aH where a mode starts.
        k_start: f64,
    },
    /// A k of a multi-field spectrum crosses the horizon too close to the end to freeze.
    MultiSpectrumExitsLate {
        /// The k, in Mpc^-1.
        k_mpc: f64,
        /// e-folds between its crossing (k = aH) and the end; `None` when it never crosses.
        n_before_end: Option<f64>,
        /// The fewest e-folds a mode needs outside the horizon.
        min_efolds: f64,
    },
    /// The start of the multi-field background is not an inflating point (eps_H >= 1 there).
    MultiStartNotInflating {
        /// eps_H at the start.
        eps_h: f64,
        /// The start.
        at: Vec<f64>,
    },
    /// The metric G_ab is not positive definite at a point of the trajectory.
    MultiMetricNotPositive {
        /// The field point.
        at: Vec<f64>,
    },
    /// A number of a multi-field prediction is not finite.
    MultiNotFinite {
        /// The report key.
        key: &'static str,
        /// Its value.
        value: f64,
        /// N_*.
        n_star: f64,
    },
    /// A basin start whose velocity gives eps_H >= 3, so that H^2 = V / (3 - eps_H) <= 0.
    BasinHubbleNegative {
        /// eps_H of the start.
        eps_h: f64,
        /// The field point.
        at: Vec<f64>,
    },
    /// A basin run reached a point where V <= 0, V or the metric is not finite, or the field
    /// is outside the model's domain.
    BasinLeftDomain {
        /// The field point.
        at: Vec<f64>,
        /// e-folds run before.
        ran: f64,
    },
    /// A basin start where V is not positive and finite.
    BasinStartNotUsable {
        /// The field point.
        at: Vec<f64>,
        /// V there.
        v: f64,
    },
    /// A velocity along the gradient at a point where the gradient vanishes.
    BasinNoGradient {
        /// The field point.
        at: Vec<f64>,
    },
    /// A basin start outside the model's domain.
    BasinStartOutside {
        /// The field point.
        at: Vec<f64>,
        /// The domain's lower ends.
        lo: Vec<f64>,
        /// Its upper ends.
        hi: Vec<f64>,
    },
    /// Every start of a basin run reached the cap on e-folds.
    BasinEveryStartCapped {
        /// The starts.
        count: usize,
        /// The cap.
        cap: f64,
    },
    /// Every start of a basin run failed; the first reason.
    BasinEveryStartFailed {
        /// The starts.
        count: usize,
        /// Why the first failed.
        first: String,
    },
}

/// Significant digits of fitted parameter values in messages (as in the fit's report).
pub const FIT_PARAM_DIGITS: usize = 12;

impl ErrorKind {
    /// How to fix it, or what it means: one line each.
    pub fn hints(&self) -> Vec<String> {
        use ErrorKind::*;
        if let NoBranchOnStartSide { above, .. } = self {
            let other = if *above { "below" } else { "above" };
            return vec![
                format!("set `start = \"{other}\"` in the model's [settings], or choose a branch with --branch"),
                "or widen the range past the minimum (`efold inspect` shows the domain and the minimum)".to_string(),
            ];
        }
        let hints: &[&str] = match self {
            Numerical(_) => &["tighten the range with --range, or report the model"],
            FieldSpaceNotFinite { .. } => &[
                "the point lies outside the model's domain, or V or the metric is not smooth there",
                "check the potential and the [metric] entries near that point, or start elsewhere",
            ],
            MetricNotPositiveDefinite { .. } => &[
                "the kinetic term 1/2 G_ab dphi^a dphi^b must be positive for every velocity",
                "the trajectory has reached the edge of field space: check the [metric] entries there, or start elsewhere",
            ],
            PointDimension { .. } => &["give one coordinate per field, in the order of `fields`"],
            NoDomain => &[
                "check the kinetic function: L = 1/2 K (d phi)^2 - V needs K > 0",
                "or give the interval with --range LO HI",
            ],
            KSingularInRange { .. } => &[
                "the kinetic term must be positive and finite inside the range",
                "end the range at this point with --range, or leave it out to let efold find the domain",
            ],
            BadInRange { .. } => &[
                "the kinetic term must be positive and V finite everywhere in the range",
                "narrow it with --range LO HI, or leave it out to let efold find the domain",
            ],
            NoBranch => &["check the potential"],
            NoBranchOnStartSide { .. } | Rebound { .. } => &[],
            NoSuchBranch { .. } => &["run without --branch to see them listed"],
            RollsIntoPole { .. } => &[
                "V decreases toward the pole, so the field runs into it instead of reaching a minimum",
                "choose another branch with --branch, or change the potential",
            ],
            NegativeBeforeEnd { .. } => {
                &["inflation would end in a region of negative potential energy: check the potential's minimum"]
            }
            NegativeAtTop { .. } => {
                &["inflation needs V > 0 where the field starts: check the sign and the constant term of V"]
            }
            NoSlowRoll { .. } => &["choose another branch with --branch, or check the potential"],
            NeverEnds { .. } => {
                &["inflation would have to end by another mechanism (a second field, a phase transition)"]
            }
            RoundingNearTop { .. } => &[
                "write the model in a variable in which the top of the branch is not so close (the distance to a pole, or the canonical field)",
                "or ask for fewer e-folds with --efolds",
            ],
            EfoldIntegral { .. } => &["the slow-roll integrand V K / V' must stay finite up the branch"],
            TooFewEfolds { .. } => &["ask for fewer e-folds with --efolds, or choose another branch or parameters"],
            PhiStarNoConvergence { .. } => {
                &["report the model: the e-fold integral is not monotonic on this branch"]
            }
            BadEfolds { .. } | NoEfolds => &["use --efolds 50,55,60"],
            PredictionNotFinite { .. } => &[
                "V or K is not smooth enough there (a derivative overflows), or the numbers leave double precision",
                "check the potential and the kinetic function near that point",
            ],
            InspectionNotFinite { field, .. } => {
                return vec![format!(
                    "V or K overflows or is not smooth enough there: check them, or give a --range for {field} that avoids it"
                )]
            }
            Matching(_) => &["change the reheating assumptions (--reheat ...)"],
            MatchingBadEfolds { .. } | MatchingNoConvergence => &["check the reheating assumptions"],
            BackgroundIntegration(_) => &["check the potential along the trajectory"],
            StartOutsideDomain { .. } => &[
                "start inside the domain, on the branch you want (`efold inspect` shows the domain)",
                "or leave out --start-phi to start on the slow-roll attractor",
            ],
            StartTooFewEfolds { .. } => {
                &["start further up the potential, or ask for fewer e-folds or a smaller k range"]
            }
            StartNeverEnds { .. } => &["check the start and the potential"],
            ExactNeverEnds => &["slow roll found an end (eps_V = 1) that the exact solution does not reach"],
            ExactNeverEndsAtPivot => &["the slow-roll end of inflation was not confirmed by the exact solution"],
            ExactTooFewEfolds { .. } => &["start the background earlier"],
            NoStart { .. } => &["ask for fewer e-folds, or a smaller k range"],
            NoRoomForExact { .. } => &["ask for fewer e-folds"],
            ModeNeverReaches { .. } => &["ask for a smaller k, or fewer e-folds"],
            StartsTooLate { .. } => &["ask for a larger k, or start the background earlier"],
            ModeBackground(_) | ModeIntegration { .. } => &[],
            ModeExitsLate { .. } => &["the mode exits too close to the end of inflation: ask for smaller k"],
            NotFrozen { .. } => &["stop the modes further outside the horizon (a smaller k/aH at the stop)"],
            ScaleNotFinite { .. } => &["P_zeta at the pivot is zero or not finite: check the potential"],
            SpectrumNotFinite { .. } => &[
                "V or K is not smooth enough where this mode crosses the horizon, or the numbers leave double precision",
            ],
            NoWavenumbers => &["give --points 2 or more"],
            FitEmpty | FitModel { .. } | FitJacobianAtSolution { .. } => &[],
            FitNotUnique { .. } => &["free at most as many parameters as there are targets"],
            FitUnknownFree { .. } => &["--free takes a parameter's name"],
            FitStart { .. } => &["start the fit from values that predict"],
            FitJacobian { .. } => &["start closer to a solution"],
            FitBudget { .. } => &[
                "start closer to the solution with --param (or --start), or raise config::MultiFitSettings::max_evaluations",
            ],
            FitUnknownFreeSeveral { .. } => &[
                "--free takes a parameter's name, or a start coordinate as `start.FIELD`",
            ],
            MultiTooManyFields { .. } => &["split the model, or raise the limit in config::MultiLimits"],
            MultiDimension { .. } => &["give one number per field, in the model's field order"],
            MultiNeverEnds { .. } => &[
                "inflation would have to end by another mechanism, or the trajectory has not reached its end within the cap",
                "start closer to the minimum, or raise the cap in config::MultiLimits",
            ],
            MultiTooFewEfolds { .. } => &["start further up the potential, or ask for fewer e-folds"],
            MultiSpectrumTooFewEfolds { .. } => &["raise --k-min, lower --efolds, or start the model further up the potential"],
            MultiSpectrumExitsLate { .. } => &["lower --k-max, or raise --efolds"],
            MultiStartNotInflating { .. } => &["start where the potential is flatter, or with a smaller velocity"],
            MultiMetricNotPositive { .. } => &["the kinetic term must be positive in every direction along the trajectory: check the metric there"],
            MultiNotFinite { .. } => &[
                "V or the metric is not smooth enough along the trajectory, or the numbers leave double precision",
            ],
            BasinHubbleNegative { .. } => &[
                "the slow-roll attractor's velocity is not defined where eps_V >= 3: start with --velocity rest or --kinetic-ratio",
            ],
            BasinLeftDomain { .. } => &["the model is not defined beyond this point: check V and the metric there, or sample nearer the minimum"],
            BasinStartNotUsable { .. } => &["sample only where V > 0 (`efold inspect` shows the domain)"],
            BasinNoGradient { .. } => &["at a stationary point of V there is no downhill or uphill direction: use --velocity rest there"],
            BasinStartOutside { .. } => &["give sample ranges inside the domain (`efold inspect` shows it)"],
            BasinEveryStartCapped { .. } => &[
                "the field stays on a plateau or at a hilltop: sample nearer the minimum, or raise the cap in config::BasinLimits",
            ],
            BasinEveryStartFailed { .. } => &["check the sample ranges and the velocity against the potential"],
            FitNoSolution { .. } => &[
                "the targets may be out of the model's reach at this N_*: check them against a scan",
                "or start from other values with --param",
            ],
        };
        hints.iter().map(|h| h.to_string()).collect()
    }
}

impl fmt::Display for ErrorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ErrorKind::*;
        match self {
            FieldSpaceNotFinite { .. } | MetricNotPositiveDefinite { .. } | PointDimension { .. } => {
                self.fmt_field_space(f)
            }
            Numerical(_)
            | NoDomain
            | KSingularInRange { .. }
            | BadInRange { .. }
            | NoBranch
            | NoSuchBranch { .. }
            | RollsIntoPole { .. }
            | NoBranchOnStartSide { .. }
            | Rebound { .. } => self.fmt_domain(f),
            NegativeBeforeEnd { .. } | NegativeAtTop { .. } | NoSlowRoll { .. } | NeverEnds { .. } => self.fmt_end(f),
            RoundingNearTop { .. }
            | EfoldIntegral { .. }
            | TooFewEfolds { .. }
            | PhiStarNoConvergence { .. }
            | BadEfolds { .. }
            | NoEfolds
            | PredictionNotFinite { .. }
            | InspectionNotFinite { .. }
            | Matching(_)
            | MatchingBadEfolds { .. }
            | MatchingNoConvergence => self.fmt_efolds(f),
            BackgroundIntegration(_)
            | StartOutsideDomain { .. }
            | StartTooFewEfolds { .. }
            | StartNeverEnds { .. }
            | ExactNeverEnds
            | ExactNeverEndsAtPivot
            | ExactTooFewEfolds { .. }
            | NoStart { .. }
            | NoRoomForExact { .. } => self.fmt_background(f),
            ModeNeverReaches { .. }
            | StartsTooLate { .. }
            | ModeBackground(_)
            | ModeIntegration { .. }
            | ModeExitsLate { .. }
            | NotFrozen { .. }
            | ScaleNotFinite { .. }
            | SpectrumNotFinite { .. }
            | NoWavenumbers => self.fmt_modes(f),
            FitEmpty
            | FitNotUnique { .. }
            | FitModel { .. }
            | FitUnknownFree { .. }
            | FitStart { .. }
            | FitJacobian { .. }
            | FitJacobianAtSolution { .. }
            | FitNoSolution { .. }
            | FitBudget { .. }
            | FitUnknownFreeSeveral { .. } => self.fmt_fit(f),
            MultiTooManyFields { .. }
            | MultiDimension { .. }
            | MultiNeverEnds { .. }
            | MultiTooFewEfolds { .. }
            | MultiSpectrumTooFewEfolds { .. }
            | MultiSpectrumExitsLate { .. }
            | MultiStartNotInflating { .. }
            | MultiMetricNotPositive { .. }
            | MultiNotFinite { .. } => self.fmt_multi(f),
            BasinHubbleNegative { .. }
            | BasinLeftDomain { .. }
            | BasinStartNotUsable { .. }
            | BasinNoGradient { .. }
            | BasinStartOutside { .. }
            | BasinEveryStartCapped { .. }
            | BasinEveryStartFailed { .. } => self.fmt_basin(f),
        }
    }
}

/// A point of field space as `(x, y) = (0.3, -0.2)`.
fn show_point(fields: &[String], point: &[f64]) -> String {
    let xs: Vec<String> = point.iter().map(|x| number(*x)).collect();
    format!("({}) = ({})", fields.join(", "), xs.join(", "))
}

impl ErrorKind {
    /// The messages of field space (several fields).
    fn fmt_field_space(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ErrorKind::*;
        match self {
            FieldSpaceNotFinite {
                fields,
                point,
                what,
                value,
            } => write!(
                f,
                "{what} is not a finite number ({value}) at {}",
                show_point(fields, point)
            ),
            MetricNotPositiveDefinite {
                fields,
                point,
                row,
                pivot,
            } => {
                let name = fields.get(*row).map_or("?", String::as_str);
                let what = if *pivot == 0.0 {
                    "singular"
                } else {
                    "not positive definite"
                };
                write!(
                    f,
                    "the field-space metric is {what} at {}: the Cholesky pivot of row {name} \
                     (G_{name}{name} less the rows before it) is {}",
                    show_point(fields, point),
                    number(*pivot)
                )
            }
            PointDimension { fields, given } => {
                write!(
                    f,
                    "a point of field space needs {fields} coordinates, {given} were given"
                )
            }
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }

    /// The messages of the domain and the branches.
    fn fmt_domain(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ErrorKind::*;
        match self {
            Numerical(e) => write!(f, "numerical failure: {e}"),
            NoDomain => f.write_str("no interval of field space has K > 0 with V finite"),
            KSingularInRange { field, at, pole } => {
                let what = if *pole { "K has a pole" } else { "K vanishes" };
                write!(f, "{what} at {field} = {} inside the range", number(*at))
            }
            BadInRange { field, at: x, defect } => match defect {
                RangeDefect::KZero => write!(f, "K = 0 at {field} = {x} inside the range"),
                RangeDefect::KNegative(k) => write!(f, "K = {k} <= 0 at {field} = {x} inside the range"),
                RangeDefect::KNotFinite(k) => write!(f, "K is {k} at {field} = {x} inside the range (a pole?)"),
                RangeDefect::VNotReal => write!(f, "V is not real (NaN) at {field} = {x} inside the range"),
                RangeDefect::VNotFinite(v) => write!(f, "V is {v} at {field} = {x} inside the range"),
            },
            NoBranch => f.write_str("V is constant on the domain: the field does not roll"),
            NoSuchBranch { asked, count } => write!(
                f,
                "--branch {asked}: the domain has {count} branch(es), numbered 1 to {count}"
            ),
            RollsIntoPole { field, top, pole } => write!(
                f,
                "on the branch from {field} = {} the field rolls into the pole of K at {field} = {}",
                number(*top),
                number(*pole)
            ),
            NoBranchOnStartSide { field, above, minimum } => {
                let word = if *above { "above" } else { "below" };
                write!(
                    f,
                    "the model starts the field {word} the minimum of V ({field} = {}), and no branch lies {word} it",
                    number(minimum.unwrap_or(f64::NAN))
                )
            }
            Rebound { message } => f.write_str(message),
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }

    /// The messages of the end of inflation.
    fn fmt_end(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ErrorKind::*;
        match self {
            NegativeBeforeEnd { field, at } => write!(
                f,
                "V becomes negative at {field} = {} before eps_V reaches 1",
                number(*at)
            ),
            NegativeAtTop { field, at, top, bottom } => write!(
                f,
                "V <= 0 at {field} = {}, near the top of the branch from {field} = {} to {}: a negative potential does not inflate",
                number(*at),
                number(*top),
                number(*bottom)
            ),
            NoSlowRoll { field, top, bottom } => write!(
                f,
                "eps_V >= 1 everywhere on the branch from {field} = {} to {}: it does not inflate",
                number(*top),
                number(*bottom)
            ),
            NeverEnds { field, top, bottom } => write!(
                f,
                "inflation never ends on the branch from {field} = {} to {}: eps_V stays below 1 down to the bottom",
                number(*top),
                number(*bottom)
            ),
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }

    /// The messages of e-folds, predictions and reheating.
    fn fmt_efolds(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ErrorKind::*;
        match self {
            RoundingNearTop {
                field,
                top,
                distance,
                error,
                allowed,
            } => write!(
                f,
                "the e-fold integral cannot be resolved in double precision within {distance:.1e} of {field} = {}: rounding in V K / V' there leaves a relative error of {error:.1e} (allowed {allowed:.0e}), and the pivot lies that close",
                number(*top)
            ),
            EfoldIntegral { field, from, to, error } => write!(
                f,
                "e-fold integral failed between {field} = {} and {}: {error}",
                number(*from),
                number(*to)
            ),
            TooFewEfolds {
                field,
                available,
                asked,
                end,
                top,
            } => write!(
                f,
                "the branch gives only {} e-folds between the end of inflation at {field} = {} and {field} = {}, fewer than the {asked} asked",
                number(*available),
                number(*end),
                number(*top)
            ),
            PhiStarNoConvergence { n_star } => write!(f, "finding phi_* for N_* = {n_star} did not converge"),
            BadEfolds { n_star } => write!(f, "N_* = {n_star} is not a positive number of e-folds"),
            NoEfolds => f.write_str("no N_* to predict at: the list of e-folds is empty"),
            PredictionNotFinite {
                key,
                value,
                n_star,
                field,
                phi_star,
            } => write!(
                f,
                "{key} is not a finite number ({value}) at N_* = {} ({field}_* = {})",
                number(*n_star),
                number(*phi_star)
            ),
            InspectionNotFinite { key, value, .. } => write!(f, "{key} is not a finite number ({value})"),
            Matching(e) => write!(f, "{e}"),
            MatchingBadEfolds { n_star } => write!(f, "the matching gives N_* = {n_star}"),
            MatchingNoConvergence => f.write_str("the reheating matching did not converge in 60 steps"),
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }

    /// The messages of the exact background.
    fn fmt_background(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ErrorKind::*;
        match self {
            BackgroundIntegration(e) => write!(f, "the background integration failed: {e}"),
            StartOutsideDomain {
                field: fl,
                phi,
                lo,
                hi,
                lo_kind,
                hi_kind,
            } => write!(
                f,
                "the start {fl} = {} lies outside the domain {} < {fl} < {} (lower end: {}; upper end: {})",
                number(*phi),
                number(*lo),
                number(*hi),
                lo_kind.words(),
                hi_kind.words()
            ),
            StartTooFewEfolds { phi, available, needed } => write!(
                f,
                "starting at phi = {} gives {} e-folds before the end, fewer than the {} needed",
                typed(*phi),
                number(*available),
                number(*needed)
            ),
            StartNeverEnds { phi } => write!(
                f,
                "starting at phi = {}, inflation does not end (eps_H never reaches 1)",
                typed(*phi)
            ),
            ExactNeverEnds => f.write_str("inflation does not end in the exact background: eps_H never reaches 1"),
            ExactNeverEndsAtPivot => {
                f.write_str("inflation does not end in the exact background (eps_H never reaches 1)")
            }
            ExactTooFewEfolds { available, n_star } => write!(
                f,
                "the exact background gives only {} e-folds from its start, fewer than N_* = {}",
                number(*available),
                typed(*n_star)
            ),
            NoStart { needed } => write!(
                f,
                "could not start the exact background {} e-folds before its end",
                number(*needed)
            ),
            NoRoomForExact { needed, cause } => write!(
                f,
                "the exact solver needs {} e-folds of slow roll before the end: {cause}",
                number(*needed)
            ),
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }

    /// The messages of the modes and the spectrum.
    fn fmt_modes(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ErrorKind::*;
        match self {
            ModeNeverReaches { kappa, k_over_ah } => write!(
                f,
                "the mode k/k_* = {} never reaches k/aH = {} before the end of inflation",
                number(*kappa),
                typed(*k_over_ah)
            ),
            StartsTooLate { kappa, k_over_ah } => write!(
                f,
                "the background starts too late for k/k_* = {} (k/aH is already below {})",
                number(*kappa),
                typed(*k_over_ah)
            ),
            ModeBackground(e) => write!(f, "background integration failed: {e}"),
            ModeIntegration { kappa, error } => {
                write!(f, "the mode k/k_* = {} failed to integrate: {error}", number(*kappa))
            }
            ModeExitsLate { kappa, k_over_ah } => write!(
                f,
                "the mode k/k_* = {} does not reach k/aH = {} before inflation ends",
                number(*kappa),
                typed(*k_over_ah)
            ),
            NotFrozen { kappa, drift, allowed } => write!(
                f,
                "the mode k/k_* = {} has not frozen: P changed by {} over its last e-fold (allowed {})",
                number(*kappa),
                scientific(*drift, 2),
                typed(*allowed)
            ),
            ScaleNotFinite { scale } => write!(
                f,
                "the factor on V that gives the observed A_s is not a finite number ({scale})"
            ),
            SpectrumNotFinite {
                key,
                value,
                k_mpc,
                n_before_end,
            } => write!(
                f,
                "{key} is not a finite number ({value}) for the mode k = {} Mpc^-1, {} e-folds before the end",
                number(*k_mpc),
                number(*n_before_end)
            ),
            NoWavenumbers => f.write_str("no wavenumbers asked for"),
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }

    /// The messages of the multi-field analyses.
    fn fmt_multi(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ErrorKind::*;
        let point = |at: &[f64]| at.iter().map(|x| number(*x)).collect::<Vec<_>>().join(", ");
        match self {
            MultiTooManyFields { n, max } => write!(
                f,
                "the model has {n} fields; the multi-field analyses take at most {max}"
            ),
            MultiDimension { what, got, expected } => write!(
                f,
                "the {what} has {got} component(s), but the model has {expected} field(s)"
            ),
            MultiNeverEnds { ran, eps_h, at } => write!(
                f,
                "inflation does not end: after {} e-folds eps_H is {} at ({}), still below 1",
                number(*ran),
                number(*eps_h),
                point(at)
            ),
            // delta-N alone needs only the pivot itself after the start
            MultiTooFewEfolds { available, needed, n_star } if needed <= n_star => write!(
                f,
                "the background gives {} e-folds from the start to the end of inflation, fewer than the N_* = {} asked for",
                number(*available),
                typed(*n_star)
            ),
            MultiTooFewEfolds { available, needed, n_star } => write!(
                f,
                "the background gives {} e-folds from the start to the end of inflation, fewer than the {} needed for N_* = {} and its modes, which start inside the horizon",
                number(*available),
                number(*needed),
                typed(*n_star)
            ),
            MultiSpectrumTooFewEfolds {
                available,
                needed,
                k_min_mpc,
                k_start,
            } => write!(
                f,
                "the background gives {} e-folds from the start to the end of inflation, fewer than the {} needed by the lowest k = {} Mpc^-1: its mode must start at k/aH = {} inside the horizon after the background starts",
                number(*available),
                number(*needed),
                typed(*k_min_mpc),
                typed(*k_start)
            ),
            MultiSpectrumExitsLate {
                k_mpc,
                n_before_end: Some(n),
                min_efolds,
            } => write!(
                f,
                "k = {} Mpc^-1 leaves the horizon only {} e-folds before the end of inflation, too late to freeze (a mode needs {} e-folds outside)",
                typed(*k_mpc),
                number(*n),
                typed(*min_efolds)
            ),
            MultiSpectrumExitsLate { k_mpc, min_efolds, .. } => write!(
                f,
                "k = {} Mpc^-1 never leaves the horizon before the end of inflation (a mode needs {} e-folds outside to freeze)",
                typed(*k_mpc),
                typed(*min_efolds)
            ),
            MultiStartNotInflating { eps_h, at } if eps_h.is_nan() => write!(
                f,
                "the start ({}) does not inflate: the slow-roll velocity -G^ab V_b / V is not defined there (V = 0 at a stationary point)",
                point(at)
            ),
            MultiStartNotInflating { eps_h, at } => write!(
                f,
                "the start ({}) does not inflate: eps_H = {} there (inflation needs eps_H < 1)",
                point(at),
                number(*eps_h)
            ),
            MultiMetricNotPositive { at } => write!(f, "the metric is not positive definite at ({})", point(at)),
            MultiNotFinite { key, value, n_star } => write!(
                f,
                "{key} = {value} at N_* = {} is not a finite number",
                typed(*n_star)
            ),
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }

    /// The messages of basins of initial conditions.
    fn fmt_basin(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ErrorKind::*;
        let point = |at: &[f64]| at.iter().map(|x| number(*x)).collect::<Vec<_>>().join(", ");
        match self {
            BasinHubbleNegative { eps_h, at } => write!(
                f,
                "the velocity at ({}) gives eps_H = {}, at least 3, so H^2 = V/(3 - eps_H) is not positive",
                point(at),
                number(*eps_h)
            ),
            BasinLeftDomain { at, .. } => write!(f, "the background leaves the domain at ({})", point(at)),
            BasinStartNotUsable { at, v } => write!(
                f,
                "V = {} at the start ({}): a start needs V > 0",
                number(*v),
                point(at)
            ),
            BasinNoGradient { at } => write!(
                f,
                "the gradient of V vanishes at ({}): no direction for the velocity",
                point(at)
            ),
            BasinStartOutside { at, lo, hi } => {
                let ends: Vec<String> = lo
                    .iter()
                    .zip(hi)
                    .map(|(l, h)| format!("[{}, {}]", number(*l), number(*h)))
                    .collect();
                write!(
                    f,
                    "the start ({}) lies outside the domain {}",
                    point(at),
                    ends.join(" x ")
                )
            }
            BasinEveryStartCapped { count, cap } => write!(
                f,
                "every one of the {count} starts is still inflating after the cap of {} e-folds",
                number(*cap)
            ),
            BasinEveryStartFailed { count, first } => {
                write!(f, "every one of the {count} starts failed; the first: {first}")
            }
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }

    /// The messages of fits.
    fn fmt_fit(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ErrorKind::*;
        match self {
            FitEmpty => f.write_str("a fit needs at least one --free parameter and one --target"),
            FitNotUnique { free, targets } => write!(
                f,
                "{free} free parameters for {targets} target(s): the solution would not be unique"
            ),
            FitModel { message } => f.write_str(message),
            FitUnknownFree { name } => write!(f, "`{name}` is not a parameter of the model"),
            FitStart { cause } => write!(f, "the model does not predict at the starting values: {cause}"),
            FitJacobian { cause } => write!(f, "the Jacobian could not be formed: {cause}"),
            FitJacobianAtSolution { cause } => f.write_str(cause),
            FitBudget {
                evaluations,
                at,
                misses,
            } => write!(
                f,
                "the fit used its {evaluations} predictions (config::MultiFitSettings::max_evaluations) before it reached the targets: the best found, at {}",
                fit_best(at, misses)
            ),
            FitUnknownFreeSeveral { name, fields, params } => {
                let quote = |v: &[String]| v.iter().map(|x| format!("`{x}`")).collect::<Vec<_>>().join(", ");
                let params = match params.is_empty() {
                    true => "no parameters".to_string(),
                    false => format!("the parameters {}", quote(params)),
                };
                write!(
                    f,
                    "`{name}` is not a parameter of the model, which has {} fields ({}) and {params}",
                    fields.len(),
                    quote(fields)
                )
            }
            FitNoSolution { at, misses } => {
                let at: Vec<String> = at
                    .iter()
                    .map(|(k, v)| format!("{k} = {}", crate::report::numfmt::number_digits(*v, FIT_PARAM_DIGITS)))
                    .collect();
                let parts: Vec<String> = misses
                    .iter()
                    .map(|m| {
                        format!(
                            "{} = {} (wanted {}, scaled residual {})",
                            m.observable,
                            number(m.reached),
                            typed(m.wanted),
                            scientific(m.residual, 3)
                        )
                    })
                    .collect();
                write!(
                    f,
                    "no parameter values reproduce the targets: the best found, at {}, gives {}",
                    at.join(", "),
                    parts.join("; ")
                )
            }
            _ => unreachable!("{self:?} is not formatted here"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Each kind against the message and hints the analyses built by hand before the kinds
    /// existed: the `format!` calls below are those of the old call sites, kept as the
    /// reference (the numbers through the same `numfmt` functions).
    #[test]
    fn each_kind_gives_the_message_and_hints_it_gave_before() {
        let (field, x, top, bottom) = ("phi", 0.1234567891, 12.5, 1e-3);
        let inf_err = NumericError::NotFinite {
            at: 2.0,
            value: f64::INFINITY,
        };
        let table: Vec<(ErrorKind, String, Vec<&str>)> = vec![
            (
                ErrorKind::Numerical(inf_err.clone()),
                format!("numerical failure: {inf_err}"),
                vec!["tighten the range with --range, or report the model"],
            ),
            (
                ErrorKind::KSingularInRange {
                    field: field.into(),
                    at: x,
                    pole: true,
                },
                format!("K has a pole at {field} = {} inside the range", number(x)),
                vec![
                    "the kinetic term must be positive and finite inside the range",
                    "end the range at this point with --range, or leave it out to let efold find the domain",
                ],
            ),
            (
                ErrorKind::KSingularInRange {
                    field: field.into(),
                    at: x,
                    pole: false,
                },
                format!("K vanishes at {field} = {} inside the range", number(x)),
                vec![
                    "the kinetic term must be positive and finite inside the range",
                    "end the range at this point with --range, or leave it out to let efold find the domain",
                ],
            ),
            (
                ErrorKind::BadInRange {
                    field: field.into(),
                    at: x,
                    defect: RangeDefect::KNegative(-0.5),
                },
                format!("K = {} <= 0 at {field} = {x} inside the range", -0.5),
                vec![
                    "the kinetic term must be positive and V finite everywhere in the range",
                    "narrow it with --range LO HI, or leave it out to let efold find the domain",
                ],
            ),
            (
                ErrorKind::BadInRange {
                    field: field.into(),
                    at: x,
                    defect: RangeDefect::VNotFinite(f64::INFINITY),
                },
                format!("V is {} at {field} = {x} inside the range", f64::INFINITY),
                vec![
                    "the kinetic term must be positive and V finite everywhere in the range",
                    "narrow it with --range LO HI, or leave it out to let efold find the domain",
                ],
            ),
            (
                ErrorKind::NoSlowRoll {
                    field: field.into(),
                    top,
                    bottom,
                },
                format!(
                    "eps_V >= 1 everywhere on the branch from {field} = {} to {}: it does not inflate",
                    number(top),
                    number(bottom)
                ),
                vec!["choose another branch with --branch, or check the potential"],
            ),
            (
                ErrorKind::NeverEnds {
                    field: field.into(),
                    top,
                    bottom,
                },
                format!(
                    "inflation never ends on the branch from {field} = {} to {}: eps_V stays below 1 down to the bottom",
                    number(top),
                    number(bottom)
                ),
                vec!["inflation would have to end by another mechanism (a second field, a phase transition)"],
            ),
            (
                ErrorKind::TooFewEfolds {
                    field: field.into(),
                    available: 41.234567,
                    asked: 60.0,
                    end: x,
                    top,
                },
                format!(
                    "the branch gives only {} e-folds between the end of inflation at {field} = {} and {field} = {}, fewer than the {} asked",
                    number(41.234567),
                    number(x),
                    number(top),
                    60.0
                ),
                vec!["ask for fewer e-folds with --efolds, or choose another branch or parameters"],
            ),
            (
                ErrorKind::RoundingNearTop {
                    field: field.into(),
                    top,
                    distance: 3.2e-9,
                    error: 4.5e-6,
                    allowed: 1e-6,
                },
                format!(
                    "the e-fold integral cannot be resolved in double precision within {:.1e} of {field} = {}: rounding in V K / V' there leaves a relative error of {:.1e} (allowed {:.0e}), and the pivot lies that close",
                    3.2e-9,
                    number(top),
                    4.5e-6,
                    1e-6
                ),
                vec![
                    "write the model in a variable in which the top of the branch is not so close (the distance to a pole, or the canonical field)",
                    "or ask for fewer e-folds with --efolds",
                ],
            ),
            (
                ErrorKind::StartOutsideDomain {
                    field: field.into(),
                    phi: -3.0,
                    lo: 0.0,
                    hi: f64::INFINITY,
                    lo_kind: EndKind::Pole,
                    hi_kind: EndKind::Infinite,
                },
                format!(
                    "the start {field} = {} lies outside the domain {} < {field} < {} (lower end: {}; upper end: {})",
                    number(-3.0),
                    number(0.0),
                    number(f64::INFINITY),
                    EndKind::Pole.words(),
                    EndKind::Infinite.words()
                ),
                vec![
                    "start inside the domain, on the branch you want (`efold inspect` shows the domain)",
                    "or leave out --start-phi to start on the slow-roll attractor",
                ],
            ),
            (
                ErrorKind::StartTooFewEfolds {
                    phi: 15.5,
                    available: 20.25,
                    needed: 66.0,
                },
                format!(
                    "starting at phi = {} gives {} e-folds before the end, fewer than the {} needed",
                    typed(15.5),
                    number(20.25),
                    number(66.0)
                ),
                vec!["start further up the potential, or ask for fewer e-folds or a smaller k range"],
            ),
            (
                ErrorKind::ExactNeverEnds,
                "inflation does not end in the exact background: eps_H never reaches 1".into(),
                vec!["slow roll found an end (eps_V = 1) that the exact solution does not reach"],
            ),
            (
                ErrorKind::ExactNeverEndsAtPivot,
                "inflation does not end in the exact background (eps_H never reaches 1)".into(),
                vec!["the slow-roll end of inflation was not confirmed by the exact solution"],
            ),
            (
                ErrorKind::NotFrozen {
                    kappa: 1.0512710963760241,
                    drift: 3.25e-4,
                    allowed: 1e-5,
                },
                format!(
                    "the mode k/k_* = {} has not frozen: P changed by {} over its last e-fold (allowed {})",
                    number(1.0512710963760241),
                    scientific(3.25e-4, 2),
                    typed(1e-5)
                ),
                vec!["stop the modes further outside the horizon (a smaller k/aH at the stop)"],
            ),
            (
                ErrorKind::ModeIntegration {
                    kappa: 2.0,
                    error: inf_err.clone(),
                },
                format!("the mode k/k_* = {} failed to integrate: {inf_err}", number(2.0)),
                vec![],
            ),
            (
                ErrorKind::NoRoomForExact {
                    needed: 70.0,
                    cause: Box::new(ErrorKind::NeverEnds {
                        field: field.into(),
                        top,
                        bottom,
                    }),
                },
                format!(
                    "the exact solver needs {} e-folds of slow roll before the end: {}",
                    number(70.0),
                    format_args!(
                        "inflation never ends on the branch from {field} = {} to {}: eps_V stays below 1 down to the bottom",
                        number(top),
                        number(bottom)
                    )
                ),
                vec!["ask for fewer e-folds"],
            ),
            (
                ErrorKind::Matching(crate::analysis::reheating::MatchingError::BadW { w: -0.5 }),
                format!(
                    "equation of state w = {} is outside (-1/3, 1]: the universe would still be inflating",
                    -0.5
                ),
                vec!["change the reheating assumptions (--reheat ...)"],
            ),
            (
                ErrorKind::InspectionNotFinite {
                    key: "minimum.v".into(),
                    value: f64::NEG_INFINITY,
                    field: "x".into(),
                },
                format!("{} is not a finite number ({})", "minimum.v", f64::NEG_INFINITY),
                vec!["V or K overflows or is not smooth enough there: check them, or give a --range for x that avoids it"],
            ),
            (
                ErrorKind::FitNoSolution {
                    at: vec![("alpha".into(), 1.0 / 3.0)],
                    misses: vec![Miss {
                        observable: "r",
                        reached: 0.0123456789,
                        wanted: 0.01,
                        residual: 0.2107210,
                    }],
                },
                format!(
                    "no parameter values reproduce the targets: the best found, at {}, gives {}",
                    format_args!(
                        "alpha = {}",
                        crate::report::numfmt::number_digits(1.0 / 3.0, FIT_PARAM_DIGITS)
                    ),
                    format_args!(
                        "r = {} (wanted {}, scaled residual {})",
                        number(0.0123456789),
                        typed(0.01),
                        scientific(0.2107210, 3)
                    )
                ),
                vec![
                    "the targets may be out of the model's reach at this N_*: check them against a scan",
                    "or start from other values with --param",
                ],
            ),
        ];
        for (kind, message, hints) in table {
            let e = AnalysisError::from(kind.clone());
            assert_eq!(e.message, message, "{kind:?}");
            assert_eq!(e.hints, hints, "{kind:?}");
            assert_eq!(*e.kind, kind);
            // The diagnostic carries both, drawn by the one renderer.
            let d = e.diagnostic();
            assert_eq!((d.message, d.hints), (e.message.clone(), e.hints.clone()));
        }
    }

    /// A few messages written out in full (the numbers as `numfmt` writes them).
    #[test]
    fn messages_in_full() {
        let e = AnalysisError::from(ErrorKind::NoSuchBranch { asked: 4, count: 2 });
        assert_eq!(e.message, "--branch 4: the domain has 2 branch(es), numbered 1 to 2");
        assert_eq!(e.hints, ["run without --branch to see them listed"]);
        let e = AnalysisError::from(ErrorKind::BadEfolds { n_star: -5.0 });
        assert_eq!(e.to_string(), "N_* = -5 is not a positive number of e-folds");
        let e = AnalysisError::from(ErrorKind::BadInRange {
            field: "phi".into(),
            at: 0.5,
            defect: RangeDefect::KZero,
        });
        assert_eq!(e.message, "K = 0 at phi = 0.5 inside the range");
        let e = AnalysisError::from(NumericError::NoBracket { lo: 1.0, hi: 2.0 });
        assert_eq!(e.message, "numerical failure: no sign change between 1 and 2");
        assert!(matches!(*e.kind, ErrorKind::Numerical(NumericError::NoBracket { .. })));
    }
}
