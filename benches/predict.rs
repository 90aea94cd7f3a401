//! Speed of one full prediction (compilation included), in process.
//!
//! Run with `cargo bench --bench predict`. Numbers are reported in README.md (Performance).

use divan::{black_box, Bencher};
use efold::config::Config;
use efold::model::{Model, ModelSpec};
use efold::predict::{predict, Options};

fn main() {
    divan::main();
}

/// Three N_* (50, 55, 60), slow roll, the built-in data set: the defaults.
fn options() -> Options {
    Options::default()
}

fn spec(name: &str) -> ModelSpec {
    let path = format!("{}/models/{name}.toml", env!("CARGO_MANIFEST_DIR"));
    ModelSpec::load(std::path::Path::new(&path)).unwrap()
}

/// Compile V and K, find the domain and the branch, the end of inflation, phi_* for three
/// N_*, the observables, amplitude, scales and excursion.
#[divan::bench(args = ["pole-order-2-quadratic", "exponential-plateau", "quadratic-monomial", "nonminimal-quartic"])]
fn full_prediction(b: Bencher, name: &str) {
    let spec = spec(name);
    let config = Config::default();
    let opts = options();
    b.bench_local(|| {
        let model = Model::build(black_box(&spec), &config).unwrap();
        predict(&model, &opts, &config).unwrap().predictions.len()
    });
}

/// The same with the model compiled once (what a parameter scan pays per point, parameters
/// rebound through the model spec).
#[divan::bench]
fn prediction_without_compilation(b: Bencher) {
    let config = Config::default();
    let model = Model::build(&spec("pole-order-2-quadratic"), &config).unwrap();
    let opts = options();
    b.bench_local(|| predict(black_box(&model), &opts, &config).unwrap().predictions.len());
}
