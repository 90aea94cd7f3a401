//! `efold predict --method delta-n` on models of several fields: the slow-roll delta-N route
//! alone, against the exact route's own `delta_n` object and against the independent reference
//! calculation `tests/reference/multifield.json` (model B, written by
//! `tests/reference/gen_multifield.py` from the equations in `tests/reference/MULTIFIELD.md`).

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

fn predict_json(args: &[&str]) -> Value {
    let mut a = vec!["predict"];
    a.extend(args);
    a.extend(["--format", "json"]);
    let r = efold(&a);
    assert_eq!(r.code, 0, "{args:?}: {}", r.stderr);
    serde_json::from_str(&r.stdout).unwrap()
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

/// |a - b| <= tol (relative when `rel`), printed.
fn close(what: &str, a: f64, b: f64, tol: f64, rel: bool) {
    let d = if rel { a / b - 1.0 } else { a - b };
    eprintln!("{what}: {a:.15e} against {b:.15e}: difference {d:.2e} (allowed {tol:.0e})");
    assert!(
        d.abs() <= tol,
        "{what}: {a} against {b}: difference {d:e} beyond {tol:e}"
    );
}

/// The delta-N route gives the numbers of the exact route's `delta_n` object (the same
/// background and pivot state; the same derivatives of N) to 1e-12.
#[test]
fn delta_n_alone_equals_the_exact_routes_delta_n() {
    let m = model("two-field-quadratic-mass-ratio");
    let dn = predict_json(&[&m, "--efolds", "55", "--method", "delta-n"]);
    let ex = predict_json(&[&m, "--efolds", "55", "--method", "exact"]);
    assert_eq!(dn["method"], "delta-n");
    assert_eq!(ex["method"], "exact");
    let (p, q) = (&dn["predictions"][0], &ex["predictions"][0]);
    for key in ["n_s", "r", "f_nl", "p_zeta_unscaled"] {
        close(key, num(&p["delta_n"][key]), num(&q["delta_n"][key]), 1e-12, true);
        // the top-level numbers of the delta-N route are delta-N's
        assert_eq!(p[key], p["delta_n"][key], "{key}");
    }
    for f in ["x", "y"] {
        close(f, num(&p["fields_star"][f]), num(&q["fields_star"][f]), 1e-12, true);
    }
    for key in ["eps_h", "turn_rate", "n_total"] {
        close(key, num(&p[key]), num(&q[key]), 1e-12, true);
    }
    // the scale of V from A_s, by the P_zeta of delta-N
    let a_s = num(&q["potential_scale"]) * num(&q["p_zeta_unscaled"]);
    close(
        "potential_scale",
        num(&p["potential_scale"]),
        a_s / num(&p["p_zeta_unscaled"]),
        1e-12,
        true,
    );
    // every key of the exact route is there; the ones only the modes give are null
    for key in q.as_object().unwrap().keys() {
        assert!(p.get(key).is_some(), "{key} missing");
    }
    for key in ["alpha_s", "n_t", "p_iso", "p_cross", "beta_iso"] {
        assert!(p[key].is_null(), "{key}: {}", p[key]);
    }
    assert_eq!(dn["stages"], ex["stages"]);
}

/// Model B of the reference at N_* = 50, 55, 60: the delta-N numbers, to the tolerances of
/// tests/multifield.rs (P_zeta and r 1e-8 relative, n_s 1e-9, f_NL 1e-8, N_a 1e-8, N_ab 1e-6).
#[test]
fn delta_n_alone_matches_reference_model_b() {
    let v = predict_json(&[
        &model("two-field-quadratic-mass-ratio"),
        "--efolds",
        "50,55,60",
        "--method",
        "delta-n",
    ]);
    let r = reference();
    for p in v["predictions"].as_array().unwrap() {
        let key = format!("{}", num(&p["n_star"]));
        let d = &r["models"]["B"]["delta_N"][&key];
        let tag = format!("B N_*={key}");
        let dn = &p["delta_n"];
        close(
            &format!("{tag} P_zeta"),
            num(&dn["p_zeta_unscaled"]),
            num(&d["P_zeta"]),
            1e-8,
            true,
        );
        close(&format!("{tag} r"), num(&dn["r"]), num(&d["r"]), 1e-8, true);
        close(&format!("{tag} n_s"), num(&dn["n_s"]), num(&d["n_s"]), 1e-9, false);
        close(&format!("{tag} f_NL"), num(&dn["f_nl"]), num(&d["f_NL"]), 1e-8, false);
        close(
            &format!("{tag} N"),
            num(&dn["n"]),
            num(&d["N_from_pivot_on_attractor"]),
            1e-8,
            false,
        );
        for (a, f) in ["x", "y"].iter().enumerate() {
            close(
                &format!("{tag} N_{f}"),
                num(&dn["n_a"][f]),
                num(&d["N_a"][a]),
                1e-8,
                false,
            );
            for (b, g) in ["x", "y"].iter().enumerate() {
                close(
                    &format!("{tag} N_{f}{g}"),
                    num(&dn["n_ab"][f][g]),
                    num(&d["N_ab"][a][b]),
                    1e-6,
                    false,
                );
            }
        }
    }
}

/// Four fields, more than `delta_n_max_fields` (3, which gates delta-N beside the exact
/// route only): the delta-N route computes it (closed-form field space, for speed). Equal
/// masses, V = sum phi_i^2 / 2: the sum-separable slow-roll delta-N (Vernizzi & Wands 2006,
/// from memory) has N_a = phi_a / 2, so r = 8 / sum N_a^2 = 32 / |phi_*|^2, which the
/// numerical delta-N meets to the slow-roll approximation (1e-2).
#[test]
fn delta_n_alone_is_not_limited_by_the_field_count() {
    use efold::analysis::multi::closed_form::{Diagonal, Metric1};
    use efold::analysis::multi::delta_n_route::predict_delta_n;
    use efold::analysis::multi::predict::MultiSettings;
    let settings = MultiSettings::default();
    assert!(settings.limits.delta_n_max_fields < 4);
    let mut space = Diagonal::quadratic([1.0; 4], Metric1::Flat);
    let rep = predict_delta_n(&mut space, &[10.0, 9.0, 8.0, 7.0], None, &[50.0], &settings).unwrap();
    let p = &rep.predictions[0];
    let phi2: f64 = p.fields_star.iter().map(|x| x * x).sum();
    close("four fields r", p.observables.r, 32.0 / phi2, 1e-2, true);
    close("four fields N_a", p.delta_n.n_a[0], p.fields_star[0] / 2.0, 1e-2, true);
}

/// On a model of one field `--method delta-n` is refused (exit 2, nothing on stdout), with a
/// hint that the slow-roll route is this computation there.
#[test]
fn delta_n_on_one_field_is_refused() {
    let m = format!("{}/models/quadratic-monomial.toml", env!("CARGO_MANIFEST_DIR"));
    let r = efold(&["predict", &m, "--method", "delta-n"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stdout.is_empty());
    assert!(r.stderr.contains("--method slow-roll"), "{}", r.stderr);
    insta::assert_snapshot!("predict_delta_n_one_field_refused", r.stderr);
}
