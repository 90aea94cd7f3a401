//! `efold predict`: from a model to what the CMB sees. Slow-roll observables at each N_*, the
//! amplitude fixed by A_s, scales in GeV, the field excursion, the pivot from a reheating
//! history, and the verdict against a data set. Reduced Planck units unless a key says GeV.

use crate::analysis::background::hubble_squared;
use crate::analysis::error::AnalysisError;
use crate::analysis::error::ErrorKind;
use crate::analysis::pivot::AtPivot;
use crate::analysis::reheating::{Matching, Reheating};
use crate::analysis::single::branches::Branch;
use crate::analysis::single::canonical::CanonicalMap;
use crate::analysis::single::domain::{EndKind, Interval};
use crate::analysis::single::pole::analyse_pole;
use crate::analysis::slowroll::{a_s_first_order, end_of_inflation, phi_stars, Observables, SlowRoll};
use crate::config::Config;
use crate::data::DataSet;
use crate::drivers::inspect::ModelSummary;
use crate::drivers::prepared::Prepared;
use crate::language::tape::Evaluator;
use crate::model::{Model, Side};
use crate::report::numfmt::number as fmt;
use serde::Serialize;
use std::f64::consts::PI;

// The report's renderings, where they were before they moved to `report`.
pub use crate::report::predict::{csv, csv_values, text, CSV_KEYS};

/// What to compute.
#[derive(Debug, Clone)]
pub struct Options {
    /// N_* values (ignored when `reheating` is given: it fixes N_*).
    pub n_stars: Vec<f64>,
    /// 1-based branch index (in ascending position), if chosen.
    pub branch: Option<usize>,
    /// Second-order slow-roll observables.
    pub second_order: bool,
    /// A reheating history that fixes N_*.
    pub reheating: Option<Reheating>,
    /// The data to judge against, and the constants for the scales.
    pub data: DataSet,
    /// Solve the exact background and Mukhanov–Sasaki modes (with these settings) instead of
    /// using the slow-roll formulas; `None` is slow roll.
    pub exact: Option<crate::analysis::background::Settings>,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            n_stars: crate::config::DEFAULT_N_STARS.to_vec(),
            branch: None,
            second_order: false,
            reheating: None,
            data: DataSet::builtin(),
            exact: None,
        }
    }
}

/// The leading-order prediction of a pole alone, beside the numerical one.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PoleOnly {
    /// Pole order.
    pub order: f64,
    /// Residue a_p.
    pub residue: f64,
    /// n_s at leading order in 1/N.
    pub n_s: f64,
    /// r at leading order in 1/N.
    pub r: f64,
    /// m in V = V_p (1 - c rho^m) near the pole: 1 where V has a slope there, 2 where it is
    /// flat.
    pub flatness: f64,
}

/// How a prediction compares with the data.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Verdict {
    /// The n_s pull within the data's tension threshold and r within its limit.
    Consistent,
    /// The n_s pull beyond the tension threshold but within the exclusion one.
    Tension,
    /// The n_s pull beyond the exclusion threshold, or r above the limit.
    Excluded,
}

impl Verdict {
    /// The word, as in the outputs.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Consistent => "consistent",
            Verdict::Tension => "tension",
            Verdict::Excluded => "excluded",
        }
    }
}

impl std::fmt::Display for Verdict {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The route to the observables.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Method {
    /// The slow-roll formulas.
    #[serde(rename = "slow-roll")]
    SlowRoll,
    /// The exact background and Mukhanov–Sasaki modes.
    #[serde(rename = "exact")]
    Exact,
}

/// How N_* was chosen: given, or fixed by a reheating history (serialized as `given` or
/// `reheating: ...`).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum NStarFrom {
    /// The N_* asked for.
    Given,
    /// Fixed by the reheating history described.
    Reheating(String),
}

impl std::fmt::Display for NStarFrom {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            NStarFrom::Given => f.write_str("given"),
            NStarFrom::Reheating(how) => write!(f, "reheating: {how}"),
        }
    }
}

impl Serialize for NStarFrom {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}

/// The predictions at one N_*. The observables at the pivot ([`AtPivot`]: `n_star`,
/// `phi_star`, `phi_end`, `n_s`, `r`, `alpha_s`, `n_t`) come first, in the JSON as in field
/// access (`p.n_s` reads through to `p.at.n_s`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Prediction {
    /// N_*, phi_*, phi_end and the observables, slow-roll or exact.
    #[serde(flatten)]
    pub at: AtPivot,
    /// eps_V at phi_*.
    pub eps_v: f64,
    /// eta_V at phi_*.
    pub eta_v: f64,
    /// xi2_V at phi_*.
    pub xi2_v: f64,
    /// omega3_V at phi_*.
    pub omega3_v: f64,
    /// Canonical field excursion |chi_* - chi_end|.
    pub delta_chi: f64,
    /// Excursion in the original field |phi_* - phi_end|.
    pub delta_phi: f64,
    /// N_* sqrt(r/8), the Lyth estimate of delta_chi for slowly varying eps.
    pub lyth_bound: f64,
    /// A_s of the potential as written.
    pub a_s_unscaled: f64,
    /// The factor on the user's V that gives the observed A_s.
    pub potential_scale: f64,
    /// (scaled V_*)^(1/4) in GeV.
    pub v_star_quarter_gev: f64,
    /// H_* = sqrt(V_*/3) in GeV.
    pub h_star_gev: f64,
    /// The de Sitter temperature H_*/(2 pi) in GeV.
    pub t_ds_gev: f64,
    /// Scaled V at the end of inflation, in M_p^4.
    pub v_end: f64,
    /// (scaled V_end)^(1/4) in GeV.
    pub v_end_quarter_gev: f64,
    /// (n_s - mean) / sigma against the data.
    pub n_s_pull: f64,
    /// The data's upper limit on r.
    pub r_limit: f64,
    /// consistent, tension or excluded.
    pub verdict: Verdict,
    /// The pole-only leading-order prediction, when the branch starts at a pole.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pole_only: Option<PoleOnly>,
    /// How N_* was fixed by reheating, when it was.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub reheating: Option<Matching>,
    /// What the exact route adds, when it was used.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub exact: Option<crate::analysis::perturbations::ExactExtras>,
}

impl std::ops::Deref for Prediction {
    type Target = AtPivot;
    fn deref(&self) -> &AtPivot {
        &self.at
    }
}

impl std::ops::DerefMut for Prediction {
    fn deref_mut(&mut self) -> &mut AtPivot {
        &mut self.at
    }
}

impl Prediction {
    /// Every number of the prediction with its key (nested ones as `exact.eps_3`), for the
    /// final check that nothing non-finite reaches an output. All of them must be finite: the
    /// only infinite numbers a report may hold are the ends of branches and of the domain,
    /// which are not here.
    pub fn numbers(&self) -> Vec<(&'static str, f64)> {
        let mut v = vec![
            ("n_star", self.n_star),
            ("phi_star", self.phi_star),
            ("phi_end", self.phi_end),
            ("n_s", self.n_s),
            ("r", self.r),
            ("alpha_s", self.alpha_s),
            ("n_t", self.n_t),
            ("eps_v", self.eps_v),
            ("eta_v", self.eta_v),
            ("xi2_v", self.xi2_v),
            ("omega3_v", self.omega3_v),
            ("delta_chi", self.delta_chi),
            ("delta_phi", self.delta_phi),
            ("lyth_bound", self.lyth_bound),
            ("a_s_unscaled", self.a_s_unscaled),
            ("potential_scale", self.potential_scale),
            ("v_star_quarter_gev", self.v_star_quarter_gev),
            ("h_star_gev", self.h_star_gev),
            ("t_ds_gev", self.t_ds_gev),
            ("v_end", self.v_end),
            ("v_end_quarter_gev", self.v_end_quarter_gev),
            ("n_s_pull", self.n_s_pull),
            ("r_limit", self.r_limit),
        ];
        if let Some(p) = &self.pole_only {
            v.extend([
                ("pole_only.order", p.order),
                ("pole_only.residue", p.residue),
                ("pole_only.n_s", p.n_s),
                ("pole_only.r", p.r),
            ]);
        }
        if let Some(m) = &self.reheating {
            v.extend([
                ("reheating.n_star", m.n_star),
                ("reheating.n_reh", m.n_reh),
                ("reheating.t_reh_gev", m.t_reh_gev),
                ("reheating.w", m.w),
                ("reheating.g_star", m.g_star),
                ("reheating.rho_end_gev4", m.rho_end_gev4),
            ]);
        }
        if let Some(e) = &self.exact {
            v.extend([
                ("exact.n_total", e.n_total),
                ("exact.phi_end_slow_roll", e.phi_end_slow_roll),
                ("exact.phi_star_slow_roll", e.phi_star_slow_roll),
                ("exact.n_s_slow_roll", e.n_s_slow_roll),
                ("exact.r_slow_roll", e.r_slow_roll),
                ("exact.eps_1", e.eps_1),
                ("exact.eps_2", e.eps_2),
                ("exact.eps_3", e.eps_3),
                ("exact.n_s_second_order", e.n_s_second_order),
                ("exact.r_second_order", e.r_second_order),
                ("exact.n_t_second_order", e.n_t_second_order),
                ("exact.p_s_unscaled", e.p_s_unscaled),
                ("exact.freeze_drift", e.freeze_drift),
            ]);
        }
        v
    }
}

/// The last check before a report leaves `predict`: a number that is not finite (a NaN from
/// 0/0 or inf - inf, an overflow) is an error naming the quantity and N_*, never a `null` or
/// `NaN` in the output.
pub fn check_finite(predictions: &[Prediction], field: &str) -> Result<(), AnalysisError> {
    for p in predictions {
        if let Some((key, x)) = p.numbers().into_iter().find(|(_, x)| !x.is_finite()) {
            return Err(ErrorKind::PredictionNotFinite {
                key,
                value: x,
                n_star: p.n_star,
                field: field.to_string(),
                phi_star: p.phi_star,
            }
            .into());
        }
    }
    Ok(())
}

/// The factor on the user's V that turns the amplitude `a_s_model` of the potential as
/// written into the data's observed A_s (the spectrum scales as V).
fn potential_scale(a_s_model: f64, data: &DataSet) -> f64 {
    data.a_s() / a_s_model
}

/// The potential scaled to the observed A_s, and the energy scales it implies.
struct Scales {
    potential_scale: f64,
    v_star_quarter_gev: f64,
    h_star_gev: f64,
    t_ds_gev: f64,
    v_end: f64,
    v_end_quarter_gev: f64,
}

impl Scales {
    /// From the amplitude of the potential as written (`a_s_model`), V at the pivot and at the
    /// end as written, and eps_H at the pivot (0 in slow roll, where H^2 = V/3).
    fn new(a_s_model: f64, v_star_user: f64, eps_h: f64, v_end_user: f64, data: &DataSet) -> Scales {
        let mp = data.units.reduced_planck_mass_gev;
        let scale = potential_scale(a_s_model, data);
        let v_star = scale * v_star_user;
        let h_star = hubble_squared(v_star, eps_h).sqrt();
        let v_end = scale * v_end_user;
        Scales {
            potential_scale: scale,
            v_star_quarter_gev: v_star.powf(0.25) * mp,
            h_star_gev: h_star * mp,
            t_ds_gev: h_star * mp / (2.0 * PI),
            v_end,
            v_end_quarter_gev: v_end.max(0.0).powf(0.25) * mp,
        }
    }
}

/// The pull of n_s against the data, in sigma, and the verdict on (n_s, r).
fn judge(n_s: f64, r: f64, data: &DataSet) -> (f64, Verdict) {
    let pull = (n_s - data.n_s.mean) / data.n_s.sigma;
    let verdict = if pull.abs() > data.verdict.excluded_sigma || r > data.r.upper {
        Verdict::Excluded
    } else if pull.abs() > data.verdict.tension_sigma {
        Verdict::Tension
    } else {
        Verdict::Consistent
    };
    (pull, verdict)
}

/// A branch with its index among all branches.
#[derive(Debug, Clone, Serialize)]
pub struct BranchInfo {
    /// 1-based, in ascending position.
    pub index: usize,
    /// How many branches the interval has.
    pub count: usize,
    /// Where the field comes from and rolls to.
    #[serde(flatten)]
    pub branch: Branch,
}

/// Everything `predict` reports.
#[derive(Debug, Clone, Serialize)]
pub struct Report {
    /// The model.
    pub model: ModelSummary,
    /// "slow-roll" or "exact".
    pub method: Method,
    /// 1 or 2.
    pub order: u8,
    /// The branch used.
    pub branch: BranchInfo,
    /// The other branches (position only).
    pub other_branches: Vec<BranchInfo>,
    /// The data set's name and source.
    pub data: DataSummary,
    /// How N_* was chosen.
    pub n_star_from: NStarFrom,
    /// One object per N_*.
    pub predictions: Vec<Prediction>,
    /// Things to know.
    pub warnings: Vec<String>,
}

/// Name and origin of the data set.
#[derive(Debug, Clone, Serialize)]
pub struct DataSummary {
    /// Name.
    pub name: String,
    /// File or built-in.
    pub source: String,
}

/// Runs the predictions: prepares the model's analysis ([`Prepared`]) and predicts from it.
/// To predict several times for one model, or for many parameter values, keep a
/// [`Prepared`] instead (and [`Prepared::rebind`] it).
///
/// The order-2 pole with a quadratic potential, K = 1/(1 - phi^2/6)^2 and V = phi^2/6
/// (alpha = 1): at N_* = 55 the leading order of the pole gives n_s = 1 - 2/N_* and
/// r = 12 alpha/N_*^2 (common practice); the full slow-roll numbers lie close to them.
///
/// ```
/// use efold::config::Config;
/// use efold::model::{Model, ModelSpec};
/// use efold::predict::{predict, Options};
///
/// let spec = ModelSpec::inline("phi^2/6", Some("1/(1 - phi^2/6)^2"));
/// let model = Model::build(&spec, &Config::default())?;
/// let opts = Options { n_stars: vec![55.0], ..Default::default() };
/// let report = predict(&model, &opts, &Config::default())?;
/// let p = &report.predictions[0];
/// assert!((p.n_s - (1.0 - 2.0 / 55.0)).abs() < 1e-3);
/// assert!((p.r - 12.0 / (55.0 * 55.0)).abs() < 3e-4);
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
pub fn predict(model: &Model, opts: &Options, config: &Config) -> Result<Report, AnalysisError> {
    Prepared::new(model).predict(opts, config)
}

/// The predictions from a prepared analysis, whose domain and branches are surveyed once
/// ([`Prepared::predict`] calls it). The branches are tried in order (the one chosen, or those
/// on the model's side of the minimum of V, from the last); the first that gives the requested
/// e-folds is used.
pub fn predict_prepared(prep: &Prepared<'_>, opts: &Options, config: &Config) -> Result<Report, AnalysisError> {
    let model = prep.model();
    let field = model.field().to_string();
    let iv = prep.interval()?;
    let all = prep.branches()?;
    if all.is_empty() {
        return Err(ErrorKind::NoBranch.into());
    }
    let n_wanted = wanted_efolds(opts)?;
    let order = branch_order(prep, all, opts)?;
    let job = Job {
        model,
        iv,
        n_wanted: &n_wanted,
        opts,
        config,
        field: &field,
    };
    let mut ev = model.evaluator();
    let mut first_err: Option<AnalysisError> = None;
    for &i in &order {
        match job.run_branch(&mut ev, &all[i]) {
            Ok(found) => return job.report(&mut ev, all, &order, i, found),
            Err(e) => {
                if first_err.is_none() {
                    first_err = Some(e);
                }
            }
        }
    }
    let mut e = first_err.expect("at least one branch was tried");
    if all.len() > 1 {
        let list: Vec<String> = all
            .iter()
            .enumerate()
            .map(|(i, b)| format!("{}: {field} from {} to {}", i + 1, fmt(b.top), fmt(b.bottom)))
            .collect();
        e.hints.push(format!("branches: {}", list.join("; ")));
    }
    Err(e)
}

/// The N_* values to predict at (55 as the reheating matching's first guess), each checked.
fn wanted_efolds(opts: &Options) -> Result<Vec<f64>, AnalysisError> {
    let n_wanted: Vec<f64> = if opts.reheating.is_some() {
        vec![55.0]
    } else {
        opts.n_stars.clone()
    };
    if n_wanted.is_empty() {
        return Err(ErrorKind::NoEfolds.into());
    }
    if let Some(bad) = n_wanted.iter().find(|n| !(n.is_finite() && **n > 0.0)) {
        return Err(ErrorKind::BadEfolds { n_star: *bad }.into());
    }
    Ok(n_wanted)
}

/// Which branches to try, in order (indices into `all`).
fn branch_order(prep: &Prepared<'_>, all: &[Branch], opts: &Options) -> Result<Vec<usize>, AnalysisError> {
    Ok(match (opts.branch, prep.model().spec.start) {
        (Some(k), _) => {
            if k == 0 || k > all.len() {
                return Err(ErrorKind::NoSuchBranch {
                    asked: k,
                    count: all.len(),
                }
                .into());
            }
            vec![k - 1]
        }
        (None, Some(side)) => {
            let min = prep.minimum_of_v()?;
            let mut v: Vec<usize> = (0..all.len())
                .filter(|&i| match (min, side) {
                    (Some(m), Side::Above) => all[i].top > m,
                    (Some(m), Side::Below) => all[i].top < m,
                    (None, _) => true,
                })
                .collect();
            if v.is_empty() {
                return Err(no_branch_on_side(prep, side, min));
            }
            v.reverse();
            v
        }
        (None, None) => (0..all.len()).rev().collect(),
    })
}

/// The error when the model's `start` side of the minimum of V holds no branch (the minimum
/// is at that end of a given range).
fn no_branch_on_side(prep: &Prepared<'_>, side: Side, min: Option<f64>) -> AnalysisError {
    let field = prep.model().field();
    ErrorKind::NoBranchOnStartSide {
        field: field.to_string(),
        above: matches!(side, Side::Above),
        minimum: min,
    }
    .into()
}

type BranchResult = (Vec<Prediction>, Vec<String>, NStarFrom);

/// What every branch of one prediction shares.
struct Job<'a> {
    model: &'a Model,
    iv: Interval,
    n_wanted: &'a [f64],
    opts: &'a Options,
    config: &'a Config,
    field: &'a str,
}

/// Where one prediction is made: N_*, the field there, and the canonical excursion to the end.
#[derive(Clone, Copy)]
struct Pivot {
    n_star: f64,
    phi_star: f64,
    delta_chi: f64,
}

/// The data's verdict on (n_s pull, r).
impl Job<'_> {
    /// The report of branch `i` of `all`, whose predictions are `found`: the final check that
    /// every number is finite, and the warnings about where the field settles.
    fn report(
        &self,
        ev: &mut Evaluator<'_>,
        all: &[Branch],
        order: &[usize],
        i: usize,
        found: BranchResult,
    ) -> Result<Report, AnalysisError> {
        let (predictions, mut warnings, n_from) = found;
        let (field, iv, opts) = (self.field, &self.iv, self.opts);
        check_finite(&predictions, field)?;
        let info = |j: usize| BranchInfo {
            index: j + 1,
            count: all.len(),
            branch: all[j],
        };
        // Where the field settles: the bottom of its branch (a minimum of V, or an end of a
        // given range).
        let bottom = all[i].bottom;
        if bottom.is_finite() {
            if let Some(v) = crate::analysis::single::domain::positive_minimum(ev, iv, bottom) {
                warnings.push(crate::drivers::inspect::positive_minimum_warning(field, bottom, v, iv));
            }
            let v = ev.eval(bottom);
            if v < 0.0 && v.is_finite() {
                warnings.push(format!(
                    "V = {} < 0 where the field settles ({field} = {}): a vacuum of negative energy, which collapses rather than reheats",
                    crate::report::numfmt::number(v),
                    fmt(bottom)
                ));
            }
        }
        if order.len() > 1 && i != order[0] {
            warnings.push(format!(
                "branch {} was the first choice but does not give the requested e-folds; branch {} was used",
                order[0] + 1,
                i + 1
            ));
        }
        Ok(Report {
            model: ModelSummary::of(self.model),
            method: if opts.exact.is_some() {
                Method::Exact
            } else {
                Method::SlowRoll
            },
            order: if opts.second_order { 2 } else { 1 },
            branch: info(i),
            other_branches: (0..all.len()).filter(|&j| j != i).map(info).collect(),
            data: DataSummary {
                name: opts.data.name.clone(),
                source: opts.data.source.clone(),
            },
            n_star_from: n_from,
            predictions,
            warnings,
        })
    }

    /// The order of the e-fold integral: second with `--second-order`
    /// ([`crate::analysis::slowroll::Order`]), so that phi_* is placed to the order of the
    /// observables.
    fn order(&self) -> crate::analysis::slowroll::Order {
        if self.opts.second_order {
            crate::analysis::slowroll::Order::Second
        } else {
            crate::analysis::slowroll::Order::First
        }
    }

    /// The kind of the domain's end at `x`, if `x` is one.
    fn end_kind(&self, x: f64) -> Option<EndKind> {
        if x == self.iv.lo {
            Some(self.iv.lo_kind)
        } else if x == self.iv.hi {
            Some(self.iv.hi_kind)
        } else {
            None
        }
    }

    /// The predictions on one branch, with their warnings and how N_* was fixed.
    fn run_branch(&self, ev: &mut Evaluator<'_>, b: &Branch) -> Result<BranchResult, AnalysisError> {
        let (field, opts, config) = (self.field, self.opts, self.config);
        // A branch that rolls into a pole of K: V levels off there, and the field never gets out.
        if self.end_kind(b.bottom) == Some(EndKind::Pole) {
            return Err(ErrorKind::RollsIntoPole {
                field: field.to_string(),
                top: b.top,
                pole: b.bottom,
            }
            .into());
        }
        let phi_end = end_of_inflation(ev, b, field)?;
        let mut warnings = Vec::new();
        let pole = self.pole_alone(ev, b, &mut warnings);
        let (n_stars, matching, n_from) = match &opts.reheating {
            None => (self.n_wanted.to_vec(), None, NStarFrom::Given),
            Some(reh) => {
                let (n, m) = self.solve_matching(ev, b, phi_end, reh)?;
                (vec![n], Some(m), NStarFrom::Reheating(reh.describe()))
            }
        };
        let (stars, n_error) =
            crate::analysis::slowroll::phi_stars_of_order(ev, b, phi_end, &n_stars, config, field, self.order())?;
        if n_error > 0.0 {
            let nearest = stars.iter().map(|x| (x - b.top).abs()).fold(f64::INFINITY, f64::min);
            warnings.push(format!(
                "rounding in V K / V' limits the e-fold integral to a relative accuracy of {n_error:.1e} (the pivot lies {nearest:.1e} from {field} = {}, where the integrand loses digits); phi_* and the observables are good to about that",
                fmt(b.top)
            ));
        }
        let excursion = self.excursions(phi_end, &stars)?;
        let v_end_user = ev.eval(phi_end);
        let mut out = Vec::new();
        for (idx, (&n_star, &phi_star)) in n_stars.iter().zip(&stars).enumerate() {
            let at = Pivot {
                n_star,
                phi_star,
                delta_chi: excursion[idx],
            };
            let mut p = self.slow_roll_prediction(ev, at, phi_end, v_end_user);
            // slow roll along the way
            let violated = (1..8).any(|k| {
                let x = phi_end + (phi_star - phi_end) * k as f64 / 8.0;
                crate::analysis::slowroll::eps_first_order(ev, x).1 >= 1.0
            });
            if violated {
                warnings.push(format!(
                    "N_* = {n_star}: eps_V exceeds 1 somewhere between phi_* and phi_end; slow roll is not reliable there"
                ));
            }
            p.pole_only = pole.as_ref().map(|(order, residue, lo)| {
                let (n_s, r) = lo.predict(n_star);
                PoleOnly {
                    order: *order,
                    residue: *residue,
                    n_s,
                    r,
                    flatness: lo.flatness,
                }
            });
            p.reheating = matching;
            out.push(p);
        }
        if let Some(settings) = &opts.exact {
            self.refine_exact(ev, b, phi_end, &mut out, settings)?;
        }
        warnings.dedup();
        Ok((out, warnings, n_from))
    }

    /// The leading order of a pole of K at the top of the branch alone: (order, residue, the
    /// leading order), when there is a pole there and it has one (a warning says why not).
    fn pole_alone(
        &self,
        ev: &mut Evaluator<'_>,
        b: &Branch,
        warnings: &mut Vec<String>,
    ) -> Option<(f64, f64, crate::analysis::single::pole::PoleLeadingOrder)> {
        if self.end_kind(b.top) != Some(EndKind::Pole) {
            return None;
        }
        let iv = &self.iv;
        let inward = if b.top == iv.lo { 1.0 } else { -1.0 };
        let p = analyse_pole(ev, b.top, inward, iv.hi - iv.lo);
        if let Some(why) = p.as_ref().and_then(|p| p.no_leading_order) {
            warnings.push(format!(
                "no pole-alone prediction from the pole of K at {} = {} at the top of the branch: {}",
                self.field,
                fmt(b.top),
                why.words()
            ));
        }
        p.and_then(|p| p.leading_order.map(|lo| (p.order, p.residue, lo)))
    }

    /// Canonical excursions |chi_* - chi_end| for each field value of `stars`, integrated
    /// piecewise in order of distance from the end.
    fn excursions(&self, phi_end: f64, stars: &[f64]) -> Result<Vec<f64>, AnalysisError> {
        let mut map = CanonicalMap::new(self.model, phi_end, self.config);
        let mut order: Vec<usize> = (0..stars.len()).collect();
        order.sort_by(|&i, &j| (stars[i] - phi_end).abs().total_cmp(&(stars[j] - phi_end).abs()));
        let mut excursion = vec![0.0; stars.len()];
        let (mut from, mut acc) = (phi_end, 0.0);
        let limit = self.config.quad_rounding_limit.max(self.config.quad_accept);
        for &i in &order {
            let (d, _) = crate::analysis::slowroll::accept_within(map.between(from, stars[i]), limit)?;
            acc += d.abs();
            excursion[i] = acc;
            from = stars[i];
        }
        Ok(excursion)
    }

    /// The slow-roll prediction at one pivot (without the pole-alone and reheating parts).
    fn slow_roll_prediction(&self, ev: &mut Evaluator<'_>, at: Pivot, phi_end: f64, v_end_user: f64) -> Prediction {
        let data = &self.opts.data;
        let Pivot {
            n_star,
            phi_star,
            delta_chi,
        } = at;
        let sr = SlowRoll::at(ev, phi_star);
        let obs: Observables = if self.opts.second_order {
            sr.second_order()
        } else {
            sr.first_order()
        };
        let a_s_user = a_s_first_order(sr.v, sr.eps_v);
        let sc = Scales::new(a_s_user, sr.v, 0.0, v_end_user, data);
        let (pull, verdict) = judge(obs.n_s, obs.r, data);
        Prediction {
            at: AtPivot {
                n_star,
                phi_star,
                phi_end,
                n_s: obs.n_s,
                r: obs.r,
                alpha_s: obs.alpha_s,
                n_t: obs.n_t,
            },
            eps_v: sr.eps_v,
            eta_v: sr.eta_v,
            xi2_v: sr.xi2_v,
            omega3_v: sr.omega3_v,
            delta_chi,
            delta_phi: (phi_star - phi_end).abs(),
            lyth_bound: n_star * (obs.r / 8.0).sqrt(),
            a_s_unscaled: a_s_user,
            potential_scale: sc.potential_scale,
            v_star_quarter_gev: sc.v_star_quarter_gev,
            h_star_gev: sc.h_star_gev,
            t_ds_gev: sc.t_ds_gev,
            v_end: sc.v_end,
            v_end_quarter_gev: sc.v_end_quarter_gev,
            n_s_pull: pull,
            r_limit: data.r.upper,
            verdict,
            pole_only: None,
            reheating: None,
            exact: None,
        }
    }

    /// Replaces the slow-roll observables by those of the exact background and modes, keeping
    /// the slow-roll values in `exact` for comparison. N_* counts from the exact end (eps_H = 1).
    fn refine_exact(
        &self,
        ev: &mut Evaluator<'_>,
        b: &Branch,
        phi_end: f64,
        out: &mut [Prediction],
        settings: &crate::analysis::background::Settings,
    ) -> Result<(), AnalysisError> {
        let (model, config, field) = (self.model, self.config, self.field);
        let n_stars: Vec<f64> = out.iter().map(|p| p.n_star).collect();
        let deepest = n_stars.iter().copied().fold(0.0f64, f64::max);
        // Start early enough for the lowest k of the tilt stencil to begin k/aH = k_start inside,
        // plus a few e-folds for the approach to the attractor.
        let margin = settings.k_start.ln() + 2.0 * crate::analysis::perturbations::TILT_STEP + 4.0;
        let mut phi_at = |n: f64| -> Result<f64, AnalysisError> {
            phi_stars(ev, b, phi_end, &[n], config, field)
                .map(|v| v[0])
                .map_err(|e| {
                    AnalysisError::from(ErrorKind::NoRoomForExact {
                        needed: n,
                        cause: e.kind,
                    })
                })
        };
        let (_, run) = crate::analysis::background::start_with_room_in(
            model,
            &|| Ok(self.iv),
            deepest + margin,
            settings,
            &mut phi_at,
        )?;
        let points = crate::analysis::perturbations::observe(model, &run, &n_stars, settings)?;
        let data = &self.opts.data;
        let mut map = CanonicalMap::new(model, phi_end, config);
        for (p, e) in out.iter_mut().zip(points) {
            let sr = SlowRoll::at(ev, e.phi_star);
            let v_end_user = ev.eval(e.phi_end);
            let sc = Scales::new(e.extras.p_s_unscaled, sr.v, e.extras.eps_1, v_end_user, data);
            let mut extras = e.extras;
            extras.phi_end_slow_roll = p.phi_end;
            extras.phi_star_slow_roll = p.phi_star;
            extras.n_s_slow_roll = p.n_s;
            extras.r_slow_roll = p.r;
            let (pull, verdict) = judge(e.n_s, e.r, data);
            p.at = AtPivot {
                n_star: p.n_star,
                ..e.at
            };
            p.eps_v = sr.eps_v;
            p.eta_v = sr.eta_v;
            p.xi2_v = sr.xi2_v;
            p.omega3_v = sr.omega3_v;
            p.delta_chi = map.between(e.phi_end, e.phi_star)?.value.abs();
            p.delta_phi = (e.phi_star - e.phi_end).abs();
            p.lyth_bound = p.n_star * (e.r / 8.0).sqrt();
            p.a_s_unscaled = e.extras.p_s_unscaled;
            p.potential_scale = sc.potential_scale;
            p.v_star_quarter_gev = sc.v_star_quarter_gev;
            p.h_star_gev = sc.h_star_gev;
            p.t_ds_gev = sc.t_ds_gev;
            p.v_end = sc.v_end;
            p.v_end_quarter_gev = sc.v_end_quarter_gev;
            p.n_s_pull = pull;
            p.verdict = verdict;
            p.exact = Some(extras);
        }
        Ok(())
    }

    /// N_* consistent with a reheating history: V_* (and so H_*) depends on N_*, N_* on H_* and
    /// V_end; iterated to a fixed point (the dependence is logarithmic, so it converges in a few
    /// steps), to 1e-10 e-folds.
    fn solve_matching(
        &self,
        ev: &mut Evaluator<'_>,
        b: &Branch,
        phi_end: f64,
        reh: &Reheating,
    ) -> Result<(f64, Matching), AnalysisError> {
        let data = &self.opts.data;
        let v_end_user = ev.eval(phi_end);
        let mut n = 55.0;
        for _ in 0..60 {
            let phi = crate::analysis::slowroll::phi_stars_of_order(
                ev,
                b,
                phi_end,
                &[n],
                self.config,
                self.field,
                self.order(),
            )?
            .0[0];
            let sr = SlowRoll::at(ev, phi);
            // potential_scale(a_s_first_order(..)) in the order of operations the pinned
            // N_* of every reheating history was computed with.
            let scale = data.a_s() * 24.0 * PI * PI * sr.eps_v / sr.v;
            let h = hubble_squared(scale * sr.v, 0.0).sqrt();
            let m = reh
                .match_pivot(h, scale * v_end_user, data)
                .map_err(|e| AnalysisError::from(ErrorKind::Matching(e)))?;
            if (m.n_star - n).abs() < 1e-10 {
                return Ok((m.n_star, m));
            }
            if !(m.n_star.is_finite() && m.n_star > 0.0) {
                return Err(ErrorKind::MatchingBadEfolds { n_star: m.n_star }.into());
            }
            n = m.n_star;
        }
        Err(ErrorKind::MatchingNoConvergence.into())
    }
}
