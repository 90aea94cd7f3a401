//! The real binary's spectrum of a model of several fields: P_zeta, P_iso, P_cross and P_t at
//! the end of inflation on a grid of k, checked against the independent reference calculation
//! `tests/reference/multifield.json` (written by `tests/reference/gen_multifield.py`: scipy's
//! integrators on the background and mode equations of `tests/reference/MULTIFIELD.md`).

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

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

/// Reference model B (two quadratics, mass ratio 9) on three k around the pivot, k_*/1.05,
/// k_*, 1.05 k_* (the middle point is the geometric mean, k_* to round-off).
#[test]
fn two_field_spectrum_matches_the_reference_at_the_pivot() {
    let (lo, hi) = (format!("{:e}", 0.05 / 1.05), format!("{:e}", 0.05 * 1.05));
    let r = efold(&[
        "spectrum",
        &model("two-field-quadratic-mass-ratio"),
        "--points",
        "3",
        "--k-min",
        &lo,
        "--k-max",
        &hi,
        "--format",
        "json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).unwrap();
    let sp = &v["spectrum"];
    let rows = sp["rows"].as_array().unwrap();
    assert_eq!(rows.len(), 3);
    let num = |row: &Value, key: &str| row[key].as_f64().unwrap_or_else(|| panic!("{key} in {row}"));
    let scale = sp["potential_scale"].as_f64().unwrap();
    let k_star = sp["k_star_mpc"].as_f64().unwrap();
    assert_eq!(k_star, 0.05);
    let mid = &rows[1];
    assert!(rel(num(mid, "k_mpc"), k_star) < 1e-14, "{mid}");
    // The definition of the scale: P_zeta(k_*) scaled is the data set's A_s.
    let a_s = efold::data::DataSet::builtin().a_s();
    assert!(rel(num(mid, "p_zeta"), a_s) < 1e-10, "{} vs {a_s}", num(mid, "p_zeta"));
    // The crossing of k_* is N_* before the end (the pivot's definition).
    assert!((num(mid, "n_before_end") - 55.0).abs() < 1e-8, "{mid}");
    let q = &reference()["models"]["B"]["predictions"]["55"];
    let want = |key: &str| q[key].as_f64().unwrap();
    // Unscaled P_zeta at the pivot: the reference states 2e-11 relative (MULTIFIELD.md).
    let p_zeta = num(mid, "p_zeta") / scale;
    assert!(rel(p_zeta, want("P_zeta")) < 1e-8, "P_zeta {p_zeta}");
    let p_t = num(mid, "p_t") / scale;
    assert!(rel(p_t, want("P_t")) < 1e-8, "P_t {p_t}");
    // P_iso is what is left of the decayed heavy mode (4e-15): the reference states it to 2e-8
    // relative and efold's own mode error is of the same order, so 1e-7 holds both.
    let p_iso = num(mid, "p_iso") / scale;
    assert!(rel(p_iso, want("P_iso")) < 1e-7, "P_iso {p_iso}");
    // P_cross: stated to 2e-12 absolute.
    let p_cross = num(mid, "p_cross") / scale;
    assert!((p_cross - want("P_cross")).abs() < 2e-12, "P_cross {p_cross}");
    // The local slope: the central difference over h = ln 1.05 = 0.049 has the error
    // h^2/6 d^3 ln P/d ln k^3 (Taylor's theorem, common practice), some 4e-4 times the
    // running of alpha_s; with |alpha_s| = 1.5e-3 here that is below 1e-6, so 1e-4 leaves the
    // reference's own n_s (five-point stencil, error O(h^4)) all the room it needs.
    let (k0, k2) = (num(&rows[0], "k_mpc"), num(&rows[2], "k_mpc"));
    let slope = (num(&rows[2], "p_zeta") / num(&rows[0], "p_zeta")).ln() / (k2 / k0).ln();
    assert!((1.0 + slope - want("n_s")).abs() < 1e-4, "n_s {}", 1.0 + slope);
    // The crossings are ln 1.05 e-folds apart, to the first order in eps_H = 0.018.
    let dn = num(&rows[0], "n_before_end") - num(&rows[2], "n_before_end");
    assert!((dn / (2.0 * 1.05f64.ln()) - 1.0).abs() < 0.03, "{dn}");
}

/// A grid whose lowest k would start before the background (it needs 55 + ln(0.05/1e-10) +
/// ln 100 e-folds; the model gives 72.85), or whose highest never freezes, is refused with
/// exit code 2 and nothing on stdout; so are the one-field options.
#[test]
fn a_spectrum_of_several_fields_refuses_what_it_cannot_do() {
    let m = model("two-field-quadratic-mass-ratio");
    let r = efold(&["spectrum", &m, "--k-min", "1e-10", "--points", "3"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stdout.is_empty());
    assert!(r.stderr.contains("72.85"), "{}", r.stderr);
    assert!(
        r.stderr.contains("needed by the lowest k = 1e-10 Mpc^-1"),
        "{}",
        r.stderr
    );
    assert!(r.stderr.contains("raise --k-min"), "{}", r.stderr);
    let r = efold(&["spectrum", &m, "--k-min", "0.05", "--k-max", "1e30", "--points", "2"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stdout.is_empty());
    assert!(r.stderr.contains("k = 1e30 Mpc^-1"), "{}", r.stderr);
    assert!(r.stderr.contains("lower --k-max"), "{}", r.stderr);
    for flags in [&["--branch", "1"][..], &["--start-phi", "3"], &["--svg", "x.svg"]] {
        let mut args = vec!["spectrum", &m];
        args.extend_from_slice(flags);
        let r = efold(&args);
        assert_eq!(r.code, 2, "{flags:?}: {}", r.stderr);
        assert!(r.stderr.contains("is an option of one-field models"), "{}", r.stderr);
        assert!(r.stderr.contains("has 2 fields"), "{}", r.stderr);
        assert!(r.stdout.is_empty());
    }
}
