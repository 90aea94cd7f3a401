//! Bad models of several fields, run through the real binary: each error has its place (a
//! caret into the file or the flag), its hints and exit code 2; and the one-field commands
//! refuse a model of several fields.

mod common;
use common::{efold, efold_in};

/// Runs `efold ARGS` in a directory holding `m.toml` with `text`, so that messages name the
/// file as `m.toml`.
fn run_file(tag: &str, text: &str, args: &[&str]) -> common::Run {
    let dir = std::env::temp_dir().join(format!("efold-fields-{tag}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::write(dir.join("m.toml"), text).unwrap();
    let mut all = vec![args[0], "m.toml"];
    all.extend(&args[1..]);
    let r = efold_in(&dir, &all);
    std::fs::remove_dir_all(&dir).ok();
    r
}

const GOOD_METRIC: &str = "[metric]\nx = 1\ny = \"exp(2*x)\"\n";
const GOOD_START: &str = "[start]\nx = 1\ny = 0\n";

#[test]
fn bad_models_of_several_fields_are_errors_at_their_place() {
    let two = "fields = [\"x\", \"y\"]\n";
    let cases: Vec<(&str, String)> = vec![
        (
            "unknown_name",
            format!("{two}potential = \"x^2 + z^2\"\n{GOOD_METRIC}{GOOD_START}"),
        ),
        (
            "missing_diagonal",
            format!("{two}potential = \"x^2 + y^2\"\n[metric]\nx = 1\n\"x y\" = \"0.1\"\n{GOOD_START}"),
        ),
        (
            "metric_key_not_a_field",
            format!("{two}potential = \"x^2 + y^2\"\n[metric]\nx = 1\ny = 1\n\"x z\" = \"0.1\"\n{GOOD_START}"),
        ),
        (
            "field_twice",
            format!("fields = [\"x\", \"y\", \"x\"]\npotential = \"x^2 + y^2\"\n{GOOD_METRIC}{GOOD_START}"),
        ),
        (
            "start_missing_a_field",
            format!("{two}potential = \"x^2 + y^2\"\n{GOOD_METRIC}[start]\nx = 1\n"),
        ),
        (
            "start_unknown_name",
            format!("{two}potential = \"x^2 + y^2\"\n{GOOD_METRIC}[start]\nx = 1\ny = 0\nw = 2\n"),
        ),
        (
            "metric_not_positive_definite",
            format!("{two}potential = \"x^2 + y^2\"\n[metric]\nx = 1\ny = 1\n\"x y\" = \"x\"\n[start]\nx = 2\ny = 0\n"),
        ),
        (
            "metric_singular",
            format!("{two}potential = \"x^2 + y^2\"\n[metric]\nx = 1\ny = \"1 - x^2\"\n[start]\nx = 1\ny = 0\n"),
        ),
        (
            "start_outside_domain",
            format!("{two}potential = \"log(x) + y^2\"\n{GOOD_METRIC}[start]\nx = -1\ny = 0\n"),
        ),
        (
            "kinetic_with_fields",
            format!("{two}potential = \"x^2 + y^2\"\nkinetic = \"1\"\n{GOOD_METRIC}{GOOD_START}"),
        ),
        (
            "start_velocity_too_fast",
            format!("{two}potential = \"x^2 + y^2\"\n{GOOD_METRIC}{GOOD_START}[start.velocity]\nx = 2\ny = 1\n"),
        ),
        ("fields_empty", "fields = []\npotential = \"1\"\n".to_string()),
        (
            "metric_without_fields",
            "potential = \"phi^2\"\n[metric]\nphi = 1\n".to_string(),
        ),
    ];
    for (name, text) in cases {
        let r = run_file(name, &text, &["inspect"]);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        assert!(r.stdout.is_empty(), "{name}");
        assert!(!r.stderr.contains("panicked"), "{name}: {}", r.stderr);
        insta::assert_snapshot!(format!("fields_error_{name}"), r.stderr);
    }
}

#[test]
fn inline_models_of_several_fields() {
    let base = ["inspect", "--potential", "x^2 + y^2", "--field", "x", "--field", "y"];
    let with = |extra: &[&str]| {
        let mut v: Vec<&str> = base.to_vec();
        v.extend(extra);
        efold(&v)
    };
    // A complete inline model is read and checked, then refused by a one-field command.
    let r = efold(&[
        "fit",
        "--free",
        "q",
        "--target",
        "n_s=0.96",
        "--potential",
        "x^2 + y^2",
        "--field",
        "x",
        "--field",
        "y",
        "--metric",
        "x=1",
        "--metric",
        "y=1",
        "--metric",
        "x y=0.2",
        "--start",
        "x=1",
        "--start",
        "y=2",
    ]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("has 2 fields"), "{}", r.stderr);
    let cases: [(&str, &[&str]); 4] = [
        (
            "flag_metric_not_a_field",
            &[
                "--metric", "x=1", "--metric", "y=1", "--metric", "x w=0.2", "--start", "x=1", "--start", "y=2",
            ],
        ),
        (
            "flag_metric_expression",
            &[
                "--metric",
                "x=1",
                "--metric",
                "y=1 + tanhh(x)",
                "--start",
                "x=1",
                "--start",
                "y=2",
            ],
        ),
        (
            "flag_start_missing",
            &["--metric", "x=1", "--metric", "y=1", "--start", "x=1"],
        ),
        ("flag_metric_form", &["--metric", "x", "--start", "x=1"]),
    ];
    for (name, extra) in cases {
        let r = with(extra);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        insta::assert_snapshot!(format!("fields_error_{name}"), r.stderr);
    }
    // One --field alone keeps its meaning: the name of the one field.
    let r = efold(&["predict", "--potential", "x^2/2", "--field", "x", "--format", "csv"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
}
