//! `efold basin`: the starts of a grid or a random sample, each run in parallel by
//! [`crate::analysis::basin`], and their summary (the basin fraction, the outcomes, the minima
//! or directions, and the spread of n_s and r).

use crate::analysis::basin::multi::MultiBasin;
use crate::analysis::basin::sample::Plan;
use crate::analysis::basin::single::SingleBasin;
use crate::analysis::basin::{Ask, Outcome, StartResult, Velocity};
use crate::analysis::error::{AnalysisError, ErrorKind};
use crate::analysis::single::domain::{find_domain, Interval};
use crate::config::{BasinLimits, MultiLimits};
use crate::drivers::scan::Shard;
use crate::model::Model;
use indexmap::IndexMap;
use serde::Serialize;

/// Which way a velocity set by X points.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Directions {
    /// Along minus the gradient.
    Down,
    /// Along the gradient.
    Up,
    /// Each point twice, down then up.
    Both,
}

/// The velocity of every start.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VelocityPlan {
    /// The slow-roll attractor's.
    Attractor,
    /// At rest.
    Rest,
    /// Set by X, the plan's coordinate named `X`, in these directions.
    Kinetic(Directions),
}

/// The name of the kinetic ratio among a plan's coordinates.
pub const X_NAME: &str = "X";

/// One basin run: the model, where the starts lie, and what to ask of each.
#[derive(Debug, Clone, Copy)]
pub struct BasinJob<'a> {
    /// The model (one field or several).
    pub model: &'a Model,
    /// Where the starts lie.
    pub plan: &'a Plan,
    /// Their velocity.
    pub velocity: VelocityPlan,
    /// e-folds for the outcome `enough`.
    pub need: f64,
    /// N_* values.
    pub n_stars: &'a [f64],
    /// Limits of the basin runs.
    pub limits: &'a BasinLimits,
    /// Settings of delta-N (several fields).
    pub multi: MultiLimits,
    /// Only this slice of the starts.
    pub shard: Option<Shard>,
    /// Show a progress bar.
    pub progress: bool,
}

impl BasinJob<'_> {
    /// The number of starts (None on overflow).
    pub fn total(&self) -> Option<usize> {
        let per = if self.velocity == VelocityPlan::Kinetic(Directions::Both) {
            2
        } else {
            1
        };
        self.plan.len()?.checked_mul(per)
    }

    /// The start `i`: the field point, X and the direction (`down` or `up`).
    pub fn start(&self, i: usize) -> (Vec<f64>, Option<f64>, Option<&'static str>) {
        let (p, up) = match self.velocity {
            VelocityPlan::Kinetic(Directions::Both) => (i / 2, i % 2 == 1),
            VelocityPlan::Kinetic(Directions::Up) => (i, true),
            _ => (i, false),
        };
        let coords = self.plan.point(p);
        let names = self.plan.names();
        let fields = self.model.field_names();
        let mut phi: Vec<f64> = self
            .model
            .start()
            .map_or_else(|| vec![0.0; fields.len()], <[f64]>::to_vec);
        let mut x = None;
        for (name, v) in names.iter().zip(coords) {
            if name == X_NAME {
                x = Some(v);
            } else if let Some(j) = fields.iter().position(|f| f == name) {
                phi[j] = v;
            }
        }
        let dir = matches!(self.velocity, VelocityPlan::Kinetic(_)).then_some(if up { "up" } else { "down" });
        (phi, x, dir)
    }

    fn velocity_of(&self, x: Option<f64>, dir: Option<&str>) -> Velocity {
        match self.velocity {
            VelocityPlan::Attractor => Velocity::Attractor,
            VelocityPlan::Rest => Velocity::Rest,
            VelocityPlan::Kinetic(_) => Velocity::Kinetic {
                x: x.unwrap_or(0.0),
                up: dir == Some("up"),
            },
        }
    }
}

/// One start and what became of it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BasinPoint {
    /// Its index among all the starts.
    pub index: usize,
    /// The field point.
    pub start: Vec<f64>,
    /// X = rho_kin / V, when the velocity is set by it.
    pub x_kinetic: Option<f64>,
    /// `down` or `up`, when the velocity is set by X.
    pub direction: Option<&'static str>,
    /// The result.
    pub result: StartResult,
}

/// A worker's analysis: one field or several.
enum Worker<'m> {
    One(Box<SingleBasin<'m>>),
    Many(Box<MultiBasin<'m>>),
}

/// The domain of a one-field model (the interval starts must lie in).
pub fn domain_of(model: &Model) -> Result<Interval, AnalysisError> {
    Ok(find_domain(model, &mut model.evaluator())?.interval)
}

/// Runs the starts (or a shard of them) in parallel, in index order. One failing start never
/// stops the run: its row says why.
pub fn run(job: &BasinJob<'_>) -> Result<Vec<BasinPoint>, AnalysisError> {
    use rayon::prelude::*;
    let total = job.total().unwrap_or(usize::MAX);
    let range = job.shard.map_or(0..total, |s| s.range(total));
    let iv = if job.model.n_fields() == 1 {
        Some(domain_of(job.model)?)
    } else {
        None
    };
    let bar = if job.progress {
        indicatif::ProgressBar::new(range.len() as u64)
    } else {
        indicatif::ProgressBar::hidden()
    };
    let ask = Ask {
        need: job.need,
        n_stars: job.n_stars,
        limits: job.limits,
    };
    let points: Vec<BasinPoint> = range
        .into_par_iter()
        .map_init(
            || match iv {
                Some(iv) => Worker::One(Box::new(SingleBasin::new(job.model, iv, job.limits))),
                None => Worker::Many(Box::new(
                    MultiBasin::new(job.model, job.limits, job.multi).expect("a model of several fields"),
                )),
            },
            |w, i| {
                let (phi, x, dir) = job.start(i);
                let v = job.velocity_of(x, dir);
                let result = match w {
                    Worker::One(b) => b.run(phi[0], v, &ask),
                    Worker::Many(b) => b.run(&phi, v, &ask),
                };
                bar.inc(1);
                BasinPoint {
                    index: i,
                    start: phi,
                    x_kinetic: x,
                    direction: dir,
                    result,
                }
            },
        )
        .collect();
    bar.finish_and_clear();
    Ok(points)
}

/// An error when no start gives a result: all failed (with the first reason), or all reached
/// the cap.
pub fn check_all(points: &[BasinPoint], limits: &BasinLimits) -> Result<(), AnalysisError> {
    if points.is_empty() {
        return Ok(());
    }
    if points.iter().all(|p| p.result.outcome == Outcome::Failed) {
        let first = points[0].result.reason.clone().unwrap_or_default();
        return Err(ErrorKind::BasinEveryStartFailed {
            count: points.len(),
            first,
        }
        .into());
    }
    if points.iter().all(|p| p.result.outcome == Outcome::NeverEnds) {
        return Err(ErrorKind::BasinEveryStartCapped {
            count: points.len(),
            cap: limits.cap_efolds,
        }
        .into());
    }
    Ok(())
}

/// min, median and max of some values.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Spread {
    /// Smallest.
    pub min: f64,
    /// Median (the mean of the two middle values of an even count).
    pub median: f64,
    /// Largest.
    pub max: f64,
}

impl Spread {
    /// Of a non-empty list.
    pub fn of(mut xs: Vec<f64>) -> Option<Spread> {
        if xs.is_empty() {
            return None;
        }
        xs.sort_by(f64::total_cmp);
        let m = xs.len() / 2;
        let median = if xs.len() % 2 == 1 {
            xs[m]
        } else {
            0.5 * (xs[m - 1] + xs[m])
        };
        Some(Spread {
            min: xs[0],
            median,
            max: xs[xs.len() - 1],
        })
    }
}

/// The observables of one cluster of starts (one final minimum, or one direction) at one N_*.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Cluster {
    /// The minimum (`phi = 0`) or the direction (`along x`).
    pub label: String,
    /// N_*.
    pub n_star: f64,
    /// Starts with n_s and r there.
    pub count: usize,
    /// n_s.
    pub n_s: Spread,
    /// r.
    pub r: Spread,
}

/// The summary of a basin run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Summary {
    /// Starts.
    pub count: usize,
    /// The fraction with the outcome `enough` (the basin fraction).
    pub fraction_enough: f64,
    /// Its binomial standard error sqrt(p (1 - p) / count) for random samples (common
    /// practice); None for a grid.
    pub fraction_uncertainty: Option<f64>,
    /// Starts per outcome.
    pub outcomes: IndexMap<String, usize>,
    /// Starts per final minimum of V.
    pub minima: IndexMap<String, usize>,
    /// Several fields: starts per direction at the end of inflation.
    pub directions: IndexMap<String, usize>,
    /// n_s and r per cluster and N_*.
    pub clusters: Vec<Cluster>,
}

/// A field point as `x = 1, y = 0`, values to 4 digits and those below 1e-6 of the largest
/// shown as 0 (a minimum found to the tolerance of its descent).
pub fn point_label(names: &[String], at: &[f64]) -> String {
    let scale = at.iter().map(|x| x.abs()).fold(1.0, f64::max);
    names
        .iter()
        .zip(at)
        .map(|(n, &x)| {
            let x = if x.abs() < 1e-6 * scale { 0.0 } else { x };
            format!("{n} = {}", crate::report::numfmt::number_digits(x, 4))
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// The cluster a start belongs to: the direction (several fields) or the minimum.
pub fn cluster_label(names: &[String], r: &StartResult) -> Option<String> {
    if let Some(a) = r.rolls_along {
        return Some(format!("along {}", names[a]));
    }
    r.minimum.as_ref().map(|m| point_label(names, m))
}

/// The summary of the points (`random`: the uncertainty of the fraction is given).
pub fn summarise(points: &[BasinPoint], names: &[String], n_stars: &[f64], random: bool) -> Summary {
    let count = points.len();
    let mut outcomes: IndexMap<String, usize> = Outcome::ALL.iter().map(|o| (o.name().to_string(), 0)).collect();
    let mut minima = IndexMap::new();
    let mut directions = IndexMap::new();
    for p in points {
        *outcomes.get_mut(p.result.outcome.name()).expect("every outcome") += 1;
        if let Some(m) = &p.result.minimum {
            *minima.entry(point_label(names, m)).or_insert(0) += 1;
        }
        if let Some(a) = p.result.rolls_along {
            *directions.entry(names[a].clone()).or_insert(0) += 1;
        }
    }
    let enough = outcomes[Outcome::Enough.name()];
    let p = if count == 0 { 0.0 } else { enough as f64 / count as f64 };
    Summary {
        count,
        fraction_enough: p,
        fraction_uncertainty: (random && count > 0).then(|| (p * (1.0 - p) / count as f64).sqrt()),
        outcomes,
        minima,
        directions,
        clusters: clusters(points, names, n_stars),
    }
}

/// n_s and r per cluster and N_*, clusters in order of first appearance.
fn clusters(points: &[BasinPoint], names: &[String], n_stars: &[f64]) -> Vec<Cluster> {
    let mut by: IndexMap<String, Vec<&StartResult>> = IndexMap::new();
    for p in points {
        if let Some(l) = cluster_label(names, &p.result) {
            by.entry(l).or_default().push(&p.result);
        }
    }
    let mut out = Vec::new();
    for (label, rs) in &by {
        for (i, &n_star) in n_stars.iter().enumerate() {
            let pairs: Vec<(f64, f64)> = rs.iter().filter_map(|r| Some((r.n_s[i]?, r.r[i]?))).collect();
            let (Some(n_s), Some(r)) = (
                Spread::of(pairs.iter().map(|p| p.0).collect()),
                Spread::of(pairs.iter().map(|p| p.1).collect()),
            ) else {
                continue;
            };
            out.push(Cluster {
                label: label.clone(),
                n_star,
                count: pairs.len(),
                n_s,
                r,
            });
        }
    }
    out
}
