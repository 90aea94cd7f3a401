//! `watch`: re-predict a model file whenever it changes.

use crate::cli::args::WatchArgs;
use crate::cli::check::check_tolerance;
use crate::cli::load::predict_model_file;
use crate::cli::{print_out, Failure};
use crate::config::Config;
use crate::data::DataSet;
use crate::diag::Diagnostic;
use crate::drivers::golden::{diff, model_files};
use crate::report::numfmt;
use notify::{RecursiveMode, Watcher};
use std::collections::BTreeMap;
use std::path::PathBuf;
use std::sync::mpsc::Receiver;
use std::time::Duration;

/// The last report of each file (or its error), to tell what moved.
type Last = BTreeMap<PathBuf, Result<serde_json::Value, Failure>>;

/// How long a burst of events (an editor's save) is left to settle before a round.
const SETTLE: Duration = Duration::from_millis(150);

/// `efold watch`: one round at the start, then one after each change to a `.toml` file.
pub(crate) fn watch_cmd(a: &WatchArgs, config: &Config) -> Result<String, Failure> {
    check_tolerance(a.tolerance)?;
    let data = DataSet::builtin();
    let mut last = Last::new();
    round(a, &data, config, &mut last, true)?;
    let cannot = |e: notify::Error| Failure::from(Diagnostic::new(format!("cannot watch `{}`: {e}", a.path.display())));
    let (tx, rx) = std::sync::mpsc::channel();
    let mut watcher = notify::recommended_watcher(move |ev: notify::Result<notify::Event>| {
        let _ = tx.send(ev);
    })
    .map_err(cannot)?;
    watcher.watch(&a.path, RecursiveMode::Recursive).map_err(cannot)?;
    print_out(&format!("watching {} (interrupt to stop)\n", a.path.display()))?;
    let mut rounds = 0;
    while wait_for_change(&rx) {
        round(a, &data, config, &mut last, false)?;
        rounds += 1;
        if a.exit_after.is_some_and(|n| rounds >= n) {
            break;
        }
    }
    Ok(String::new())
}

/// Waits for an event on a `.toml` file, then lets the burst settle and drops the rest of it;
/// false when the watcher has gone.
fn wait_for_change(rx: &Receiver<notify::Result<notify::Event>>) -> bool {
    while let Ok(ev) = rx.recv() {
        let relevant = ev
            .map(|e| e.paths.iter().any(|p| p.extension().is_some_and(|x| x == "toml")))
            .unwrap_or(false);
        if !relevant {
            continue;
        }
        std::thread::sleep(SETTLE);
        while rx.try_recv().is_ok() {}
        return true;
    }
    false
}

/// The files watched: the path itself, or the model files under a directory.
fn files(a: &WatchArgs) -> Result<Vec<PathBuf>, Failure> {
    if a.path.is_dir() {
        model_files(&a.path).map_err(|e| Failure::input(e.render()))
    } else {
        Ok(vec![a.path.clone()])
    }
}

/// Predicts every file and prints what changed since `last` (on the first round, every file);
/// a model of several fields is compared with at least
/// [`crate::config::MULTI_GOLDEN_TOLERANCE`].
fn round(a: &WatchArgs, data: &DataSet, config: &Config, last: &mut Last, first: bool) -> Result<(), Failure> {
    for f in files(a)? {
        let rep = predict_model_file(&f, data, config);
        let tolerance = rep.as_ref().map_or(a.tolerance, |r| r.tolerance(a.tolerance));
        let now = rep.map(|r| r.value());
        let line = match (last.get(&f), &now) {
            (_, Err(e)) => Some(format!("{}: fails to predict\n{e}", f.display())),
            (Some(Ok(old)), Ok(new)) => changes(&f, old, new, tolerance, first),
            (_, Ok(new)) => Some(format!("{}: {}", f.display(), summary(new))),
        };
        if let Some(line) = line {
            print_out(&format!("{line}\n"))?;
            last.insert(f, now);
        }
    }
    Ok(())
}

/// The values of a file's report that moved beyond `tolerance`; `None` when nothing moved
/// after the first round.
fn changes(
    f: &std::path::Path,
    old: &serde_json::Value,
    new: &serde_json::Value,
    tolerance: f64,
    first: bool,
) -> Option<String> {
    let d = diff(old, new, tolerance);
    if d.is_empty() {
        return first.then(|| format!("{}: predicted", f.display()));
    }
    let mut s = format!("{}: {} value(s) changed", f.display(), d.drifts.len());
    for line in d.lines() {
        s.push('\n');
        s.push_str(&line);
    }
    Some(s)
}

/// n_s and r at each N_* of a new report, on one line.
fn summary(new: &serde_json::Value) -> String {
    let summary: Vec<String> = new["predictions"]
        .as_array()
        .into_iter()
        .flatten()
        .map(|x| {
            format!(
                "N_* = {}: n_s = {}, r = {}",
                numfmt::typed(x["n_star"].as_f64().unwrap_or(f64::NAN)),
                numfmt::number(x["n_s"].as_f64().unwrap_or(f64::NAN)),
                numfmt::number(x["r"].as_f64().unwrap_or(f64::NAN))
            )
        })
        .collect();
    summary.join("; ")
}
