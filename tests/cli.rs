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
