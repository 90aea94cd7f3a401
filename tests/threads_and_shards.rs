//! `--threads N` on the parallel commands and `--shard auto/N` from the job array's task id,
//! on the real binary.

mod common;
use common::efold;
use std::process::Command;

fn model(name: &str) -> String {
    format!("{}/models/{name}.toml", env!("CARGO_MANIFEST_DIR"))
}

/// The job-array variables of the batch systems (their documented names, common practice).
const ARRAY_VARS: [&str; 7] = [
    "SLURM_ARRAY_TASK_ID",
    "SLURM_ARRAY_TASK_MIN",
    "PBS_ARRAY_INDEX",
    "PBS_ARRAYID",
    "SGE_TASK_ID",
    "SGE_TASK_FIRST",
    "LSB_JOBINDEX",
];

/// Job-array variables and their values.
type Vars<'a> = &'a [(&'a str, &'a str)];

/// Runs efold with exactly these job-array variables set (the others removed).
fn efold_env(args: &[&str], vars: &[(&str, &str)]) -> common::Run {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_efold"));
    cmd.args(args);
    for v in ARRAY_VARS {
        cmd.env_remove(v);
    }
    for (k, v) in vars {
        cmd.env(k, v);
    }
    let out = cmd.output().expect("the efold binary runs");
    common::Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8(out.stdout).unwrap(),
        stderr: String::from_utf8(out.stderr).unwrap(),
    }
}

fn with(args: &[&str], extra: &[&str]) -> Vec<String> {
    args.iter().chain(extra).map(|s| s.to_string()).collect()
}

fn run(args: &[String]) -> common::Run {
    efold(&args.iter().map(String::as_str).collect::<Vec<_>>())
}

/// One thread and two give the same bytes: scan (CSV and JSON), spectrum, basin.
#[test]
fn output_does_not_depend_on_the_thread_count() {
    let pole = model("pole-order-2-quadratic");
    let plateau = model("exponential-plateau");
    let runs: Vec<Vec<&str>> = vec![
        vec!["scan", &pole, "--vary", "alpha=0.1:10:24:log", "--efolds", "50,60"],
        vec!["scan", &pole, "--vary", "alpha=0.1:10:24:log", "--format", "json"],
        vec![
            "spectrum", &pole, "--points", "6", "--k-min", "1e-3", "--k-max", "1", "--format", "csv",
        ],
        vec![
            "basin",
            &plateau,
            "--sample",
            "phi=4:8:12",
            "--velocity",
            "rest",
            "--format",
            "json",
        ],
    ];
    for args in runs {
        let one = run(&with(&args, &["--threads", "1"]));
        let two = run(&with(&args, &["--threads", "2"]));
        assert_eq!(one.code, 0, "{args:?}: {}", one.stderr);
        assert!(one.stdout.len() > 100, "{args:?}");
        assert_eq!(one.stdout, two.stdout, "{args:?}");
    }
}

/// A thread count that is not a whole number from 1 to `Limits::max_threads` (256) is refused
/// before any work, exit code 2, with a caret under it; 256 itself runs.
#[test]
fn bad_thread_counts_are_refused() {
    let pole = model("pole-order-2-quadratic");
    for (n, says) in [
        ("0", "1 or more"),
        ("-2", "1 or more"),
        ("two", "1 or more"),
        ("1.5", "1 or more"),
        ("257", "at most 256"),
    ] {
        for cmd in [
            vec!["scan", &pole, "--vary", "alpha=1:2:2", "--threads", n],
            vec!["spectrum", &pole, "--points", "3", "--threads", n],
            vec!["basin", &pole, "--sample", "phi=1:2:2", "--threads", n],
        ] {
            let r = efold(&cmd);
            assert_eq!(r.code, 2, "{cmd:?}");
            assert!(r.stderr.contains(says), "{cmd:?}: {}", r.stderr);
            assert!(r.stderr.contains(&format!("--threads {n}\n")), "{}", r.stderr);
            assert!(
                r.stderr
                    .contains(&format!("|           {} not in the valid range", "^".repeat(n.len()))),
                "{}",
                r.stderr
            );
            assert!(r.stdout.is_empty());
        }
    }
    let r = efold(&["scan", &pole, "--vary", "alpha=1:2:2", "--threads", "256"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
}

/// `--shard auto/N` takes K = id - first + 1 from the job array: the same bytes as `--shard
/// K/N`, said on stderr; the shards of a Slurm array counted from 0 merge into the unsharded
/// table.
#[test]
fn auto_shards_read_the_task_id() {
    let pole = model("pole-order-2-quadratic");
    let scan = ["scan", pole.as_str(), "--vary", "alpha=0.5:4:9:log", "--efolds", "55"];
    let cases: [(Vars, usize, &str); 6] = [
        (
            &[("SLURM_ARRAY_TASK_ID", "2"), ("SLURM_ARRAY_TASK_MIN", "0")],
            3,
            "SLURM_ARRAY_TASK_ID=2, SLURM_ARRAY_TASK_MIN=0",
        ),
        (&[("SLURM_ARRAY_TASK_ID", "2")], 2, "SLURM_ARRAY_TASK_ID=2"),
        (&[("PBS_ARRAY_INDEX", "1")], 1, "PBS_ARRAY_INDEX=1"),
        (&[("PBS_ARRAYID", "3")], 3, "PBS_ARRAYID=3"),
        (
            &[("SGE_TASK_ID", "11"), ("SGE_TASK_FIRST", "10")],
            2,
            "SGE_TASK_ID=11, SGE_TASK_FIRST=10",
        ),
        (
            &[("LSB_JOBINDEX", "3"), ("SGE_TASK_ID", "undefined")],
            3,
            "LSB_JOBINDEX=3",
        ),
    ];
    for (vars, k, from) in cases {
        let auto = efold_env(
            &with(&scan, &["--shard", "auto/3"])
                .iter()
                .map(String::as_str)
                .collect::<Vec<_>>(),
            vars,
        );
        assert_eq!(auto.code, 0, "{vars:?}: {}", auto.stderr);
        assert!(
            auto.stderr.contains(&format!("shard {k}/3 (from {from})")),
            "{}",
            auto.stderr
        );
        let explicit = run(&with(&scan, &["--shard", &format!("{k}/3")]));
        assert_eq!(auto.stdout, explicit.stdout, "{vars:?}");
        assert!(auto.stdout.contains(&format!("\"shard\":{k},\"shards\":3")));
    }
    // two systems that agree are fine
    let agree = efold_env(
        &with(&scan, &["--shard", "auto/3"])
            .iter()
            .map(String::as_str)
            .collect::<Vec<_>>(),
        &[("SLURM_ARRAY_TASK_ID", "2"), ("PBS_ARRAYID", "2")],
    );
    assert_eq!(agree.code, 0, "{}", agree.stderr);
    // a 0-based array of three tasks, merged
    let dir = std::env::temp_dir().join(format!("efold-auto-shards-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let mut files = Vec::new();
    for id in 0..3 {
        let path = dir.join(format!("part-{id}.json"));
        let args = with(
            &scan,
            &["--format", "json", "--shard", "auto/3", "--out", path.to_str().unwrap()],
        );
        let id = id.to_string();
        let r = efold_env(
            &args.iter().map(String::as_str).collect::<Vec<_>>(),
            &[("SLURM_ARRAY_TASK_ID", &id), ("SLURM_ARRAY_TASK_MIN", "0")],
        );
        assert_eq!(r.code, 0, "{}", r.stderr);
        files.push(path.to_str().unwrap().to_string());
    }
    let mut merge = vec!["merge".to_string()];
    merge.extend(files.iter().rev().cloned());
    let merged = run(&merge);
    assert_eq!(merged.code, 0, "{}", merged.stderr);
    let whole = run(&with(&scan, &["--format", "json"]));
    assert_eq!(merged.stdout, whole.stdout);
    std::fs::remove_dir_all(&dir).ok();
    // basin takes the same rule
    let plateau = model("exponential-plateau");
    let basin = ["basin", plateau.as_str(), "--sample", "phi=5:8:4", "--format", "json"];
    let auto = efold_env(
        &with(&basin, &["--shard", "auto/2"])
            .iter()
            .map(String::as_str)
            .collect::<Vec<_>>(),
        &[("LSB_JOBINDEX", "2")],
    );
    assert_eq!(auto.code, 0, "{}", auto.stderr);
    assert_eq!(auto.stdout, run(&with(&basin, &["--shard", "2/2"])).stdout);
}

/// Every way `auto` can fail: exit code 2, a caret under `auto`, nothing on stdout.
#[test]
fn auto_shards_fail_clearly() {
    let pole = model("pole-order-2-quadratic");
    let scan = [
        "scan",
        pole.as_str(),
        "--vary",
        "alpha=0.5:4:9:log",
        "--shard",
        "auto/3",
    ];
    let cases: [(Vars, &str); 6] = [
        (&[], "no job-array task id in the environment"),
        (
            &[("SGE_TASK_ID", "undefined"), ("LSB_JOBINDEX", "0")],
            "no job-array task id",
        ),
        (
            &[("SLURM_ARRAY_TASK_ID", "2"), ("PBS_ARRAYID", "1")],
            "disagree: SLURM_ARRAY_TASK_ID=2 gives shard 2, PBS_ARRAYID=1 gives 1",
        ),
        (
            &[("SLURM_ARRAY_TASK_ID", "4"), ("SLURM_ARRAY_TASK_MIN", "1")],
            "gives shard 4, outside 1..3",
        ),
        (
            &[("PBS_ARRAY_INDEX", "0")],
            "PBS_ARRAY_INDEX=0 gives shard 0, outside 1..3",
        ),
        (
            &[("SLURM_ARRAY_TASK_ID", "two")],
            "SLURM_ARRAY_TASK_ID=two is not a whole number",
        ),
    ];
    for (vars, says) in cases {
        let r = efold_env(&scan, vars);
        assert_eq!(r.code, 2, "{vars:?}");
        assert!(r.stderr.contains(says), "{vars:?}: {}", r.stderr);
        assert!(r.stderr.contains("1 | --shard auto/3\n"), "{}", r.stderr);
        assert!(r.stderr.contains("|         ^^^^"), "{}", r.stderr);
        assert!(r.stdout.is_empty());
    }
    let r = efold_env(
        &["scan", &pole, "--vary", "alpha=1:2:2", "--shard", "auto/0"],
        &[("PBS_ARRAYID", "1")],
    );
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("`--shard auto/0`"), "{}", r.stderr);
}
