//! Golden prediction files for a directory of models, their check, atomic writes, and watch.

mod common;
use common::efold;
use std::io::BufRead;
use std::path::{Path, PathBuf};

fn temp_dir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("efold-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn copy_model(name: &str, to: &Path) -> PathBuf {
    let from = format!("{}/models/{name}.toml", env!("CARGO_MANIFEST_DIR"));
    let dest = to.join(format!("{name}.toml"));
    std::fs::copy(from, &dest).unwrap();
    dest
}

#[test]
fn editing_a_model_makes_the_check_fail_with_a_readable_diff() {
    let dir = temp_dir("golden");
    let pole = copy_model("pole-order-2-quadratic", &dir);
    copy_model("quadratic-monomial", &dir);
    let d = dir.to_str().unwrap();
    let w = efold(&["golden", "write", d]);
    assert_eq!(w.code, 0, "{}", w.stderr);
    assert!(dir.join("pole-order-2-quadratic.predictions.json").exists());
    let c = efold(&["golden", "check", d]);
    assert_eq!(c.code, 0, "{}", c.stderr);
    assert_eq!(c.stdout.matches("unchanged").count(), 2);
    // edit the potential's expression
    let text = std::fs::read_to_string(&pole).unwrap().replace(
        "potential = \"phi^2/(6*alpha)\"",
        "potential = \"phi^2/(6*alpha) + phi^4/(60*alpha^2)\"",
    );
    std::fs::write(&pole, text).unwrap();
    let c = efold(&["golden", "check", d]);
    assert_eq!(c.code, 1, "drift is exit code 1: {}", c.stderr);
    assert!(c.stderr.contains("1 of 2 model(s) drifted"), "{}", c.stderr);
    assert!(
        c.stderr.contains("pole-order-2-quadratic.toml") && c.stderr.contains("N_* = 55: n_s"),
        "{}",
        c.stderr
    );
    assert!(c.stderr.contains("quadratic-monomial.toml: unchanged"));
    std::fs::remove_dir_all(&dir).unwrap();
}

/// A write that fails half-way (here: its temporary file cannot be created) leaves the old
/// file as it was and no partial file behind.
#[test]
fn an_interrupted_write_leaves_the_old_file() {
    let dir = temp_dir("atomic");
    let target = dir.join("x.predictions.json");
    std::fs::write(&target, "old contents\n").unwrap();
    std::fs::create_dir(dir.join(format!(".x.predictions.json.tmp{}", std::process::id()))).unwrap();
    let r = efold::output::write_file(&target, "new contents\n");
    assert!(r.is_err());
    assert_eq!(std::fs::read_to_string(&target).unwrap(), "old contents\n");
    let names: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names.len(), 2, "{names:?}");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn watch_reports_what_changed() {
    let dir = temp_dir("watch");
    let pole = copy_model("pole-order-2-quadratic", &dir);
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_efold"))
        .args(["watch", dir.to_str().unwrap(), "--exit-after", "1"])
        .stdout(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let stdout = child.stdout.take().unwrap();
    let (tx, rx) = std::sync::mpsc::channel();
    std::thread::spawn(move || {
        for line in std::io::BufReader::new(stdout).lines().map_while(Result::ok) {
            let _ = tx.send(line);
        }
    });
    let deadline = std::time::Instant::now() + std::time::Duration::from_secs(30);
    let mut lines = Vec::new();
    while !lines.iter().any(|l: &String| l.starts_with("watching")) {
        let left = deadline.saturating_duration_since(std::time::Instant::now());
        lines.push(rx.recv_timeout(left).expect("watch starts"));
    }
    let text = std::fs::read_to_string(&pole)
        .unwrap()
        .replace("alpha = 1", "alpha = 2");
    std::fs::write(&pole, text).unwrap();
    while !lines.iter().any(|l| l.starts_with("  N_* = 55: n_s ")) {
        let left = deadline.saturating_duration_since(std::time::Instant::now());
        match rx.recv_timeout(left) {
            Ok(l) => lines.push(l),
            Err(_) => break,
        }
    }
    let _ = child.kill();
    let _ = child.wait();
    let all = lines.join("\n");
    assert!(all.contains("value(s) changed") && all.contains("n_s"), "{all}");
    let summary = lines
        .iter()
        .find(|l| l.starts_with("  N_* = 55: n_s "))
        .expect("a summary line");
    assert!(summary.ends_with("; input changed: params.alpha 1 -> 2"), "{all}");
    std::fs::remove_dir_all(&dir).unwrap();
}

fn prediction_at(report: &serde_json::Value, n_star: f64) -> &serde_json::Value {
    report["predictions"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["n_star"].as_f64() == Some(n_star))
        .unwrap()
}

/// alpha 1 -> 1.01 on the order-2 pole moves the pole-alone r = 8 a_2 / N^2 (a_2 = 3 alpha / 2),
/// a nested key: the check names it by its path `pole_only.r`, leads with one summary line per
/// N_* (n_s and r before and after, and the parameter that changed), and lists n_s, r, alpha_s
/// and the amplitude before the other keys.
#[test]
fn a_nested_change_is_reported_by_path_after_a_summary() {
    let dir = temp_dir("golden-nested");
    let pole = copy_model("pole-order-2-quadratic", &dir);
    let d = dir.to_str().unwrap();
    assert_eq!(efold(&["golden", "write", d]).code, 0);
    let golden: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("pole-order-2-quadratic.predictions.json")).unwrap())
            .unwrap();
    let text = std::fs::read_to_string(&pole).unwrap();
    assert!(text.contains("\nalpha = 1\n"));
    std::fs::write(&pole, text.replace("\nalpha = 1\n", "\nalpha = 1.01\n")).unwrap();
    let now = efold(&["predict", pole.to_str().unwrap(), "--format", "json"]);
    assert_eq!(now.code, 0, "{}", now.stderr);
    let now: serde_json::Value = serde_json::from_str(&now.stdout).unwrap();
    let c = efold(&["golden", "check", d]);
    assert_eq!(c.code, 1, "{}", c.stderr);
    let lines: Vec<&str> = c.stderr.lines().collect();
    let heading = lines.iter().position(|l| l.contains("value(s) drifted")).unwrap();
    // one summary line per N_*, first; numbers in shortest round-trip form (Rust's `{}` of f64)
    for (i, n) in [50.0, 55.0, 60.0].into_iter().enumerate() {
        let (o, p) = (prediction_at(&golden, n), prediction_at(&now, n));
        let f = |v: &serde_json::Value, k: &str| format!("{}", v[k].as_f64().unwrap());
        assert_eq!(
            lines[heading + 1 + i],
            format!(
                "  N_* = {n}: n_s {} -> {}, r {} -> {}; input changed: params.alpha 1 -> 1.01",
                f(o, "n_s"),
                f(p, "n_s"),
                f(o, "r"),
                f(p, "r")
            )
        );
    }
    // the nested key, by path, with its values: 8 a_2 / N^2 with a_2 = 3/2 alpha (the pole's
    // residue, DEVELOPERS.md "The pole of order p alone", own derivation), N = 55
    let nested = lines
        .iter()
        .find(|l| l.starts_with("  N_* = 55: pole_only.r "))
        .unwrap_or_else(|| panic!("{}", c.stderr));
    let (old_r, new_r) = (8.0 * 1.5 / 55f64.powi(2), 8.0 * 1.515 / 55f64.powi(2));
    let nums: Vec<f64> = nested.split_whitespace().filter_map(|w| w.parse().ok()).collect();
    assert!(
        // printed to six significant digits
        ((nums[0] - old_r) / old_r).abs() < 1e-5 && ((nums[1] - new_r) / new_r).abs() < 1e-5,
        "{nested}"
    );
    // the order within one N_*: n_s, r, alpha_s, the amplitude, then the report's own order
    let keys: Vec<&str> = lines
        .iter()
        .filter_map(|l| l.strip_prefix("  N_* = 50: "))
        .filter(|l| !l.starts_with("n_s ") || l.contains("(relative"))
        .map(|l| l.split_whitespace().next().unwrap())
        .collect();
    assert_eq!(
        keys[..8],
        [
            "n_s",
            "r",
            "alpha_s",
            "a_s_unscaled",
            "potential_scale",
            "phi_star",
            "phi_end",
            "n_t"
        ],
        "{keys:?}"
    );
    assert_eq!(keys[keys.len() - 2..], ["pole_only.r", "pole_only.residue"], "{keys:?}");
    // the branch's top sqrt(6 alpha) moved too: reported with the report, after the predictions
    let top = lines
        .iter()
        .position(|l| l.starts_with("  report: branch.top "))
        .unwrap();
    assert!(lines[top..].iter().all(|l| !l.contains("N_* =")), "{}", c.stderr);
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_changed_list_of_n_star_reads_as_requests() {
    let dir = temp_dir("golden-nstar");
    let pole = copy_model("pole-order-2-quadratic", &dir);
    let text = std::fs::read_to_string(&pole).unwrap();
    std::fs::write(&pole, format!("{text}\n[settings]\nefolds = [50, 55, 60]\n")).unwrap();
    let d = dir.to_str().unwrap();
    assert_eq!(efold(&["golden", "write", d]).code, 0);
    std::fs::write(&pole, format!("{text}\n[settings]\nefolds = [50, 55, 65]\n")).unwrap();
    let c = efold(&["golden", "check", d]);
    assert_eq!(c.code, 1, "{}", c.stderr);
    // 50 and 55 are matched to themselves and unchanged; 60 and 65 are the only differences
    assert!(
        c.stderr.contains("pole-order-2-quadratic.toml: 2 value(s) drifted"),
        "{}",
        c.stderr
    );
    let diff: Vec<&str> = c.stderr.lines().filter(|l| l.starts_with("  ")).collect();
    assert!(
        diff[0].starts_with("  N_* = 60 no longer requested (was n_s 0.966885"),
        "{diff:?}"
    );
    // n_s near 1 - 2/65 = 0.9692 (the pole alone, DEVELOPERS.md, own derivation)
    assert!(diff[1].starts_with("  N_* = 65 newly requested (n_s 0.969"), "{diff:?}");
    assert_eq!(
        diff[2..],
        ["  N_* = 60 no longer requested", "  N_* = 65 newly requested"]
    );
    assert!(
        !c.stderr.contains("(prediction)") && !c.stderr.contains("null"),
        "{}",
        c.stderr
    );
    std::fs::remove_dir_all(&dir).unwrap();
}

/// A directory walk does not follow symbolic links to directories: a link loop (a link to the
/// directory itself) ends the walk instead of repeating it without end.
#[test]
fn a_symlink_loop_does_not_trap_the_walk() {
    let dir = std::env::temp_dir().join(format!("efold-loop-{}", std::process::id()));
    std::fs::create_dir_all(dir.join("sub")).unwrap();
    std::fs::write(dir.join("sub/m.toml"), "potential = \"phi^2\"\n").unwrap();
    std::os::unix::fs::symlink(&dir, dir.join("sub/back")).unwrap();
    std::os::unix::fs::symlink(dir.join("sub"), dir.join("again")).unwrap();
    let files = efold::golden::model_files(&dir).unwrap();
    assert_eq!(files, vec![dir.join("sub/m.toml")]);
    std::fs::remove_dir_all(&dir).unwrap();
}
