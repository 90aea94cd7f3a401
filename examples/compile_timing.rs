use efold::config::Limits;
use efold::ir::{Graph, Scope};
use efold::syntax::parse;
use efold::tape::Tape;
use std::time::Instant;
fn main() {
    let l = Limits::default();
    let srcs = ["phi^2/(6*alpha)", "1/(1 - phi^2/(6*alpha))^2"];
    let n = 2000;
    let t = Instant::now();
    for _ in 0..n {
        for s in srcs {
            std::hint::black_box(parse(s, &l).unwrap());
        }
    }
    println!("parse {:?}", t.elapsed() / n);
    let asts: Vec<_> = srcs.iter().map(|s| parse(s, &l).unwrap()).collect();
    let scope = Scope::new("phi", &["alpha"]);
    let t = Instant::now();
    for _ in 0..n {
        let mut g = Graph::new(scope.clone());
        for a in &asts {
            std::hint::black_box(g.lower(a).unwrap());
        }
    }
    println!("lower {:?}", t.elapsed() / n);
    let mut g = Graph::new(scope.clone());
    let roots: Vec<_> = asts.iter().map(|a| g.lower(a).unwrap()).collect();
    let t = Instant::now();
    for _ in 0..n {
        std::hint::black_box(Tape::compile(&g, &roots));
    }
    println!("tape {:?}", t.elapsed() / n);
    let tape = Tape::compile(&g, &roots);
    let t = Instant::now();
    for _ in 0..n {
        std::hint::black_box(tape.evaluator(&[1.0]));
    }
    println!("evaluator {:?}", t.elapsed() / n);
}
