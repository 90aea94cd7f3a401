//! The real binary scans models of several fields: each row is `efold predict` of the rebound
//! model, the equal-mass case is the one-field quadratic, shards merge into the unsharded
//! table, and bad axes and mixed shards are clear errors. Grids are kept to two or three
//! points at one N_* (a multi-field prediction takes seconds in a debug build).

mod common;
use common::efold;
use std::path::PathBuf;

fn model(name: &str) -> String {
    format!("{}/models/several-fields/{name}.toml", env!("CARGO_MANIFEST_DIR"))
}

fn temp_dir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("efold-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// The CSV as (header, rows of cells).
fn table(csv: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let mut lines = csv
        .lines()
        .map(|l| l.split(',').map(str::to_string).collect::<Vec<_>>());
    let header = lines.next().expect("a header");
    (header, lines.collect())
}

/// The prediction at N_* = 55 of a model of the independent reference calculation,
/// `tests/reference/multifield.json` (written by `tests/reference/gen_multifield.py`).
fn reference(model: &str) -> serde_json::Value {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/multifield.json");
    let v: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    v["models"][model]["predictions"]["55"].clone()
}

fn cell(header: &[String], row: &[String], key: &str) -> f64 {
    let i = header
        .iter()
        .position(|h| h == key)
        .unwrap_or_else(|| panic!("no column {key}"));
    row[i].parse().unwrap_or_else(|_| panic!("{key} = `{}`", row[i]))
}

/// Every row of a scan over the mass ratio equals `efold predict` of the model with that ratio
/// (the same computation: to 1e-12 relative, in practice bit for bit), column by column.
#[test]
fn each_row_is_the_prediction_of_the_rebound_model() {
    let m = model("two-field-quadratic-mass-ratio");
    let r = efold(&["scan", &m, "--vary", "ratio=4:9:2", "--efolds", "55"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let (header, rows) = table(&r.stdout);
    assert_eq!(&header[..3], ["point", "ratio", "n_star"]);
    assert_eq!(header.last().map(String::as_str), Some("error"));
    assert_eq!(rows.len(), 2);
    for (row, ratio) in rows.iter().zip(["4", "9"]) {
        let p = efold(&[
            "predict",
            &m,
            "--param",
            &format!("ratio={ratio}"),
            "--efolds",
            "55",
            "--format",
            "csv",
        ]);
        assert_eq!(p.code, 0, "{}", p.stderr);
        let (ph, prows) = table(&p.stdout);
        // the predict columns sit between the varied name and `error`
        assert_eq!(ph[..], header[2..header.len() - 1]);
        for (k, key) in ph.iter().enumerate() {
            let (a, b) = (&row[2 + k], &prows[0][k]);
            if a.is_empty() || b.is_empty() {
                assert_eq!(a, b, "{key} at ratio {ratio}");
                continue;
            }
            let (x, y): (f64, f64) = (a.parse().unwrap(), b.parse().unwrap());
            assert!((x - y).abs() <= 1e-12 * y.abs(), "{key} at ratio {ratio}: {x} vs {y}");
        }
        assert!(row.last().unwrap().is_empty(), "no error: {row:?}");
    }
    // At ratio 9 the model is model B of the reference calculation (multifield.json): n_s to
    // 1e-8 and r to 1e-7 relative, the accuracy tests/predict_fields.rs holds it to.
    let b = reference("B");
    let (n_s, r) = (cell(&header, &rows[1], "n_s"), cell(&header, &rows[1], "r"));
    assert!(
        (n_s - b["n_s"].as_f64().unwrap()).abs() < 1e-8,
        "n_s {n_s} vs {}",
        b["n_s"]
    );
    let r_ref = b["r"].as_f64().unwrap();
    assert!((r - r_ref).abs() < 1e-7 * r_ref, "r {r} vs {r_ref}");
}

/// With equal masses V = m^2 (x^2 + y^2)/2 depends on the radius alone, so the trajectory is
/// radial and the model is the one-field m^2 phi^2/2 (symmetry, common practice): its exact
/// n_s and r at N_* = 55 are those of `models/quadratic-monomial.toml` on the exact route.
#[test]
fn equal_masses_give_the_one_field_quadratic() {
    let r = efold(&[
        "scan",
        &model("two-field-quadratic-mass-ratio"),
        "--vary",
        "ratio=1:1:1",
        "--efolds",
        "55",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let (header, rows) = table(&r.stdout);
    let one = efold(&[
        "predict",
        &format!("{}/models/quadratic-monomial.toml", env!("CARGO_MANIFEST_DIR")),
        "--method",
        "exact",
        "--efolds",
        "55",
        "--format",
        "json",
    ]);
    assert_eq!(one.code, 0, "{}", one.stderr);
    let v: serde_json::Value = serde_json::from_str(&one.stdout).unwrap();
    let p = &v["predictions"][0];
    for key in ["n_s", "r"] {
        let want = p[key].as_f64().unwrap();
        let got = cell(&header, &rows[0], key);
        assert!((got - want).abs() < 1e-6, "{key}: {got} vs one field {want}");
    }
    // Model A of the reference calculation (multifield.json) is the same potential started at
    // (15, 12): the motion is radial from any start, so its n_s and r at N_* = 55 are these
    // (to 1e-8 and 1e-7 relative, as tests/predict_fields.rs holds efold to the reference).
    let a = reference("A");
    let (n_s, r) = (cell(&header, &rows[0], "n_s"), cell(&header, &rows[0], "r"));
    assert!(
        (n_s - a["n_s"].as_f64().unwrap()).abs() < 1e-8,
        "n_s {n_s} vs {}",
        a["n_s"]
    );
    let r_ref = a["r"].as_f64().unwrap();
    assert!((r - r_ref).abs() < 1e-7 * r_ref, "r {r} vs {r_ref}");
    // and no turn: the isocurvature part stays at the level of rounding
    assert!(cell(&header, &rows[0], "turn_rate").abs() < 1e-10);
}

/// Shards of a scan over a start coordinate, merged, are the unsharded table byte for byte, in
/// CSV and in JSON; the JSON rows have the CSV header's keys in its order.
#[test]
fn shards_merge_into_the_unsharded_table() {
    let dir = temp_dir("scan-fields-shards");
    let m = model("two-field-quadratic-mass-ratio");
    for (format, ext) in [("csv", "csv"), ("json", "json")] {
        let base = [
            "scan",
            &m,
            "--vary",
            "start.y=11:12:2",
            "--efolds",
            "55",
            "--format",
            format,
        ];
        let whole = efold(&base);
        assert_eq!(whole.code, 0, "{}", whole.stderr);
        let mut files = Vec::new();
        for k in 1..=2 {
            let path = dir.join(format!("shard{k}.{ext}"));
            let mut args = base.to_vec();
            let shard = format!("{k}/2");
            let out = path.to_str().unwrap().to_string();
            args.extend(["--shard", &shard, "--out", &out]);
            let r = efold(&args);
            assert_eq!(r.code, 0, "{}", r.stderr);
            files.push(out);
        }
        let mut args = vec!["merge"];
        args.extend(files.iter().map(String::as_str));
        let merged = efold(&args);
        assert_eq!(merged.code, 0, "{}", merged.stderr);
        assert_eq!(merged.stdout, whole.stdout, "{format}");
        if format == "json" {
            let rows: Vec<serde_json::Map<String, serde_json::Value>> = serde_json::from_str(&whole.stdout).unwrap();
            assert_eq!(rows.len(), 2);
            assert_eq!(rows[1]["start.y"], serde_json::json!(12.0));
            assert!(rows[1]["n_s"].is_number() && rows[1]["error"].is_null());
        } else {
            let (header, rows) = table(&whole.stdout);
            assert_eq!(&header[..3], ["point", "start.y", "n_star"]);
            // a lower start is fewer e-folds: the pivot sits at smaller fields
            assert!(cell(&header, &rows[0], "y_star") < cell(&header, &rows[1], "y_star"));
        }
    }
    std::fs::remove_dir_all(&dir).ok();
}

/// A start coordinate of a field the model does not have: exit code 2, the caret under it.
#[test]
fn an_unknown_start_field_is_refused() {
    let r = efold(&[
        "scan",
        &model("two-field-quadratic-mass-ratio"),
        "--vary",
        "start.z=1:2:2",
        "--efolds",
        "55",
    ]);
    assert_eq!(r.code, 2);
    assert!(r.stdout.is_empty());
    insta::assert_snapshot!("scan_fields_error_unknown_start_field", r.stderr);
}

/// Shards of a one-field scan and of a scan of several fields are not merged.
#[test]
fn mixed_shard_kinds_are_refused() {
    let dir = temp_dir("scan-fields-mixed");
    let one = dir.join("one.csv");
    let two = dir.join("two.csv");
    let r = efold(&[
        "scan",
        &format!("{}/models/quadratic-monomial.toml", env!("CARGO_MANIFEST_DIR")),
        "--vary",
        "m=1e-6:2e-6:2",
        "--efolds",
        "55",
        "--shard",
        "1/2",
        "--out",
        one.to_str().unwrap(),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let r = efold(&[
        "scan",
        &model("two-field-quadratic-mass-ratio"),
        "--vary",
        "ratio=1:2:2",
        "--efolds",
        "55",
        "--shard",
        "2/2",
        "--out",
        two.to_str().unwrap(),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let r = common::efold_in(&dir, &["merge", "one.csv", "two.csv"]);
    assert_eq!(r.code, 2);
    assert!(r.stdout.is_empty());
    insta::assert_snapshot!("scan_fields_error_mixed_shard_kinds", r.stderr);
    std::fs::remove_dir_all(&dir).ok();
}
