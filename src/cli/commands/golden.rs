//! `golden`: golden prediction files written and checked.

use crate::cli::args::{GoldenAction, GoldenArgs, GoldenCheckArgs, GoldenWriteArgs};
use crate::cli::check::check_tolerance;
use crate::cli::files::write_output_file;
use crate::cli::load::{load_data, predict_model_file};
use crate::cli::Failure;
use crate::config::Config;
use crate::data::DataSet;
use crate::diag::Diagnostic;
use crate::drivers::golden::{diff, golden_path, kind_text, model_files, report_fields};
use crate::report::numfmt;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// `efold golden write|check`.
pub(crate) fn golden_cmd(a: &GoldenArgs, config: &Config) -> Result<String, Failure> {
    match &a.action {
        GoldenAction::Write(w) => golden_write(w, config),
        GoldenAction::Check(c) => golden_check(c, config),
    }
}

/// The model files under `dir`; none is an error.
fn files_under(dir: &Path) -> Result<Vec<PathBuf>, Failure> {
    let files = model_files(dir).map_err(|e| Failure::input(e.render()))?;
    if files.is_empty() {
        return Err(Diagnostic::new(format!("no model files (*.toml) under `{}`", dir.display())).into());
    }
    Ok(files)
}

/// `golden write`: every model's report written beside it.
fn golden_write(a: &GoldenWriteArgs, config: &Config) -> Result<String, Failure> {
    let data = load_data(&a.data, config)?;
    let files = files_under(&a.dir)?;
    let mut out = String::new();
    for f in &files {
        let rep = predict_model_file(f, &data, config).map_err(|e| Failure::input(format!("{}: {e}", f.display())))?;
        write_output_file(&golden_path(f), &rep.text())?;
        let _ = writeln!(out, "wrote {}", golden_path(f).display());
    }
    Ok(out)
}

/// `golden check`: every model against its golden file; exit code 1 if any drifted, or if a
/// golden file is of a model of one field and the model now has several, or the other way
/// round. A model of several fields is compared with at least
/// [`crate::config::MULTI_GOLDEN_TOLERANCE`].
fn golden_check(a: &GoldenCheckArgs, config: &Config) -> Result<String, Failure> {
    check_tolerance(a.tolerance)?;
    let data = load_data(&a.data, config)?;
    let files = files_under(&a.dir)?;
    let mut out = String::new();
    let mut drifted = 0;
    for f in &files {
        if !check_one(f, &data, a.tolerance, config, &mut out) {
            drifted += 1;
        }
    }
    if drifted > 0 {
        return Err(Failure::drifted(format!(
            "{drifted} of {} model(s) drifted beyond {}\n{out}",
            files.len(),
            numfmt::typed(a.tolerance)
        )));
    }
    Ok(out)
}

/// One model against its golden file, its lines appended to `out`; whether it is unchanged.
fn check_one(f: &Path, data: &DataSet, tolerance: f64, config: &Config, out: &mut String) -> bool {
    let g = golden_path(f);
    let old = match std::fs::read_to_string(&g) {
        Ok(t) => serde_json::from_str::<serde_json::Value>(&t).ok(),
        Err(_) => None,
    };
    let Some(old) = old else {
        let _ = writeln!(
            out,
            "{}: no readable golden file {} (run `efold golden write`)",
            f.display(),
            g.display()
        );
        return false;
    };
    match predict_model_file(f, data, config) {
        Err(e) => {
            let _ = writeln!(out, "{}: now fails to predict:\n{e}", f.display());
            false
        }
        Ok(rep) => {
            let new = rep.value();
            let (was, now) = (report_fields(&old), report_fields(&new));
            if was.is_some() != now.is_some() {
                let _ = writeln!(
                    out,
                    "{}: its golden file {} holds the predictions of a model of {}, but the model now has {}: the two cannot be compared (run `efold golden write` to replace it)",
                    f.display(),
                    g.display(),
                    kind_text(&was),
                    kind_text(&now)
                );
                return false;
            }
            let d = diff(&old, &new, rep.tolerance(tolerance));
            if d.is_empty() {
                let _ = writeln!(out, "{}: unchanged", f.display());
                return true;
            }
            let used = rep.tolerance(tolerance);
            let beyond = match used == tolerance {
                true => String::new(),
                false => format!(
                    " beyond {} (config::MULTI_GOLDEN_TOLERANCE, for a model of several fields)",
                    numfmt::typed(used)
                ),
            };
            let _ = writeln!(out, "{}: {} value(s) drifted{beyond}", f.display(), d.drifts.len());
            for line in d.lines() {
                let _ = writeln!(out, "{line}");
            }
            false
        }
    }
}
