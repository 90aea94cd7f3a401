//! The Taylor-jet evaluator against three things it does not share code with: derivatives
//! computed by sympy (tests/reference/gen_derivatives.py, committed with its output), the IR's
//! own symbolic derivatives compiled separately, Richardson-extrapolated finite differences of
//! the f64 tape, and handbook values (DLMF).

use approx::assert_relative_eq;
use efold::compile::{compile, compile_one};
use efold::config::Limits;
use efold::ir::Scope;
use efold::tape::{Tape, MAX_ORDER};
use serde_json::Value;

struct Case {
    expr: String,
    names: Vec<String>,
    values: Vec<f64>,
    at: f64,
    derivatives: Vec<f64>,
}

fn reference_cases() -> Vec<Case> {
    let text = include_str!("reference/derivatives.json");
    let json: Value = serde_json::from_str(text).unwrap();
    json.as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let params = c["params"].as_object().unwrap();
            Case {
                expr: c["expr"].as_str().unwrap().to_string(),
                names: params.keys().cloned().collect(),
                values: params.values().map(|v| v.as_f64().unwrap()).collect(),
                at: c["at"].as_f64().unwrap(),
                derivatives: c["derivatives"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|v| v.as_f64().unwrap())
                    .collect(),
            }
        })
        .collect()
}

impl Case {
    fn scope(&self) -> Scope {
        let refs: Vec<&str> = self.names.iter().map(String::as_str).collect();
        Scope::new("phi", &refs)
    }
}

/// Size of the derivatives of order k, for tolerances: a derivative that is zero by accident
/// (sin at a root of its k-th derivative) is judged against its neighbours' scale.
fn scale(d: &[f64], k: usize) -> f64 {
    let lo = k.saturating_sub(1);
    let hi = (k + 1).min(d.len() - 1);
    d[lo..=hi].iter().fold(0.0f64, |m, v| m.max(v.abs())).max(1e-300)
}

/// Every built-in function and the composite expressions of the trade, to order 8, against
/// sympy's exact derivatives (30-digit arithmetic, rounded to double).
#[test]
fn jets_match_sympy_derivatives_to_order_8() {
    let mut worst = [0.0f64; MAX_ORDER + 1];
    for case in reference_cases() {
        let c = compile_one(&case.expr, &case.scope()).unwrap();
        let got = c.tape.evaluator(&case.values).derivatives(case.at, MAX_ORDER);
        for k in 0..=MAX_ORDER {
            let err = (got[k] - case.derivatives[k]).abs() / scale(&case.derivatives, k);
            worst[k] = worst[k].max(err);

            let tol = 1e-13;
            assert!(
                err <= tol,
                "{} order {k}: {} vs {} (rel {err:e})",
                case.expr,
                got[k],
                case.derivatives[k]
            );
        }
    }
    let w: Vec<String> = worst.iter().map(|e| format!("{e:.1e}")).collect();
    eprintln!("worst relative error by order, against sympy: {}", w.join(" "));
}

/// The jets against the IR's symbolic derivatives, each compiled to its own tape: two
/// independent routes to the same numbers.
#[test]
fn jets_match_symbolic_derivatives() {
    for case in reference_cases() {
        let scope = case.scope();
        let mut c = compile_one(&case.expr, &scope).unwrap();
        let jets = c.tape.evaluator(&case.values).derivatives(case.at, 4);
        let mut d = c.roots[0];
        for (k, jet) in jets.iter().enumerate().skip(1) {
            d = c.graph.derivative(d);
            let tape = Tape::compile(&c.graph, &[d]);
            let sym = tape.evaluator(&case.values).eval(case.at);
            assert_relative_eq!(*jet, sym, epsilon = 1e-12 * scale(&jets, k), max_relative = 1e-11);
        }
    }
}

/// First and second derivatives from central differences of the f64 tape with Richardson
/// extrapolation (step h, h/2: error O(h^4)), against the jets.
#[test]
fn jets_match_richardson_finite_differences() {
    for case in reference_cases() {
        let c = compile_one(&case.expr, &case.scope()).unwrap();
        let mut ev = c.tape.evaluator(&case.values);
        let jets = ev.derivatives(case.at, 2);
        let x = case.at;
        let h = 1e-3 * x.abs().max(0.1);
        let mut f = |t: f64| ev.eval(t);
        let d1 = |f: &mut dyn FnMut(f64) -> f64, h: f64| (f(x + h) - f(x - h)) / (2.0 * h);
        let d2 = |f: &mut dyn FnMut(f64) -> f64, h: f64| (f(x + h) - 2.0 * f(x) + f(x - h)) / (h * h);
        let r1 = (4.0 * d1(&mut f, h / 2.0) - d1(&mut f, h)) / 3.0;
        let r2 = (4.0 * d2(&mut f, h / 2.0) - d2(&mut f, h)) / 3.0;
        assert_relative_eq!(jets[1], r1, epsilon = 1e-8 * scale(&jets, 1), max_relative = 1e-8);
        assert_relative_eq!(jets[2], r2, epsilon = 1e-5 * scale(&jets, 2), max_relative = 1e-5);
    }
}

/// DLMF 4.33.3 (equation number from memory): tanh x = x - x^3/3 + 2x^5/15 - 17x^7/315 + ...
#[test]
fn tanh_maclaurin_coefficients_dlmf() {
    let c = compile_one("tanh(phi)", &Scope::new("phi", &[])).unwrap();
    let mut ev = c.tape.evaluator(&[]);
    let jet = *ev.eval_jet(0.0, 7);
    let want = [0.0, 1.0, 0.0, -1.0 / 3.0, 0.0, 2.0 / 15.0, 0.0, -17.0 / 315.0];
    for (k, w) in want.iter().enumerate() {
        assert_relative_eq!(jet[k], *w, epsilon = 1e-16, max_relative = 1e-15);
    }
}

/// DLMF §4.40(ii) (from memory): d/dx arcsinh x = (1 + x^2)^(-1/2), d/dx arccosh x =
/// (x^2 - 1)^(-1/2) for x > 1, d/dx arctanh x = 1/(1 - x^2); the second derivatives follow by
/// differentiating these closed forms once more by hand.
#[test]
fn inverse_hyperbolic_derivatives_dlmf() {
    type Closed = fn(f64) -> [f64; 2];
    let cases: [(&str, Closed, &[f64]); 3] = [
        (
            "asinh(phi)",
            |x| [(1.0 + x * x).powf(-0.5), -x * (1.0 + x * x).powf(-1.5)],
            &[-2.0, -0.3, 0.0, 0.7, 5.0],
        ),
        (
            "acosh(phi)",
            |x| [(x * x - 1.0).powf(-0.5), -x * (x * x - 1.0).powf(-1.5)],
            &[1.1, 1.5, 3.0, 40.0],
        ),
        (
            "atanh(phi)",
            |x| [1.0 / (1.0 - x * x), 2.0 * x / (1.0 - x * x).powi(2)],
            &[-0.9, -0.2, 0.0, 0.5, 0.99],
        ),
    ];
    for (expr, closed, points) in cases {
        let c = compile_one(expr, &Scope::new("phi", &[])).unwrap();
        let mut ev = c.tape.evaluator(&[]);
        for &x in points {
            let d = ev.derivatives(x, 2);
            let want = closed(x);
            assert_relative_eq!(d[1], want[0], max_relative = 1e-14);
            assert_relative_eq!(d[2], want[1], epsilon = 1e-15, max_relative = 1e-13);
        }
    }
}

/// Parameters are inputs: rebinding them changes the result exactly as recompiling with the new
/// value substituted would.
#[test]
fn rebinding_parameters_equals_recompiling() {
    let scope = Scope::new("phi", &["alpha"]);
    let c = compile(
        &[("v", "1 - tanh(phi/sqrt(6*alpha))^2*exp(-phi)")],
        &scope,
        &Limits::default(),
    )
    .unwrap();
    let mut ev = c.tape.evaluator(&[1.0]);
    for alpha in [0.1, 1.0 / 3.0, 7.5] {
        ev.set_params(&[alpha]);
        let text = format!("1 - tanh(phi/sqrt(6*{alpha:e}))^2*exp(-phi)");
        let folded = compile_one(&text, &Scope::new("phi", &[])).unwrap();
        let mut fe = folded.tape.evaluator(&[]);
        for x in [0.1, 1.0, 3.0] {
            assert_eq!(ev.eval(x), fe.eval(x));
            assert_eq!(ev.derivatives(x, 5), fe.derivatives(x, 5));
        }
    }
}

/// The evaluator is shared across threads: one tape, one evaluator per thread.
#[test]
fn one_tape_many_threads() {
    let c = compile_one("sin(phi)^2 + cos(phi)^2", &Scope::new("phi", &[])).unwrap();
    std::thread::scope(|s| {
        for t in 0..4 {
            let tape = &c.tape;
            s.spawn(move || {
                let mut ev = tape.evaluator(&[]);
                for i in 0..1000 {
                    let v = ev.eval(t as f64 + i as f64 * 1e-3);
                    assert!((v - 1.0).abs() < 1e-15);
                }
            });
        }
    });
}
