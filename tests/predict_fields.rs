//! The real binary predicts a model of several fields: the exact multi-field route, with the
//! slow-roll delta-N beside it, checked against the independent reference calculation
//! `tests/reference/multifield.json` (written by `tests/reference/gen_multifield.py` from the
//! equations in `tests/reference/MULTIFIELD.md`: scipy's integrators on the same background and
//! mode equations, field coordinates, sympy geometry).

mod common;
use common::efold;
use serde_json::Value;

fn reference() -> Value {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/multifield.json");
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn model(name: &str) -> String {
    format!("{}/models/several-fields/{name}.toml", env!("CARGO_MANIFEST_DIR"))
}

/// Two quadratics with mass ratio 9 (reference model B) at N_* = 55: n_s, r and the fields at
/// the pivot from the exact route, n_s and r of delta-N, keyed as the JSON promises.
#[test]
fn two_field_quadratic_is_predicted_on_the_exact_route() {
    let r = efold(&[
        "predict",
        &model("two-field-quadratic-mass-ratio"),
        "--efolds",
        "55",
        "--format",
        "json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).unwrap();
    let reference = reference();
    let want = &reference["models"]["B"]["predictions"]["55"];
    let p = &v["predictions"][0];
    assert_eq!(v["fields"], serde_json::json!(["x", "y"]));
    assert_eq!(v["method"], "exact");
    let close = |got: &Value, want: &Value, tol: f64, what: &str| {
        let (g, w) = (got.as_f64().unwrap(), want.as_f64().unwrap());
        assert!(((g - w) / w).abs() < tol, "{what}: {g} against the reference's {w}");
    };
    // the reference's own accuracy: n_s to 7e-10, r and P_zeta to 2e-10 relative
    close(&p["n_s"], &want["n_s"], 1e-8, "n_s");
    close(&p["r"], &want["r"], 1e-7, "r");
    close(&p["p_zeta_unscaled"], &want["P_zeta"], 1e-7, "P_zeta");
    close(&p["fields_star"]["x"], &want["phi_pivot"][0], 1e-8, "x_*");
    close(&p["fields_star"]["y"], &want["phi_pivot"][1], 1e-8, "y_*");
    let dn = &reference["models"]["B"]["delta_N"]["55"];
    close(&p["delta_n"]["n_s"], &dn["n_s"], 1e-7, "n_s of delta-N");
    close(&p["delta_n"]["r"], &dn["r"], 1e-6, "r of delta-N");
    for key in ["p_iso", "beta_iso", "eps_h", "turn_rate", "n_total", "potential_scale"] {
        assert!(p[key].is_number(), "{key}: {}", p[key]);
    }
    assert!(v["stages"].is_array() && v["max_turn"]["turn_rate"].is_number());
}

/// The options of one-field models are refused on a model of several fields, naming the flag.
#[test]
fn one_field_options_are_refused() {
    let m = model("two-field-quadratic-mass-ratio");
    for (flag, args) in [
        ("--branch", vec!["--branch", "1"]),
        ("--second-order", vec!["--second-order"]),
        ("--reheat", vec!["--reheat", "instant"]),
    ] {
        let mut a = vec!["predict", m.as_str()];
        a.extend(args);
        let r = efold(&a);
        assert_eq!(r.code, 2, "{flag}: {}", r.stderr);
        assert!(
            r.stderr.contains(&format!("{flag} is an option of one-field models")),
            "{}",
            r.stderr
        );
        assert!(r.stdout.is_empty());
    }
}

/// A start at the minimum of V (V = 0, no slope) has no slow-roll velocity: a clear error, not
/// a NaN.
#[test]
fn a_start_at_the_minimum_is_refused() {
    let dir = std::env::temp_dir().join(format!("efold-fields-minimum-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let m = dir.join("at-minimum.toml");
    std::fs::write(
        &m,
        "fields = [\"x\", \"y\"]\npotential = \"(x^2 + 9*y^2)/2\"\n[metric]\nx = \"1\"\ny = \"1\"\n[start]\nx = 0\ny = 0\n",
    )
    .unwrap();
    let r = efold(&["predict", m.to_str().unwrap()]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr
            .contains("the slow-roll velocity -G^ab V_b / V is not defined there"),
        "{}",
        r.stderr
    );
    assert!(!r.stderr.contains("NaN") && !r.stderr.contains("nan"), "{}", r.stderr);
    std::fs::remove_dir_all(&dir).ok();
}

/// A start value of a model of several fields is a constant: one that names a field, or an
/// unknown name, is an error that lists every field.
#[test]
fn start_values_name_every_field_in_their_errors() {
    let dir = std::env::temp_dir().join(format!("efold-fields-start-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let head = "fields = [\"x\", \"y\"]\npotential = \"(x^2 + 9*y^2)/2\"\n[metric]\nx = \"1\"\ny = \"1\"\n[start]\n";
    for (name, start, want) in [
        (
            "names-a-field",
            "x = 2\ny = \"x\"\n",
            "depends on a field (the fields are `x`, `y`)",
        ),
        ("unknown", "x = \"nan\"\ny = 1\n", "in scope: the fields `x`, `y`"),
    ] {
        let m = dir.join(format!("{name}.toml"));
        std::fs::write(&m, format!("{head}{start}")).unwrap();
        let r = efold(&["predict", m.to_str().unwrap()]);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        assert!(r.stderr.contains(want), "{name}: {}", r.stderr);
    }
    std::fs::remove_dir_all(&dir).ok();
}

/// `--metric` and `--start` name each key once, as `--param` does: a second one is an error at
/// its place, never a silent choice.
#[test]
fn repeated_metric_and_start_flags_are_refused() {
    let base = ["predict", "--potential", "x^2 + y^2", "--field", "x", "--field", "y"];
    for (extra, want) in [
        (
            &[
                "--metric", "x=1", "--metric", "x y=0", "--metric", "x  y=0.1", "--metric", "y=1",
            ][..],
            "`--metric x y` is given twice",
        ),
        (
            &[
                "--metric", "x=1", "--metric", "y=1", "--start", "x=10", "--start", "x=11", "--start", "y=1",
            ][..],
            "`--start x` is given twice",
        ),
    ] {
        let mut args = base.to_vec();
        args.extend_from_slice(extra);
        let r = efold(&args);
        assert_eq!(r.code, 2, "{}", r.stderr);
        assert!(r.stderr.contains(want), "{}", r.stderr);
        assert!(r.stdout.is_empty());
    }
}
