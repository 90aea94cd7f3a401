//! efold's f64 tape against an independent evaluator, the `meval` crate (a general-purpose
//! expression evaluator, not made by this project).
//!
//! Random expressions are generated in the syntax both accept (meval spells the natural log
//! `ln` only, knows no `sech`, and writes power as `^` only), evaluated by both at random points,
//! and required to agree to 1e-12 relative wherever both are finite. meval is given efold's exp
//! and tanh (see `meval_at`); every other function is the platform's in both.

use efold::compile::compile_one;
use efold::ir::Scope;
use proptest::prelude::*;
use proptest::strategy::ValueTree;

/// An expression written twice: for efold (which may use `log`, `sech`, `**`) and for meval;
/// and, in meval's syntax, the scale of the rounding errors of evaluating it as written.
///
/// The scale is the running error bound of sums and products (Higham, *Accuracy and Stability
/// of Numerical Algorithms*, 2nd ed., SIAM 2002, sec. 3.3): |a| + |b| for a sum of terms
/// evaluated separately, |a| S(b) + S(a) |b| for a product, and so on. It is what a sum that
/// cancels (x + x^5 - x) can be wrong by in meval, which evaluates it as written, while efold
/// combines the terms of a polynomial first and gets x^5 exactly. Through a function the scale
/// restarts at |f(a)|.
#[derive(Debug, Clone)]
struct Pair {
    efold: String,
    meval: String,
    scale: String,
}

/// A leaf whose scale is its own magnitude.
fn same(s: String) -> Pair {
    Pair {
        efold: s.clone(),
        meval: s.clone(),
        scale: format!("abs({s})"),
    }
}

fn leaf() -> impl Strategy<Value = Pair> {
    prop_oneof![
        3 => Just(same("x".into())),
        1 => (1u32..20).prop_map(|n| same(n.to_string())),
        1 => (1u32..999, 0u32..3).prop_map(|(m, e)| same(format!("{}.{:03}e-{e}", m / 100, m % 1000))),
        1 => Just(same("pi".into())),
    ]
}

const FUNCS: [&str; 17] = [
    "exp", "log", "sqrt", "sin", "cos", "tan", "asin", "acos", "atan", "sinh", "cosh", "tanh", "sech", "asinh",
    "acosh", "atanh", "abs",
];

fn expr() -> impl Strategy<Value = Pair> {
    leaf().prop_recursive(5, 40, 2, |inner| {
        prop_oneof![
            // binary operators, sometimes without parentheses to exercise precedence
            (inner.clone(), 0usize..5, inner.clone(), any::<bool>(), any::<bool>()).prop_map(
                |(a, op, b, paren, stars)| {
                    let (e_op, m_op) = match op {
                        0 => ("+", "+"),
                        1 => ("-", "-"),
                        2 => ("*", "*"),
                        3 => ("/", "/"),
                        _ => (if stars { "**" } else { "^" }, "^"),
                    };
                    let wrap = |s: &str| {
                        if paren {
                            format!("({s})")
                        } else {
                            s.to_string()
                        }
                    };
                    let (am, bm) = (paren_atom(&a.meval), paren_atom(&b.meval));
                    let (sa, sb) = (&a.scale, &b.scale);
                    let scale = match op {
                        0 | 1 => format!("({sa} + {sb})"),
                        2 => format!("({sa} * abs({bm}) + abs({am}) * {sb})"),
                        3 => format!("({sa} / abs({bm}) + abs({am}) * {sb} / ({bm})^2)"),
                        _ => format!("abs({am} ^ {bm})"),
                    };
                    Pair {
                        efold: wrap(&format!("{} {e_op} {}", paren_atom(&a.efold), paren_atom(&b.efold))),
                        meval: wrap(&format!("{am} {m_op} {bm}")),
                        scale,
                    }
                }
            ),
            // unary minus before an operand
            inner.clone().prop_map(|a| Pair {
                efold: format!("-{}", paren_atom(&a.efold)),
                meval: format!("-{}", paren_atom(&a.meval)),
                scale: a.scale,
            }),
            // built-in functions
            (inner, 0usize..FUNCS.len()).prop_map(|(a, f)| {
                let name = FUNCS[f];
                let meval = match name {
                    "log" => format!("ln({})", a.meval),
                    "sech" => format!("(1/cosh({}))", a.meval),
                    _ => format!("{name}({})", a.meval),
                };
                Pair {
                    efold: format!("{name}({})", a.efold),
                    scale: format!("abs({meval})"),
                    meval,
                }
            }),
        ]
    })
}

/// Parenthesises anything that is not a single token or call, so generated operands keep their
/// meaning in both languages (precedence is pinned separately below).
fn paren_atom(s: &str) -> String {
    let simple = s.chars().all(|c| c.is_ascii_alphanumeric() || c == '.')
        || (s.ends_with(')') && s.starts_with(|c: char| c.is_ascii_alphabetic() || c == '('));
    if simple {
        s.to_string()
    } else {
        format!("({s})")
    }
}

/// meval's value, with efold's own exp and tanh in place of the platform's: the two kernels
/// are checked on their own (against mpmath, in `numerics::elementary`), and the last-ulp
/// difference between two good implementations of tanh is magnified without bound by the
/// cancellation in random expressions such as 1 - tanh(6). What this oracle checks is the
/// compiler: parsing, precedence, folding, the tape.
fn meval_at(src: &str, x: f64) -> f64 {
    let e: meval::Expr = src.parse().unwrap_or_else(|e| panic!("meval rejected {src}: {e}"));
    let mut ctx = meval::Context::new();
    ctx.func("exp", efold::numerics::elementary::exp);
    ctx.func("tanh", efold::numerics::elementary::tanh);
    e.bind_with_context(ctx, "x")
        .unwrap_or_else(|e| panic!("meval bind {src}: {e}"))(x)
}

fn efold_at(src: &str, x: f64) -> f64 {
    let c = compile_one(src, &Scope::new("x", &[])).unwrap_or_else(|e| panic!("{}", e.render()));
    c.tape.evaluator(&[]).eval(x)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2000, ..ProptestConfig::default() })]

    #[test]
    fn tape_agrees_with_meval(p in expr(), x in -3.0f64..3.0) {
        let want = meval_at(&p.meval, x);
        let got = efold_at(&p.efold, x);
        if want.is_finite() && got.is_finite() {
            let scale = meval_at(&p.scale, x);
            let scale = if scale.is_finite() { scale } else { 0.0 };
            let tol = 1e-12 * want.abs().max(got.abs()).max(scale).max(1e-300);
            if (got - want).abs() > tol {
                // efold raises to small integer powers by multiplication, meval by `powf`; the
                // few ulps between them are an input rounding that an ill-conditioned outer
                // function (tan of a large argument) can magnify. Accept a result only if meval
                // itself gives it to 1e-12 at a point within 8 ulps of x (backward error).
                let near: Vec<f64> = (-8..=8)
                    .map(|k| meval_at(&p.meval, x * (1.0 + k as f64 * f64::EPSILON)))
                    .filter(|v| v.is_finite())
                    .collect();
                let lo = near.iter().cloned().fold(f64::INFINITY, f64::min);
                let hi = near.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
                prop_assert!(got >= lo - tol && got <= hi + tol,
                    "efold {} = {got}, meval {} = {want} at x = {x} (meval nearby: {lo}..{hi})",
                    p.efold, p.meval);
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 500, ..ProptestConfig::default() })]

    /// The batch evaluator (vectorised, with its own path for exp and tanh) gives the single-point
    /// evaluator's bits on the same random expressions, NaN where it gives NaN.
    #[test]
    fn batches_give_the_single_point_bits(p in expr(), xs in proptest::collection::vec(-3.0f64..3.0, 1..=16)) {
        let c = compile_one(&p.efold, &Scope::new("x", &[])).unwrap();
        let mut one = c.tape.evaluator(&[]);
        let mut batch = c.tape.evaluator(&[]);
        batch.eval_batch(&xs);
        for (j, &x) in xs.iter().enumerate() {
            let (a, b) = (one.eval(x), batch.batch_output(0)[j]);
            prop_assert!(a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()),
                "{} at {x}: one point {a}, batch {b}", p.efold);
        }
    }
}

/// The operator conventions the language documents, pinned against meval: unary minus binds
/// looser than power, power is right-associative and takes a signed exponent.
#[test]
fn operator_conventions_match_meval() {
    let cases = [
        ("-2^2", -4.0),
        ("2^3^2", 512.0),
        ("2^-1", 0.5),
        ("-2^-2", -0.25),
        ("2*-3", -6.0),
    ];
    for (src, want) in cases {
        assert_eq!(meval_at(src, 0.0), want, "meval {src}");
        assert_eq!(efold_at(src, 0.0), want, "efold {src}");
        assert_eq!(efold_at(&src.replace('^', "**"), 0.0), want, "efold {src} with **");
    }
}

/// Printing the IR back to the language round-trips: the reprinted expression evaluates
/// identically (bit for bit) at random points.
#[test]
fn printed_ir_evaluates_identically() {
    let mut runner = proptest::test_runner::TestRunner::deterministic();
    for _ in 0..500 {
        let p = expr().new_tree(&mut runner).unwrap().current();
        let c = compile_one(&p.efold, &Scope::new("x", &[])).unwrap();
        let printed = c.graph.print(c.roots[0]);
        let c2 = compile_one(&printed, &Scope::new("x", &[])).unwrap_or_else(|e| panic!("{printed}: {}", e.render()));
        for i in 0..7 {
            let x = -2.9 + 0.97 * i as f64;
            let (a, b) = (c.tape.evaluator(&[]).eval(x), c2.tape.evaluator(&[]).eval(x));
            assert!(
                a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()),
                "{} -> {printed} at {x}: {a} vs {b}",
                p.efold
            );
        }
    }
}

/// Two cases the random search found, pinned with the true values.
#[test]
fn cancellations_found_by_the_search() {
    // x + x^5 - x: efold combines the polynomial's terms (the linear ones cancel exactly) and
    // returns x^5 to rounding; meval, summing as written, is off by 3e-11 relative here.
    let x = -0.038_483_001_897_021_8f64;
    let got = efold_at("x + (x ^ 5) + (-x)", x);
    assert!((got - x.powi(5)).abs() <= 4.0 * f64::EPSILON * x.powi(5).abs(), "{got}");
    // 1 - tanh(9 - pi) = 1.6310921110050994e-5 (mpmath, 50 digits). tanh within one ulp of
    // its true value near 1 (numerics::elementary) leaves at most 1.1e-16 / 1.6e-5 = 6.8e-12
    // relative in the difference.
    let want = 1.631_092_111_005_099_4e-5;
    let got = efold_at("1 - tanh(9 - pi)", 0.0);
    assert!((got - want).abs() <= 6.8e-12 * want, "{got}");
}
