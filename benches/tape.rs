//! Speed of the compiled evaluator against native Rust and a general-purpose evaluator (meval).
//!
//! Run with `cargo bench --bench tape`. Numbers are reported in README.md (Performance).

use divan::{black_box, Bencher};
use efold::compile::{compile, compile_one};
use efold::config::Limits;
use efold::ir::Scope;

fn main() {
    check_hand_written_derivatives();
    divan::main();
}

/// The plateau-with-decay expression of the benchmarks, with alpha = 1.
const PLATEAU: &str = "1 - tanh(phi/sqrt(6*alpha))^2 * exp(-phi)";
const ALPHA: f64 = 1.0;
const X: f64 = 0.7;

fn polynomial_text() -> String {
    (0..20)
        .map(|k| match k {
            0 => "1".to_string(),
            1 => "2*phi".to_string(),
            _ => format!("{}*phi^{k}", k + 1),
        })
        .collect::<Vec<_>>()
        .join(" + ")
}

/// meval's bound closure for the plateau expression, alpha set.
fn meval_plateau() -> impl Fn(f64) -> f64 {
    let mut ctx = meval::Context::new();
    ctx.var("alpha", ALPHA);
    let e: meval::Expr = PLATEAU.parse().unwrap();
    e.bind_with_context(ctx, "phi").unwrap()
}

#[inline(never)]
fn native_plateau(x: f64, alpha: f64) -> f64 {
    let t = (x / (6.0 * alpha).sqrt()).tanh();
    1.0 - t * t * (-x).exp()
}

#[inline(never)]
fn native_polynomial(x: f64) -> f64 {
    1.0 + 2.0 * x
        + 3.0 * x.powi(2)
        + 4.0 * x.powi(3)
        + 5.0 * x.powi(4)
        + 6.0 * x.powi(5)
        + 7.0 * x.powi(6)
        + 8.0 * x.powi(7)
        + 9.0 * x.powi(8)
        + 10.0 * x.powi(9)
        + 11.0 * x.powi(10)
        + 12.0 * x.powi(11)
        + 13.0 * x.powi(12)
        + 14.0 * x.powi(13)
        + 15.0 * x.powi(14)
        + 16.0 * x.powi(15)
        + 17.0 * x.powi(16)
        + 18.0 * x.powi(17)
        + 19.0 * x.powi(18)
        + 20.0 * x.powi(19)
}

/// f = 1 - T^2 e^{-x}, T = tanh(x/s), s = sqrt(6 alpha), and its first four derivatives written
/// out by hand: the derivatives of g = T^2 are polynomials in T (d/dx P(T) = P'(T)(1 - T^2)/s),
/// and (g e^{-x})^(n) = sum_k C(n,k) g^(k) (-1)^(n-k) e^{-x}.
#[inline(never)]
fn hand_plateau_derivatives(x: f64, alpha: f64) -> [f64; 5] {
    let s = (6.0 * alpha).sqrt();
    let t = (x / s).tanh();
    let e = (-x).exp();
    let t2 = t * t;
    let g = [
        t2,
        (2.0 * t - 2.0 * t * t2) / s,
        (2.0 - 8.0 * t2 + 6.0 * t2 * t2) / (s * s),
        (-16.0 * t + 40.0 * t * t2 - 24.0 * t * t2 * t2) / (s * s * s),
        (-16.0 + 136.0 * t2 - 240.0 * t2 * t2 + 120.0 * t2 * t2 * t2) / (s * s * s * s),
    ];
    const C: [[f64; 5]; 5] = [
        [1.0, 0.0, 0.0, 0.0, 0.0],
        [1.0, 1.0, 0.0, 0.0, 0.0],
        [1.0, 2.0, 1.0, 0.0, 0.0],
        [1.0, 3.0, 3.0, 1.0, 0.0],
        [1.0, 4.0, 6.0, 4.0, 1.0],
    ];
    let mut f = [0.0; 5];
    for n in 0..5 {
        let mut acc = 0.0;
        for k in 0..=n {
            let sign = if (n - k) % 2 == 0 { 1.0 } else { -1.0 };
            acc += C[n][k] * g[k] * sign;
        }
        f[n] = -acc * e;
    }
    f[0] += 1.0;
    f
}

/// The hand-written derivatives must agree with the jets, or the comparison means nothing.
fn check_hand_written_derivatives() {
    let c = compile_one(PLATEAU, &Scope::new("phi", &["alpha"])).unwrap();
    let mut ev = c.tape.evaluator(&[ALPHA]);
    for x in [0.1, 0.7, 2.0, 5.0] {
        let jet = ev.derivatives(x, 4);
        let hand = hand_plateau_derivatives(x, ALPHA);
        for k in 0..5 {
            assert!(
                (jet[k] - hand[k]).abs() <= 1e-13 * (1.0 + hand[k].abs()),
                "order {k} at {x}"
            );
        }
    }
}

mod f64_eval {
    use super::*;

    #[divan::bench]
    fn plateau_native() -> f64 {
        native_plateau(black_box(X), black_box(ALPHA))
    }

    #[divan::bench]
    fn plateau_tape(b: Bencher) {
        let c = compile_one(PLATEAU, &Scope::new("phi", &["alpha"])).unwrap();
        let mut ev = c.tape.evaluator(&[ALPHA]);
        b.bench_local(|| ev.eval(black_box(X)));
    }

    #[divan::bench]
    fn plateau_meval(b: Bencher) {
        let f = meval_plateau();
        b.bench_local(|| f(black_box(X)));
    }

    #[divan::bench]
    fn polynomial_native() -> f64 {
        native_polynomial(black_box(X))
    }

    #[divan::bench]
    fn polynomial_tape(b: Bencher) {
        let c = compile_one(&polynomial_text(), &Scope::new("phi", &[])).unwrap();
        let mut ev = c.tape.evaluator(&[]);
        assert!((ev.eval(X) - native_polynomial(X)).abs() < 1e-12);
        b.bench_local(|| ev.eval(black_box(X)));
    }

    #[divan::bench]
    fn polynomial_meval(b: Bencher) {
        let e: meval::Expr = polynomial_text().parse().unwrap();
        let f = e.bind("phi").unwrap();
        b.bench_local(|| f(black_box(X)));
    }
}

/// Sixteen points per call, the batch evaluator's width ([`efold::tape::BATCH`]): the native
/// closures and meval in a loop over the points, the tape in one batch. Divide the times by 16
/// for the cost per point (divan also prints the rate in points per second).
mod f64_batch_of_16 {
    use super::*;
    use divan::counter::ItemsCount;
    use efold::tape::BATCH;

    fn points() -> [f64; BATCH] {
        std::array::from_fn(|j| X + 0.01 * j as f64)
    }

    #[divan::bench]
    fn plateau_native(b: Bencher) {
        let xs = points();
        b.counter(ItemsCount::new(BATCH)).bench_local(|| {
            let xs = black_box(&xs);
            xs.map(|x| native_plateau(x, black_box(ALPHA)))
        });
    }

    /// One batch of the compiled `src` per iteration.
    fn tape_batch(b: Bencher, src: &str, params: &[&str], values: &[f64]) {
        let c = compile_one(src, &Scope::new("phi", params)).unwrap();
        let mut ev = c.tape.evaluator(values);
        let xs = points();
        ev.eval_batch(&xs); // warm: the first call detects the processor's vector extensions
        b.counter(ItemsCount::new(BATCH)).bench_local(|| {
            ev.eval_batch(black_box(&xs));
            ev.batch_output(0)[BATCH - 1]
        });
    }

    #[divan::bench]
    fn plateau_tape(b: Bencher) {
        tape_batch(b, PLATEAU, &["alpha"], &[ALPHA]);
    }

    #[divan::bench]
    fn plateau_meval(b: Bencher) {
        let f = meval_plateau();
        let xs = points();
        b.counter(ItemsCount::new(BATCH)).bench_local(|| black_box(&xs).map(&f));
    }

    #[divan::bench]
    fn polynomial_native(b: Bencher) {
        let xs = points();
        b.counter(ItemsCount::new(BATCH))
            .bench_local(|| black_box(&xs).map(native_polynomial));
    }

    #[divan::bench]
    fn polynomial_tape(b: Bencher) {
        tape_batch(b, &polynomial_text(), &[], &[]);
    }

    #[divan::bench]
    fn polynomial_meval(b: Bencher) {
        let e: meval::Expr = polynomial_text().parse().unwrap();
        let f = e.bind("phi").unwrap();
        let xs = points();
        b.counter(ItemsCount::new(BATCH)).bench_local(|| black_box(&xs).map(&f));
    }
}

mod derivatives {
    use super::*;

    #[divan::bench]
    fn plateau_order4_hand_written() -> [f64; 5] {
        hand_plateau_derivatives(black_box(X), black_box(ALPHA))
    }

    #[divan::bench]
    fn plateau_order4_jet(b: Bencher) {
        let c = compile_one(PLATEAU, &Scope::new("phi", &["alpha"])).unwrap();
        let mut ev = c.tape.evaluator(&[ALPHA]);
        b.bench_local(|| ev.eval_jet(black_box(X), 4)[4]);
    }
}

mod compile_time {
    use super::*;

    /// Potential and kinetic function of the order-2 pole model, parsed to one tape.
    #[divan::bench]
    fn pole_model_v_and_k() -> usize {
        let scope = Scope::new("phi", &["alpha"]);
        let exprs = [
            ("potential", black_box("phi^2/(6*alpha)")),
            ("kinetic", black_box("1/(1 - phi^2/(6*alpha))^2")),
        ];
        compile(&exprs, &scope, &Limits::default()).unwrap().tape.body_len()
    }

    #[divan::bench]
    fn plateau_expression() -> usize {
        compile_one(black_box(PLATEAU), &Scope::new("phi", &["alpha"]))
            .unwrap()
            .tape
            .body_len()
    }
}

/// Parameters as inputs (rebind, then evaluate) against folding them as constants (recompile
/// with the value substituted, then evaluate): the measurement behind the choice in `tape`.
mod bind {
    use super::*;

    #[divan::bench]
    fn rebind_then_eval(b: Bencher) {
        let c = compile_one(PLATEAU, &Scope::new("phi", &["alpha"])).unwrap();
        let mut ev = c.tape.evaluator(&[ALPHA]);
        let mut alpha = 1.0;
        b.bench_local(|| {
            alpha += 1e-9;
            ev.set_params(&[black_box(alpha)]);
            ev.eval(black_box(X))
        });
    }

    #[divan::bench]
    fn fold_recompile_then_eval(b: Bencher) {
        let mut alpha = 1.0;
        b.bench_local(|| {
            alpha += 1e-9;
            let text = PLATEAU.replace("alpha", &format!("{alpha:e}"));
            let c = compile_one(&text, &Scope::new("phi", &[])).unwrap();
            let v = c.tape.evaluator(&[]).eval(black_box(X));
            v
        });
    }

    /// Per-point cost once bound: parameter-only work is hoisted, so the two tapes run the same
    /// per-point instructions.
    #[divan::bench]
    fn eval_with_folded_constants(b: Bencher) {
        let text = PLATEAU.replace("alpha", "1");
        let c = compile_one(&text, &Scope::new("phi", &[])).unwrap();
        let mut ev = c.tape.evaluator(&[]);
        b.bench_local(|| ev.eval(black_box(X)));
    }
}
