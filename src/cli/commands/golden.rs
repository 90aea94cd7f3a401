//! `golden`: golden prediction files written and checked.

use crate::cli::*;
use crate::config::Config;
use crate::diag::Diagnostic;

pub(crate) fn golden_cmd(a: &GoldenArgs, config: &Config) -> Result<String, Failure> {
    use crate::drivers::golden::{diff, golden_path, model_files, predict_file};
    use std::fmt::Write as _;
    let (dir, data) = match &a.action {
        GoldenAction::Write { dir, data } | GoldenAction::Check { dir, data, .. } => (dir, data),
    };
    if let GoldenAction::Check { tolerance, .. } = &a.action {
        check_tolerance(*tolerance)?;
    }
    let base = crate::drivers::predict::Options {
        data: load_data(data)?,
        ..Default::default()
    };
    let files = model_files(dir).map_err(|e| Failure::input(e.render()))?;
    if files.is_empty() {
        return Err(Diagnostic::new(format!("no model files (*.toml) under `{}`", dir.display())).into());
    }
    let mut out = String::new();
    match &a.action {
        GoldenAction::Write { .. } => {
            for f in &files {
                let rep = predict_file(f, &base, config)
                    .map_err(|e| Failure::input(format!("{}: {}", f.display(), e.render())))?;
                let text = format!("{}\n", serde_json::to_string_pretty(&rep).expect("serialisable"));
                write_output_file(&golden_path(f), &text)?;
                let _ = writeln!(out, "wrote {}", golden_path(f).display());
            }
            Ok(out)
        }
        GoldenAction::Check { tolerance, .. } => {
            let mut drifted = 0;
            for f in &files {
                let g = golden_path(f);
                let old = match std::fs::read_to_string(&g) {
                    Ok(t) => serde_json::from_str::<serde_json::Value>(&t).ok(),
                    Err(_) => None,
                };
                let Some(old) = old else {
                    drifted += 1;
                    let _ = writeln!(
                        out,
                        "{}: no readable golden file {} (run `efold golden write`)",
                        f.display(),
                        g.display()
                    );
                    continue;
                };
                match predict_file(f, &base, config) {
                    Err(e) => {
                        drifted += 1;
                        let _ = writeln!(out, "{}: now fails to predict:\n{}", f.display(), e.render());
                    }
                    Ok(rep) => {
                        let new = serde_json::to_value(&rep).expect("serialisable");
                        let d = diff(&old, &new, *tolerance);
                        if d.is_empty() {
                            let _ = writeln!(out, "{}: unchanged", f.display());
                        } else {
                            drifted += 1;
                            let _ = writeln!(out, "{}: {} value(s) drifted", f.display(), d.drifts.len());
                            for line in d.lines() {
                                let _ = writeln!(out, "{line}");
                            }
                        }
                    }
                }
            }
            if drifted > 0 {
                return Err(Failure::drifted(format!(
                    "{drifted} of {} model(s) drifted beyond {}\n{out}",
                    files.len(),
                    crate::report::numfmt::typed(*tolerance)
                )));
            }
            Ok(out)
        }
    }
}
