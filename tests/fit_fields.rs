//! The real binary fits a model of several fields: a parameter recovered from data the model
//! itself gives at a known value. A multi-field prediction takes seconds in a debug build, so
//! the fit starts near the solution and has one free parameter and one target.

mod common;
use common::efold;

/// n_s of the two-field quadratic at mass ratio 4, N_* = 55, from `efold predict`, then fitted
/// from ratio 4.5: the fit stops when the scaled residual of n_s, (n_s - target)/1e-3, is below
/// its tolerance (config::MultiFitSettings::tol = 1e-4), so n_s is within 1e-7. Between ratio
/// 1 and 4, n_s falls by about 2.8e-3 per unit of ratio (0.96338 to 0.95504, the table of the
/// scan in tests/scan_fields.rs and this predict), so the ratio is within 1e-7 / 2.8e-3, some
/// 4e-5 (own derivation); the check allows 1e-4.
#[test]
fn fit_recovers_the_mass_ratio() {
    let m = format!(
        "{}/models/several-fields/two-field-quadratic-mass-ratio.toml",
        env!("CARGO_MANIFEST_DIR")
    );
    let p = efold(&[
        "predict", &m, "--param", "ratio=4", "--efolds", "55", "--format", "json",
    ]);
    assert_eq!(p.code, 0, "{}", p.stderr);
    let v: serde_json::Value = serde_json::from_str(&p.stdout).unwrap();
    let n_s = v["predictions"][0]["n_s"].as_f64().unwrap();
    let target = format!("n_s={n_s:?}");
    let f = efold(&[
        "fit",
        &m,
        "--param",
        "ratio=4.5",
        "--free",
        "ratio",
        "--target",
        &target,
        "--efolds",
        "55",
        "--format",
        "json",
    ]);
    assert_eq!(f.code, 0, "{}", f.stderr);
    let r: serde_json::Value = serde_json::from_str(&f.stdout).unwrap();
    let ratio = r["parameters"]["ratio"].as_f64().unwrap();
    assert!((ratio - 4.0).abs() < 1e-4, "ratio = {ratio}");
    let tol = r["tolerance"].as_f64().unwrap();
    assert!(r["residuals"]["n_s"].as_f64().unwrap().abs() < tol);
    // the shape of a one-field fit, with the fields at the pivot and the predictions made
    for key in [
        "achieved",
        "targets",
        "n_star",
        "iterations",
        "condition_number",
        "prediction",
    ] {
        assert!(r.get(key).is_some(), "{key}: {r}");
    }
    let evaluations = r["evaluations"].as_u64().unwrap();
    assert!((1..=40).contains(&evaluations), "{evaluations}");
    // the pivot is the one `efold predict` gives at the recovered ratio, to the fit's accuracy
    let x_star = v["predictions"][0]["fields_star"]["x"].as_f64().unwrap();
    assert!((r["fields_star"]["x"].as_f64().unwrap() - x_star).abs() < 1e-3 * x_star);
}
