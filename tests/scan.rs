//! Scans: closed forms point by point, shards that merge into the unsharded table byte for
//! byte, and the shape of the outputs.

mod common;
use common::efold;

fn model(name: &str) -> String {
    format!("{}/models/{name}.toml", env!("CARGO_MANIFEST_DIR"))
}

/// The order-2 pole at every alpha of a scan, against check-values section 3 (Kallosh & Linde,
/// JCAP 07 (2013) 002): V = tanh^2(x), x = chi/sqrt(6 alpha), sinh 2x_end = 2/sqrt(3 alpha),
/// N = (3 alpha/4)(cosh 2x_* - cosh 2x_end), eps = 4/(3 alpha sinh^2 2x), and
/// eta = V_chichi/V with V_chichi = (2 - 8t^2 + 6t^4)/(6 alpha), t = tanh x.
#[test]
fn pole_scan_matches_closed_forms() {
    let r = efold(&[
        "scan",
        &model("pole-order-2-quadratic"),
        "--vary",
        "alpha=0.1:30:12:log",
        "--efolds",
        "50,60",
        "--format",
        "json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let rows: Vec<serde_json::Value> = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(rows.len(), 24);
    for row in rows {
        let alpha = row["alpha"].as_f64().unwrap();
        let n = row["n_star"].as_f64().unwrap();
        let x_end = 0.5 * (2.0 / (3.0 * alpha).sqrt()).asinh();
        let c = 4.0 * n / (3.0 * alpha) + (2.0 * x_end).cosh();
        let x = 0.5 * c.acosh();
        let eps = 4.0 / (3.0 * alpha * (2.0 * x).sinh().powi(2));
        let t = x.tanh();
        let eta = (2.0 - 8.0 * t * t + 6.0 * t.powi(4)) / (6.0 * alpha) / (t * t);
        let (ns, r_) = (1.0 - 6.0 * eps + 2.0 * eta, 16.0 * eps);
        let got_ns = row["n_s"].as_f64().unwrap();
        let got_r = row["r"].as_f64().unwrap();
        assert!(
            ((got_ns - ns) / ns).abs() < 1e-8,
            "alpha {alpha} N {n}: n_s {got_ns} vs {ns}"
        );
        assert!(
            ((got_r - r_) / r_).abs() < 1e-8,
            "alpha {alpha} N {n}: r {got_r} vs {r_}"
        );
        assert!(row["error"].is_null());
    }
}

#[test]
fn shards_merge_into_the_unsharded_table() {
    let dir = std::env::temp_dir().join(format!("efold-shards-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    for format in ["csv", "json"] {
        // two parameters: the cubic-tilt model's alpha and gamma
        let args = |extra: &[&str]| {
            let mut v: Vec<String> = vec![
                "scan".into(),
                model("pole-order-2-cubic-tilt"),
                "--vary".into(),
                "alpha=0.5:4:5:log".into(),
                "--vary".into(),
                "gamma=0:0.3:3".into(),
                "--efolds".into(),
                "50,60".into(),
                "--format".into(),
                format.into(),
            ];
            v.extend(extra.iter().map(|s| s.to_string()));
            v
        };
        let whole = efold(&args(&[]).iter().map(String::as_str).collect::<Vec<_>>());
        assert_eq!(whole.code, 0, "{}", whole.stderr);
        assert!(whole.stdout.starts_with(if format == "csv" { "point," } else { "[" }));
        let mut files = Vec::new();
        for k in [3, 1, 2] {
            let out = dir.join(format!("part{k}.{format}"));
            let shard = format!("{k}/3");
            let r = efold(
                &args(&["--shard", &shard, "--out", out.to_str().unwrap()])
                    .iter()
                    .map(String::as_str)
                    .collect::<Vec<_>>(),
            );
            assert_eq!(r.code, 0, "{}", r.stderr);
            assert!(r.stdout.is_empty());
            // a shard names where it comes from; the unsharded table does not
            let text = std::fs::read_to_string(&out).unwrap();
            let provenance = if format == "csv" {
                text.starts_with("# efold-scan-shard {")
            } else {
                serde_json::from_str::<serde_json::Value>(&text).unwrap()["shard"]["shard"] == k
            };
            assert!(provenance, "{format} shard {k}: {}", &text[..80.min(text.len())]);
            files.push(out.display().to_string());
        }
        let mut merge_args = vec!["merge"];
        merge_args.extend(files.iter().map(String::as_str));
        let merged = efold(&merge_args);
        assert_eq!(merged.code, 0, "{}", merged.stderr);
        assert_eq!(
            merged.stdout, whole.stdout,
            "{format}: merged shards differ from the unsharded run"
        );
        // a shard given twice is refused
        let twice = efold(&["merge", &files[0], &files[0]]);
        assert_eq!(twice.code, 2, "{}", twice.stderr);
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn csv_header_failed_points_and_figure() {
    let dir = std::env::temp_dir().join(format!("efold-scanfig-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let svg = dir.join("nsr.svg");
    // phi^p with p from 1 to 3: every point predicts; with a range cut at phi = 5 the larger
    // powers give too few e-folds and keep their rows with the error.
    let r = efold(&[
        "scan",
        "--potential",
        "phi^p",
        "--param",
        "p=2",
        "--range",
        "0",
        "12",
        "--vary",
        "p=1:3:3",
        "--efolds",
        "55",
        "--svg",
        svg.to_str().unwrap(),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let lines: Vec<&str> = r.stdout.lines().collect();
    insta::assert_snapshot!("scan_csv_header", lines[0]);
    assert_eq!(lines.len(), 4);
    let failed: Vec<&&str> = lines[1..].iter().filter(|l| l.ends_with('"')).collect();
    assert!(
        !failed.is_empty() && failed.iter().all(|l| l.contains("e-folds")),
        "{lines:?}"
    );
    assert!(r.stderr.contains("rows failed"));
    let text = std::fs::read_to_string(&svg).unwrap();
    let structure: Vec<String> = text
        .lines()
        .filter_map(|l| {
            [
                "class=\"panel\"",
                "class=\"axes\"",
                "class=\"xlabel\"",
                "class=\"ylabel\"",
                "class=\"region\"",
                "class=\"series\"",
                "class=\"legend\"",
                "class=\"colorbar\"",
                "class=\"cblabel\"",
            ]
            .iter()
            .find(|c| l.contains(**c))
            .map(|c| c.to_string())
        })
        .collect();
    insta::assert_snapshot!("scan_svg_structure", structure.join("\n"));
    // n_s with its subscript, r in italics, and the colour bar labelled with the parameter.
    assert!(text.contains("<tspan font-style=\"italic\">n</tspan><tspan dy=\"2.64\" font-size=\"8.4\">s</tspan>"));
    assert!(text.contains("<tspan font-style=\"italic\">r</tspan>"));
    assert!(text.contains("class=\"cblabel\"") && text.contains("<tspan font-style=\"italic\">p</tspan></text>"));
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn bad_scans() {
    let cases: Vec<(&str, Vec<String>)> = vec![
        (
            "unknown_param",
            vec![
                "scan".into(),
                model("pole-order-2-quadratic"),
                "--vary".into(),
                "beta=1:2:3".into(),
            ],
        ),
        (
            "bad_range",
            vec![
                "scan".into(),
                model("pole-order-2-quadratic"),
                "--vary".into(),
                "alpha=1:x:3".into(),
            ],
        ),
        (
            "bad_shard",
            vec![
                "scan".into(),
                model("pole-order-2-quadratic"),
                "--vary".into(),
                "alpha".into(),
                "--shard".into(),
                "4/3".into(),
            ],
        ),
        (
            "log_negative",
            vec![
                "scan".into(),
                model("pole-order-2-quadratic"),
                "--vary".into(),
                "alpha=-1:2:3:log".into(),
            ],
        ),
    ];
    for (name, args) in cases {
        let r = efold(&args.iter().map(String::as_str).collect::<Vec<_>>());
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        insta::assert_snapshot!(format!("scan_error_{name}"), r.stderr);
    }
}
