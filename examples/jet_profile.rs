//! Instruction profile of order-4 jets of the plateau expression (for `valgrind --tool=callgrind`).
use efold::compile::compile_one;
use efold::ir::Scope;
fn main() {
    let c = compile_one(
        "1 - tanh(phi/sqrt(6*alpha))^2 * exp(-phi)",
        &Scope::new("phi", &["alpha"]),
    )
    .unwrap();
    let mut ev = c.tape.evaluator(&[1.0]);
    let mut acc = 0.0;
    for i in 0..200_000 {
        acc += ev.eval_jet(0.5 + (i % 7) as f64 * 0.01, 4)[4];
    }
    println!("{acc}");
}
