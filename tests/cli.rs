//! The real binary, run as a user would: outputs, rendered errors and exit codes.

mod common;
use common::efold;

#[test]
fn eval_json_has_value_and_derivatives() {
    // V = phi^2/(6 alpha) at alpha = 1/3: V(0.7) = 0.245, V' = phi/(3 alpha) = 0.7, V'' = 1.
    let r = efold(&[
        "eval",
        "phi^2/(6*alpha)",
        "--at",
        "phi=0.7",
        "--param",
        "alpha=1/3",
        "--order",
        "3",
        "--format",
        "json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    approx::assert_relative_eq!(v["value"].as_f64().unwrap(), 0.245, max_relative = 1e-15);
    let d: Vec<f64> = v["derivatives"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect();
    assert_eq!(d.len(), 3);
    approx::assert_relative_eq!(d[0], 0.7, max_relative = 1e-15);
    approx::assert_relative_eq!(d[1], 1.0, max_relative = 1e-15);
    assert_eq!(d[2], 0.0);
}

#[test]
fn eval_text_and_field_from_at() {
    let r = efold(&["eval", "exp(2*x)", "--at", "x=0", "--order", "2"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    insta::assert_snapshot!(r.stdout);
}

#[test]
fn emit_views() {
    let r = efold(&[
        "compile",
        "1 - tanh(phi/sqrt(6*alpha))^2 * exp(-phi)",
        "--param",
        "alpha=1",
        "--order",
        "1",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    insta::assert_snapshot!(r.stdout);
}

/// Each kind of bad input: a rendered error with a caret, exit code 2, nothing on stdout.
#[test]
fn rendered_errors() {
    let deep = "(".repeat(70) + "phi" + &")".repeat(70);
    let long = "phi+".repeat(2600) + "phi";
    let cases: Vec<(&str, Vec<&str>)> = vec![
        ("empty", vec!["eval", "  ", "--at", "phi=1"]),
        ("unclosed", vec!["eval", "exp(-(phi^2)", "--at", "phi=1"]),
        ("unmatched", vec!["eval", "phi^2)", "--at", "phi=1"]),
        ("unexpected", vec!["eval", "2 phi", "--at", "phi=1"]),
        ("dangling_operator", vec!["eval", "phi^2 +", "--at", "phi=1"]),
        ("bad_number", vec!["eval", "1e400*phi", "--at", "phi=1"]),
        ("too_deep", vec!["eval", &deep, "--at", "phi=1"]),
        ("too_long", vec!["eval", &long, "--at", "phi=1"]),
        ("unknown_function", vec!["eval", "1 - tanhh(phi)^2", "--at", "phi=1"]),
        (
            "variable_as_function",
            vec!["eval", "alpha(phi+1)", "--at", "phi=1", "--param", "alpha=2"],
        ),
        (
            "unknown_name",
            vec!["eval", "phi^2/(6*alhpa)", "--at", "phi=1", "--param", "alpha=2"],
        ),
        ("arity", vec!["eval", "pow(phi)", "--at", "phi=1"]),
        ("function_as_value", vec!["eval", "exp*phi", "--at", "phi=1"]),
        ("param_form", vec!["eval", "phi", "--at", "phi=1", "--param", "alpha"]),
        (
            "param_expression",
            vec!["eval", "phi", "--at", "phi=1", "--param", "alpha=1/(3"],
        ),
        (
            "param_uses_field",
            vec!["eval", "phi", "--at", "phi=1", "--param", "alpha=phi"],
        ),
        ("nan_at_point", vec!["eval", "sqrt(1 - phi^2)", "--at", "phi=2"]),
        ("abs_kink", vec!["eval", "abs(phi)", "--at", "phi=0", "--order", "1"]),
        ("order_too_high", vec!["eval", "phi", "--at", "phi=1", "--order", "9"]),
        ("at_other_name", vec!["eval", "phi", "--at", "x=1", "--field", "phi"]),
    ];
    for (name, args) in cases {
        let r = efold(&args);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        assert!(r.stdout.is_empty(), "{name}: stdout {}", r.stdout);
        insta::assert_snapshot!(format!("error_{name}"), r.stderr);
    }
}

#[test]
fn hostile_nesting_from_a_file_sized_argument() {
    // 60 000 parentheses: over the length limit, refused before any parsing.
    let deep = "(".repeat(30_000) + &")".repeat(30_000);
    let r = efold(&["eval", &deep, "--at", "phi=1"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("over the limit"), "{}", r.stderr);
}

/// `compile` shows an expression whose names are not all declared, with the undeclared ones
/// as symbolic parameters; `eval` still needs their values.
#[test]
fn compile_treats_undeclared_names_as_symbolic_parameters() {
    let r = efold(&["compile", "phi^2*alpha"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    // d/dphi (alpha phi^2) = 2 alpha phi, d^2 = 2 alpha (calculus)
    assert!(r.stdout.contains("d^1/dphi^1 = alpha*(2*phi)"), "{}", r.stdout);
    assert!(r.stdout.contains("d^2/dphi^2 = 2*alpha"), "{}", r.stdout);
    insta::assert_snapshot!(r.stdout);
    let e = efold(&["eval", "phi^2*alpha", "--at", "phi=1"]);
    assert_eq!(e.code, 2);
    assert!(e.stderr.contains("unknown name `alpha`"), "{}", e.stderr);
    // a function used as a value is still an error, not a parameter
    let f = efold(&["compile", "phi^2*sin"]);
    assert_eq!(f.code, 2);
    assert!(f.stderr.contains("`sin` is a function"), "{}", f.stderr);
}

fn help(command: &[&str]) -> String {
    let mut args = command.to_vec();
    args.push("--help");
    let r = efold(&args);
    assert_eq!(r.code, 0, "{command:?}: {}", r.stderr);
    r.stdout
}

/// The paragraph of one option in a --help text (up to the next option).
fn option_help(text: &str, flag: &str) -> String {
    let start = text
        .find(&format!("      {flag} "))
        .unwrap_or_else(|| panic!("{flag} in {text}"));
    let rest = &text[start + 6..];
    let end = rest.find("\n  -").unwrap_or(rest.len());
    rest[..end].to_string()
}

#[test]
fn compile_and_spectrum_have_their_own_option_docs() {
    let compile = option_help(&help(&["compile"]), "--field");
    assert!(!compile.contains("--at"), "{compile}");
    assert!(compile.contains("[default: phi]"), "{compile}");
    assert!(option_help(&help(&["eval"]), "--field").contains("--at"));
    let spectrum = option_help(&help(&["spectrum"]), "--format");
    assert!(
        spectrum.contains("one row per k") && !spectrum.contains("N_*"),
        "{spectrum}"
    );
    assert!(option_help(&help(&["predict"]), "--format").contains("one row per N_*"));
}

const MODEL_COMMANDS: [&str; 5] = ["inspect", "predict", "spectrum", "scan", "fit"];

#[test]
fn no_model_suggests_an_example_of_the_same_command() {
    for cmd in MODEL_COMMANDS {
        let mut args = vec![cmd];
        // the flags each command requires, so that the missing model is the only error
        match cmd {
            "scan" => args.extend(["--vary", "alpha=0.1:10:3"]),
            "fit" => args.extend(["--free", "alpha", "--target", "r=0.01"]),
            _ => {}
        }
        let r = efold(&args);
        assert_eq!(r.code, 2, "{cmd}: {}", r.stderr);
        assert!(r.stderr.contains("no model given"), "{cmd}: {}", r.stderr);
        let hint = format!("hint: give a model file, e.g. `efold {cmd} models/pole-order-2-quadratic.toml");
        assert!(r.stderr.contains(&hint), "{cmd}: {}", r.stderr);
    }
}

#[test]
fn the_usage_after_a_bad_flag_shows_the_model_as_optional() {
    for cmd in MODEL_COMMANDS {
        let r = efold(&[cmd, "--bogus"]);
        assert_eq!(r.code, 2, "{cmd}: {}", r.stderr);
        let usage = r
            .stderr
            .lines()
            .find(|l| l.starts_with("Usage: "))
            .unwrap_or_else(|| panic!("{cmd}: {}", r.stderr));
        assert!(
            usage.starts_with(&format!("Usage: efold {cmd} ")) && usage.ends_with(" [MODEL.toml]"),
            "{usage}"
        );
    }
}

/// Every numeric default in every --help is written as a person would: `1e-8`, not
/// `0.00000001`; the ones that matter are pinned.
#[test]
fn numeric_defaults_print_in_short_form() {
    let commands: [&[&str]; 12] = [
        &[],
        &["eval"],
        &["compile"],
        &["inspect"],
        &["predict"],
        &["spectrum"],
        &["scan"],
        &["merge"],
        &["fit"],
        &["golden", "write"],
        &["golden", "check"],
        &["watch"],
    ];
    for c in commands {
        let text = help(c);
        for d in text.split("[default: ").skip(1) {
            let value = &d[..d.find(']').unwrap()];
            if let Ok(x) = value.parse::<f64>() {
                let short = x == 0.0 || x.abs() >= 1e-3 || value.contains('e');
                assert!(short, "{c:?}: [default: {value}]");
            }
        }
    }
    assert!(option_help(&help(&["golden", "check"]), "--tolerance").contains("[default: 1e-8]"));
    assert!(option_help(&help(&["watch"]), "--tolerance").contains("[default: 1e-10]"));
    assert!(option_help(&help(&["spectrum"]), "--k-min").contains("[default: 1e-4]"));
}
