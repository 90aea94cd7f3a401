//! Fits: the parameter values that reproduce target observables at one N_*, by
//! Levenberg–Marquardt with a finite-difference Jacobian (nalgebra for the linear algebra).
//!
//! Residuals are scaled so that each is of order one per "unit of concern": n_s and alpha_s in
//! units of 1e-3, r and A_s as logarithms. A parameter whose starting value is positive is
//! fitted in its logarithm (it stays positive, and scale-like parameters such as alpha move
//! evenly); others linearly.

use crate::analysis::error::fail;
use crate::analysis::error::AnalysisError;
use crate::config::Config;
use crate::data::DataSet;
use crate::drivers::predict::{predict, Options, Prediction};
use crate::model::{Model, ModelSpec};
use crate::report::numfmt;
use indexmap::IndexMap;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;

// The fit's rendering, where it was before it moved to `report`.
pub use crate::report::fit::text;
use crate::report::fit::PARAM_DIGITS;

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
    pub fn parse(text: &str) -> Result<Target, String> {
        let (name, value) = text
            .split_once('=')
            .ok_or_else(|| format!("`--target {text}`: write NAME=VALUE, e.g. `--target n_s=0.965`"))?;
        let observable = match name.trim() {
            "n_s" => Observable::NS,
            "r" => Observable::R,
            "alpha_s" => Observable::AlphaS,
            "A_s" | "a_s" => Observable::As,
            other => {
                return Err(format!(
                    "`{other}` cannot be targeted: the targets are n_s, r, alpha_s and A_s"
                ))
            }
        };
        let value: f64 = value
            .trim()
            .parse()
            .map_err(|_| format!("`{value}` is not a number in `--target {text}`"))?;
        if matches!(observable, Observable::R | Observable::As) && value <= 0.0 {
            return Err(format!("`--target {text}`: {} must be positive", observable.name()));
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

struct Problem<'a> {
    spec: &'a ModelSpec,
    free: &'a [String],
    log: Vec<bool>,
    targets: &'a [Target],
    opts: Options,
    config: &'a Config,
}

impl Problem<'_> {
    fn params(&self, theta: &DVector<f64>) -> Vec<f64> {
        theta
            .iter()
            .zip(&self.log)
            .map(|(t, l)| if *l { t.exp() } else { *t })
            .collect()
    }

    fn predict(&self, theta: &DVector<f64>) -> Result<Prediction, String> {
        let mut spec = self.spec.clone();
        for (name, v) in self.free.iter().zip(self.params(theta)) {
            spec.set_param(name, &format!("{v:e}"));
        }
        let model = Model::build(&spec, self.config).map_err(|e| e.diagnostic.message.clone())?;
        let rep = predict(&model, &self.opts, self.config).map_err(|e| e.message)?;
        Ok(rep.predictions[0].clone())
    }

    fn residuals(&self, theta: &DVector<f64>) -> Result<(DVector<f64>, Prediction), String> {
        let p = self.predict(theta)?;
        let r = DVector::from_iterator(
            self.targets.len(),
            self.targets
                .iter()
                .map(|t| t.observable.residual(t.observable.value(&p), t.value)),
        );
        if r.iter().any(|x| !x.is_finite()) {
            return Err("a target observable is not finite here".to_string());
        }
        Ok((r, p))
    }

    /// Central differences, step 1e-6 in each fitted variable (relative for linear ones).
    fn jacobian(&self, theta: &DVector<f64>) -> Result<DMatrix<f64>, String> {
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
        return Err(fail(
            "a fit needs at least one --free parameter and one --target".to_string(),
            &[],
        ));
    }
    if free.len() > targets.len() {
        return Err(fail(
            format!(
                "{} free parameters for {} target(s): the solution would not be unique",
                free.len(),
                targets.len()
            ),
            &["free at most as many parameters as there are targets"],
        ));
    }
    let start_model = Model::build(spec, config).map_err(|e| fail(e.diagnostic.message.clone(), &[]))?;
    let mut start = Vec::new();
    for name in free {
        let v = start_model
            .param_pairs()
            .find(|(n, _)| n == name)
            .map(|(_, v)| v)
            .ok_or_else(|| {
                fail(
                    format!("`{name}` is not a parameter of the model"),
                    &["--free takes a parameter's name"],
                )
            })?;
        start.push(v);
    }
    let log: Vec<bool> = start.iter().map(|v| *v > 0.0).collect();
    let problem = Problem {
        spec,
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
    let mut theta = DVector::from_iterator(
        start.len(),
        start.iter().zip(&log).map(|(v, l)| if *l { v.ln() } else { *v }),
    );
    let (mut r, mut pred) = problem.residuals(&theta).map_err(|e| {
        fail(
            format!("the model does not predict at the starting values: {e}"),
            &["start the fit from values that predict"],
        )
    })?;
    let mut lambda = 1e-3;
    let mut iterations = 0;
    let cost = |r: &DVector<f64>| r.norm_squared();
    while r.amax() > settings.tol && iterations < settings.max_iter {
        iterations += 1;
        let j = problem.jacobian(&theta).map_err(|e| {
            fail(
                format!("the Jacobian could not be formed: {e}"),
                &["start closer to a solution"],
            )
        })?;
        let jt = j.transpose();
        let jtj = &jt * &j;
        let g = &jt * &r;
        let mut improved = false;
        for _ in 0..30 {
            let mut a = jtj.clone();
            for d in 0..a.nrows() {
                a[(d, d)] += lambda * jtj[(d, d)].max(1e-12);
            }
            let Some(mut step) = a.lu().solve(&(-&g)) else {
                lambda *= 4.0;
                continue;
            };
            // A trust region: no variable moves by more than 1 per step (a factor e for the
            // logarithmic ones), so a far start walks rather than leaps past the solution.
            let biggest = step.amax();
            if biggest > 1.0 {
                step /= biggest;
            }
            let trial = &theta + &step;
            match problem.residuals(&trial) {
                Ok((rt, pt)) if cost(&rt) < cost(&r) => {
                    theta = trial;
                    r = rt;
                    pred = pt;
                    lambda = (lambda / 3.0).max(1e-12);
                    improved = true;
                    break;
                }
                _ => lambda *= 4.0,
            }
        }
        if !improved {
            break;
        }
    }
    let values = problem.params(&theta);
    let named = |v: &[f64]| -> IndexMap<String, f64> { free.iter().cloned().zip(v.iter().copied()).collect() };
    if r.amax() > settings.tol.max(1e-8) {
        let parts: Vec<String> = targets
            .iter()
            .zip(r.iter())
            .map(|(t, x)| {
                format!(
                    "{} = {} (wanted {}, scaled residual {})",
                    t.observable.name(),
                    numfmt::number(t.observable.value(&pred)),
                    numfmt::typed(t.value),
                    numfmt::scientific(*x, 3)
                )
            })
            .collect();
        let at: Vec<String> = named(&values)
            .iter()
            .map(|(k, v)| format!("{k} = {}", numfmt::number_digits(*v, PARAM_DIGITS)))
            .collect();
        return Err(fail(
            format!(
                "no parameter values reproduce the targets: the best found, at {}, gives {}",
                at.join(", "),
                parts.join("; ")
            ),
            &[
                "the targets may be out of the model's reach at this N_*: check them against a scan",
                "or start from other values with --param",
            ],
        ));
    }
    let j = problem.jacobian(&theta).map_err(|e| fail(e, &[]))?;
    let sv = j.svd(false, false).singular_values;
    let (smax, smin) = (sv.max(), sv.min());
    Ok(FitResult {
        parameters: named(&values),
        residuals: targets
            .iter()
            .map(|t| t.observable.name().to_string())
            .zip(r.iter().copied())
            .collect(),
        achieved: targets
            .iter()
            .map(|t| (t.observable.name().to_string(), t.observable.value(&pred)))
            .collect(),
        targets: targets
            .iter()
            .map(|t| (t.observable.name().to_string(), t.value))
            .collect(),
        n_star,
        iterations,
        condition_number: if smin > 0.0 { smax / smin } else { f64::INFINITY },
        prediction: pred,
    })
}
