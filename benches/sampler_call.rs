//! The call in a sampler's inner loop, in Rust: a built model rebound to a new parameter value
//! and predicted at three N_* (50, 55, 60, slow roll), as the JSON value `efold predict --format
//! json` prints; exactly what `model.with_params(alpha=...).predict(efolds=[50, 55, 60])` runs
//! in the Python module (`python/bench_sampler.py` times that call and the `efold predict`
//! process beside it).
//!
//! Run with `cargo bench --bench sampler_call`.

use divan::{black_box, Bencher};
use efold::api::{predict, PredictRequest};
use efold::config::Config;
use efold::model::{Model, ModelSpec};

fn main() {
    divan::main();
}

fn model(name: &str) -> Model {
    let path = format!("{}/models/{name}.toml", env!("CARGO_MANIFEST_DIR"));
    Model::build(
        &ModelSpec::load(std::path::Path::new(&path)).unwrap(),
        &Config::default(),
    )
    .unwrap()
}

/// Clone the built model, rebind `alpha` (alternating between two values, so that nothing is
/// reused from the previous call), predict, and build the JSON value.
#[divan::bench]
fn rebind_and_predict(b: Bencher) {
    let base = model("pole-order-2-quadratic");
    let req = PredictRequest {
        efolds: Some(vec![50.0, 55.0, 60.0]),
        ..PredictRequest::default()
    };
    let mut i = 0u64;
    b.bench_local(|| {
        i += 1;
        let alpha = if i.is_multiple_of(2) { 0.9 } else { 1.1 };
        let config = Config::default();
        let mut m = black_box(&base).clone();
        m.rebind(&[("alpha", alpha)], &config).unwrap();
        predict(&m, &req, &config).unwrap()
    });
}
