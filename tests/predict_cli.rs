//! `efold predict` run as a user would: the table and JSON for every shipped model, the CSV
//! header, the documented JSON keys, figures, data files and failures.

use std::path::Path;

mod common;
use common::efold;

fn model(name: &str) -> String {
    format!("{}/models/{name}.toml", env!("CARGO_MANIFEST_DIR"))
}

fn shipped() -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(Path::new(env!("CARGO_MANIFEST_DIR")).join("models"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .map(|p| p.file_stem().unwrap().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

#[test]
fn table_and_json_for_every_shipped_model() {
    for name in shipped() {
        let r = efold(&["predict", &model(&name)]);
        assert_eq!(r.code, 0, "{name}: {}", r.stderr);
        insta::assert_snapshot!(format!("predict_{name}"), r.stdout);
        let r = efold(&["predict", &model(&name), "--format", "json"]);
        assert_eq!(r.code, 0, "{name}: {}", r.stderr);
        // Numbers to 10 significant digits: the snapshot pins the physics, not the last ulps.
        let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
        let pretty = serde_json::to_string_pretty(&rounded(v)).unwrap();
        insta::assert_snapshot!(format!("predict_json_{name}"), pretty);
    }
}

fn rounded(v: serde_json::Value) -> serde_json::Value {
    use serde_json::Value;
    match v {
        Value::Number(n) => {
            let x = n.as_f64().unwrap();
            let r: f64 = format!("{x:.9e}").parse().unwrap();
            serde_json::json!(r)
        }
        Value::Array(a) => Value::Array(a.into_iter().map(rounded).collect()),
        Value::Object(o) => Value::Object(o.into_iter().map(|(k, v)| (k, rounded(v))).collect()),
        other => other,
    }
}

#[test]
fn json_keys_scripts_rely_on() {
    let r = efold(&[
        "predict",
        &model("pole-order-2-quadratic"),
        "--efolds",
        "50,55,60",
        "--format",
        "json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let preds = v["predictions"].as_array().unwrap();
    assert_eq!(preds.len(), 3);
    for p in preds {
        for key in [
            "n_star",
            "phi_star",
            "phi_end",
            "n_s",
            "r",
            "alpha_s",
            "n_t",
            "eps_v",
            "eta_v",
            "delta_chi",
            "potential_scale",
        ] {
            assert!(p[key].is_number(), "{key} missing in {p}");
        }
    }
    assert_eq!(preds[1]["n_star"], 55.0);
}

#[test]
fn csv_header_and_rows() {
    let r = efold(&[
        "predict",
        &model("quadratic-monomial"),
        "--efolds",
        "50,60",
        "--format",
        "csv",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let lines: Vec<&str> = r.stdout.lines().collect();
    assert_eq!(lines.len(), 3);
    insta::assert_snapshot!("predict_csv_header", lines[0]);
    let cols = lines[0].split(',').count();
    assert!(lines[1..].iter().all(|l| l.split(',').count() == cols));
}

#[test]
fn inline_model_and_second_order() {
    let r = efold(&[
        "predict",
        "--potential",
        "phi^2",
        "--range",
        "0",
        "inf",
        "--efolds",
        "60",
        "--second-order",
        "--format",
        "json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(v["order"], 2);
    let ns = v["predictions"][0]["n_s"].as_f64().unwrap();
    // second order moves n_s of phi^2 at N = 60 by O(eps^2) ~ 1e-4 from 1 - 4/121
    assert!(
        (ns - (1.0 - 4.0 / 121.0)).abs() < 1e-3 && ns != 1.0 - 4.0 / 121.0,
        "{ns}"
    );
}

#[test]
fn reheating_flags() {
    let r = efold(&[
        "predict",
        &model("exponential-plateau"),
        "--reheat",
        "instant",
        "--format",
        "json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let p = &v["predictions"][0];
    assert!(p["reheating"]["n_reh"].as_f64().unwrap() == 0.0);
    assert!(v["n_star_from"].as_str().unwrap().contains("instant"));
    let r = efold(&["predict", &model("exponential-plateau"), "--reheat-w", "0"]);
    assert_eq!(r.code, 2);
    insta::assert_snapshot!("predict_error_reheat_flags", r.stderr);
}

#[test]
fn figure_marks_end_and_pivots() {
    let dir = std::env::temp_dir().join(format!("efold-pfig-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let svg = dir.join("p.svg");
    let r = efold(&[
        "predict",
        &model("pole-order-2-quadratic"),
        "--svg",
        svg.to_str().unwrap(),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(text.contains(">end<"));
    assert!(text.contains("<tspan font-style=\"italic\">N</tspan> = 55<"));
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn data_files() {
    let alt = format!("{}/data/act-dr6.toml", env!("CARGO_MANIFEST_DIR"));
    let r = efold(&[
        "predict",
        &model("exponential-plateau"),
        "--data",
        &alt,
        "--format",
        "json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert!(v["data"]["name"].as_str().unwrap().contains("ACT"));
    // n_s = 0.9650 at N = 55 sits (0.9650 - 0.9743)/0.0034 = -2.7 sigma from that mean.
    let pull = v["predictions"][1]["n_s_pull"].as_f64().unwrap();
    assert!((pull + 2.73).abs() < 0.02, "{pull}");
    assert_eq!(v["predictions"][1]["verdict"], "tension");

    let dir = std::env::temp_dir().join(format!("efold-data-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let bad = dir.join("bad.toml");
    std::fs::write(&bad, "name = \"x\"\n[pivot]\nk_mpc = \"a lot\"\n").unwrap();
    let r = efold(&[
        "predict",
        &model("exponential-plateau"),
        "--data",
        bad.to_str().unwrap(),
    ]);
    assert_eq!(r.code, 2);
    insta::assert_snapshot!(
        "predict_error_bad_data",
        r.stderr.replace(&dir.display().to_string(), "TMP")
    );
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn failures_exit_2_with_a_diagnosis() {
    let tilt = model("pole-order-2-cubic-tilt");
    let cases: Vec<(&str, Vec<&str>)> = vec![
        ("never_ends", vec!["predict", "--potential", "1 + phi^2"]),
        (
            "too_few_efolds",
            vec!["predict", "--potential", "phi^2", "--range", "0", "10"],
        ),
        ("into_the_pole", vec!["predict", &tilt, "--branch", "1"]),
        ("negative_potential", vec!["predict", "--potential", "-1 - phi^2"]),
        (
            "no_such_branch",
            vec!["predict", "--potential", "phi^2", "--branch", "7"],
        ),
        ("bad_efolds", vec!["predict", "--potential", "phi^2", "--efolds", "-5"]),
    ];
    for (name, args) in cases {
        let r = efold(&args);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        assert!(r.stdout.is_empty());
        insta::assert_snapshot!(
            format!("predict_error_{name}"),
            r.stderr.replace(env!("CARGO_MANIFEST_DIR"), "REPO")
        );
    }
}

#[test]
fn exact_method_and_spectrum() {
    let r = efold(&[
        "predict",
        &model("pole-order-2-quadratic"),
        "--method",
        "exact",
        "--efolds",
        "55",
        "--format",
        "json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(v["method"], "exact");
    let p = &v["predictions"][0];
    for key in ["n_s", "r", "alpha_s", "n_t", "phi_star", "phi_end", "potential_scale"] {
        assert!(p[key].is_number(), "{key}");
    }
    for key in [
        "eps_1",
        "eps_2",
        "eps_3",
        "n_s_second_order",
        "r_second_order",
        "phi_end_slow_roll",
        "freeze_drift",
    ] {
        assert!(p["exact"][key].is_number(), "exact.{key}");
    }
    let r = efold(&[
        "spectrum",
        &model("pole-order-2-quadratic"),
        "--points",
        "5",
        "--k-min",
        "1e-3",
        "--k-max",
        "1e3",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    insta::assert_snapshot!("spectrum_pole", r.stdout);
    let r = efold(&[
        "spectrum",
        &model("pole-order-2-quadratic"),
        "--points",
        "3",
        "--format",
        "csv",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_eq!(
        r.stdout.lines().next().unwrap(),
        "k_mpc,p_zeta,p_t,p_zeta_slow_roll,n_before_end,drift"
    );
    // A start given by hand: far enough up, the attractor forgets the kick; too low, an error.
    let a = efold(&[
        "predict",
        &model("quadratic-monomial"),
        "--method",
        "exact",
        "--efolds",
        "55",
        "--format",
        "json",
    ]);
    let b = efold(&[
        "predict",
        &model("quadratic-monomial"),
        "--method",
        "exact",
        "--efolds",
        "55",
        "--format",
        "json",
        "--start-phi",
        "18",
        "--start-velocity",
        "-0.2",
    ]);
    let ns = |r: &str| {
        serde_json::from_str::<serde_json::Value>(r).unwrap()["predictions"][0]["n_s"]
            .as_f64()
            .unwrap()
    };
    assert!((ns(&a.stdout) - ns(&b.stdout)).abs() < 1e-8);
    let r = efold(&[
        "predict",
        &model("quadratic-monomial"),
        "--method",
        "exact",
        "--start-phi",
        "12",
    ]);
    assert_eq!(r.code, 2);
    insta::assert_snapshot!("exact_error_start_too_low", r.stderr);
    let r = efold(&["spectrum", &model("pole-order-2-quadratic"), "--k-max", "1e30"]);
    assert_eq!(r.code, 2);
    insta::assert_snapshot!("spectrum_error_k_max", r.stderr);
}

/// Every row of the predict table is one style across its N_* columns: in fixed style each
/// value has the same number of decimals, so the right-aligned columns put every value's
/// decimal point the same distance from the column's right edge; in scientific style every
/// value has the same mantissa length.
#[test]
fn table_rows_keep_one_style() {
    for name in ["pole-order-2-quadratic", "quadratic-monomial", "nonminimal-quartic"] {
        let r = efold(&["predict", &model(name)]);
        assert_eq!(r.code, 0, "{name}: {}", r.stderr);
        let table = r.stdout.lines().skip_while(|l| !l.starts_with("N_*")).skip(1);
        let mut checked = 0;
        for line in table.take_while(|l| !l.is_empty()) {
            let cells: Vec<&str> = line.split_whitespace().rev().take(3).collect();
            let numeric = cells.iter().all(|c| c.parse::<f64>().is_ok());
            if !numeric || line.starts_with("n_s pull") {
                continue; // words, `< 0.036`, and the pull (two decimals by design, checked below)
            }
            let shape = |c: &str| match c.split_once('e') {
                Some((m, _)) => ('e', m.len() - m.find('.').unwrap_or(m.len())),
                None => ('f', c.len() - c.find('.').unwrap_or(c.len())),
            };
            let s0 = shape(cells[0]);
            for c in &cells {
                assert_eq!(shape(c), s0, "{name}: mixed styles in `{line}`");
            }
            checked += 1;
        }
        assert!(checked >= 15, "{name}: only {checked} rows\n{}", r.stdout);
        // n_s: fixed, six significant digits of a value near 0.96 (common practice: n_s is
        // quoted to 1e-6 or coarser)
        let ns = r.stdout.lines().find(|l| l.starts_with("n_s ")).unwrap();
        for c in ns.split_whitespace().skip(1) {
            assert_eq!(c.len(), "0.960314".len(), "{name}: {ns}");
        }
        let pull = r.stdout.lines().find(|l| l.starts_with("n_s pull")).unwrap();
        for c in pull.split_whitespace().skip(3) {
            assert!(
                c.starts_with(['+', '-']) && c.len() - c.find('.').unwrap() == 3,
                "{pull}"
            );
        }
    }
}
