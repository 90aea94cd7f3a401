//! Speed of `efold basin`: 10 000 one-field starts from rest on the exponential plateau,
//! 10 000 starts with kinetic ratios up to 1e6, and 2 500 starts of the two-field landscape
//! of two alphas, on all cores and on one; one N_* (55) each.
//!
//! Run with `cargo bench --bench basin`. Numbers are reported in README.md (Performance).

use divan::Bencher;
use efold::analysis::basin::sample::Plan;
use efold::config::{BasinLimits, Config, MultiLimits};
use efold::drivers::basin::{run, BasinJob, Directions, VelocityPlan};
use efold::model::{Model, ModelSpec};
use efold::scan::Axis;

fn main() {
    divan::main();
}

fn model(path: &str) -> Model {
    let path = format!("{}/models/{path}.toml", env!("CARGO_MANIFEST_DIR"));
    let spec = ModelSpec::load(std::path::Path::new(&path)).unwrap();
    Model::build(&spec, &Config::default()).unwrap()
}

fn time(threads: usize, m: &Model, plan: &Plan, velocity: VelocityPlan) -> usize {
    let limits = BasinLimits::default();
    let job = BasinJob {
        model: m,
        plan,
        velocity,
        need: 60.0,
        n_stars: &[55.0],
        limits: &limits,
        multi: MultiLimits {
            bg_rtol: limits.delta_n_rtol,
            ..MultiLimits::default()
        },
        shard: None,
        progress: false,
    };
    let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
    pool.install(|| run(&job).unwrap().len())
}

/// phi from 1 to 7 at rest: 0.2 to 230 e-folds.
#[divan::bench(args = [1, 2], sample_count = 3, sample_size = 1)]
fn one_field_10000_from_rest(b: Bencher, threads: usize) {
    let m = model("exponential-plateau");
    let plan = Plan::Grid(vec![Axis::new("phi", 1.0, 7.0, 10_000, false).unwrap()]);
    b.bench_local(|| time(threads, &m, &plan, VelocityPlan::Rest));
}

/// phi from 1 to 7 and X from 1e-3 to 1e6, down the gradient.
#[divan::bench(args = [1, 2], sample_count = 3, sample_size = 1)]
fn one_field_10000_kinetic_to_1e6(b: Bencher, threads: usize) {
    let m = model("exponential-plateau");
    let plan = Plan::Grid(vec![
        Axis::new("phi", 1.0, 7.0, 100, false).unwrap(),
        Axis::new("X", 1e-3, 1e6, 100, true).unwrap(),
    ]);
    b.bench_local(|| time(threads, &m, &plan, VelocityPlan::Kinetic(Directions::Down)));
}

/// x and y over most of the landscape of two alphas, on the attractor: n_s and r by delta-N
/// for the starts with enough e-folds.
#[divan::bench(args = [1, 2], sample_count = 1, sample_size = 1)]
fn two_fields_2500(b: Bencher, threads: usize) {
    let m = model("several-fields/two-alphas-turning");
    let plan = Plan::Grid(vec![
        Axis::new("x", 0.5, 0.999, 50, false).unwrap(),
        Axis::new("y", 1.0, 3.4, 50, false).unwrap(),
    ]);
    b.bench_local(|| time(threads, &m, &plan, VelocityPlan::Attractor));
}
