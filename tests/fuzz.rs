//! Fuzzing the expression parser, the compiler, the model and data loaders and a cheap
//! analysis with random and mutated input: every entry point must return (an error is fine),
//! never panic, and every error must render.
//!
//! Bounded for CI: a fixed seed (proptest's deterministic runner) and a fixed number of cases
//! per target (150 each). `EFOLD_FUZZ_CASES=N` sets the number of cases of every target, to
//! search longer locally; the seed stays fixed, so a larger N extends the same sequence.

use efold::config::Config;
use efold::data::DataSet;
use efold::model::{Model, ModelSpec};
use efold::{compile, inspect, ir::Scope, syntax};
use proptest::prelude::*;
use proptest::strategy::ValueTree;
use proptest::test_runner::TestRunner;

fn cases(default: usize) -> usize {
    std::env::var("EFOLD_FUZZ_CASES")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(default)
}

/// Numbers that stress the parser and the folder: huge, tiny, subnormal, overflowing, signed
/// zeros, malformed exponents.
const NUMBERS: [&str; 16] = [
    "0", "1", "2", "0.5", ".5", "1e308", "1e309", "1e-320", "1e-400", "-0", "1e999", "2.5E+4", "1e", "1.2.3", "9",
    "1e-3",
];

/// Names: the field, a parameter, the constant, functions used as values, unknown names,
/// words that read as non-finite numbers.
const NAMES: [&str; 10] = ["phi", "a", "pi", "exp", "nan", "inf", "NaN", "x", "phi_", "tanhh"];

const FUNCS: [&str; 20] = [
    "exp", "log", "ln", "sqrt", "sin", "cos", "tan", "asin", "acos", "atan", "sinh", "cosh", "tanh", "sech", "asinh",
    "acosh", "atanh", "abs", "pow", "foo",
];

/// Random expressions: mostly trees of the grammar (so that they reach the compiler and the
/// analysis), some with wrong arities, unknown names and extreme numbers.
fn expr() -> impl Strategy<Value = String> {
    let leaf = prop_oneof![
        4 => Just("phi".to_string()),
        1 => Just("a".to_string()),
        3 => (0usize..NUMBERS.len()).prop_map(|i| NUMBERS[i].to_string()),
        1 => (0usize..NAMES.len()).prop_map(|i| NAMES[i].to_string()),
    ];
    leaf.prop_recursive(6, 48, 3, |inner| {
        prop_oneof![
            (inner.clone(), 0usize..6, inner.clone(), any::<bool>()).prop_map(|(a, op, b, paren)| {
                let op = ["+", "-", "*", "/", "^", "**"][op];
                if paren {
                    format!("({a}){op}({b})")
                } else {
                    format!("{a} {op} {b}")
                }
            }),
            (0usize..FUNCS.len(), proptest::collection::vec(inner.clone(), 0..3)).prop_map(|(f, args)| format!(
                "{}({})",
                FUNCS[f],
                args.join(", ")
            )),
            inner.clone().prop_map(|a| format!("-{a}")),
            inner.prop_map(|a| format!("({a})")),
        ]
    })
}

/// Token soup and shapes the grammar must refuse: unbalanced parentheses, dangling operators,
/// deep nesting, long chains, stray bytes.
fn soup() -> impl Strategy<Value = String> {
    let token = prop_oneof![
        Just("(".to_string()),
        Just(")".to_string()),
        Just(",".to_string()),
        Just("+".to_string()),
        Just("^".to_string()),
        Just("*".to_string()),
        Just("-".to_string()),
        Just(" ".to_string()),
        Just("\u{e9}".to_string()),
        Just("\t".to_string()),
        (0usize..NUMBERS.len()).prop_map(|i| NUMBERS[i].to_string()),
        (0usize..NAMES.len()).prop_map(|i| NAMES[i].to_string()),
        (0usize..FUNCS.len()).prop_map(|i| FUNCS[i].to_string()),
    ];
    prop_oneof![
        3 => proptest::collection::vec(token, 0..40).prop_map(|t| t.concat()),
        1 => (1usize..400).prop_map(|n| format!("{}phi{}", "(".repeat(n), ")".repeat(n))),
        1 => (1usize..400).prop_map(|n| format!("{}phi", "sin(".repeat(n))),
        1 => (1usize..3000).prop_map(|n| vec!["2"; n].join("^")),
        1 => (1usize..3000).prop_map(|n| vec!["phi"; n].join("+")),
        1 => (1usize..200).prop_map(|n| "-".repeat(n) + "phi"),
    ]
}

/// Runs `f` on each generated value; a panic is reported with the input that caused it.
fn run<S: Strategy>(strategy: S, n: usize, mut f: impl FnMut(&S::Value))
where
    S::Value: std::fmt::Debug,
{
    let mut runner = TestRunner::deterministic();
    for _ in 0..n {
        let value = strategy.new_tree(&mut runner).expect("a value").current();
        let result = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| f(&value)));
        if result.is_err() {
            panic!("panicked on input {value:?}");
        }
    }
}

/// The library entry points on one expression as V: parse, compile, evaluate with jets,
/// build a model with it, and inspect that model without a table.
fn exercise_expression(text: &str) {
    let config = Config::default();
    let _ = syntax::parse(text, &config.limits);
    match compile::compile(&[("V", text)], &Scope::new("phi", &["a"]), &config.limits) {
        Err(e) => {
            let _ = e.render();
        }
        Ok(c) => {
            let mut ev = c.tape.evaluator(&[0.7]);
            for x in [-2.0, 0.0, 0.3, 1e10] {
                let _ = ev.eval(x);
                let _ = ev.eval_jet(x, 4);
            }
        }
    }
    let mut spec = ModelSpec::inline(text, None);
    spec.set_param("a", "0.7");
    exercise_spec(&spec, &config);
}

fn exercise_spec(spec: &ModelSpec, config: &Config) {
    match Model::build(spec, config) {
        Err(e) => {
            let _ = e.render();
        }
        Ok(model) => {
            if let Err(e) = inspect::inspect(&model, config, None) {
                let _ = e.diagnostic().render(None);
            }
        }
    }
}

#[test]
fn random_expressions_do_not_panic() {
    run(expr(), cases(150), |t| exercise_expression(t));
}

#[test]
fn malformed_expressions_do_not_panic() {
    run(soup(), cases(150), |t| exercise_expression(t));
}

/// The shipped model files, the seeds of the mutations.
fn shipped_models() -> Vec<String> {
    let mut paths: Vec<_> = std::fs::read_dir(concat!(env!("CARGO_MANIFEST_DIR"), "/models"))
        .expect("the models directory")
        .map(|e| e.expect("an entry").path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    paths.sort();
    paths
        .iter()
        .map(|p| std::fs::read_to_string(p).expect("a model file"))
        .collect()
}

/// Strings injected by the mutations.
const INJECT: [&str; 14] = [
    "nan",
    "inf",
    "-inf",
    "1e999",
    "1e308",
    "1e-320",
    "0",
    "-1",
    "\"",
    "[",
    "]",
    "=",
    "\n[params]\n",
    "((((((((((",
];

/// One mutation of a text, chosen by `kind`, placed by `at` (a fraction of the length).
fn mutate(text: &str, kind: usize, at: f64, pick: usize, byte: u8) -> String {
    let chars: Vec<char> = text.chars().collect();
    let i = ((chars.len() as f64) * at) as usize;
    let i = i.min(chars.len());
    let lines: Vec<&str> = text.lines().collect();
    let line = ((lines.len() as f64) * at) as usize;
    let line = line.min(lines.len().saturating_sub(1));
    match kind {
        // a random printable byte in place of one character
        0 => {
            let mut c = chars.clone();
            if i < c.len() {
                c[i] = char::from(32 + byte % 95);
            }
            c.into_iter().collect()
        }
        // truncation
        1 => chars[..i].iter().collect(),
        // a duplicated line
        2 => {
            let mut l = lines.clone();
            if !l.is_empty() {
                l.insert(line, lines[line]);
            }
            l.join("\n")
        }
        // an injected token
        3 => {
            let mut c: String = chars[..i].iter().collect();
            c.push_str(INJECT[pick % INJECT.len()]);
            c.extend(&chars[i..]);
            c
        }
        // every number of one line replaced by a non-finite or huge one
        4 => {
            let mut l: Vec<String> = lines.iter().map(|s| s.to_string()).collect();
            if let Some(s) = l.get_mut(line) {
                let repl = ["nan", "inf", "1e999", "1e308", "-0.0", "1e-400"][pick % 6];
                let mut out = String::new();
                let mut in_number = false;
                for ch in s.chars() {
                    if ch.is_ascii_digit() || (in_number && (ch == '.' || ch == 'e')) {
                        if !in_number {
                            out.push_str(repl);
                        }
                        in_number = true;
                    } else {
                        in_number = false;
                        out.push(ch);
                    }
                }
                *s = out;
            }
            l.join("\n")
        }
        // the potential nested deeply
        5 => {
            let depth = 1 + pick % 300;
            let deep = format!("potential = \"{}phi^2{}\"", "(".repeat(depth), ")".repeat(depth));
            lines
                .iter()
                .map(|l| if l.starts_with("potential") { deep.as_str() } else { l })
                .collect::<Vec<_>>()
                .join("\n")
        }
        // a deleted line
        _ => {
            let mut l = lines.clone();
            if !l.is_empty() {
                l.remove(line);
            }
            l.join("\n")
        }
    }
}

fn mutation() -> impl Strategy<Value = (usize, Vec<(usize, f64, usize, u8)>)> {
    (
        0usize..64,
        proptest::collection::vec((0usize..7, 0.0f64..1.0, 0usize..1000, any::<u8>()), 1..4),
    )
}

#[test]
fn mutated_model_files_do_not_panic() {
    let seeds = shipped_models();
    let config = Config::default();
    run(mutation(), cases(150), |(seed, edits)| {
        let mut text = seeds[seed % seeds.len()].clone();
        for &(kind, at, pick, byte) in edits {
            text = mutate(&text, kind, at, pick, byte);
        }
        match ModelSpec::from_toml(&text, "fuzz.toml") {
            Err(e) => {
                let _ = e.render();
            }
            Ok(spec) => exercise_spec(&spec, &config),
        }
    });
}

#[test]
fn mutated_data_files_do_not_panic() {
    let seed = include_str!("../data/planck2018-bk18.toml");
    run(mutation(), cases(150), |(_, edits)| {
        let mut text = seed.to_string();
        for &(kind, at, pick, byte) in edits {
            text = mutate(&text, kind, at, pick, byte);
        }
        if let Ok(d) = DataSet::parse(&text, "fuzz.toml") {
            // What validation lets through is usable.
            assert!(d.a_s().is_finite() && d.a_s() > 0.0);
            assert!(d.k_star_planck().is_finite() && d.k_star_planck() > 0.0);
            assert!(d.t0_planck().is_finite() && d.t0_planck() > 0.0);
        }
    });
}
