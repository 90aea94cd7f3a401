//! Fits: the parameter values that reproduce target observables at one N_*, by
//! Levenberg–Marquardt with a finite-difference Jacobian (nalgebra for the linear algebra).
//!
//! Residuals are scaled so that each is of order one per "unit of concern": n_s and alpha_s in
//! units of 1e-3, r and A_s as logarithms. A parameter whose starting value is positive is
//! fitted in its logarithm (it stays positive, and scale-like parameters such as alpha move
//! evenly); others linearly.

use crate::analysis::error::AnalysisError;
use crate::analysis::error::{ErrorKind, Miss};
use crate::config::Config;
use crate::data::DataSet;
use crate::drivers::predict::{Options, Prediction};
use crate::drivers::prepared::Prepared;
use crate::model::{Model, ModelSpec};
use indexmap::IndexMap;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;

// The fit's rendering, where it was before it moved to `report`.
pub use crate::report::fit::text;

/// An observable that can be targeted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Observable {
    /// The scalar spectral index.
    #[serde(rename = "n_s")]
    NS,
    /// The tensor-to-scalar ratio.
    #[serde(rename = "r")]
    R,
    /// The running.
    #[serde(rename = "alpha_s")]
    AlphaS,
    /// The scalar amplitude of the potential as written.
    #[serde(rename = "A_s")]
    As,
}

impl Observable {
    /// Its name on the command line and in JSON.
    pub fn name(self) -> &'static str {
        match self {
            Observable::NS => "n_s",
            Observable::R => "r",
            Observable::AlphaS => "alpha_s",
            Observable::As => "A_s",
        }
    }

    fn value(self, p: &Prediction) -> f64 {
        match self {
            Observable::NS => p.n_s,
            Observable::R => p.r,
            Observable::AlphaS => p.alpha_s,
            Observable::As => p.a_s_unscaled,
        }
    }

    /// The scaled residual of `got` against `want`.
    fn residual(self, got: f64, want: f64) -> f64 {
        match self {
            Observable::NS | Observable::AlphaS => (got - want) / 1e-3,
            Observable::R | Observable::As => (got / want).ln(),
        }
    }
}

/// Why a `--target` cannot be read.
#[derive(Debug, Clone, PartialEq)]
pub enum TargetError {
    /// Not `NAME=VALUE`.
    Form {
        /// The flag's value.
        text: String,
    },
    /// Not an observable that can be targeted.
    Unknown {
        /// The flag's value.
        text: String,
        /// The name given.
        name: String,
    },
    /// The value is not a number.
    NotANumber {
        /// The flag's value.
        text: String,
        /// The value given.
        value: String,
    },
    /// r or A_s not positive.
    NotPositive {
        /// The flag's value.
        text: String,
        /// Which.
        observable: Observable,
    },
}

impl std::fmt::Display for TargetError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            TargetError::Form { text } => write!(f, "`--target {text}`: write NAME=VALUE, e.g. `--target n_s=0.965`"),
            TargetError::Unknown { name, .. } => write!(
                f,
                "`{name}` cannot be targeted: the targets are n_s, r, alpha_s and A_s"
            ),
            TargetError::NotANumber { text, value } => write!(f, "`{value}` is not a number in `--target {text}`"),
            TargetError::NotPositive { text, observable } => {
                write!(f, "`--target {text}`: {} must be positive", observable.name())
            }
        }
    }
}

impl std::error::Error for TargetError {}

/// A target: `n_s=0.965`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Target {
    /// Which observable.
    pub observable: Observable,
    /// Its wanted value.
    pub value: f64,
}

impl Target {
    /// Parses `NAME=VALUE`.
    pub fn parse(text: &str) -> Result<Target, TargetError> {
        let (name, value) = text
            .split_once('=')
            .ok_or_else(|| TargetError::Form { text: text.to_string() })?;
        let observable = match name.trim() {
            "n_s" => Observable::NS,
            "r" => Observable::R,
            "alpha_s" => Observable::AlphaS,
            "A_s" | "a_s" => Observable::As,
            other => {
                return Err(TargetError::Unknown {
                    text: text.to_string(),
                    name: other.to_string(),
                })
            }
        };
        let value: f64 = value.trim().parse().map_err(|_| TargetError::NotANumber {
            text: text.to_string(),
            value: value.to_string(),
        })?;
        if matches!(observable, Observable::R | Observable::As) && value <= 0.0 {
            return Err(TargetError::NotPositive {
                text: text.to_string(),
                observable,
            });
        }
        Ok(Target { observable, value })
    }
}

/// The outcome of a fit.
#[derive(Debug, Clone, Serialize)]
pub struct FitResult {
    /// Fitted parameter values.
    pub parameters: IndexMap<String, f64>,
    /// Scaled residuals (n_s, alpha_s: per 1e-3; r, A_s: logarithmic), by target.
    pub residuals: IndexMap<String, f64>,
    /// The observables reached, by target.
    pub achieved: IndexMap<String, f64>,
    /// The targets.
    pub targets: IndexMap<String, f64>,
    /// N_* of the fit.
    pub n_star: f64,
    /// Levenberg–Marquardt iterations.
    pub iterations: usize,
    /// Condition number of the Jacobian (in the fitted variables) at the solution.
    pub condition_number: f64,
    /// The prediction at the solution.
    pub prediction: Prediction,
}

/// Settings of the solver.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitSettings {
    /// Stop when every scaled residual is below this. Default 1e-10.
    pub tol: f64,
    /// Iteration cap. Default 200.
    pub max_iter: usize,
}

impl Default for FitSettings {
    fn default() -> Self {
        FitSettings {
            tol: 1e-10,
            max_iter: 200,
        }
    }
}

/// Why the fit's problem has no residuals at a point: no prediction there, or a target
/// observable that is not finite.
#[derive(Debug, Clone, PartialEq)]
pub enum ProblemError {
    /// The model does not build or predict there.
    Point(crate::drivers::scan::PointError),
    /// A target observable is not finite there.
    NotFinite,
}

impl std::fmt::Display for ProblemError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ProblemError::Point(e) => write!(f, "{e}"),
            ProblemError::NotFinite => f.write_str("a target observable is not finite here"),
        }
    }
}

/// The fit's model and targets. Every trial point and every finite-difference step rebinds the
/// one compiled model ([`Prepared::rebind`]): the values, predictions and error messages of a
/// model built afresh with `ModelSpec::set_param(name, "{value:e}")`, without parsing or
/// compiling V and K again.
struct Problem<'a> {
    prep: Prepared<'static>,
    free: &'a [String],
    log: Vec<bool>,
    targets: &'a [Target],
    opts: Options,
    config: &'a Config,
}

/// Where the solver stands: the fitted variables, their scaled residuals and prediction.
struct Solution {
    theta: DVector<f64>,
    r: DVector<f64>,
    pred: Prediction,
    iterations: usize,
}

impl Problem<'_> {
    fn params(&self, theta: &DVector<f64>) -> Vec<f64> {
        theta
            .iter()
            .zip(&self.log)
            .map(|(t, l)| if *l { t.exp() } else { *t })
            .collect()
    }

    fn predict(&mut self, theta: &DVector<f64>) -> Result<Prediction, ProblemError> {
        use crate::drivers::scan::PointError;
        let values = self.params(theta);
        let pairs: Vec<(&str, f64)> = self.free.iter().map(String::as_str).zip(values).collect();
        self.prep
            .rebind(&pairs, self.config)
            .map_err(|e| ProblemError::Point(PointError::from(e)))?;
        let mut rep = self
            .prep
            .predict(&self.opts, self.config)
            .map_err(|e| ProblemError::Point(PointError::from(e)))?;
        Ok(rep.predictions.swap_remove(0))
    }

    fn residuals(&mut self, theta: &DVector<f64>) -> Result<(DVector<f64>, Prediction), ProblemError> {
        let p = self.predict(theta)?;
        let r = DVector::from_iterator(
            self.targets.len(),
            self.targets
                .iter()
                .map(|t| t.observable.residual(t.observable.value(&p), t.value)),
        );
        if r.iter().any(|x| !x.is_finite()) {
            return Err(ProblemError::NotFinite);
        }
        Ok((r, p))
    }

    /// Central differences, step 1e-6 in each fitted variable (relative for linear ones).
    fn jacobian(&mut self, theta: &DVector<f64>) -> Result<DMatrix<f64>, ProblemError> {
        let (m, n) = (self.targets.len(), theta.len());
        let mut j = DMatrix::zeros(m, n);
        for c in 0..n {
            let h = if self.log[c] {
                1e-6
            } else {
                1e-6 * theta[c].abs().max(1e-3)
            };
            let mut up = theta.clone();
            up[c] += h;
            let mut down = theta.clone();
            down[c] -= h;
            let (ru, _) = self.residuals(&up)?;
            let (rd, _) = self.residuals(&down)?;
            for r in 0..m {
                j[(r, c)] = (ru[r] - rd[r]) / (2.0 * h);
            }
        }
        Ok(j)
    }

    /// One Levenberg–Marquardt step from `s` with the Jacobian `j`: up to 30 tries of the
    /// damped normal equations, `lambda` raised fourfold after each try that does not lower
    /// the cost and lowered threefold after one that does (which moves `s`). False when no try
    /// lowered the cost.
    fn damped_step(&mut self, s: &mut Solution, j: &DMatrix<f64>, lambda: &mut f64) -> bool {
        let cost = |r: &DVector<f64>| r.norm_squared();
        let jt = j.transpose();
        let jtj = &jt * j;
        let g = &jt * &s.r;
        for _ in 0..30 {
            let mut a = jtj.clone();
            for d in 0..a.nrows() {
                a[(d, d)] += *lambda * jtj[(d, d)].max(1e-12);
            }
            let Some(mut step) = a.lu().solve(&(-&g)) else {
                *lambda *= 4.0;
                continue;
            };
            // A trust region: no variable moves by more than 1 per step (a factor e for the
            // logarithmic ones), so a far start walks rather than leaps past the solution.
            let biggest = step.amax();
            if biggest > 1.0 {
                step /= biggest;
            }
            let trial = &s.theta + &step;
            match self.residuals(&trial) {
                Ok((rt, pt)) if cost(&rt) < cost(&s.r) => {
                    s.theta = trial;
                    s.r = rt;
                    s.pred = pt;
                    *lambda = (*lambda / 3.0).max(1e-12);
                    return true;
                }
                _ => *lambda *= 4.0,
            }
        }
        false
    }

    /// Iterates from `s` until every scaled residual is below `settings.tol`, the iteration
    /// cap is reached or no step lowers the cost.
    fn solve(&mut self, mut s: Solution, settings: &FitSettings) -> Result<Solution, AnalysisError> {
        let mut lambda = 1e-3;
        while s.r.amax() > settings.tol && s.iterations < settings.max_iter {
            s.iterations += 1;
            let j = self
                .jacobian(&s.theta)
                .map_err(|e| AnalysisError::from(ErrorKind::FitJacobian { cause: e.to_string() }))?;
            if !self.damped_step(&mut s, &j, &mut lambda) {
                break;
            }
        }
        Ok(s)
    }
}

/// The model's values of the free parameters, in order.
fn start_values(model: &Model, free: &[String]) -> Result<Vec<f64>, AnalysisError> {
    free.iter()
        .map(|name| {
            model
                .param_pairs()
                .find(|(n, _)| n == name)
                .map(|(_, v)| v)
                .ok_or_else(|| AnalysisError::from(ErrorKind::FitUnknownFree { name: name.clone() }))
        })
        .collect()
}

/// The error of a fit that stopped short of the targets: where it stopped and what it reached.
fn no_solution(targets: &[Target], s: &Solution, at: &IndexMap<String, f64>) -> AnalysisError {
    let misses = targets
        .iter()
        .zip(s.r.iter())
        .map(|(t, x)| Miss {
            observable: t.observable.name(),
            reached: t.observable.value(&s.pred),
            wanted: t.value,
            residual: *x,
        })
        .collect();
    ErrorKind::FitNoSolution {
        at: at.clone().into_iter().collect(),
        misses,
    }
    .into()
}

/// Solves for the free parameters that reproduce the targets at N_* = `n_star`, starting from
/// the model's values.
pub fn fit(
    spec: &ModelSpec,
    free: &[String],
    targets: &[Target],
    n_star: f64,
    data: &DataSet,
    config: &Config,
    settings: &FitSettings,
) -> Result<FitResult, AnalysisError> {
    if free.is_empty() || targets.is_empty() {
        return Err(ErrorKind::FitEmpty.into());
    }
    if free.len() > targets.len() {
        return Err(ErrorKind::FitNotUnique {
            free: free.len(),
            targets: targets.len(),
        }
        .into());
    }
    let start_model = Model::build(spec, config).map_err(|e| {
        AnalysisError::from(ErrorKind::FitModel {
            message: e.diagnostic.message.clone(),
        })
    })?;
    let start = start_values(&start_model, free)?;
    let log: Vec<bool> = start.iter().map(|v| *v > 0.0).collect();
    let mut problem = Problem {
        prep: Prepared::owned(start_model),
        free,
        log: log.clone(),
        targets,
        opts: Options {
            n_stars: vec![n_star],
            data: data.clone(),
            ..Default::default()
        },
        config,
    };
    let theta = DVector::from_iterator(
        start.len(),
        start.iter().zip(&log).map(|(v, l)| if *l { v.ln() } else { *v }),
    );
    let (r, pred) = problem
        .residuals(&theta)
        .map_err(|e| AnalysisError::from(ErrorKind::FitStart { cause: e.to_string() }))?;
    let first = Solution {
        theta,
        r,
        pred,
        iterations: 0,
    };
    let s = problem.solve(first, settings)?;
    let values = problem.params(&s.theta);
    let parameters: IndexMap<String, f64> = free.iter().cloned().zip(values.iter().copied()).collect();
    if s.r.amax() > settings.tol.max(1e-8) {
        return Err(no_solution(targets, &s, &parameters));
    }
    let j = problem
        .jacobian(&s.theta)
        .map_err(|e| AnalysisError::from(ErrorKind::FitJacobianAtSolution { cause: e.to_string() }))?;
    let sv = j.svd(false, false).singular_values;
    let (smax, smin) = (sv.max(), sv.min());
    let by_target = |g: &dyn Fn(usize, &Target) -> f64| -> IndexMap<String, f64> {
        targets
            .iter()
            .enumerate()
            .map(|(i, t)| (t.observable.name().to_string(), g(i, t)))
            .collect()
    };
    Ok(FitResult {
        parameters,
        residuals: by_target(&|i, _| s.r[i]),
        achieved: by_target(&|_, t| t.observable.value(&s.pred)),
        targets: by_target(&|_, t| t.value),
        n_star,
        iterations: s.iterations,
        condition_number: if smin > 0.0 { smax / smin } else { f64::INFINITY },
        prediction: s.pred,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `--target` values that cannot be read, each with the message it had as a plain string.
    #[test]
    fn bad_targets_keep_their_messages() {
        let cases = [
            ("n_s", "`--target n_s`: write NAME=VALUE, e.g. `--target n_s=0.965`"),
            (
                "tau=0.05",
                "`tau` cannot be targeted: the targets are n_s, r, alpha_s and A_s",
            ),
            ("r=small", "`small` is not a number in `--target r=small`"),
            ("r=-0.01", "`--target r=-0.01`: r must be positive"),
            ("A_s=0", "`--target A_s=0`: A_s must be positive"),
        ];
        for (text, message) in cases {
            assert_eq!(Target::parse(text).unwrap_err().to_string(), message, "{text}");
        }
        assert_eq!(
            Target::parse("alpha_s=-0.001"),
            Ok(Target {
                observable: Observable::AlphaS,
                value: -0.001
            })
        );
    }

    use crate::model::Text;

    fn problem<'a>(spec: &ModelSpec, free: &'a [String], targets: &'a [Target], config: &'a Config) -> Problem<'a> {
        let model = Model::build(spec, config).unwrap();
        let log = start_values(&model, free).unwrap().iter().map(|v| *v > 0.0).collect();
        Problem {
            prep: Prepared::owned(model),
            free,
            log,
            targets,
            opts: Options {
                n_stars: vec![55.0],
                ..Default::default()
            },
            config,
        }
    }

    /// What the model built afresh with the parameter set as text says at these values.
    fn fresh(spec: &ModelSpec, name: &str, v: f64, config: &Config) -> Result<Prediction, String> {
        let mut spec = spec.clone();
        spec.set_param(name, &format!("{v:e}"));
        let model = Model::build(&spec, config).map_err(|e| e.diagnostic.message.clone())?;
        let rep = crate::drivers::predict::predict(
            &model,
            &Options {
                n_stars: vec![55.0],
                ..Default::default()
            },
            config,
        );
        rep.map(|mut r| r.predictions.swap_remove(0)).map_err(|e| e.message)
    }

    #[test]
    fn each_trial_point_predicts_what_a_fresh_build_predicts() {
        let config = Config::default();
        let mut spec = ModelSpec::inline("phi^2/(6*alpha)", Some("1/(1 - phi^2/(6*alpha))^2"));
        spec.set_param("alpha", "1");
        let (free, targets) = (
            ["alpha".to_string()],
            [Target {
                observable: Observable::R,
                value: 0.01,
            }],
        );
        let mut p = problem(&spec, &free, &targets, &config);
        assert_eq!(p.log, [true]);
        // in the logarithm, as the solver steps: the value is exp(theta), not a round number
        for theta in [0.3f64.ln(), 2.5f64.ln(), 2.5f64.ln() + 1e-6, 0.0] {
            let got = p.predict(&DVector::from_element(1, theta)).unwrap();
            let want = fresh(&spec, "alpha", theta.exp(), &config).unwrap();
            let bits = |q: &Prediction| q.numbers().iter().map(|(_, x)| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&got), bits(&want), "theta = {theta}");
        }
    }

    #[test]
    fn a_trial_point_that_does_not_build_fails_with_the_builds_message() {
        let config = Config::default();
        // c starts negative, so it is fitted linearly; at c = 2 the range [c, 1] is empty
        let mut spec = ModelSpec::inline("phi^2", None);
        spec.set_param("c", "-1");
        spec.range = Some((Text::inline("lo", "c"), Text::inline("hi", "1")));
        let (free, targets) = (
            ["c".to_string()],
            [Target {
                observable: Observable::NS,
                value: 0.96,
            }],
        );
        let mut p = problem(&spec, &free, &targets, &config);
        assert_eq!(p.log, [false]);
        let got = p.predict(&DVector::from_element(1, 2.0)).unwrap_err().to_string();
        let want = fresh(&spec, "c", 2.0, &config).unwrap_err();
        assert_eq!(got, want);
        assert!(got.contains("the range is empty"), "{got}");
    }
}
