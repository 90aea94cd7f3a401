//! Fits of models of several fields: the parameters (and start coordinates, `start.FIELD`)
//! that reproduce target observables of the exact multi-field route at one N_*, by
//! Levenberg–Marquardt with central differences, as for one field ([`super::fit`]), with the
//! solver's settings of [`MultiFitSettings`]: a tolerance above the route's own scatter and a
//! budget of predictions, since each one is a whole multi-field background and its modes.
//!
//! Each evaluation rebinds the one compiled model ([`rebind_point`]) and predicts without the
//! slow-roll delta-N (the targets are those of the exact route). The result says how many
//! predictions were made.

use super::fit::{Observable, Target};
use super::scan_multi::{predict_bound, rebind_point, START_PREFIX};
use crate::analysis::error::{AnalysisError, ErrorKind, Miss};
use crate::analysis::multi::predict::{MultiPrediction, MultiSettings};
use crate::config::{Config, MultiFitSettings};
use crate::model::Model;
use indexmap::IndexMap;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;

/// The outcome of a fit of a model of several fields: the keys of a one-field fit, the fields
/// at the pivot, and the number of predictions made.
#[derive(Debug, Clone, Serialize)]
pub struct MultiFitResult {
    /// Fitted values (parameters and start coordinates).
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
    /// Multi-field predictions made (trial points and finite differences).
    pub evaluations: usize,
    /// The tolerance reached on every scaled residual.
    pub tolerance: f64,
    /// Condition number of the last Jacobian (in the fitted variables).
    pub condition_number: f64,
    /// The fields at the pivot's exit at the solution, by name.
    pub fields_star: IndexMap<String, f64>,
    /// The prediction at the solution.
    pub prediction: MultiPrediction,
}

/// The value of a target observable in a multi-field prediction (A_s is P_zeta of V as
/// written).
fn value(o: Observable, p: &MultiPrediction) -> f64 {
    match o {
        Observable::NS => p.n_s,
        Observable::R => p.r,
        Observable::AlphaS => p.alpha_s,
        Observable::As => p.p_zeta,
    }
}

/// The scaled residual, as for one field.
fn residual(o: Observable, got: f64, want: f64) -> f64 {
    match o {
        Observable::NS | Observable::AlphaS => (got - want) / 1e-3,
        Observable::R | Observable::As => (got / want).ln(),
    }
}

/// The model, the free names and the targets; counts the predictions.
struct Problem<'a> {
    model: Model,
    free: &'a [String],
    log: Vec<bool>,
    targets: &'a [Target],
    n_star: f64,
    config: &'a Config,
    settings: MultiFitSettings,
    evaluations: usize,
}

/// Where the solver stands.
struct Solution {
    theta: DVector<f64>,
    r: DVector<f64>,
    pred: MultiPrediction,
    iterations: usize,
    jacobian: Option<DMatrix<f64>>,
}

/// A prediction could not be made: why, or the budget is spent.
enum Stop {
    Failed(String),
    Budget,
}

impl Problem<'_> {
    fn values(&self, theta: &DVector<f64>) -> Vec<(String, f64)> {
        self.free
            .iter()
            .zip(theta.iter().zip(&self.log))
            .map(|(n, (t, l))| (n.clone(), if *l { t.exp() } else { *t }))
            .collect()
    }

    fn residuals(&mut self, theta: &DVector<f64>) -> Result<(DVector<f64>, MultiPrediction), Stop> {
        if self.evaluations >= self.settings.max_evaluations {
            return Err(Stop::Budget);
        }
        self.evaluations += 1;
        let values = self.values(theta);
        let settings = MultiSettings {
            delta_n: false,
            ..MultiSettings::default()
        };
        let p = rebind_point(&mut self.model, &values, self.config)
            .and_then(|_| predict_bound(&self.model, &[self.n_star], &settings))
            .map_err(|e| Stop::Failed(e.to_string()))?
            .predictions
            .swap_remove(0);
        let r = DVector::from_iterator(
            self.targets.len(),
            self.targets
                .iter()
                .map(|t| residual(t.observable, value(t.observable, &p), t.value)),
        );
        if r.iter().any(|x| !x.is_finite()) {
            return Err(Stop::Failed("a target observable is not finite here".into()));
        }
        Ok((r, p))
    }

    /// Central differences of step `settings.step` in each fitted variable.
    fn jacobian(&mut self, theta: &DVector<f64>) -> Result<DMatrix<f64>, Stop> {
        let (m, n) = (self.targets.len(), theta.len());
        let mut j = DMatrix::zeros(m, n);
        for c in 0..n {
            let step = self.settings.step;
            let h = if self.log[c] {
                step
            } else {
                step * theta[c].abs().max(1e-3)
            };
            let (mut up, mut down) = (theta.clone(), theta.clone());
            up[c] += h;
            down[c] -= h;
            let (ru, _) = self.residuals(&up)?;
            let (rd, _) = self.residuals(&down)?;
            for r in 0..m {
                j[(r, c)] = (ru[r] - rd[r]) / (2.0 * h);
            }
        }
        Ok(j)
    }

    /// One Levenberg–Marquardt step (as for one field): up to 30 damped tries, each variable
    /// moving by at most 1 per step. `Ok(false)` when no try lowered the cost.
    fn damped_step(&mut self, s: &mut Solution, j: &DMatrix<f64>, lambda: &mut f64) -> Result<bool, Stop> {
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
            let biggest = step.amax();
            if biggest > 1.0 {
                step /= biggest;
            }
            let trial = &s.theta + &step;
            match self.residuals(&trial) {
                Ok((rt, pt)) if rt.norm_squared() < s.r.norm_squared() => {
                    (s.theta, s.r, s.pred) = (trial, rt, pt);
                    *lambda = (*lambda / 3.0).max(1e-12);
                    return Ok(true);
                }
                Err(Stop::Budget) => return Err(Stop::Budget),
                _ => *lambda *= 4.0,
            }
        }
        Ok(false)
    }

    /// Iterates until every scaled residual is below the tolerance, no step lowers the cost,
    /// or the budget is spent (`Err(Stop::Budget)`, with `s` the best point).
    fn solve(&mut self, s: &mut Solution) -> Result<(), Stop> {
        let mut lambda = 1e-3;
        while s.r.amax() > self.settings.tol {
            s.iterations += 1;
            let j = self.jacobian(&s.theta)?;
            let moved = self.damped_step(s, &j, &mut lambda)?;
            s.jacobian = Some(j);
            if !moved {
                break;
            }
        }
        Ok(())
    }
}

/// The start values of the free names: parameters, or `start.FIELD` coordinates.
fn start_values(model: &Model, free: &[String]) -> Result<Vec<f64>, AnalysisError> {
    free.iter()
        .map(|name| {
            let start = name.strip_prefix(START_PREFIX).and_then(|f| {
                let i = model.field_names().iter().position(|x| x == f)?;
                model.start().map(|s| s[i])
            });
            let param = model.param_pairs().find(|(n, _)| n == name).map(|(_, v)| v);
            param.or(start).ok_or_else(|| {
                AnalysisError::from(ErrorKind::FitUnknownFreeSeveral {
                    name: name.clone(),
                    fields: model.field_names().to_vec(),
                    params: model.scope.params.clone(),
                })
            })
        })
        .collect()
}

/// What the targets reach at `s`.
fn misses(targets: &[Target], s: &Solution) -> Vec<Miss> {
    targets
        .iter()
        .zip(s.r.iter())
        .map(|(t, x)| Miss {
            observable: t.observable.name(),
            reached: value(t.observable, &s.pred),
            wanted: t.value,
            residual: *x,
        })
        .collect()
}

/// The problem set up at the model's values, checked.
fn problem<'a>(
    model: &Model,
    free: &'a [String],
    targets: &'a [Target],
    n_star: f64,
    config: &'a Config,
    settings: &MultiFitSettings,
) -> Result<(Problem<'a>, DVector<f64>), AnalysisError> {
    if free.is_empty() || targets.is_empty() {
        return Err(ErrorKind::FitEmpty.into());
    }
    let start = start_values(model, free)?;
    if free.len() > targets.len() {
        return Err(ErrorKind::FitNotUnique {
            free: free.len(),
            targets: targets.len(),
        }
        .into());
    }
    let log: Vec<bool> = start.iter().map(|v| *v > 0.0).collect();
    let theta = DVector::from_iterator(
        start.len(),
        start.iter().zip(&log).map(|(v, l)| if *l { v.ln() } else { *v }),
    );
    let p = Problem {
        model: model.clone(),
        free,
        log,
        targets,
        n_star,
        config,
        settings: *settings,
        evaluations: 0,
    };
    Ok((p, theta))
}

/// Solves for the free names (parameters, `start.FIELD`) that reproduce the targets at
/// N_* = `n_star` on the exact multi-field route, from the model's values, within
/// `settings.tol` on every scaled residual and at most `settings.max_evaluations` predictions.
pub fn fit(
    model: &Model,
    free: &[String],
    targets: &[Target],
    n_star: f64,
    config: &Config,
    settings: &MultiFitSettings,
) -> Result<MultiFitResult, AnalysisError> {
    let (mut problem, theta) = problem(model, free, targets, n_star, config, settings)?;
    let (r, pred) = problem.residuals(&theta).map_err(|e| {
        let cause = match e {
            Stop::Failed(c) => c,
            Stop::Budget => "the budget of predictions is zero".into(),
        };
        AnalysisError::from(ErrorKind::FitStart { cause })
    })?;
    let mut s = Solution {
        theta,
        r,
        pred,
        iterations: 0,
        jacobian: None,
    };
    let solved = problem.solve(&mut s);
    let at = problem.values(&s.theta);
    match solved {
        Err(Stop::Budget) => {
            return Err(ErrorKind::FitBudget {
                evaluations: problem.evaluations,
                at,
                misses: misses(targets, &s),
            }
            .into())
        }
        Err(Stop::Failed(cause)) => return Err(ErrorKind::FitJacobian { cause }.into()),
        Ok(()) if s.r.amax() > settings.tol => {
            return Err(ErrorKind::FitNoSolution {
                at,
                misses: misses(targets, &s),
            }
            .into())
        }
        Ok(()) => {}
    }
    let j = match s.jacobian.take() {
        Some(j) => j,
        None => problem
            .jacobian(&s.theta)
            .map_err(|_| ErrorKind::FitJacobianAtSolution {
                cause: "the Jacobian at the solution could not be formed".into(),
            })?,
    };
    let sv = j.svd(false, false).singular_values;
    let (smax, smin) = (sv.max(), sv.min());
    let by_target = |g: &dyn Fn(usize, &Target) -> f64| -> IndexMap<String, f64> {
        targets
            .iter()
            .enumerate()
            .map(|(i, t)| (t.observable.name().to_string(), g(i, t)))
            .collect()
    };
    Ok(MultiFitResult {
        parameters: at.into_iter().collect(),
        residuals: by_target(&|i, _| s.r[i]),
        achieved: by_target(&|_, t| value(t.observable, &s.pred)),
        targets: by_target(&|_, t| t.value),
        n_star,
        iterations: s.iterations,
        evaluations: problem.evaluations,
        tolerance: settings.tol,
        condition_number: if smin > 0.0 { smax / smin } else { f64::INFINITY },
        fields_star: model
            .field_names()
            .iter()
            .cloned()
            .zip(s.pred.fields_star.iter().copied())
            .collect(),
        prediction: s.pred,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::ModelSpec;

    fn model() -> Model {
        let text = "fields = [\"x\", \"y\"]\npotential = \"(x^2 + ratio*y^2)/2\"\n[params]\nratio = 9\n\
                    [metric]\nx = 1\ny = 1\n[start]\nx = 12\ny = 12\n";
        Model::build(&ModelSpec::from_toml(text, "m.toml").unwrap(), &Config::default()).unwrap()
    }

    /// The free names are checked before any prediction is made.
    #[test]
    fn free_names_are_parameters_or_start_coordinates() {
        let m = model();
        assert_eq!(
            start_values(&m, &["ratio".into(), "start.y".into()]).unwrap(),
            vec![9.0, 12.0]
        );
        let e = start_values(&m, &["start.z".into()]).unwrap_err();
        assert_eq!(
            e.message,
            "`start.z` is not a parameter of the model, which has 2 fields (`x`, `y`) and the parameters `ratio`"
        );
        let config = Config::default();
        let t = [Target {
            observable: Observable::NS,
            value: 0.96,
        }];
        let free = ["ratio".to_string(), "start.x".to_string()];
        let e = fit(&m, &free, &t, 55.0, &config, &MultiFitSettings::default()).unwrap_err();
        assert!(e.message.contains("2 free parameters for 1 target(s)"), "{}", e.message);
    }

    /// A budget too small for the first iteration stops the fit with the best point found
    /// and how many predictions were made.
    #[test]
    fn the_budget_bounds_the_predictions() {
        let m = model();
        let config = Config::default();
        let t = [Target {
            observable: Observable::NS,
            value: 0.95,
        }];
        let settings = MultiFitSettings {
            max_evaluations: 2,
            ..MultiFitSettings::default()
        };
        let e = fit(&m, &["ratio".to_string()], &t, 55.0, &config, &settings).unwrap_err();
        assert!(e.message.starts_with("the fit used its 2 predictions"), "{}", e.message);
        assert!(e.message.contains("ratio = 9"), "{}", e.message);
    }
}
