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
    while !lines.iter().any(|l| l.contains("changed")) {
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
    std::fs::remove_dir_all(&dir).unwrap();
}
