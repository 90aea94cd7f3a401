//! Hostile input at the command line and in the files efold writes and reads back: closed
//! pipes, full devices, sizes at and beyond their limits, damaged or mixed shards, outputs onto
//! links and devices, and flag values that make no sense. Every case runs the real binary;
//! error texts are insta snapshots.

mod common;
use common::{efold, efold_in};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

fn model(name: &str) -> String {
    format!("{}/models/{name}.toml", env!("CARGO_MANIFEST_DIR"))
}

fn temp_dir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("efold-hostile-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn entries(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

/// Runs efold with its standard output a pipe whose reading end is closed without reading:
/// every write past the pipe's buffer (or all of them, once it is closed) fails with EPIPE.
/// Returns the exit code and standard error.
fn with_closed_pipe(args: &[&str]) -> (i32, String) {
    let mut child = Command::new(env!("CARGO_BIN_EXE_efold"))
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the efold binary runs");
    drop(child.stdout.take());
    let out = child.wait_with_output().expect("efold ends");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8(out.stderr).expect("utf-8 errors"),
    )
}

// ---- 1. standard output ----

#[test]
fn a_closed_pipe_ends_quietly_with_exit_code_0() {
    // a small report, and a scan whose table (about 1.2 MB) is far larger than a pipe's buffer,
    // so that its writes must meet the closed pipe
    let pole = model("pole-order-2-quadratic");
    for args in [
        vec!["predict", pole.as_str()],
        vec!["predict", pole.as_str(), "--format", "json"],
        vec!["scan", pole.as_str(), "--vary", "alpha=0.1:10:1000:log"],
    ] {
        let (code, stderr) = with_closed_pipe(&args);
        assert_eq!(code, 0, "{args:?}: {stderr}");
        assert_eq!(stderr, "", "{args:?}: nothing on stderr");
    }
}

#[test]
fn watch_stops_quietly_when_its_reader_goes_away() {
    let dir = temp_dir("watch-pipe");
    std::fs::copy(model("quadratic-monomial"), dir.join("m.toml")).unwrap();
    let (code, stderr) = with_closed_pipe(&["watch", dir.to_str().unwrap()]);
    assert_eq!(code, 0, "{stderr}");
    assert_eq!(stderr, "");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_closed_pipe_through_the_shell() {
    // `efold predict MODEL | head -c 10`: the reader takes ten bytes and leaves
    let out = Command::new("sh")
        .arg("-c")
        .arg(format!(
            "'{}' predict '{}' | head -c 10",
            env!("CARGO_BIN_EXE_efold"),
            model("pole-order-2-quadratic")
        ))
        .output()
        .unwrap();
    assert_eq!(out.stdout.len(), 10);
    assert_eq!(String::from_utf8_lossy(&out.stderr), "");
}

#[test]
fn a_full_device_on_standard_output_is_exit_code_2() {
    if !Path::new("/dev/full").exists() {
        eprintln!("no /dev/full here: skipped");
        return;
    }
    let full = std::fs::OpenOptions::new().write(true).open("/dev/full").unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_efold"))
        .args(["predict", &model("pole-order-2-quadratic")])
        .stdout(Stdio::from(full))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    insta::assert_snapshot!("stdout_full", String::from_utf8(out.stderr).unwrap());
}

// ---- 2. sizes ----

/// Each limit at its edge is accepted (the run then stops at a later, deliberate error, so that
/// no test computes ten thousand modes) and one beyond is refused with the limit named.
#[test]
fn every_size_has_a_limit() {
    let pole = model("pole-order-2-quadratic");
    let tilt = model("pole-order-2-cubic-tilt");
    let efolds = |n: usize| vec!["55"; n].join(",");
    let (e1000, e1001) = (efolds(1000), efolds(1001));
    // (name, at the edge, beyond, what the edge run stops at instead)
    let cases: Vec<(&str, Vec<&str>, Vec<&str>, &str)> = vec![
        (
            "spectrum_points",
            vec!["spectrum", "--potential", "phi^", "--points", "10000"],
            vec!["spectrum", "--potential", "phi^", "--points", "10001"],
            "expected",
        ),
        (
            "spectrum_points_huge",
            vec!["spectrum", "--potential", "phi^", "--points", "10000"],
            vec!["spectrum", &pole, "--points", "18446744073709551615"],
            "expected",
        ),
        (
            "inspect_table",
            vec!["inspect", "--potential", "phi^", "--table", "100000"],
            vec!["inspect", &pole, "--table", "100001"],
            "expected",
        ),
        (
            "compile_order",
            vec!["compile", "phi^3", "--emit", "derivatives", "--order", "8"],
            vec!["compile", "phi^3", "--emit", "derivatives", "--order", "9"],
            "",
        ),
        (
            "vary_count",
            vec!["scan", &pole, "--vary", "alpha=0.1:10:1000000", "--shard", "0/1"],
            vec!["scan", &pole, "--vary", "alpha=0.1:10:1000001", "--shard", "0/1"],
            "--shard 0/1",
        ),
        (
            "vary_points",
            vec![
                "scan", &pole, "--vary", "alpha", "--points", "1000000", "--shard", "0/1",
            ],
            vec![
                "scan", &pole, "--vary", "alpha", "--points", "1000001", "--shard", "0/1",
            ],
            "--shard 0/1",
        ),
        (
            "grid_product",
            vec![
                "scan",
                &tilt,
                "--vary",
                "alpha=1:2:10000",
                "--vary",
                "gamma=0:1:1000",
                "--shard",
                "0/1",
            ],
            vec![
                "scan",
                &tilt,
                "--vary",
                "alpha=1:2:10001",
                "--vary",
                "gamma=0:1:1000",
                "--shard",
                "0/1",
            ],
            "--shard 0/1",
        ),
        (
            "grid_overflow",
            vec![
                "scan",
                &tilt,
                "--vary",
                "alpha=1:2:1000",
                "--vary",
                "gamma=0:1:10000",
                "--shard",
                "0/1",
            ],
            vec![
                "scan",
                &tilt,
                "--vary",
                "alpha=1:2:1000000",
                "--vary",
                "gamma=0:1:1000000",
                "--shard",
                "0/1",
            ],
            "--shard 0/1",
        ),
        (
            "efolds_list",
            vec!["predict", "--potential", "phi^", "--efolds", &e1000],
            vec!["predict", "--potential", "phi^", "--efolds", &e1001],
            "expected",
        ),
        (
            "scan_efolds_list",
            vec![
                "scan",
                &pole,
                "--vary",
                "alpha=1:2:2",
                "--efolds",
                &e1000,
                "--shard",
                "0/1",
            ],
            vec![
                "scan",
                &pole,
                "--vary",
                "alpha=1:2:2",
                "--efolds",
                &e1001,
                "--shard",
                "0/1",
            ],
            "--shard 0/1",
        ),
        (
            "threads",
            vec![
                "scan",
                &pole,
                "--vary",
                "alpha=1:2:2",
                "--threads",
                "256",
                "--shard",
                "0/1",
            ],
            vec![
                "scan",
                &pole,
                "--vary",
                "alpha=1:2:2",
                "--threads",
                "257",
                "--shard",
                "0/1",
            ],
            "--shard 0/1",
        ),
    ];
    for (name, edge, beyond, stop) in cases {
        let r = efold(&edge);
        assert!(
            !r.stderr.contains("config::Limits"),
            "{name}: the edge is allowed: {}",
            r.stderr
        );
        assert!(r.stderr.contains(stop), "{name}: {}", r.stderr);
        let r = efold(&beyond);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        assert!(r.stderr.contains("config::Limits::"), "{name}: {}", r.stderr);
        insta::assert_snapshot!(format!("limit_{name}"), r.stderr);
    }
}

#[test]
fn a_large_scan_streams_the_same_table_as_its_shards() {
    // 2800 points at 3 N_* are 8400 rows: more than one chunk of scan::CHUNK_ROWS (8192)
    let dir = temp_dir("stream");
    let pole = model("pole-order-2-quadratic");
    let base = ["scan", pole.as_str(), "--vary", "alpha=0.1:10:2800:log"];
    let whole = efold(&base);
    assert_eq!(whole.code, 0, "{}", whole.stderr);
    assert_eq!(whole.stdout.lines().count(), 1 + 2800 * 3);
    let points: Vec<usize> = whole
        .stdout
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap().parse().unwrap())
        .collect();
    assert!(points.windows(2).all(|w| w[0] <= w[1]), "rows in point order");
    let mut files = Vec::new();
    for k in 1..=2 {
        let name = format!("part{k}.csv");
        let shard = format!("{k}/2");
        let mut args = base.to_vec();
        args.extend(["--shard", &shard, "--out", &name]);
        let r = efold_in(&dir, &args);
        assert_eq!(r.code, 0, "{}", r.stderr);
        files.push(name);
    }
    let r = efold_in(&dir, &["merge", &files[1], &files[0]]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        r.stdout == whole.stdout,
        "the merged shards differ from the streamed table"
    );
    std::fs::remove_dir_all(&dir).unwrap();
}

// ---- 3. merge ----

/// Writes the shards of a small scan into `dir` as `{prefix}{k}.{format}` and returns the names.
fn shards(dir: &Path, prefix: &str, format: &str, vary: &str, n: usize) -> Vec<String> {
    let pole = model("pole-order-2-quadratic");
    (1..=n)
        .map(|k| {
            let name = format!("{prefix}{k}.{format}");
            let shard = format!("{k}/{n}");
            let r = efold_in(
                dir,
                &[
                    "scan", &pole, "--vary", vary, "--efolds", "50,60", "--format", format, "--shard", &shard, "--out",
                    &name,
                ],
            );
            assert_eq!(r.code, 0, "{}", r.stderr);
            name
        })
        .collect()
}

#[test]
fn shard_files_carry_their_provenance() {
    let dir = temp_dir("provenance");
    let csv = shards(&dir, "a", "csv", "alpha=1:3:5", 2);
    let text = std::fs::read_to_string(dir.join(&csv[1])).unwrap();
    let first = text.lines().next().unwrap();
    assert!(first.starts_with("# efold-scan-shard {"), "{first}");
    let prov: serde_json::Value = serde_json::from_str(first.trim_start_matches("# efold-scan-shard ")).unwrap();
    // 5 points in 2 shards: the second holds points 2, 3 and 4
    assert_eq!(prov["shard"], 2);
    assert_eq!(prov["shards"], 2);
    assert_eq!(prov["points"], serde_json::json!([2, 5]));
    assert_eq!(prov["total"], 5);
    assert_eq!(prov["efolds"], serde_json::json!([50.0, 60.0]));
    assert_eq!(prov["scan"].as_str().unwrap().len(), 16);
    let json = shards(&dir, "a", "json", "alpha=1:3:5", 2);
    let v: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(dir.join(&json[0])).unwrap()).unwrap();
    assert_eq!(v["shard"]["scan"], prov["scan"], "one definition, whatever the format");
    assert_eq!(v["rows"].as_array().unwrap().len(), 2 * 2);
    // an unsharded run has no provenance
    let r = efold(&["scan", &model("pole-order-2-quadratic"), "--vary", "alpha=1:3:5"]);
    assert!(r.stdout.starts_with("point,"));
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn merge_refuses_what_is_not_one_complete_scan() {
    let dir = temp_dir("merge");
    let a = shards(&dir, "a", "csv", "alpha=1:3:5", 3);
    let b = shards(&dir, "b", "csv", "alpha=1:4:5", 3);
    let j = shards(&dir, "j", "json", "alpha=1:3:5", 3);
    let write = |name: &str, text: &str| {
        std::fs::write(dir.join(name), text).unwrap();
        name.to_string()
    };
    let read = |name: &str| std::fs::read_to_string(dir.join(name)).unwrap();
    let last = read(&a[2]);
    let cut = write("cut.csv", &last[..last.len() - 5]);
    let cut_at_newline = write("cut-line.csv", &last[..last.trim_end().rfind('\n').unwrap() + 1]);
    let extra = write("extra.csv", &last.replacen(",,\n", ",,,\n", 1));
    let no_n_star_row = {
        let lines: Vec<&str> = last.lines().collect();
        let mut kept: Vec<&str> = lines[..lines.len() - 2].to_vec();
        kept.push(lines[lines.len() - 1]);
        write("missing-row.csv", &(kept.join("\n") + "\n"))
    };
    let predict = efold(&["predict", &model("pole-order-2-quadratic"), "--format", "csv"]);
    let predict = write("predict.csv", &predict.stdout);
    let predict_json = efold(&["predict", &model("pole-order-2-quadratic"), "--format", "json"]);
    let predict_json = write("predict.json", &predict_json.stdout);
    let unsharded = efold(&["scan", &model("pole-order-2-quadratic"), "--vary", "alpha=1:3:5"]);
    let unsharded = write("whole.csv", &unsharded.stdout);
    let json_last = read(&j[2]);
    let json_cut = write("cut.json", &json_last[..json_last.len() / 2]);
    let cases: Vec<(&str, Vec<&str>)> = vec![
        ("two_scans", vec![&a[0], &a[1], &b[2]]),
        ("truncated_last_row", vec![&a[0], &a[1], &cut]),
        ("truncated_at_a_row", vec![&a[0], &a[1], &cut_at_newline]),
        ("extra_column", vec![&a[0], &a[1], &extra]),
        ("missing_n_star_row", vec![&a[0], &a[1], &no_n_star_row]),
        ("missing_shard", vec![&a[0], &a[2]]),
        ("duplicated_shard", vec![&a[0], &a[1], &a[1]]),
        ("predict_table", vec![&predict]),
        ("predict_json", vec![&predict_json]),
        ("unsharded_table", vec![&unsharded]),
        ("mixed_formats", vec![&a[0], &j[1], &a[2]]),
        ("truncated_json", vec![&j[0], &j[1], &json_cut]),
    ];
    for (name, files) in cases {
        let mut args = vec!["merge"];
        args.extend(files.iter().copied());
        let r = efold_in(&dir, &args);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        assert!(r.stdout.is_empty(), "{name}");
        insta::assert_snapshot!(format!("merge_{name}"), r.stderr);
    }
    // and the complete sets still merge, in any order
    for set in [[&a[2], &a[0], &a[1]], [&j[1], &j[2], &j[0]]] {
        let r = efold_in(&dir, &["merge", set[0], set[1], set[2]]);
        assert_eq!(r.code, 0, "{}", r.stderr);
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

// ---- 4. output files ----

#[test]
fn output_onto_a_symbolic_link_updates_its_target() {
    let dir = temp_dir("symlink");
    std::fs::write(dir.join("real.svg"), "old").unwrap();
    std::os::unix::fs::symlink("real.svg", dir.join("link.svg")).unwrap();
    let r = efold_in(&dir, &["inspect", &model("quadratic-monomial"), "--svg", "link.svg"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let meta = std::fs::symlink_metadata(dir.join("link.svg")).unwrap();
    assert!(meta.file_type().is_symlink(), "the link stays a link");
    assert!(std::fs::read_to_string(dir.join("real.svg"))
        .unwrap()
        .starts_with("<svg"));
    assert_eq!(entries(&dir), vec!["link.svg", "real.svg"], "no temporary file left");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn output_onto_dev_null_leaves_it_a_device() {
    use std::os::unix::fs::FileTypeExt;
    let r = efold(&[
        "scan",
        &model("pole-order-2-quadratic"),
        "--vary",
        "alpha=1:2:2",
        "--out",
        "/dev/null",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let meta = std::fs::symlink_metadata("/dev/null").unwrap();
    assert!(
        meta.file_type().is_char_device(),
        "/dev/null is still a character device"
    );
}

#[test]
fn output_onto_a_device_node_writes_through() {
    use std::os::unix::fs::FileTypeExt;
    let dir = temp_dir("mknod");
    // a character device with the numbers of /dev/null (1, 3 on Linux); needs the right to mknod
    let made = Command::new("mknod")
        .args(["null-device", "c", "1", "3"])
        .current_dir(&dir)
        .status()
        .is_ok_and(|s| s.success());
    if !made {
        eprintln!("note: cannot create a device node here (not permitted): skipped");
        std::fs::remove_dir_all(&dir).unwrap();
        return;
    }
    let r = efold_in(&dir, &["inspect", &model("quadratic-monomial"), "--svg", "null-device"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let meta = std::fs::symlink_metadata(dir.join("null-device")).unwrap();
    assert!(meta.file_type().is_char_device(), "still a device node");
    assert_eq!(entries(&dir), vec!["null-device"], "no temporary file");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn output_onto_a_full_device_is_an_error_and_leaves_nothing() {
    if !Path::new("/dev/full").exists() {
        eprintln!("no /dev/full here: skipped");
        return;
    }
    let before = entries(Path::new("/dev"));
    let r = efold(&[
        "scan",
        &model("pole-order-2-quadratic"),
        "--vary",
        "alpha=1:2:2",
        "--out",
        "/dev/full",
    ]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stdout.is_empty());
    insta::assert_snapshot!("out_full", r.stderr);
    assert_eq!(entries(Path::new("/dev")), before, "no temporary file in /dev");
}

#[test]
fn one_file_for_two_outputs_is_refused() {
    let dir = temp_dir("same-file");
    std::fs::create_dir(dir.join("sub")).unwrap();
    let pole = model("pole-order-2-quadratic");
    for (name, out, svg) in [("same_spelling", "x", "x"), ("other_spelling", "x", "./sub/../x")] {
        let r = efold_in(
            &dir,
            &["scan", &pole, "--vary", "alpha=1:2:2", "--out", out, "--svg", svg],
        );
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        insta::assert_snapshot!(format!("out_and_svg_{name}"), r.stderr);
    }
    std::fs::write(dir.join("y"), "").unwrap();
    std::os::unix::fs::symlink("y", dir.join("link")).unwrap();
    let r = efold_in(
        &dir,
        &["scan", &pole, "--vary", "alpha=1:2:2", "--out", "y", "--svg", "link"],
    );
    assert_eq!(r.code, 2, "through a link: {}", r.stderr);
    assert_eq!(entries(&dir), vec!["link", "sub", "y"], "nothing written");
    std::fs::remove_dir_all(&dir).unwrap();
}

// ---- 5-7. flag values ----

/// Every refused flag value exits 2 with the flag named and its valid range, and prints nothing
/// on standard output.
#[test]
fn meaningless_flag_values_are_refused() {
    let pole = model("pole-order-2-quadratic");
    let p = pole.as_str();
    let dir = temp_dir("tolerance");
    std::fs::copy(model("quadratic-monomial"), dir.join("m.toml")).unwrap();
    let d = dir.to_str().unwrap();
    let cases: Vec<(&str, Vec<&str>)> = vec![
        ("golden_tolerance_nan", vec!["golden", "check", d, "--tolerance", "nan"]),
        (
            "golden_tolerance_negative",
            vec!["golden", "check", d, "--tolerance", "-1e-8"],
        ),
        ("watch_tolerance_infinite", vec!["watch", d, "--tolerance", "inf"]),
        ("param_pi", vec!["predict", p, "--param", "pi=3"]),
        ("param_exp", vec!["predict", p, "--param", "exp=2"]),
        (
            "field_sqrt",
            vec!["predict", "--potential", "sqrt^2", "--field", "sqrt"],
        ),
        ("eval_param_pi", vec!["eval", "phi", "--at", "phi=1", "--param", "pi=3"]),
        (
            "param_twice",
            vec!["predict", p, "--param", "alpha=1", "--param", "alpha=2"],
        ),
        (
            "vary_twice",
            vec!["scan", p, "--vary", "alpha=1:2:3", "--vary", "alpha"],
        ),
        (
            "reheat_temp_negative",
            vec!["predict", p, "--reheat-w", "0", "--reheat-temp", "-5"],
        ),
        (
            "reheat_temp_zero",
            vec!["predict", p, "--reheat-w", "0", "--reheat-temp", "0"],
        ),
        (
            "reheat_temp_infinite",
            vec!["predict", p, "--reheat-w", "0", "--reheat-temp", "inf"],
        ),
        (
            "reheat_efolds_huge",
            vec!["predict", p, "--reheat-w", "0", "--reheat-efolds", "1e6"],
        ),
        (
            "reheat_efolds_nan",
            vec!["predict", p, "--reheat-w", "0", "--reheat-efolds", "nan"],
        ),
        (
            "reheat_efolds_negative",
            vec!["predict", p, "--reheat-w", "0", "--reheat-efolds", "-1"],
        ),
        (
            "g_star_zero",
            vec!["predict", p, "--reheat", "instant", "--g-star", "0"],
        ),
        (
            "g_star_nan",
            vec!["predict", p, "--reheat", "instant", "--g-star", "nan"],
        ),
        (
            "reheat_w_minus_third",
            vec![
                "predict",
                p,
                "--reheat-w",
                "-0.3333333333333333",
                "--reheat-efolds",
                "5",
            ],
        ),
        (
            "reheat_w_above_1",
            vec!["predict", p, "--reheat-w", "1.01", "--reheat-efolds", "5"],
        ),
        ("efolds_tiny", vec!["predict", p, "--efolds", "50,1e-12,60"]),
        ("efolds_nan", vec!["predict", p, "--efolds", "nan"]),
        (
            "scan_efolds_infinite",
            vec!["scan", p, "--vary", "alpha=1:2:2", "--efolds", "inf"],
        ),
        ("spectrum_efolds_zero", vec!["spectrum", p, "--efolds", "0"]),
        (
            "fit_efolds_negative",
            vec!["fit", p, "--free", "alpha", "--target", "n_s=0.965", "--efolds", "-55"],
        ),
        ("start_phi_without_exact", vec!["predict", p, "--start-phi", "2"]),
        (
            "start_velocity_without_exact",
            vec!["predict", p, "--start-velocity", "0.1"],
        ),
        (
            "start_velocity_without_phi",
            vec!["predict", p, "--method", "exact", "--start-velocity", "0.1"],
        ),
        ("g_star_without_reheating", vec!["predict", p, "--g-star", "10"]),
        (
            "efolds_with_reheating",
            vec!["predict", p, "--efolds", "55", "--reheat", "instant"],
        ),
        (
            "start_phi_nan",
            vec!["predict", p, "--method", "exact", "--start-phi", "nan"],
        ),
        (
            "start_velocity_h2_negative",
            vec![
                "predict",
                p,
                "--method",
                "exact",
                "--start-phi",
                "2.4",
                "--start-velocity",
                "10",
            ],
        ),
        ("spectrum_start_phi_nan", vec!["spectrum", p, "--start-phi", "nan"]),
        (
            "exact_too_few_efolds",
            vec!["predict", p, "--method", "exact", "--efolds", "1"],
        ),
        ("k_min_negative", vec!["spectrum", p, "--k-min", "-1"]),
    ];
    for (name, args) in cases {
        let r = efold(&args);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        assert!(r.stdout.is_empty(), "{name}: {}", r.stdout);
        insta::assert_snapshot!(format!("flag_{name}"), r.stderr);
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

/// The edges of the valid ranges are accepted: w = 1 and w just above -1/3, zero reheating
/// e-folds and the largest allowed, a zero tolerance, N_* = 1 in slow roll (with its warning),
/// the fewest e-folds the exact route takes.
#[test]
fn the_edges_of_the_ranges_are_accepted() {
    let pole = model("pole-order-2-quadratic");
    let p = pole.as_str();
    let dir = temp_dir("edges");
    std::fs::copy(model("quadratic-monomial"), dir.join("m.toml")).unwrap();
    let d = dir.to_str().unwrap();
    let w = efold(&["golden", "write", d]);
    assert_eq!(w.code, 0, "{}", w.stderr);
    for args in [
        vec!["golden", "check", d, "--tolerance", "0"],
        vec!["predict", p, "--reheat-w", "1", "--reheat-efolds", "5"],
        vec!["predict", p, "--reheat-w", "-0.3333", "--reheat-efolds", "0"],
        vec!["predict", p, "--reheat-w", "0", "--reheat-efolds", "100"],
        vec!["predict", p, "--reheat", "instant", "--g-star", "10.75"],
        vec!["predict", p, "--method", "exact", "--efolds", "14.32"],
    ] {
        let r = efold(&args);
        assert_eq!(r.code, 0, "{args:?}: {}", r.stderr);
    }
    let r = efold(&["predict", p, "--efolds", "1,55"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let warning = r
        .stdout
        .lines()
        .find(|l| l.contains("slow roll is unreliable"))
        .unwrap_or("");
    insta::assert_snapshot!("slow_roll_warning", warning);
    let r = efold(&["predict", p, "--efolds", "20,55", "--format", "json"]);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert!(
        !v["warnings"].to_string().contains("unreliable"),
        "no warning from N_* = 20 up: {}",
        v["warnings"]
    );
    std::fs::remove_dir_all(&dir).unwrap();
}

// ---- 8. minus signs ----

#[test]
fn a_leading_minus_is_an_expression_and_negative_numbers_reach_the_checks() {
    // -phi^2 = -(phi^2) (README: power binds tighter than unary minus): -1 at phi = 1, slope -2
    let r = efold(&["eval", "-phi^2", "--at", "phi=1", "--format", "json"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(v["value"], -1.0);
    assert_eq!(v["derivatives"][0], -2.0);
    let r = efold(&["eval", "-phi", "--at", "phi=-2"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let r = efold(&["eval", "--at", "phi=1", "--", "-phi^2"]);
    assert_eq!(r.code, 0, "the separator still works: {}", r.stderr);
    let r = efold(&["compile", "-phi^2", "--emit", "ir"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_eq!(r.stdout.lines().nth(1), Some("-phi^2"));
    // negative values after numeric flags reach efold's own checks, not clap's
    let pole = model("pole-order-2-quadratic");
    for args in [
        vec!["spectrum", pole.as_str(), "--k-min", "-1"],
        vec!["spectrum", pole.as_str(), "--k-max", "-1"],
        vec!["predict", pole.as_str(), "--reheat-w", "0", "--reheat-temp", "-5"],
        vec!["predict", pole.as_str(), "--efolds", "-5"],
        vec!["golden", "check", "models", "--tolerance", "-1e-8"],
        vec!["scan", pole.as_str(), "--vary", "alpha", "--shard", "-1/3"],
    ] {
        let r = efold(&args);
        assert_eq!(r.code, 2, "{args:?}");
        assert!(r.stderr.starts_with("efold: error:"), "{args:?}: {}", r.stderr);
    }
    // a negative count is clap's error (not a number of that kind), still exit code 2
    let r = efold(&["spectrum", pole.as_str(), "--points", "-3"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("invalid value '-3'"), "{}", r.stderr);
}

#[test]
fn output_into_a_fifo_reaches_its_reader() {
    use std::os::unix::fs::FileTypeExt;
    let dir = temp_dir("fifo");
    let fifo = dir.join("pipe.csv");
    let made = Command::new("mkfifo").arg(&fifo).status().is_ok_and(|s| s.success());
    if !made {
        eprintln!("note: cannot create a FIFO here: skipped");
        std::fs::remove_dir_all(&dir).unwrap();
        return;
    }
    let reader = {
        let fifo = fifo.clone();
        std::thread::spawn(move || std::fs::read_to_string(fifo).unwrap())
    };
    let pole = model("pole-order-2-quadratic");
    let args = [
        "scan",
        pole.as_str(),
        "--vary",
        "alpha=1:2:2",
        "--out",
        fifo.to_str().unwrap(),
    ];
    let r = efold(&args);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let got = reader.join().unwrap();
    let whole = efold(&args[..4]);
    assert_eq!(got, whole.stdout, "the reader gets the table");
    assert!(std::fs::symlink_metadata(&fifo).unwrap().file_type().is_fifo());
    assert_eq!(entries(&dir), vec!["pipe.csv"]);
    std::fs::remove_dir_all(&dir).unwrap();
}
