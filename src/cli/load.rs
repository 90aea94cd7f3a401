//! Loading what a command works on: the model (file or flags, with --param), the data set,
//! and files read with a size limit.

use super::*;
use crate::config::Config;
use crate::diag::Diagnostic;

/// Builds the model from a file and/or the inline flags (flags override the file).
/// `example` is the command line suggested when no model is given, e.g.
/// `efold predict models/pole-order-2-quadratic.toml`.
pub fn load_model(a: &ModelArgs, example: &str, config: &Config) -> Result<crate::model::Model, Failure> {
    use crate::model::{ModelSpec, Text};
    let mut spec = match (&a.model, &a.potential) {
        (Some(path), _) => ModelSpec::load(path)?,
        (None, Some(v)) => ModelSpec::inline(v, None),
        (None, None) => {
            return Err(Diagnostic::new("no model given")
                .with_hint(format!("give a model file, e.g. `{example}`"))
                .with_hint("or the model inline: `--potential 'phi^2/2' [--kinetic EXPR] [--param NAME=VALUE]`")
                .into())
        }
    };
    if a.model.is_some() {
        if let Some(v) = &a.potential {
            spec.potential = Text::inline("--potential", v);
        }
    }
    if let Some(k) = &a.kinetic {
        spec.kinetic = Text::inline("--kinetic", k);
    }
    if let Some(f) = &a.field {
        check_field_name(f)?;
        spec.field = f.clone();
    }
    for p in &a.params {
        split_binding("--param", p)?;
    }
    check_params_once(&a.params)?;
    for p in &a.params {
        let (name, value) = split_binding("--param", p)?;
        spec.set_param(name, value);
    }
    if let Some(r) = &a.range {
        spec.range = Some((Text::inline("--range LO", &r[0]), Text::inline("--range HI", &r[1])));
    }
    Ok(crate::model::Model::build(&spec, config)?)
}

pub(crate) fn load_data(path: &Option<std::path::PathBuf>) -> Result<crate::data::DataSet, Failure> {
    match path {
        Some(p) => crate::data::DataSet::load(p).map_err(Failure::from),
        None => Ok(crate::data::DataSet::builtin()),
    }
}

/// Reads a whole text file of at most `limit` bytes (`Limits::max_shard_bytes`), stopping at
/// `limit + 1` bytes so that an endless device cannot fill the memory.
pub(crate) fn read_bounded(path: &std::path::Path, limit: usize) -> Result<String, Failure> {
    use std::io::Read as _;
    let cannot = |e: std::io::Error| {
        Failure::from(
            Diagnostic::new(format!("cannot read `{}`: {e}", path.display()))
                .with_hint("give the shard files written by `efold scan --shard K/N`"),
        )
    };
    let file = std::fs::File::open(path).map_err(cannot)?;
    let mut bytes = Vec::new();
    file.take(limit as u64 + 1).read_to_end(&mut bytes).map_err(cannot)?;
    if bytes.len() > limit {
        return Err(Diagnostic::new(format!(
            "`{}` is larger than {limit} bytes (config::Limits::max_shard_bytes)",
            path.display()
        ))
        .with_hint("merge fewer, smaller shards at a time, or run the scan unsharded")
        .into());
    }
    String::from_utf8(bytes).map_err(|_| {
        Diagnostic::new(format!(
            "`{}` is not text (not UTF-8): not a scan shard",
            path.display()
        ))
        .with_hint("give the shard files written by `efold scan --shard K/N`")
        .into()
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn merge_reads_at_most_its_limit() {
        let path = std::env::temp_dir().join(format!("efold-bounded-{}.csv", std::process::id()));
        std::fs::write(&path, "0123456789").unwrap();
        assert_eq!(read_bounded(&path, 10).unwrap(), "0123456789");
        let err = read_bounded(&path, 9).unwrap_err();
        assert_eq!(err.code, 2);
        assert!(err.message.contains("larger than 9 bytes"), "{}", err.message);
        std::fs::remove_file(&path).unwrap();
        // an endless device stops at the limit
        if std::path::Path::new("/dev/zero").exists() {
            let err = read_bounded(std::path::Path::new("/dev/zero"), 1 << 16).unwrap_err();
            assert!(err.message.contains("max_shard_bytes"), "{}", err.message);
        }
    }
}
