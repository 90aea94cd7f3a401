use efold::canonical::{find_domain, minimum_of_v};
use efold::config::Config;
use efold::model::{Model, ModelSpec};
use efold::slowroll::{branches, end_of_inflation, phi_stars};
use std::time::Instant;
fn main() {
    let spec = ModelSpec::load(std::path::Path::new("models/pole-order-2-quadratic.toml")).unwrap();
    let config = Config::default();
    let n = 200;
    let t = Instant::now();
    for _ in 0..n {
        let _ = Model::build(&spec, &config).unwrap();
    }
    println!("build {:?}", t.elapsed() / n);
    let model = Model::build(&spec, &config).unwrap();
    let mut ev = model.evaluator();
    let t = Instant::now();
    for _ in 0..n {
        let _ = find_domain(&model, &mut ev).unwrap();
    }
    println!("domain {:?}", t.elapsed() / n);
    let d = find_domain(&model, &mut ev).unwrap();
    let t = Instant::now();
    for _ in 0..n {
        let _ = minimum_of_v(&mut ev, &d.interval);
    }
    println!("min {:?}", t.elapsed() / n);
    let t = Instant::now();
    for _ in 0..n {
        let _ = branches(&mut ev, &d.interval);
    }
    println!("branches {:?}", t.elapsed() / n);
    let b = branches(&mut ev, &d.interval)[1];
    let t = Instant::now();
    for _ in 0..n {
        let _ = end_of_inflation(&mut ev, &b, "phi").unwrap();
    }
    println!("end {:?}", t.elapsed() / n);
    let pe = end_of_inflation(&mut ev, &b, "phi").unwrap();
    let t = Instant::now();
    for _ in 0..n {
        let _ = phi_stars(&mut ev, &b, pe, &[50.0, 55.0, 60.0], &config, "phi").unwrap();
    }
    println!("phi_stars {:?}", t.elapsed() / n);
}
