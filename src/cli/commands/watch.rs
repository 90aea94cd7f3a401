//! `watch`: re-predict a model file whenever it changes.

use crate::cli::*;
use crate::config::Config;
use crate::diag::Diagnostic;

pub(crate) fn watch_cmd(a: &WatchArgs, config: &Config) -> Result<String, Failure> {
    use crate::drivers::golden::{diff, model_files, predict_file, GoldenError};
    use notify::{RecursiveMode, Watcher};
    check_tolerance(a.tolerance)?;
    let base = crate::drivers::predict::Options::default();
    let files = || -> Result<Vec<std::path::PathBuf>, Failure> {
        if a.path.is_dir() {
            model_files(&a.path).map_err(|e| Failure::input(e.render()))
        } else {
            Ok(vec![a.path.clone()])
        }
    };
    let mut last: std::collections::BTreeMap<std::path::PathBuf, Result<serde_json::Value, GoldenError>> =
        Default::default();
    let round = |last: &mut std::collections::BTreeMap<_, _>, first: bool| -> Result<(), Failure> {
        for f in files()? {
            let now = predict_file(&f, &base, config).map(|r| serde_json::to_value(&r).expect("serialisable"));
            let line = match (last.get(&f), &now) {
                (_, Err(e)) => format!("{}: fails to predict\n{}", f.display(), e.render()),
                (Some(Ok(old)), Ok(new)) => {
                    let d = diff(old, new, a.tolerance);
                    if d.is_empty() {
                        if first {
                            format!("{}: predicted", f.display())
                        } else {
                            continue;
                        }
                    } else {
                        let mut s = format!("{}: {} value(s) changed", f.display(), d.drifts.len());
                        for line in d.lines() {
                            s.push('\n');
                            s.push_str(&line);
                        }
                        s
                    }
                }
                (_, Ok(new)) => {
                    let p = &new["predictions"];
                    let summary: Vec<String> = p
                        .as_array()
                        .into_iter()
                        .flatten()
                        .map(|x| {
                            format!(
                                "N_* = {}: n_s = {}, r = {}",
                                crate::report::numfmt::typed(x["n_star"].as_f64().unwrap_or(f64::NAN)),
                                crate::report::numfmt::number(x["n_s"].as_f64().unwrap_or(f64::NAN)),
                                crate::report::numfmt::number(x["r"].as_f64().unwrap_or(f64::NAN))
                            )
                        })
                        .collect();
                    format!("{}: {}", f.display(), summary.join("; "))
                }
            };
            print_out(&format!("{line}\n"))?;
            last.insert(f, now);
        }
        Ok(())
    };
    round(&mut last, true)?;
    let (tx, rx) = std::sync::mpsc::channel();
    let mut watcher = notify::recommended_watcher(move |ev: notify::Result<notify::Event>| {
        let _ = tx.send(ev);
    })
    .map_err(|e| Failure::from(Diagnostic::new(format!("cannot watch `{}`: {e}", a.path.display()))))?;
    watcher
        .watch(&a.path, RecursiveMode::Recursive)
        .map_err(|e| Failure::from(Diagnostic::new(format!("cannot watch `{}`: {e}", a.path.display()))))?;
    print_out(&format!("watching {} (interrupt to stop)\n", a.path.display()))?;
    let mut rounds = 0;
    while let Ok(ev) = rx.recv() {
        let relevant = ev
            .map(|e| e.paths.iter().any(|p| p.extension().is_some_and(|x| x == "toml")))
            .unwrap_or(false);
        if !relevant {
            continue;
        }
        // let a burst of events (an editor's save) settle
        std::thread::sleep(std::time::Duration::from_millis(150));
        while rx.try_recv().is_ok() {}
        round(&mut last, false)?;
        rounds += 1;
        if a.exit_after.is_some_and(|n| rounds >= n) {
            break;
        }
    }
    Ok(String::new())
}
