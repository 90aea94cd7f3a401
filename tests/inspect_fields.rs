//! The real binary inspects models of several fields: the geometry at the start, the pole of
//! each diagonal entry along its own field, and the background's trajectory.

mod common;
use common::{efold, efold_in};
use serde_json::Value;

fn merging_model() -> String {
    format!(
        "{}/models/several-fields/two-pole-fields-merging.toml",
        env!("CARGO_MANIFEST_DIR")
    )
}

fn json_of(args: &[&str]) -> Value {
    let r = efold(args);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stderr.is_empty(), "{}", r.stderr);
    serde_json::from_str(&r.stdout).unwrap()
}

fn rel(got: &Value, want: f64) -> f64 {
    (got.as_f64().unwrap() - want).abs() / want.abs()
}

/// The merging model, G = diag(g(x), g(y)) with g(u) = 1/(1 - u^2/(6a))^2 and a = 1/2.
///
/// Pole (own derivation): at u = sqrt(6a) put rho = sqrt(6a) - u; then
/// 1 - u^2/(6a) = (sqrt(6a) - u)(sqrt(6a) + u)/(6a) ~ 2 rho/sqrt(6a), so
/// g ~ 6a/(4 rho^2) = 3a/(2 rho^2): order 2, residue a_p = 3a/2 = 0.75, and with
/// K = 3 alpha/(2 rho^2), alpha = 2 a_p/3 = a = 0.5. The same at u = -sqrt(6a) by symmetry.
///
/// Curvature: the product of two one-dimensional metrics is flat, R = 0
/// (tests/reference/geometry.json, `product_of_pole_metrics`, sympy).
///
/// n_total: tests/reference/multifield.json, model C `N_total` (scipy's integrator on the same
/// background equations), to 1e-8 relative.
#[test]
fn merging_model_poles_curvature_and_efolds() {
    let v = json_of(&["inspect", &merging_model(), "--format", "json"]);
    assert_eq!(v["fields"], serde_json::json!(["x", "y"]));
    assert_eq!(v["metric"]["x"], "1/(1 - x^2/(6*a))^2");
    assert_eq!(v["diagonal"], true);
    let a = 0.5_f64;
    let u_p = (6.0 * a).sqrt();
    let poles = v["poles"].as_array().unwrap();
    assert_eq!(poles.len(), 4, "{poles:?}");
    for field in ["x", "y"] {
        for sign in [-1.0, 1.0] {
            let p = poles
                .iter()
                .find(|p| p["field"] == field && p["at"].as_f64().unwrap() * sign > 0.0)
                .unwrap_or_else(|| panic!("no pole of G[{field}] on the side {sign}: {poles:?}"));
            assert!(rel(&p["at"], sign * u_p) < 1e-12, "{p}");
            assert_eq!(p["order"], 2.0, "{p}");
            assert!(rel(&p["residue"], 1.5 * a) < 1e-8, "{p}");
            assert!(rel(&p["alpha"], a) < 1e-8, "{p}");
        }
    }
    let start = &v["start"];
    assert!(start["ricci_scalar"].as_f64().unwrap().abs() < 1e-12, "{start}");
    assert_eq!(start["velocity_from"], "attractor");
    // G_xx = g(x) at the start, written out (own arithmetic), and det G = g(x) g(y).
    let x0 = start["point"]["x"].as_f64().unwrap();
    let g = 1.0 / (1.0 - x0 * x0 / (6.0 * a)).powi(2);
    assert!(rel(&start["metric"][0][0], g) < 1e-12, "{start}");
    assert!(rel(&start["determinant"], g * g) < 1e-12, "{start}");
    // V = (x^2 + y^2)/(12 a) at the start.
    assert!(rel(&start["v"], 2.0 * x0 * x0 / (12.0 * a)) < 1e-14, "{start}");
    let reference: Value = serde_json::from_str(
        &std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/multifield.json")).unwrap(),
    )
    .unwrap();
    let n_total = reference["models"]["C"]["N_total"].as_f64().unwrap();
    assert!(rel(&v["trajectory"]["n_total"], n_total) < 1e-8, "{}", v["trajectory"]);
}

/// The Poincaré disk G = 6 alpha (dx^2 + dy^2)/(1 - x^2 - y^2)^2 has R = -4/(3 alpha)
/// everywhere (from memory; confirmed symbolically in tests/reference/gen_geometry.py,
/// geometry.json `poincare_disk`, which also gives G_xx = 7.927070947284978 at (0.3, -0.2)).
/// Its diagonal entries name both fields, so no pole analysis is made.
#[test]
fn disk_scalar_curvature_at_the_start() {
    let dir = std::env::temp_dir().join(format!("efold-inspect-disk-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let text = "fields = [\"x\", \"y\"]\npotential = \"(x + 9/10)^2 + y^2\"\n[params]\nalpha = 1\n\
                [metric]\nx = \"6*alpha/(1 - x^2 - y^2)^2\"\ny = \"6*alpha/(1 - x^2 - y^2)^2\"\n\
                [start]\nx = 0.3\ny = -0.2\n";
    std::fs::write(dir.join("disk.toml"), text).unwrap();
    let r = efold_in(&dir, &["inspect", "disk.toml", "--format", "json"]);
    std::fs::remove_dir_all(&dir).ok();
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).unwrap();
    let start = &v["start"];
    assert!(rel(&start["ricci_scalar"], -4.0 / 3.0) < 1e-12, "{start}");
    assert!(rel(&start["metric"][1][1], 7.927070947284978) < 1e-14, "{start}");
    assert_eq!(v["separable"], serde_json::json!([]));
    assert_eq!(v["poles"], serde_json::json!([]));
}

/// The text report of the merging model; `--table` is refused for several fields.
#[test]
fn merging_model_text_and_refused_table() {
    let r = efold(&["inspect", &merging_model()]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    insta::assert_snapshot!("inspect_fields_merging_text", r.stdout);
    let r = efold(&["inspect", &merging_model(), "--table", "5"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stdout.is_empty());
    assert!(
        r.stderr
            .contains("--table is not available for models of several fields"),
        "{}",
        r.stderr
    );
}
