//! Speed of the exact solver: one mode, and 200 modes on all cores, for the order-2 pole model.
//!
//! Run with `cargo bench --bench spectrum`. Numbers are reported in README.md (Performance).

use divan::Bencher;
use efold::config::Config;
use efold::data::DataSet;
use efold::exact::{mode, pivot, run_background, spectrum, Background, Settings};
use efold::model::{Model, ModelSpec};
use efold::predict::{predict, Options};

fn main() {
    divan::main();
}

fn setup() -> (Model, f64) {
    let path = format!("{}/models/pole-order-2-quadratic.toml", env!("CARGO_MANIFEST_DIR"));
    let model = Model::build(
        &ModelSpec::load(std::path::Path::new(&path)).unwrap(),
        &Config::default(),
    )
    .unwrap();
    // start 75 e-folds before the slow-roll end: room for k from 1e-4 Mpc^-1
    let opts = Options {
        n_stars: vec![75.0],
        ..Default::default()
    };
    let phi_start = predict(&model, &opts, &Config::default()).unwrap().predictions[0].phi_star;
    (model, phi_start)
}

/// One scalar-and-tensor mode at the pivot, background given.
#[divan::bench]
fn single_mode(b: Bencher) {
    let (model, phi_start) = setup();
    let bg = Background::new(&model);
    let s = Settings::default();
    let run = run_background(&bg, [phi_start, bg.attractor(phi_start)], 1e4, &s).unwrap();
    let piv = pivot(&bg, &run, 55.0, &s).unwrap();
    b.bench_local(|| mode(&bg, &run, piv, 1.0, &s).unwrap().p_s);
}

/// The whole spectrum for N modes between 1e-4 and 1e14 Mpc^-1, background included.
#[divan::bench(args = [50, 100, 200])]
fn modes(b: Bencher, n: usize) {
    let (model, phi_start) = setup();
    let s = Settings::default();
    let ks: Vec<f64> = (0..n)
        .map(|i| (1e-4f64.ln() + (1e14f64.ln() - 1e-4f64.ln()) * i as f64 / (n - 1) as f64).exp())
        .collect();
    let a_s = DataSet::builtin().a_s();
    b.bench_local(|| {
        let bg = Background::new(&model);
        let run = run_background(&bg, [phi_start, bg.attractor(phi_start)], 1e4, &s).unwrap();
        spectrum(&model, &run, 55.0, &ks, a_s, 0.05, &s).unwrap().rows.len()
    });
}
