//! Speed of a two-parameter fit: alpha and beta of the order-2 pole model with a quartic
//! correction, fitted to (n_s, r) at N_* = 55 from a distant start.
//!
//! Run with `cargo bench --bench fit`.

use divan::Bencher;
use efold::config::Config;
use efold::data::DataSet;
use efold::fit::{fit, Observable, Target};
use efold::model::ModelSpec;

fn main() {
    divan::main();
}

fn spec() -> ModelSpec {
    let path = format!(
        "{}/models/pole-order-2-quadratic-quartic.toml",
        env!("CARGO_MANIFEST_DIR")
    );
    let mut s = ModelSpec::load(std::path::Path::new(&path)).unwrap();
    s.set_param("alpha", "0.5");
    s.set_param("beta", "0.15");
    s
}

/// Targets made by the model itself at alpha = 2.5, beta = 0.1 (values printed by
/// `efold predict` for those parameters; the fit must find its way back from (0.5, 0.15)).
#[divan::bench(sample_count = 5)]
fn fit_two_parameters(b: Bencher) {
    let start = spec();
    let targets = [
        Target {
            observable: Observable::NS,
            value: 0.962_945_436_119_210_4,
        },
        Target {
            observable: Observable::R,
            value: 0.009_752_818_243_888_31,
        },
    ];
    let data = DataSet::builtin();
    let config = Config::default();
    let free = ["alpha".to_string(), "beta".to_string()];
    b.bench_local(|| {
        fit(&start, &free, &targets, 55.0, &data, &config, &Default::default())
            .map(|f| f.iterations)
            .unwrap_or(0)
    });
}
