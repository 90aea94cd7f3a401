//! Golden files and watch for models of several fields, through the real binary: a write and
//! check round trip, a drift (exit code 1), a golden file of one kind checked against a model
//! of the other, and watch following an edit. One N_* (55) per model: a multi-field prediction
//! takes seconds in a debug build.

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

/// The mass-ratio model of two fields, at N_* = 55 only, copied to `dir/name.toml`.
fn two_field_model(dir: &Path, name: &str) -> PathBuf {
    let from = format!(
        "{}/models/several-fields/two-field-quadratic-mass-ratio.toml",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(from).unwrap() + "\n[settings]\nefolds = [55]\n";
    let dest = dir.join(format!("{name}.toml"));
    std::fs::write(&dest, text).unwrap();
    dest
}

#[test]
fn golden_files_of_several_fields_round_trip_and_catch_a_drift() {
    let dir = temp_dir("golden-fields");
    let m = two_field_model(&dir, "mass-ratio");
    let d = dir.to_str().unwrap();
    let w = efold(&["golden", "write", d]);
    assert_eq!(w.code, 0, "{}", w.stderr);
    let golden: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("mass-ratio.predictions.json")).unwrap()).unwrap();
    // the numbers `efold predict` gives, with the model's input beside them
    let p = efold(&["predict", m.to_str().unwrap(), "--format", "json"]);
    assert_eq!(p.code, 0, "{}", p.stderr);
    let predicted: serde_json::Value = serde_json::from_str(&p.stdout).unwrap();
    assert_eq!(golden["predictions"], predicted["predictions"]);
    assert_eq!(golden["fields"], serde_json::json!(["x", "y"]));
    assert_eq!(golden["model"]["params"]["ratio"], serde_json::json!(9.0));
    let c = efold(&["golden", "check", d]);
    assert_eq!(c.code, 0, "{}", c.stderr);
    assert!(c.stdout.contains("mass-ratio.toml: unchanged"), "{}", c.stdout);
    // a new mass ratio moves every number: exit code 1, the input named
    let text = std::fs::read_to_string(&m).unwrap().replace("ratio = 9 ", "ratio = 8 ");
    std::fs::write(&m, text).unwrap();
    let c = efold(&["golden", "check", d]);
    assert_eq!(c.code, 1, "drift is exit code 1: {}", c.stderr);
    assert!(c.stderr.contains("1 of 1 model(s) drifted"), "{}", c.stderr);
    assert!(c.stderr.contains("input changed: params.ratio 9 -> 8"), "{}", c.stderr);
    assert!(c.stderr.contains("N_* = 55: n_s "), "{}", c.stderr);
    std::fs::remove_dir_all(&dir).ok();
}

/// A golden file written for a model of several fields, checked against a model of one field
/// under the same name (and the other way round), is refused with both kinds named.
#[test]
fn a_golden_file_of_the_other_kind_is_refused() {
    let dir = temp_dir("golden-fields-kind");
    let d = dir.to_str().unwrap();
    let m = two_field_model(&dir, "model");
    assert_eq!(efold(&["golden", "write", d]).code, 0);
    let one = "potential = \"m^2*phi^2/2\"\n[params]\nm = 6e-6\n[settings]\nefolds = [55]\n";
    let two = std::fs::read_to_string(&m).unwrap();
    std::fs::write(&m, one).unwrap();
    let c = efold(&["golden", "check", d]);
    assert_eq!(c.code, 1, "{}", c.stderr);
    assert!(
        c.stderr
            .contains("holds the predictions of a model of 2 fields (x, y), but the model now has one field"),
        "{}",
        c.stderr
    );
    // and a one-field golden file against a model of several fields
    assert_eq!(efold(&["golden", "write", d]).code, 0);
    std::fs::write(&m, two).unwrap();
    let c = efold(&["golden", "check", d]);
    assert_eq!(c.code, 1, "{}", c.stderr);
    assert!(
        c.stderr
            .contains("of a model of one field, but the model now has 2 fields (x, y)"),
        "{}",
        c.stderr
    );
    std::fs::remove_dir_all(&dir).ok();
}

/// watch predicts a model of several fields and reports what moved after an edit. The wait
/// for its lines is bounded only so that a broken watch fails instead of hanging the suite.
#[test]
fn watch_follows_a_model_of_several_fields() {
    let dir = temp_dir("watch-fields");
    let m = two_field_model(&dir, "mass-ratio");
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
    let deadline = std::time::Instant::now() + std::time::Duration::from_secs(600);
    let mut lines: Vec<String> = Vec::new();
    let wait_for = |lines: &mut Vec<String>, prefix: &str| {
        while !lines.iter().any(|l| l.starts_with(prefix)) {
            let left = deadline.saturating_duration_since(std::time::Instant::now());
            match rx.recv_timeout(left) {
                Ok(l) => lines.push(l),
                Err(e) => panic!("no `{prefix}` line ({e}): {lines:?}"),
            }
        }
    };
    wait_for(&mut lines, "watching");
    assert!(
        lines.iter().any(|l| l.contains("mass-ratio.toml: N_* = 55: n_s = ")),
        "{lines:?}"
    );
    let text = std::fs::read_to_string(&m).unwrap().replace("ratio = 9 ", "ratio = 8 ");
    std::fs::write(&m, text).unwrap();
    wait_for(&mut lines, "  N_* = 55: n_s ");
    let status = child.wait().unwrap();
    assert!(status.success());
    assert!(
        lines.iter().any(|l| l.contains("input changed: params.ratio 9 -> 8")),
        "{lines:?}"
    );
    std::fs::remove_dir_all(&dir).ok();
}
