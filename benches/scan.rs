//! Speed of a 10 000-point scan of the order-2 pole model (alpha on a log grid, one N_*),
//! on all cores and on one.
//!
//! Run with `cargo bench --bench scan`. Numbers are reported in README.md (Performance).

use divan::Bencher;
use efold::config::Config;
use efold::data::DataSet;
use efold::model::ModelSpec;
use efold::scan::{run, Axis};

fn main() {
    divan::main();
}

fn spec() -> ModelSpec {
    let path = format!("{}/models/pole-order-2-quadratic.toml", env!("CARGO_MANIFEST_DIR"));
    ModelSpec::load(std::path::Path::new(&path)).unwrap()
}

#[divan::bench(args = [1, 2], sample_count = 3)]
fn scan_10000_points(b: Bencher, threads: usize) {
    let spec = spec();
    let axes = [Axis::new("alpha", 0.01, 100.0, 10_000, true).unwrap()];
    let data = DataSet::builtin();
    let config = Config::default();
    let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
    b.bench_local(|| pool.install(|| run(&spec, &axes, &[55.0], &data, None, &config, false).len()));
}
