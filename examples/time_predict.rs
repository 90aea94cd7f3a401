//! Times one full prediction in process (compilation included) and prints it with the
//! predictions, as JSON: `cargo run --release --example time_predict -- MODEL.toml [REPEAT]`.
//! Used by `benches/side_by_side.py` and for profiling (`valgrind --tool=callgrind`).

use efold::config::Config;
use efold::model::{Model, ModelSpec};
use efold::predict::{predict, Options};
use std::time::Instant;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let path = args
        .get(1)
        .map(String::as_str)
        .unwrap_or("models/pole-order-2-quadratic.toml");
    let repeat: usize = args.get(2).and_then(|r| r.parse().ok()).unwrap_or(2000);
    let spec = ModelSpec::load(std::path::Path::new(path)).expect("a model file");
    let config = Config::default();
    // Three N_* (50, 55, 60), slow roll, the built-in data set.
    let opts = Options::default();
    let mut times = Vec::with_capacity(repeat);
    let mut report = None;
    for _ in 0..repeat.max(1) {
        let t = Instant::now();
        let model = Model::build(&spec, &config).expect("the model compiles");
        let rep = predict(&model, &opts, &config).expect("the model predicts");
        times.push(t.elapsed().as_secs_f64());
        report = Some(rep);
    }
    times.sort_by(f64::total_cmp);
    let rep = report.expect("at least one run");
    let out = serde_json::json!({
        "seconds_median": times[times.len() / 2],
        "seconds_min": times[0],
        "predictions": rep.predictions,
    });
    println!("{}", serde_json::to_string_pretty(&out).expect("json"));
}
