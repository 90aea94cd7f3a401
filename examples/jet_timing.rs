use efold::config::Config;
use efold::model::{Model, ModelSpec};
use std::time::Instant;
fn main() {
    let spec = ModelSpec::load(std::path::Path::new("models/pole-order-2-quadratic.toml")).unwrap();
    let model = Model::build(&spec, &Config::default()).unwrap();
    let mut ev = model.evaluator();
    println!("{}", model.compiled.tape);
    let n = 1_000_000;
    for order in [0usize, 1, 2, 4] {
        let t = Instant::now();
        let mut acc = 0.0;
        for i in 0..n {
            acc += ev.eval_jet(0.5 + (i % 7) as f64 * 0.1, order)[0];
        }
        println!("jet order {order}: {:?} ({acc})", t.elapsed() / n);
    }
    let t = Instant::now();
    let mut acc = 0.0;
    for i in 0..n {
        acc += ev.eval(0.5 + (i % 7) as f64 * 0.1);
    }
    println!("f64: {:?} ({acc})", t.elapsed() / n);
}
