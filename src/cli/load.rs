//! The one loading layer: what a command works on. A model from a file or from flags (with
//! `--param`), a model file alone (`golden`, `watch`), the data set, and the N_* list (from
//! `--efolds`, else the model's `efolds` setting, else [`DEFAULT_N_STARS`]); and text files read
//! with a size limit.

use super::check::{
    check_efolds_count, check_efolds_values, check_field_name, check_keys_once, check_params_once, is_reserved,
    split_binding,
};
use super::Failure;
use crate::cli::args::{DataArgs, ModelArgs};
use crate::config::{Config, DEFAULT_N_STARS, MULTI_GOLDEN_TOLERANCE};
use crate::data::DataSet;
use crate::diag::{Diagnostic, Source, Span};
use crate::drivers::golden::several_fields_report;
use crate::drivers::predict::{predict, Options, Report};
use crate::drivers::scan::{Axis, AxisError, PointError};
use crate::drivers::scan_multi::{predict_bound, MultiScanJob};
use crate::model::{FieldValue, MetricEntry, Model, ModelSpec, Origin, ParamSpec, Text};
use crate::report::multi;
use std::path::Path;

/// Builds the model from a file and/or the inline flags (flags override the file), refusing a
/// model of several fields ([`Model::one_field_only`]) for a command that analyses one field.
/// `example` is the command line suggested when no model is given, e.g.
/// `efold predict models/pole-order-2-quadratic.toml`.
// Every command of the crate takes models of several fields today ([`load_model_any`]); this
// stays for a command of one field only.
#[allow(dead_code)]
pub(crate) fn load_model(a: &ModelArgs, example: &str, config: &Config) -> Result<Model, Failure> {
    let model = load_model_any(a, example, config)?;
    let command = example.split_whitespace().take(2).collect::<Vec<_>>().join(" ");
    model.one_field_only(&command)?;
    Ok(model)
}

/// [`load_model`] for a command that also takes models of several fields.
pub(crate) fn load_model_any(a: &ModelArgs, example: &str, config: &Config) -> Result<Model, Failure> {
    let spec = load_spec(a, example, config)?;
    Ok(Model::build(&spec, config)?)
}

/// The model as written, from a file and/or the inline flags, not yet built (`scan` declares
/// its varied names first).
pub(crate) fn load_spec(a: &ModelArgs, example: &str, config: &Config) -> Result<ModelSpec, Failure> {
    let mut spec = match (&a.model, &a.potential) {
        (Some(path), _) => ModelSpec::load_with(path, &config.limits)?,
        (None, Some(v)) => ModelSpec::inline(v, None),
        (None, None) => {
            return Err(Diagnostic::new("no model given")
                .with_hint(format!("give a model file, e.g. `{example}`"))
                .with_hint("or the model inline: `--potential 'phi^2/2' [--kinetic EXPR] [--param NAME=VALUE]`")
                .into())
        }
    };
    apply_flags(&mut spec, a)?;
    Ok(spec)
}

/// `--vary NAME=LO:HI...` declares NAME when the model has no parameter of that name (and it
/// is not a field nor a start coordinate `start.FIELD`): it goes first among the parameters,
/// so that the others may use it, with LO as its value, as typed. A name without a range
/// cannot be declared and is refused, with a caret under it.
pub(crate) fn declare_varied(spec: &mut ModelSpec, vary: &[String], config: &Config) -> Result<(), Failure> {
    for v in vary {
        let (name, range) = match v.split_once('=') {
            Some((n, r)) => (n.trim(), Some(r)),
            None => (v.trim(), None),
        };
        let is_field = name == spec.field || spec.fields.iter().any(|f| f.text == name);
        let known = spec.params.iter().any(|p| p.name == name);
        if known || is_field || name.starts_with("start.") || !is_identifier(name) || is_reserved(name) {
            continue;
        }
        let Some(range) = range else {
            let start = v.len() - v.trim_start().len();
            let d = Diagnostic::new(format!(
                "`--vary {v}`: `{name}` is not a parameter of the model, and without a range it cannot be declared"
            ))
            .with_span(Span::new(start, start + name.len()), "no such parameter")
            .with_hint(format!(
                "give its range, `--vary {name}=LO:HI:COUNT`, to declare and vary it"
            ));
            return Err(Failure::input(d.render(Some(&Source::new("--vary", v)))));
        };
        // The range must parse before LO becomes the parameter's value.
        Axis::parse_range(
            v,
            name,
            Some(range.trim()),
            Err(AxisError::NoRange { name: name.to_string() }),
            2,
            config.limits.max_axis_points,
        )
        .map_err(|e| Failure::from(e.diagnostic()))?;
        let lo = range.split(':').next().unwrap_or_default().trim();
        spec.params.insert(
            0,
            ParamSpec {
                name: name.to_string(),
                value: Text::inline(&format!("--vary {name}"), lo),
                scan: None,
            },
        );
    }
    Ok(())
}

/// A name of the expression language's form: letters, digits and `_`, not starting with a digit.
fn is_identifier(name: &str) -> bool {
    name.chars().next().is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
        && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
}

/// The names the model's expressions use: those of V, K, the metric, the range, the start and
/// its velocity, and of every parameter that one of them uses (parameters defined from others).
pub(crate) fn used_names(spec: &ModelSpec, config: &Config) -> Vec<String> {
    let names_of = |t: &Text| -> Vec<String> {
        crate::language::syntax::parse(&t.text, &config.limits)
            .map(|e| e.names().into_iter().map(str::to_string).collect())
            .unwrap_or_default()
    };
    let mut texts: Vec<&Text> = vec![&spec.potential, &spec.kinetic];
    texts.extend(spec.metric.iter().map(|m| &m.value));
    texts.extend(spec.range.iter().flat_map(|(a, b)| [a, b]));
    texts.extend(spec.start_point.iter().chain(&spec.start_velocity).map(|s| &s.value));
    let mut used: Vec<String> = texts.into_iter().flat_map(names_of).collect();
    // Parameters are defined from earlier ones: walking them from the last, each used one adds
    // the names of its value.
    for p in spec.params.iter().rev() {
        if used.contains(&p.name) {
            used.extend(names_of(&p.value));
        }
    }
    used.sort();
    used.dedup();
    used
}

/// A parameter given to `flag` (`--vary`, `--free`) that no expression of the model uses
/// would change nothing: refused, with a caret under its name. Start coordinates
/// (`start.FIELD`) and names that are not parameters are left to the command's own checks.
pub(crate) fn check_varied_used(
    flag: &str,
    given: &[String],
    spec: &ModelSpec,
    config: &Config,
) -> Result<(), Failure> {
    let used = used_names(spec, config);
    for v in given {
        let name = v.split_once('=').map_or(v.as_str(), |(n, _)| n).trim();
        if !spec.params.iter().any(|p| p.name == name) || used.iter().any(|u| u == name) {
            continue;
        }
        let users: Vec<&str> = spec
            .params
            .iter()
            .map(|p| p.name.as_str())
            .filter(|p| used.iter().any(|u| u == p))
            .collect();
        let start = v.len() - v.trim_start().len();
        let doing = if flag == "--free" { "solving for" } else { "varying" };
        let d = Diagnostic::new(format!(
            "`{flag} {v}`: no expression of the model uses `{name}`, so {doing} it would change nothing"
        ))
        .with_span(Span::new(start, start + name.len()), "used by no expression")
        .with_hint(if users.is_empty() {
            "the model's expressions use no parameter; check the potential and the kinetic function".to_string()
        } else {
            format!(
                "check the spelling; the parameters the model uses: {}",
                users.join(", ")
            )
        });
        return Err(Failure::input(d.render(Some(&Source::new(flag, v)))));
    }
    Ok(())
}

/// `FLAG` text as the origin of a part of it (`start..end`), so that an error in that part is
/// drawn under the whole flag value.
fn flag_part(flag: &str, value: &str, start: usize, end: usize) -> Text {
    Text {
        text: value[start..end].to_string(),
        origin: Origin {
            name: flag.to_string(),
            file_text: Some(std::sync::Arc::from(value)),
            offset: start,
        },
    }
}

/// `FLAG KEY=VALUE` split into its two parts, each pointing into the flag; the key trimmed.
fn flag_binding(flag: &str, value: &str, form: &str) -> Result<(Text, Text), Failure> {
    let Some(eq) = value.find('=') else {
        let d = Diagnostic::new(format!("`{flag} {value}` is not of the form {form}"))
            .with_span(Span::new(0, value.len().max(1)), "no `=`")
            .with_hint(format!("write it as `{flag} x=1`"));
        return Err(Failure::input(d.render(Some(&Source::new(flag, value)))));
    };
    let lead = value.len() - value.trim_start().len();
    let key_end = value[..eq].trim_end().len();
    Ok((
        flag_part(flag, value, lead, key_end.max(lead)),
        flag_part(flag, value, eq + 1, value.len()),
    ))
}

/// `--field` (repeated for several fields), `--metric` and `--start` over the model.
fn apply_field_flags(spec: &mut ModelSpec, a: &ModelArgs) -> Result<(), Failure> {
    let several = !spec.fields.is_empty() || !a.metric.is_empty() || !a.start.is_empty() || a.field.len() > 1;
    if !several {
        if let Some(f) = a.field.first() {
            check_field_name(f)?;
            spec.field = f.clone();
        }
        return Ok(());
    }
    if !a.field.is_empty() {
        spec.fields = a.field.iter().map(|f| flag_part("--field", f, 0, f.len())).collect();
        spec.field = a.field[0].clone();
    }
    check_keys_once("--metric", &a.metric, "a --metric replaces the model file's entry")?;
    check_keys_once("--start", &a.start, "a --start replaces the model file's value")?;
    for m in &a.metric {
        let (key, value) = flag_binding("--metric", m, "FIELDS=EXPR")?;
        let words = |k: &str| {
            let mut w: Vec<String> = k.split_whitespace().map(str::to_string).collect();
            w.sort();
            w
        };
        spec.metric.retain(|e| words(&e.key.text) != words(&key.text));
        spec.metric.push(MetricEntry { key, value });
    }
    for s in &a.start {
        let (name, value) = flag_binding("--start", s, "FIELD=VALUE")?;
        spec.start_point.retain(|e| e.name.text != name.text);
        spec.start_point.push(FieldValue { name, value });
    }
    if a.kinetic.is_some() && spec.fields.len() > 1 {
        return Err(Diagnostic::new("--kinetic is for one field; this model has several")
            .with_hint("give the metric's components with --metric x=EXPR and --metric 'x y=EXPR'")
            .into());
    }
    Ok(())
}

/// The inline flags over a model read from a file (or given by `--potential` alone).
fn apply_flags(spec: &mut ModelSpec, a: &ModelArgs) -> Result<(), Failure> {
    if a.model.is_some() {
        if let Some(v) = &a.potential {
            spec.potential = Text::inline("--potential", v);
        }
    }
    if let Some(k) = &a.kinetic {
        spec.kinetic = Text::inline("--kinetic", k);
    }
    apply_field_flags(spec, a)?;
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
    Ok(())
}

/// The model of one file, without flags (`golden`, `watch`).
pub(crate) fn load_model_file(path: &Path, config: &Config) -> Result<Model, Failure> {
    let spec = ModelSpec::load_with(path, &config.limits)?;
    Ok(Model::build(&spec, config)?)
}

/// The data set of `--data`, or the built-in one.
pub(crate) fn load_data(a: &DataArgs, config: &Config) -> Result<DataSet, Failure> {
    match &a.data {
        Some(p) => DataSet::load_with(p, &config.limits).map_err(Failure::from),
        None => Ok(DataSet::builtin()),
    }
}

/// The N_* list and where it came from: `--efolds` when given, else the model's `efolds`
/// setting, else [`DEFAULT_N_STARS`].
pub(crate) fn n_stars_of(flag: &[f64], spec: &ModelSpec) -> (Vec<f64>, &'static str) {
    match &spec.efolds {
        _ if !flag.is_empty() => (flag.to_vec(), "--efolds"),
        Some(list) => (list.clone(), "the model's `efolds` setting"),
        None => (DEFAULT_N_STARS.to_vec(), "the model's `efolds` setting"),
    }
}

/// [`n_stars_of`], checked: at most `Limits::max_efolds` values, each finite and at least
/// `config::MIN_EFOLDS` (the error names `--efolds` or the model's setting).
pub(crate) fn checked_n_stars(flag: &[f64], spec: &ModelSpec, config: &Config) -> Result<Vec<f64>, Failure> {
    let (n_stars, origin) = n_stars_of(flag, spec);
    check_efolds_count(&n_stars, config)?;
    check_efolds_values(origin, &n_stars)?;
    Ok(n_stars)
}

/// The report `golden` writes and checks and `watch` follows for one model file: for one
/// field the slow-roll report, for several the exact multi-field one of `efold predict` with
/// the model's input ([`several_fields_report`]).
pub(crate) enum FileReport {
    /// A model of one field.
    One(Box<Report>),
    /// A model of several fields.
    Several(serde_json::Value),
}

impl FileReport {
    /// The report as JSON.
    pub(crate) fn value(&self) -> serde_json::Value {
        match self {
            FileReport::One(rep) => serde_json::to_value(rep).expect("serialisable"),
            FileReport::Several(v) => v.clone(),
        }
    }

    /// The report as the text of a golden file.
    pub(crate) fn text(&self) -> String {
        match self {
            FileReport::One(rep) => format!("{}\n", serde_json::to_string_pretty(rep).expect("serialisable")),
            FileReport::Several(v) => format!("{}\n", serde_json::to_string_pretty(v).expect("serialisable")),
        }
    }

    /// The tolerance to compare with, from the flag's: for several fields at least
    /// [`MULTI_GOLDEN_TOLERANCE`].
    pub(crate) fn tolerance(&self, flag: f64) -> f64 {
        match self {
            FileReport::One(_) => flag,
            FileReport::Several(_) => flag.max(MULTI_GOLDEN_TOLERANCE),
        }
    }
}

/// The report of one model file, at its own N_* (or [`DEFAULT_N_STARS`]), against `data`
/// (see [`FileReport`]).
pub(crate) fn predict_model_file(path: &Path, data: &DataSet, config: &Config) -> Result<FileReport, Failure> {
    let model = load_model_file(path, config)?;
    let (n_stars, _) = n_stars_of(&[], &model.spec);
    if model.n_fields() > 1 {
        let settings = MultiScanJob::settings_for(&model);
        let rep = predict_bound(&model, &n_stars, &settings).map_err(|e| match e {
            PointError::Analysis(a) => Failure::from(a),
            PointError::Model(d) => Failure::from(*d),
        })?;
        // The pivot extras as `efold predict` adds them, so the golden file is its JSON.
        let extras: Vec<_> = rep
            .predictions
            .iter()
            .map(|p| crate::analysis::multi::at_pivot::pivot_extras(&model, &p.fields_star, &p.velocity_star, config))
            .collect::<Result<_, _>>()?;
        let text = multi::json_with(&model.spec.name, &rep, &extras, data.a_s());
        return Ok(FileReport::Several(several_fields_report(&model, &text)));
    }
    let opts = Options {
        n_stars,
        data: data.clone(),
        ..Options::default()
    };
    Ok(FileReport::One(Box::new(predict(&model, &opts, config)?)))
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
    fn n_stars_come_from_the_flag_then_the_model_then_the_default() {
        let mut spec = ModelSpec::inline("phi^2", None);
        assert_eq!(
            n_stars_of(&[], &spec),
            (vec![50.0, 55.0, 60.0], "the model's `efolds` setting")
        );
        spec.efolds = Some(vec![40.0, 45.0]);
        assert_eq!(n_stars_of(&[], &spec).0, vec![40.0, 45.0]);
        assert_eq!(n_stars_of(&[57.5], &spec), (vec![57.5], "--efolds"));
        // a bad list is refused, naming where it came from
        let config = Config::default();
        let err = checked_n_stars(&[55.0, 0.5], &spec, &config).unwrap_err();
        assert!(err.message.contains("N_* = 0.5 in --efolds"), "{}", err.message);
        spec.efolds = Some(vec![0.5]);
        let err = checked_n_stars(&[], &spec, &config).unwrap_err();
        assert!(
            err.message.contains("in the model's `efolds` setting"),
            "{}",
            err.message
        );
    }

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
