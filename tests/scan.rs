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

/// An inline scan declares its varied name: `--vary alpha=...` without `--param alpha` gives
/// the rows of the model file that declares alpha, each against the order-2 pole's leading
/// order n_s = 1 - 2/N (check-values section 3), and each row's alpha as printed, typed back
/// into `predict --param`, gives the row's n_s and r bit for bit (the value printed is the
/// value used).
#[test]
fn an_inline_scan_declares_its_varied_name_and_rows_reproduce() {
    let (v, k) = ("phi^2/(6*alpha)", "1/(1 - phi^2/(6*alpha))^2");
    let inline = efold(&[
        "scan",
        "--potential",
        v,
        "--kinetic",
        k,
        "--vary",
        "alpha=0.3:3:5:log",
        "--efolds",
        "60",
    ]);
    assert_eq!(inline.code, 0, "{}", inline.stderr);
    let file = efold(&[
        "scan",
        &model("pole-order-2-quadratic"),
        "--vary",
        "alpha=0.3:3:5:log",
        "--efolds",
        "60",
    ]);
    assert_eq!(inline.stdout, file.stdout);
    let lines: Vec<&str> = inline.stdout.lines().collect();
    let header: Vec<&str> = lines[0].split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let alphas: Vec<&str> = lines[1..].iter().map(|l| l.split(',').nth(1).unwrap()).collect();
    // the end points as typed; 0.3 * 10^(k/4) in between, short decimals near it
    assert_eq!((alphas[0], alphas[4]), ("0.3", "3"));
    for (i, a) in alphas.iter().enumerate() {
        let exact = 0.3 * 10f64.powf(i as f64 / 4.0);
        assert!(
            (a.parse::<f64>().unwrap() - exact).abs() < 8.0 * f64::EPSILON * exact,
            "{a}"
        );
    }
    for line in &lines[1..] {
        let cells: Vec<&str> = line.split(',').collect();
        let ns: f64 = cells[col("n_s")].parse().unwrap();
        assert!((ns - (1.0 - 2.0 / 60.0)).abs() < 2e-3, "n_s {ns}");
        let p = efold(&[
            "predict",
            "--potential",
            v,
            "--kinetic",
            k,
            "--param",
            &format!("alpha={}", cells[1]),
            "--efolds",
            "60",
            "--format",
            "csv",
        ]);
        assert_eq!(p.code, 0, "{}", p.stderr);
        let row: Vec<&str> = p.stdout.lines().nth(1).unwrap().split(',').collect();
        let pheader: Vec<&str> = p.stdout.lines().next().unwrap().split(',').collect();
        let pcol = |name: &str| pheader.iter().position(|h| *h == name).unwrap();
        assert_eq!(row[pcol("n_s")], cells[col("n_s")]);
        assert_eq!(row[pcol("r")], cells[col("r")]);
    }
    // a name that no expression uses, and one without a range, are refused under the name
    let unused = efold(&[
        "scan",
        "--potential",
        v,
        "--kinetic",
        k,
        "--param",
        "alpha=1",
        "--vary",
        "beta=1:2:3",
    ]);
    assert_eq!(unused.code, 2);
    assert!(
        unused.stderr.contains("no expression of the model uses `beta`"),
        "{}",
        unused.stderr
    );
    assert!(
        unused.stderr.contains("| ^^^^ used by no expression"),
        "{}",
        unused.stderr
    );
    let bare = efold(&["scan", "--potential", v, "--kinetic", k, "--vary", "alpha"]);
    assert_eq!(bare.code, 2);
    assert!(
        bare.stderr.contains("without a range it cannot be declared"),
        "{}",
        bare.stderr
    );
    // a parameter used only through another one counts as used
    let chained = efold(&[
        "scan",
        "--potential",
        "m2*phi^2/2",
        "--param",
        "m2=c^2",
        "--vary",
        "c=1:2:3",
        "--efolds",
        "60",
    ]);
    assert_eq!(chained.code, 0, "{}", chained.stderr);
}
