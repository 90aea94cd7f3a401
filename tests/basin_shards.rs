//! `efold basin --random`, `--shard` and `efold basin-merge` through the real binary:
//! reproducible bit for bit, shards that merge into the unsharded output, and the refusals.

mod common;
use common::efold;
use std::process::Command;

fn plateau() -> String {
    format!("{}/models/exponential-plateau.toml", env!("CARGO_MANIFEST_DIR"))
}

fn args(m: &str) -> Vec<String> {
    [
        "basin",
        m,
        "--sample",
        "phi=1:9",
        "--kinetic-ratio",
        "1e-3:1e3:2:log",
        "--direction",
        "both",
        "--random",
        "30",
        "--seed",
        "7",
        "--format",
        "json",
        "--efolds",
        "50,60",
    ]
    .map(String::from)
    .to_vec()
}

fn run(a: &[String]) -> String {
    let r = efold(&a.iter().map(String::as_str).collect::<Vec<_>>());
    assert_eq!(r.code, 0, "{}", r.stderr);
    r.stdout
}

fn tmp(name: &str) -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("efold-basin-shards-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}

#[test]
fn random_samples_are_reproducible_and_independent_of_the_threads() {
    let m = plateau();
    let a = args(&m);
    let first = run(&a);
    assert_eq!(first, run(&a));
    let one_thread = Command::new(env!("CARGO_BIN_EXE_efold"))
        .args(&a)
        .env("RAYON_NUM_THREADS", "1")
        .output()
        .unwrap();
    assert_eq!(String::from_utf8(one_thread.stdout).unwrap(), first);
    // another seed, other starts
    let mut b = a.clone();
    b[11] = "8".into();
    assert_ne!(run(&b), first);
    let v: serde_json::Value = serde_json::from_str(&first).unwrap();
    let pts = v["points"].as_array().unwrap();
    assert_eq!(pts.len(), 60);
    for p in pts {
        let phi = p["start"]["phi"].as_f64().unwrap();
        let x = p["x_kinetic"].as_f64().unwrap();
        assert!((1.0..9.0).contains(&phi) && (1e-3..1e3).contains(&x), "{p}");
    }
    // the binomial standard error of the basin fraction, sqrt(p (1 - p) / n) (common practice)
    let s = &v["summary"];
    let p = s["fraction_enough"].as_f64().unwrap();
    let n = s["count"].as_f64().unwrap();
    assert!(p > 0.0 && p < 1.0);
    let want = (p * (1.0 - p) / n).sqrt();
    assert!((s["fraction_uncertainty"].as_f64().unwrap() - want).abs() < 1e-15);
}

#[test]
fn shards_merge_into_the_unsharded_output() {
    let m = plateau();
    let a = args(&m);
    let whole = run(&a);
    let mut files = Vec::new();
    for k in [3, 1, 2] {
        let mut s = a.clone();
        s.extend(["--shard".to_string(), format!("{k}/3")]);
        let path = tmp(&format!("shard{k}.json"));
        std::fs::write(&path, run(&s)).unwrap();
        files.push(path.display().to_string());
    }
    let mut merge = vec!["basin-merge".to_string()];
    merge.extend(files.iter().cloned());
    assert_eq!(run(&merge), whole);
    // a shard left out, or one of another run, is refused with exit code 2
    let r = efold(&["basin-merge", &files[0], &files[1]]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("needs each of 1..=3 once"), "{}", r.stderr);
    let mut other = a.clone();
    other[11] = "8".into();
    other.extend(["--shard".to_string(), "3/3".to_string()]);
    let path = tmp("other3.json");
    std::fs::write(&path, run(&other)).unwrap();
    let r = efold(&["basin-merge", &path.display().to_string(), &files[1], &files[2]]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("`seed` differs"), "{}", r.stderr);
    let r = efold(&["basin-merge", &m]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("is not the JSON of `efold basin`"), "{}", r.stderr);
    std::fs::remove_dir_all(tmp("x").parent().unwrap()).ok();
}

/// CSV shards carry their run's definition in a first line and merge into the unsharded CSV
/// byte for byte, also on two fields (whose minimum label, a quoted field, holds commas); a
/// cut-short shard, CSV mixed with JSON and an unsharded table are refused.
#[test]
fn csv_shards_merge_into_the_unsharded_table() {
    let two = format!(
        "{}/models/several-fields/two-alphas-turning.toml",
        env!("CARGO_MANIFEST_DIR")
    );
    let one: Vec<String> = args(&plateau())
        .into_iter()
        .map(|s| if s == "json" { "csv".to_string() } else { s })
        .collect();
    let several: Vec<String> = [
        "basin",
        &two,
        "--sample",
        "x=0.6:0.95:3",
        "--sample",
        "y=2:3:2",
        "--format",
        "csv",
    ]
    .map(String::from)
    .to_vec();
    for (tag, a) in [("one", one), ("two", several)] {
        let whole = run(&a);
        assert!(whole.starts_with("index,"), "{whole}");
        let mut files = Vec::new();
        for k in [2, 1, 3] {
            let mut s = a.clone();
            s.extend(["--shard".to_string(), format!("{k}/3")]);
            let text = run(&s);
            assert!(text.starts_with("# efold-basin-shard {"), "{text}");
            let path = csv_tmp(&format!("{tag}-shard{k}.csv"));
            std::fs::write(&path, text).unwrap();
            files.push(path.display().to_string());
        }
        let mut merge = vec!["basin-merge".to_string()];
        merge.extend(files.iter().cloned());
        assert_eq!(run(&merge), whole, "{tag}");
        // a shard cut short by a row
        let cut = std::fs::read_to_string(&files[0]).unwrap();
        let cut = &cut[..cut.trim_end().rfind('\n').unwrap() + 1];
        let path = csv_tmp(&format!("{tag}-cut.csv"));
        std::fs::write(&path, cut).unwrap();
        let r = efold(&["basin-merge", &path.display().to_string(), &files[1], &files[2]]);
        assert_eq!(r.code, 2, "{tag}");
        assert!(r.stderr.contains("rows"), "{}", r.stderr);
        // the unsharded table is no shard
        let path = csv_tmp(&format!("{tag}-whole.csv"));
        std::fs::write(&path, &whole).unwrap();
        let r = efold(&["basin-merge", &path.display().to_string()]);
        assert_eq!(r.code, 2);
        assert!(r.stderr.contains("without a shard line"), "{}", r.stderr);
    }
    // CSV and JSON mixed
    let mut j = args(&plateau());
    j.extend(["--shard".to_string(), "1/3".to_string()]);
    let jp = csv_tmp("mixed1.json");
    std::fs::write(&jp, run(&j)).unwrap();
    let r = efold(&[
        "basin-merge",
        &jp.display().to_string(),
        &csv_tmp("one-shard2.csv").display().to_string(),
    ]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("mixed"), "{}", r.stderr);
    std::fs::remove_dir_all(csv_tmp("x").parent().unwrap()).ok();
}

/// A file in a directory of the CSV test's own (the other test removes its directory).
fn csv_tmp(name: &str) -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("efold-basin-csv-shards-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}
