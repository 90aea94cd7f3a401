//! Speed of one multi-field prediction at three N_* (50, 55, 60): the background, the
//! trajectory, five Mukhanov–Sasaki modes per N_* (15 in all, each with its own background
//! from k/aH = 100 to the end), and with `delta_n` the slow-roll delta-N (4 n^2 + 1 background
//! runs per N_*). On the closed-form field spaces of the reference models
//! (tests/reference/MULTIFIELD.md): B, two quadratics with mass ratio 9, and D, seven pole
//! fields. One thread. The same on the shipped models, compiled (the geometry from the tape):
//! `compiled` with the model's file name.
//!
//! Run with `cargo bench --bench multifield`.

use divan::{black_box, Bencher};
use efold::analysis::multi::closed_form::{Diagonal, Metric1};
use efold::analysis::multi::predict::{predict, MultiSettings};
use efold::analysis::multi::space::ModelFieldSpace;
use efold::config::Config;
use efold::model::{Model, ModelSpec};

fn main() {
    divan::main();
}

const N_STARS: [f64; 3] = [50.0, 55.0, 60.0];

fn settings(delta_n: bool) -> MultiSettings {
    MultiSettings {
        delta_n,
        ..MultiSettings::default()
    }
}

/// Model B: V = (x^2 + 9 y^2)/2, G = 1, from (12, 12) on the attractor.
#[divan::bench(args = [false, true])]
fn two_fields(b: Bencher, delta_n: bool) {
    let s = settings(delta_n);
    b.bench_local(|| {
        let mut space = Diagonal::quadratic([1.0, 9.0], Metric1::Flat);
        predict(&mut space, black_box(&[12.0, 12.0]), None, &N_STARS, &s)
            .unwrap()
            .predictions
            .len()
    });
}

/// Model D: seven fields u_i with the pole metric a = 1/3, V = sum u_i^2/14, from the
/// diagonal 80 slow-roll e-folds before the end.
#[divan::bench(args = [false, true], sample_count = 3, sample_size = 1)]
fn seven_fields(b: Bencher, delta_n: bool) {
    let s = settings(delta_n);
    let start = [1.3844171397586063; 7];
    b.bench_local(|| {
        let mut space = Diagonal {
            c: vec![1.0 / 14.0; 7],
            metric: vec![Metric1::Pole(1.0 / 3.0); 7],
        };
        predict(&mut space, black_box(&start), None, &N_STARS, &s)
            .unwrap()
            .predictions
            .len()
    });
}

/// A shipped model of several fields, compiled.
fn shipped(name: &str) -> Model {
    let path = format!("{}/models/several-fields/{name}.toml", env!("CARGO_MANIFEST_DIR"));
    let spec = ModelSpec::load(std::path::Path::new(&path)).expect("a shipped model");
    Model::build(&spec, &Config::default()).expect("it builds")
}

/// The shipped models, compiled, from their [start], with and without delta-N: what
/// `efold predict` computes, without the process around it.
#[divan::bench(
    args = [
        ("two-field-quadratic-mass-ratio", false),
        ("two-field-quadratic-mass-ratio", true),
        ("two-pole-fields-merging", true),
        ("two-alphas-turning", true),
        ("seven-equal-pole-fields", false),
        ("seven-equal-pole-fields", true),
    ],
    sample_count = 5,
    sample_size = 1
)]
fn compiled(b: Bencher, (name, delta_n): (&str, bool)) {
    let model = shipped(name);
    let s = settings(delta_n);
    b.bench_local(|| {
        let mut space = ModelFieldSpace::new(&model).expect("several fields");
        let (start, velocity) = space.start().unwrap();
        predict(&mut space, black_box(&start), Some(&velocity), &N_STARS, &s)
            .unwrap()
            .predictions
            .len()
    });
}
