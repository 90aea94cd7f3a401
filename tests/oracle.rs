//! efold's f64 tape against an independent evaluator, the `meval` crate (a general-purpose
//! expression evaluator, not made by this project).
//!
//! Random expressions are generated in the syntax both accept (meval spells the natural log
//! `ln` only, knows no `sech`, and writes power as `^` only), evaluated by both at random points,
//! and required to agree to 1e-12 relative wherever both are finite.

use efold::compile::compile_one;
use efold::ir::Scope;
use proptest::prelude::*;
use proptest::strategy::ValueTree;

/// An expression written twice: for efold (which may use `log`, `sech`, `**`) and for meval.
#[derive(Debug, Clone)]
struct Pair {
    efold: String,
    meval: String,
}

fn leaf() -> impl Strategy<Value = Pair> {
    prop_oneof![
        3 => Just(Pair { efold: "x".into(), meval: "x".into() }),
        1 => (1u32..20).prop_map(|n| Pair { efold: n.to_string(), meval: n.to_string() }),
        1 => (1u32..999, 0u32..3).prop_map(|(m, e)| {
            let s = format!("{}.{:03}e-{e}", m / 100, m % 1000);
            Pair { efold: s.clone(), meval: s }
        }),
        1 => Just(Pair { efold: "pi".into(), meval: "pi".into() }),
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
                    Pair {
                        efold: wrap(&format!("{} {e_op} {}", paren_atom(&a.efold), paren_atom(&b.efold))),
                        meval: wrap(&format!("{} {m_op} {}", paren_atom(&a.meval), paren_atom(&b.meval))),
                    }
                }
            ),
            // unary minus before an operand
            inner.clone().prop_map(|a| Pair {
                efold: format!("-{}", paren_atom(&a.efold)),
                meval: format!("-{}", paren_atom(&a.meval)),
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

fn meval_at(src: &str, x: f64) -> f64 {
    let e: meval::Expr = src.parse().unwrap_or_else(|e| panic!("meval rejected {src}: {e}"));
    e.bind("x").unwrap_or_else(|e| panic!("meval bind {src}: {e}"))(x)
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
            let tol = 1e-12 * want.abs().max(got.abs()).max(1e-300);
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
