//! `efold basin` through the real binary: the JSON and CSV layouts, the summary against the
//! points, and the errors (exit code 2, a caret under the offending part).

mod common;
use common::efold;

fn plateau() -> String {
    format!("{}/models/exponential-plateau.toml", env!("CARGO_MANIFEST_DIR"))
}

fn json(args: &[&str]) -> serde_json::Value {
    let r = efold(args);
    assert_eq!(r.code, 0, "{}", r.stderr);
    serde_json::from_str(&r.stdout).unwrap()
}

/// The keys of the JSON output in the order written.
#[derive(serde::Deserialize)]
struct Ordered {
    #[serde(flatten)]
    top: indexmap::IndexMap<String, serde_json::Value>,
}

struct Keys {
    top: indexmap::IndexMap<String, serde_json::Value>,
    points: Vec<indexmap::IndexMap<String, serde_json::Value>>,
}

fn ordered(m: &str) -> Keys {
    let r = efold(&["basin", m, "--sample", "phi=2:9:2", "--format", "json"]);
    let top: Ordered = serde_json::from_str(&r.stdout).unwrap();
    #[derive(serde::Deserialize)]
    struct P {
        points: Vec<indexmap::IndexMap<String, serde_json::Value>>,
    }
    let p: P = serde_json::from_str(&r.stdout).unwrap();
    Keys {
        top: top.top,
        points: p.points,
    }
}

#[test]
fn the_json_has_the_documented_keys_and_its_summary_counts_the_points() {
    let m = plateau();
    let v = json(&[
        "basin",
        &m,
        "--sample",
        "phi=2:9:8",
        "--kinetic-ratio",
        "1e-2:1e4:3:log",
        "--direction",
        "both",
        "--efolds",
        "50,60",
        "--format",
        "json",
    ]);
    let ordered = ordered(&m);
    let top: Vec<&str> = ordered.top.keys().map(String::as_str).collect();
    assert_eq!(
        top,
        [
            "model",
            "fields",
            "need",
            "efolds",
            "velocity",
            "sampling",
            "definition",
            "summary",
            "points"
        ]
    );
    let points = v["points"].as_array().unwrap();
    assert_eq!(points.len(), 8 * 3 * 2);
    let keys: Vec<&str> = ordered.points[0].keys().map(String::as_str).collect();
    assert_eq!(
        keys,
        [
            "index",
            "start",
            "x_kinetic",
            "direction",
            "n_total",
            "n_inflating",
            "outcome",
            "end",
            "minimum",
            "rolls_along",
            "n_s",
            "r",
            "reason"
        ]
    );
    let s = &v["summary"];
    assert_eq!(s["count"], 48);
    let enough = points.iter().filter(|p| p["outcome"] == "enough").count();
    assert!(enough > 0 && enough < 48, "{enough}");
    assert_eq!(s["outcomes"]["enough"], enough);
    assert!((s["fraction_enough"].as_f64().unwrap() - enough as f64 / 48.0).abs() < 1e-15);
    // a grid has no binomial uncertainty
    assert!(s["fraction_uncertainty"].is_null());
    for p in points {
        let n_total = p["n_total"].as_f64().unwrap();
        // n_s and r are aligned with the N_* list, null where the run has too few e-folds or
        // never ends (n_total then counts to the cap)
        let ended = p["outcome"] == "enough" || p["outcome"] == "too_few";
        for (i, n_star) in [50.0, 60.0].iter().enumerate() {
            assert_eq!(p["n_s"][i].is_null(), n_total < *n_star || !ended, "{p}");
        }
        assert_eq!(p["outcome"] == "enough", ended && n_total >= 60.0);
        // up and down alternate, the field point repeats
        let i = p["index"].as_u64().unwrap();
        assert_eq!(p["direction"], if i % 2 == 0 { "down" } else { "up" });
    }
    // going up the plateau from the same point and X never gives fewer e-folds than down
    for pair in points.chunks(2) {
        assert!(pair[1]["n_total"].as_f64().unwrap() >= pair[0]["n_total"].as_f64().unwrap());
    }
}

#[test]
fn the_csv_has_one_row_per_start_and_n_star() {
    let m = plateau();
    let r = efold(&[
        "basin",
        &m,
        "--sample",
        "phi=3:8:4",
        "--efolds",
        "50,55,60",
        "--format",
        "csv",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let lines: Vec<&str> = r.stdout.lines().collect();
    insta::assert_snapshot!("basin_csv_header", lines[0]);
    assert_eq!(lines.len(), 1 + 4 * 3);
    // the rows of a start repeat its columns and differ in N_*
    let cols: Vec<Vec<&str>> = lines[1..].iter().map(|l| l.split(',').collect()).collect();
    assert_eq!(cols[0][..10], cols[2][..10]);
    assert_eq!([cols[0][10], cols[1][10], cols[2][10]], ["50", "55", "60"]);
}

#[test]
fn the_text_summary() {
    let m = plateau();
    let r = efold(&["basin", &m, "--sample", "phi=3:8:6", "--velocity", "rest"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    insta::assert_snapshot!("basin_text_plateau_rest", r.stdout);
}

#[test]
fn errors_exit_with_2_and_say_where() {
    let m = plateau();
    let cases: Vec<(&str, Vec<&str>)> = vec![
        ("outside_domain", vec!["basin", &m, "--sample", "phi=-1000:8:5"]),
        ("not_a_field", vec!["basin", &m, "--sample", "psi=1:8:5"]),
        (
            "negative_ratio",
            vec!["basin", &m, "--sample", "phi=1:8:3", "--kinetic-ratio", "-1:5:3"],
        ),
        ("not_a_number", vec!["basin", &m, "--sample", "phi=1:x:3"]),
        (
            "every_start_capped",
            vec!["basin", &m, "--sample", "phi=14:15:2", "--velocity", "rest"],
        ),
        (
            "hubble_negative",
            vec!["basin", "--potential", "10*exp(-4*phi)", "--sample", "phi=1:2:2"],
        ),
    ];
    for (name, args) in cases {
        let r = efold(&args);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        assert!(r.stdout.is_empty(), "{name}");
        insta::assert_snapshot!(format!("basin_error_{name}"), r.stderr);
    }
}

#[test]
fn one_failing_start_keeps_its_row() {
    // V = tanh(phi/sqrt 6)^2 vanishes at 0: that start has no V > 0, the others run
    let v = json(&[
        "basin",
        "--potential",
        "tanh(phi/sqrt(6))^2",
        "--sample",
        "phi=-8:8:3",
        "--velocity",
        "rest",
        "--format",
        "json",
    ]);
    let points = v["points"].as_array().unwrap();
    assert_eq!(points[1]["outcome"], "failed");
    assert!(points[1]["reason"].as_str().unwrap().contains("V > 0"), "{}", points[1]);
    assert_eq!(points[0]["outcome"], "enough");
    assert_eq!(v["summary"]["outcomes"]["failed"], 1);
}
