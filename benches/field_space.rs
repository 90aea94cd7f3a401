//! Speed of the field space of a compiled model of several fields: one `local` (a tape
//! evaluation with the whole geometry, G^-1, Christoffel symbols and Riemann tensor) at the
//! start of the shipped models of two and seven fields, and the build of each model.
//!
//! Run with `cargo bench --bench field_space`.

use divan::{black_box, Bencher};
use efold::analysis::multi::space::ModelFieldSpace;
use efold::analysis::multi::{FieldSpace, Local};
use efold::config::Config;
use efold::model::{Model, ModelSpec};

fn main() {
    divan::main();
}

fn spec(name: &str) -> ModelSpec {
    let path = format!("{}/models/several-fields/{name}.toml", env!("CARGO_MANIFEST_DIR"));
    ModelSpec::load(std::path::Path::new(&path)).unwrap()
}

const MODELS: [&str; 3] = [
    "two-pole-fields-merging",
    "two-alphas-turning",
    "seven-equal-pole-fields",
];

/// One point's geometry at the model's start.
#[divan::bench(args = MODELS)]
fn local(b: Bencher, name: &str) {
    let model = Model::build(&spec(name), &Config::default()).unwrap();
    let phi = model.start().unwrap().to_vec();
    let mut space = ModelFieldSpace::new(&model).unwrap();
    let mut at = Local::zeros(phi.len());
    b.bench_local(|| {
        space.local(black_box(&phi), &mut at).unwrap();
        black_box(at.riemann[0])
    });
}

/// Parsing, the symbolic partials and the tape of the whole geometry.
#[divan::bench(args = MODELS)]
fn build(b: Bencher, name: &str) {
    let s = spec(name);
    b.bench(|| Model::build(black_box(&s), &Config::default()).unwrap());
}
