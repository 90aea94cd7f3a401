//! Golden predictions: every model file under a directory gets a `NAME.predictions.json`
//! beside it; a check recomputes and reports, model by model, every number that drifted.
//! Also the comparison that `watch` prints when a model changes.

use crate::config::Config;
use crate::model::{Model, ModelSpec};
use crate::predict::{predict, Options, Report};
use std::path::{Path, PathBuf};

/// The model files (`*.toml`) under `dir`, recursively, sorted.
pub fn model_files(dir: &Path) -> Result<Vec<PathBuf>, String> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let entries = std::fs::read_dir(&d).map_err(|e| format!("cannot read directory `{}`: {e}", d.display()))?;
        for e in entries {
            let p = e
                .map_err(|e| format!("cannot read directory `{}`: {e}", d.display()))?
                .path();
            if p.is_dir() {
                stack.push(p);
            } else if p.extension().is_some_and(|x| x == "toml") {
                out.push(p);
            }
        }
    }
    out.sort();
    Ok(out)
}

/// Where a model's golden predictions live.
pub fn golden_path(model: &Path) -> PathBuf {
    model.with_extension("predictions.json")
}

/// Predicts one model file with its own N_* setting (or 50, 55, 60).
pub fn predict_file(path: &Path, base: &Options, config: &Config) -> Result<Report, String> {
    let spec = ModelSpec::load(path).map_err(|e| e.render())?;
    let model = Model::build(&spec, config).map_err(|e| e.render())?;
    let opts = Options {
        n_stars: spec.efolds.clone().unwrap_or_else(|| base.n_stars.clone()),
        ..base.clone()
    };
    predict(&model, &opts, config).map_err(|e| e.diagnostic().render(None))
}

/// One number that moved.
#[derive(Debug, Clone, PartialEq)]
pub struct Drift {
    /// Which N_*.
    pub n_star: f64,
    /// Which key.
    pub key: String,
    /// Before.
    pub old: serde_json::Value,
    /// Now.
    pub new: serde_json::Value,
}

impl std::fmt::Display for Drift {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        use crate::numfmt;
        // Old and new as one row, with digits enough to see them differ.
        let (old, new, rel) = match (self.old.as_f64(), self.new.as_f64()) {
            (Some(a), Some(b)) => {
                let cells = numfmt::row(&[a, b], numfmt::digits_to_resolve(a, b));
                let rel = if a != 0.0 {
                    format!("  (relative {})", numfmt::scientific(((b - a) / a).abs(), 2))
                } else {
                    String::new()
                };
                (cells[0].clone(), cells[1].clone(), rel)
            }
            _ => (self.old.to_string(), self.new.to_string(), String::new()),
        };
        write!(
            f,
            "  N_* = {}: {:<20} {old} -> {new}{rel}",
            numfmt::typed(self.n_star),
            self.key
        )
    }
}

/// Numbers of the predictions that differ beyond `tolerance` (relative, with an absolute
/// floor of 1e-300), and values of other kinds that differ at all.
pub fn compare(old: &serde_json::Value, new: &serde_json::Value, tolerance: f64) -> Vec<Drift> {
    let empty = Vec::new();
    let olds = old["predictions"].as_array().unwrap_or(&empty);
    let news = new["predictions"].as_array().unwrap_or(&empty);
    let mut out = Vec::new();
    let count = olds.len().max(news.len());
    for i in 0..count {
        let (o, n) = (olds.get(i), news.get(i));
        let n_star = o.or(n).and_then(|p| p["n_star"].as_f64()).unwrap_or(f64::NAN);
        let (Some(o), Some(n)) = (o, n) else {
            out.push(Drift {
                n_star,
                key: "(prediction)".into(),
                old: o.cloned().map(|_| "present".into()).unwrap_or(serde_json::Value::Null),
                new: n.cloned().map(|_| "present".into()).unwrap_or(serde_json::Value::Null),
            });
            continue;
        };
        let mut keys: Vec<&String> = o.as_object().into_iter().flat_map(|m| m.keys()).collect();
        for k in n.as_object().into_iter().flat_map(|m| m.keys()) {
            if !keys.contains(&k) {
                keys.push(k);
            }
        }
        for k in keys {
            let (a, b) = (&o[k], &n[k]);
            let drifted = match (a.as_f64(), b.as_f64()) {
                (Some(x), Some(y)) => (x - y).abs() > tolerance * x.abs().max(y.abs()).max(1e-300),
                _ => a.is_object() != b.is_object() || (!a.is_object() && a != b),
            };
            if drifted {
                out.push(Drift {
                    n_star,
                    key: k.clone(),
                    old: a.clone(),
                    new: b.clone(),
                });
            }
        }
    }
    out
}
