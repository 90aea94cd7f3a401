//! The effective alpha along the direction of motion (src/analysis/multi/alpha_eff.rs) on the
//! demo models of several fields, in `predict` and `inspect`.
//!
//! Expected values (own derivation from the model files): each pole field has
//! g(u) = 1/(1 - u^2/(6a))^2; near u = sqrt(6a), 1 - u^2/(6a) = 2 rho/sqrt(6a) to first order
//! in rho = sqrt(6a) - u, so g = (3a/2)/rho^2: alpha = 2 a_2/3 = a for one field. A line
//! phi_* + t u reaching the pole of field i alone has K_u = u_i^2 g(u_i) with rho = |u_i| rho_t,
//! the same residue 3a/2 in t; reaching the poles of k equal fields at once (the diagonal)
//! the residues add: alpha_eff = k a.

mod common;
use common::efold;
use serde_json::Value;

fn model(name: &str) -> String {
    format!("{}/models/several-fields/{name}.toml", env!("CARGO_MANIFEST_DIR"))
}

fn json(args: &[&str]) -> Value {
    let mut a = args.to_vec();
    a.extend(["--format", "json"]);
    let r = efold(&a);
    assert_eq!(r.code, 0, "{args:?}: {}", r.stderr);
    serde_json::from_str(&r.stdout).unwrap()
}

fn close(what: &str, got: &Value, want: f64, tol: f64) {
    let g = got.as_f64().unwrap_or_else(|| panic!("{what}: {got}"));
    eprintln!(
        "{what}: {g:.15} expected {want:.15} difference {:.2e} (allowed {tol:.0e})",
        g - want
    );
    assert!((g - want).abs() <= tol, "{what}: {g} against {want}");
}

/// Two pole fields with a = 1/2 merging on the diagonal: alpha_eff = a + a = 1, the sum of
/// the two alphas (the merger of poles: Kallosh, Linde, Wrase & Yamada 2017, from memory), at
/// the pivot and at the start.
#[test]
fn merging_pole_fields_add_their_alphas() {
    let a = 0.5; // models/several-fields/two-pole-fields-merging.toml, [params] a = "1/2"
    let v = json(&[
        "predict",
        &model("two-pole-fields-merging"),
        "--efolds",
        "55",
        "--method",
        "delta-n",
    ]);
    let p = &v["predictions"][0];
    close("merging alpha_eff at N_* = 55", &p["alpha_eff"], 2.0 * a, 1e-8);
    assert_eq!(p["alpha_eff_line"]["behind"]["kind"], "pole");
    let i = json(&["inspect", &model("two-pole-fields-merging")]);
    close("merging alpha_eff at the start", &i["alpha_eff"], 2.0 * a, 1e-8);
}

/// Seven equal pole fields (a = 1/3) along the diagonal: alpha_eff = 7 a = 7/3 (Ferrara &
/// Kallosh 2016, from memory), for the start's direction (the slow-roll attractor's velocity
/// at the `[start]` point, as `inspect` takes it; called on the library, since the seven-field
/// background `inspect` also runs is slow in a debug build).
#[test]
fn seven_equal_pole_fields_give_seven_alphas() {
    use efold::analysis::multi::alpha_eff::alpha_eff;
    use efold::analysis::multi::space::ModelFieldSpace;
    use efold::config::Config;
    use efold::model::{Model, ModelSpec};
    let a = 1.0 / 3.0; // seven-equal-pole-fields.toml, a = "1/3"
    let path = model("seven-equal-pole-fields");
    let spec = ModelSpec::from_toml(&std::fs::read_to_string(&path).unwrap(), &path).unwrap();
    let m = Model::build(&spec, &Config::default()).unwrap();
    let (phi, velocity) = ModelFieldSpace::new(&m).unwrap().start().unwrap();
    let got = alpha_eff(&m, &phi, &velocity, &Config::default());
    close(
        "seven fields alpha_eff at the start",
        &serde_json::json!(got.alpha),
        7.0 * a,
        1e-8,
    );
}

/// The turning model (a = 1/6 for x, b = 2 for y): at N_* = 55 the trajectory rolls along y
/// (tests/reference/MULTIFIELD.md, model E: the pivots at 50 to 60 lie before the turn, 29.8
/// e-folds before the end), and the line along the motion meets the pole of y first, behind
/// and ahead: alpha_eff = b = 2. At N_* = 20, after the turn, it rolls along x: a = 1/6.
#[test]
fn turning_model_gives_the_alpha_of_the_field_it_rolls_along() {
    let (a, b) = (1.0 / 6.0, 2.0); // two-alphas-turning.toml
    let v = json(&[
        "predict",
        &model("two-alphas-turning"),
        "--efolds",
        "55,20",
        "--method",
        "delta-n",
    ]);
    let (p55, p20) = (&v["predictions"][0], &v["predictions"][1]);
    close("turning alpha_eff at N_* = 55", &p55["alpha_eff"], b, 1e-8);
    close("turning alpha_eff at N_* = 20", &p20["alpha_eff"], a, 1e-8);
    let y_pole = (6.0 * b).sqrt();
    for side in ["behind", "ahead"] {
        let y = p55["alpha_eff_line"][side]["point"][1].as_f64().unwrap();
        assert!((y.abs() - y_pole).abs() < 1e-9, "{side}: y = {y}");
    }
}

/// Flat field space: no pole, alpha_eff null in JSON and a reason under the text table.
#[test]
fn no_pole_no_alpha_eff() {
    let m = model("two-field-quadratic-mass-ratio");
    let v = json(&["predict", &m, "--efolds", "55", "--method", "delta-n"]);
    let p = &v["predictions"][0];
    assert!(p["alpha_eff"].is_null(), "{}", p["alpha_eff"]);
    let why = p["alpha_eff_line"]["reason"].as_str().unwrap();
    assert!(why.contains("no pole of order 2"), "{why}");
    let r = efold(&["predict", &m, "--efolds", "55", "--method", "delta-n"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        r.stdout
            .contains("alpha_eff at N_* = 55: none, the line along the motion meets no pole of order 2"),
        "{}",
        r.stdout
    );
}
