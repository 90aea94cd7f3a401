//! Stage 4: a model: field name, parameters, V(phi), K(phi) and an optional field range, read
//! from a TOML file or given inline, then compiled to one tape with outputs V, K, sqrt(K) and
//! dV/dphi.
//!
//! The file format (all keys but `potential` optional):
//!
//! ```toml
//! name = "pole-order-2-quadratic"
//! description = "Quadratic potential in the pole variable"
//! field = "phi"                                  # default phi
//! potential = "phi^2/(6*alpha)"
//! kinetic = "1/(1 - phi^2/(6*alpha))^2"          # default 1
//!
//! [params]                                       # a number, or an expression of earlier ones
//! alpha = 1
//!
//! [scan]                                         # default ranges for scans: [lo, hi] or [lo, hi, "log"]
//! alpha = [0.1, 100, "log"]
//!
//! [settings]
//! range = ["0", "sqrt(6*alpha)"]                 # field interval to consider; "-inf"/"inf" allowed
//! start = "above"                                # field starts above (larger phi) or below the minimum of V
//! efolds = [50, 55, 60]                          # default N_* values
//! ```
//!
//! ```
//! use efold::model::{ModelSpec, Model};
//! let spec = ModelSpec::from_toml("potential = \"phi^2\"\n", "inline.toml")?;
//! let model = Model::build(&spec, &Default::default())?;
//! let mut ev = model.evaluator();
//! assert_eq!(ev.eval(3.0), 9.0); // V
//! assert_eq!(ev.output(1), 1.0); // K
//! # Ok::<(), efold::model::ModelError>(())
//! ```

use crate::config::Config;
use crate::diag::{closest, Diagnostic, Source, Span};
use crate::language::compile::{lower_into, Compiled, ExprError};
use crate::language::ir::{Func, Graph, Scope};
use crate::language::tape::{Evaluator, Tape};
use indexmap::IndexMap;
use serde::Deserialize;
use std::fmt;
use std::path::Path;

/// Where a piece of text came from, so that errors can point into the file.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Origin {
    /// A name shown before the line number: a path, or a flag such as `--potential`.
    pub name: String,
    /// The whole text that `offset` points into (a file), if any; shared by every expression
    /// of the file, so that a file of many parameters is not copied once per parameter.
    pub file_text: Option<std::sync::Arc<str>>,
    /// Byte offset of the expression inside `file_text`.
    pub offset: usize,
}

/// An expression with its origin.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Text {
    /// The expression.
    pub text: String,
    /// Where it came from.
    pub origin: Origin,
}

impl Text {
    /// An expression given on the command line (or in code): errors point at the text itself.
    pub fn inline(name: &str, text: &str) -> Text {
        Text {
            text: text.to_string(),
            origin: Origin {
                name: name.to_string(),
                file_text: None,
                offset: 0,
            },
        }
    }
}

/// Which side of the minimum of V the field starts on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Side {
    /// At larger field values than the minimum.
    Above,
    /// At smaller field values than the minimum.
    Below,
}

/// A parameter: name, value expression, optional scan range.
#[derive(Debug, Clone, PartialEq)]
pub struct ParamSpec {
    /// The name.
    pub name: String,
    /// Its value, an expression of numbers, `pi` and earlier parameters.
    pub value: Text,
    /// A default range for scans: (lo, hi, logarithmic).
    pub scan: Option<(f64, f64, bool)>,
}

/// A model as written: plain data, not yet compiled.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ModelSpec {
    /// A name (file stem if not given).
    pub name: String,
    /// One line saying what the model is.
    pub description: String,
    /// The field variable's name.
    pub field: String,
    /// V(phi).
    pub potential: Text,
    /// K(phi).
    pub kinetic: Text,
    /// Parameters in order.
    pub params: Vec<ParamSpec>,
    /// The field interval to consider, as two expressions (`-inf`, `inf` allowed).
    pub range: Option<(Text, Text)>,
    /// Which side of the minimum the field starts on.
    pub start: Option<Side>,
    /// Default N_* values.
    pub efolds: Option<Vec<f64>>,
}

/// What went wrong while reading or compiling a model.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelError {
    /// The error in words.
    pub diagnostic: Box<Diagnostic>,
    /// The text its span points into: (name, text, offset).
    pub source: Option<(String, String, usize)>,
}

impl ModelError {
    fn plain(d: Diagnostic) -> ModelError {
        ModelError {
            diagnostic: Box::new(d),
            source: None,
        }
    }

    fn in_file(d: Diagnostic, name: &str, text: &str) -> ModelError {
        ModelError {
            diagnostic: Box::new(d),
            source: Some((name.to_string(), text.to_string(), 0)),
        }
    }

    /// An expression error, pointing into the file it came from when there is one.
    pub fn from_expr(e: ExprError, origin: &Origin) -> ModelError {
        let d = e.diagnostic();
        match &origin.file_text {
            Some(file) => ModelError {
                diagnostic: Box::new(d),
                source: Some((origin.name.clone(), file.to_string(), origin.offset)),
            },
            None => ModelError {
                diagnostic: Box::new(d),
                source: Some((e.origin.clone(), e.text.clone(), 0)),
            },
        }
    }

    /// Drawn with the source line and carets.
    pub fn render(&self) -> String {
        match &self.source {
            Some((name, text, offset)) => self.diagnostic.render(Some(&Source {
                origin: name,
                text,
                offset: *offset,
            })),
            None => self.diagnostic.render(None),
        }
    }
}

impl fmt::Display for ModelError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.diagnostic.message)
    }
}

impl std::error::Error for ModelError {}

const TOP_KEYS: [&str; 8] = [
    "name",
    "description",
    "field",
    "potential",
    "kinetic",
    "params",
    "scan",
    "settings",
];
const SETTINGS_KEYS: [&str; 3] = ["range", "start", "efolds"];

#[derive(Deserialize)]
struct RawModel {
    name: Option<String>,
    description: Option<String>,
    field: Option<toml::Spanned<String>>,
    potential: toml::Spanned<String>,
    kinetic: Option<toml::Spanned<String>>,
    #[serde(default)]
    params: IndexMap<String, toml::Spanned<RawValue>>,
    #[serde(default)]
    scan: IndexMap<String, toml::Spanned<Vec<RawValue>>>,
    settings: Option<RawSettings>,
}

#[derive(Deserialize)]
struct RawSettings {
    range: Option<toml::Spanned<Vec<toml::Spanned<RawValue>>>>,
    start: Option<toml::Spanned<String>>,
    efolds: Option<toml::Spanned<Vec<toml::Spanned<f64>>>>,
}

/// A value in [params], [scan] or `range`: a number, or a string holding an expression.
#[derive(Clone, Debug)]
enum RawValue {
    Number(f64),
    Text(String),
}

impl<'de> Deserialize<'de> for RawValue {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<RawValue, D::Error> {
        struct Visitor;
        impl serde::de::Visitor<'_> for Visitor {
            type Value = RawValue;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a number or a string expression")
            }
            fn visit_f64<E>(self, x: f64) -> Result<RawValue, E> {
                Ok(RawValue::Number(x))
            }
            fn visit_i64<E>(self, x: i64) -> Result<RawValue, E> {
                Ok(RawValue::Number(x as f64))
            }
            fn visit_u64<E>(self, x: u64) -> Result<RawValue, E> {
                Ok(RawValue::Number(x as f64))
            }
            fn visit_str<E>(self, s: &str) -> Result<RawValue, E> {
                Ok(RawValue::Text(s.to_string()))
            }
        }
        d.deserialize_any(Visitor)
    }
}

/// A number written in the file (`nan`, `inf` are TOML numbers) that must be finite: an error
/// at its place otherwise. `what` names the key.
fn finite_number(
    x: f64,
    span: std::ops::Range<usize>,
    what: &str,
    hint: &str,
    text: &str,
    file: &str,
) -> Result<(), ModelError> {
    if x.is_finite() {
        return Ok(());
    }
    let shown = if x.is_nan() {
        "nan"
    } else if x > 0.0 {
        "inf"
    } else {
        "-inf"
    };
    Err(ModelError::in_file(
        Diagnostic::new(format!("{what}: `{shown}` is not a finite number"))
            .with_span(
                Span::new(span.start, span.end.max(span.start + 1)),
                "not a finite number",
            )
            .with_hint(hint),
        file,
        text,
    ))
}

/// The span of a quoted TOML string's contents, if the contents appear verbatim in the file
/// (no escapes), so that expression spans map straight into the file.
fn verbatim_offset(file: &str, span: std::ops::Range<usize>, value: &str) -> Option<usize> {
    let raw = file.get(span.clone())?;
    for q in ["\"\"\"", "'''", "\"", "'"] {
        if raw.starts_with(q) && raw.len() >= 2 * q.len() {
            let inner = &raw[q.len()..raw.len() - q.len()];
            if inner == value {
                return Some(span.start + q.len());
            }
        }
    }
    None
}

/// Byte range of `key =` at the start of a line inside `[section]` (or the top level).
fn key_span(file: &str, section: Option<&str>, key: &str) -> Option<Span> {
    let mut current: Option<String> = None;
    let mut offset = 0;
    for line in file.split_inclusive('\n') {
        let trimmed = line.trim_start();
        if let Some(rest) = trimmed.strip_prefix('[') {
            current = rest.split(']').next().map(|s| s.trim().to_string());
        } else if current.as_deref() == section {
            let lead = line.len() - trimmed.len();
            let name = trimmed.split(['=', ' ', '\t']).next().unwrap_or("");
            let name = name.trim_matches(|c| c == '"' || c == '\'');
            if name == key {
                return Some(Span::new(offset + lead, offset + lead + key.len()));
            }
        }
        offset += line.len();
    }
    None
}

/// Byte range of the last of `path` (`["settings"]`, `["settings", "x"]`) in a table header
/// `[settings]`, `[settings.x]` or `[[settings]]` that starts with that path.
fn header_span(file: &str, path: &[&str]) -> Option<Span> {
    let mut offset = 0;
    for line in file.split_inclusive('\n') {
        let lead = line.len() - line.trim_start().len();
        let trimmed = &line[lead..];
        let open = if trimmed.starts_with("[[") { 2 } else { 1 };
        if trimmed.starts_with('[') {
            let inner = &trimmed[open..];
            let inner = &inner[..inner.find(']').unwrap_or(inner.len())];
            let mut at = offset + lead + open;
            let mut segments = inner.split('.');
            let mut matched = None;
            for want in path {
                let Some(seg) = segments.next() else {
                    matched = None;
                    break;
                };
                let start = at + (seg.len() - seg.trim_start().len());
                let name = seg.trim().trim_matches(|c| c == '"' || c == '\'');
                let quote = usize::from(seg.trim() != name);
                matched = (name == *want).then(|| Span::new(start + quote, start + quote + name.len()));
                if matched.is_none() {
                    break;
                }
                at += seg.len() + 1;
            }
            if matched.is_some() {
                return matched;
            }
        }
        offset += line.len();
    }
    None
}

impl ModelSpec {
    /// Reads a model file.
    /// Reads a model file of at most the default [`crate::config::Limits::max_file_bytes`].
    pub fn load(path: &Path) -> Result<ModelSpec, ModelError> {
        ModelSpec::load_with(path, &crate::config::Limits::default())
    }

    /// Reads a model file of at most `limits.max_file_bytes` bytes (no more is read).
    pub fn load_with(path: &Path, limits: &crate::config::Limits) -> Result<ModelSpec, ModelError> {
        let name = path.display().to_string();
        let text = limits.read_file(path).map_err(|e| {
            let mut d = Diagnostic::new(format!("cannot read model file `{name}`: {e}"));
            if let crate::config::ReadError::TooLarge(_) = e {
                d = d.with_hint("a model file is a few lines of TOML: check the path");
            }
            ModelError::plain(d.with_hint("give the path of a .toml model file, or the model inline with --potential"))
        })?;
        let mut spec = ModelSpec::from_toml(&text, &name)?;
        if spec.name.is_empty() {
            spec.name = path
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default();
        }
        Ok(spec)
    }

    /// Parses a model from TOML text; `file` names it in errors.
    pub fn from_toml(text: &str, file: &str) -> Result<ModelSpec, ModelError> {
        let table: toml::Table = toml::from_str(text).map_err(|e| toml_error(e, text, file))?;
        check_keys(&table, text, file)?;
        let raw: RawModel = toml::from_str(text).map_err(|e| toml_error(e, text, file))?;
        let shared: std::sync::Arc<str> = std::sync::Arc::from(text);
        let origin_of = |s: &toml::Spanned<String>, key: &str| -> Text {
            let value = s.get_ref().clone();
            match verbatim_offset(text, s.span(), &value) {
                Some(offset) => Text {
                    text: value,
                    origin: Origin {
                        name: file.to_string(),
                        file_text: Some(shared.clone()),
                        offset,
                    },
                },
                None => Text::inline(&format!("{file}: {key}"), &value),
            }
        };
        let raw_text = |v: &toml::Spanned<RawValue>, key: &str| -> Text {
            match v.get_ref() {
                RawValue::Number(x) => Text::inline(&format!("{file}: {key}"), &crate::language::ir::format_number(*x)),
                RawValue::Text(s) => origin_of(&toml::Spanned::new(v.span(), s.clone()), key),
            }
        };
        let mut params = Vec::new();
        for (name, value) in &raw.params {
            check_identifier(name, text, file, Some("params"))?;
            if let RawValue::Number(x) = value.get_ref() {
                finite_number(
                    *x,
                    value.span(),
                    &format!("parameter `{name}`"),
                    "write a finite number, or an expression in quotes such as \"1/3\"",
                    text,
                    file,
                )?;
            }
            params.push(ParamSpec {
                name: name.clone(),
                value: raw_text(value, &format!("params.{name}")),
                scan: None,
            });
        }
        for (name, range) in &raw.scan {
            let Some(p) = params.iter_mut().find(|p| &p.name == name) else {
                let span = key_span(text, Some("scan"), name).unwrap_or_default();
                return Err(ModelError::in_file(
                    Diagnostic::new(format!("scan range for `{name}`, which is not a parameter"))
                        .with_span(span, "not in [params]")
                        .with_hint("add it under [params], or remove this range"),
                    file,
                    text,
                ));
            };
            p.scan = Some(scan_range(range, text, file)?);
        }
        let settings = raw.settings.unwrap_or(RawSettings {
            range: None,
            start: None,
            efolds: None,
        });
        let range = match &settings.range {
            None => None,
            Some(r) if r.get_ref().len() == 2 => {
                let v = r.get_ref();
                // An end may be infinite (`inf`, `-inf`), never NaN.
                for end in v {
                    if let RawValue::Number(x) = end.get_ref() {
                        if x.is_nan() {
                            finite_number(
                                *x,
                                end.span(),
                                "range",
                                "write two numbers or expressions; `-inf` and `inf` are allowed",
                                text,
                                file,
                            )?;
                        }
                    }
                }
                Some((raw_text(&v[0], "settings.range"), raw_text(&v[1], "settings.range")))
            }
            Some(r) => {
                return Err(ModelError::in_file(
                    Diagnostic::new("`range` needs two values")
                        .with_span(Span::new(r.span().start, r.span().end), "here")
                        .with_hint("write `range = [\"0\", \"sqrt(6*alpha)\"]`"),
                    file,
                    text,
                ))
            }
        };
        let start = match &settings.start {
            None => None,
            Some(s) => Some(match s.get_ref().as_str() {
                "above" => Side::Above,
                "below" => Side::Below,
                other => {
                    return Err(ModelError::in_file(
                        Diagnostic::new(format!("unknown start side `{other}`"))
                            .with_span(
                                Span::new(s.span().start, s.span().end),
                                "expected \"above\" or \"below\"",
                            )
                            .with_hint("\"above\": the field starts at larger values than the minimum of V"),
                        file,
                        text,
                    ))
                }
            }),
        };
        let field = raw.field.map(|f| f.into_inner()).unwrap_or_else(|| "phi".to_string());
        check_identifier(&field, text, file, None)?;
        Ok(ModelSpec {
            name: raw.name.unwrap_or_default(),
            description: raw.description.unwrap_or_default(),
            field,
            potential: origin_of(&raw.potential, "potential"),
            kinetic: raw
                .kinetic
                .as_ref()
                .map(|k| origin_of(k, "kinetic"))
                .unwrap_or_else(|| Text::inline("kinetic (default)", "1")),
            params,
            range,
            start,
            efolds: match settings.efolds {
                None => None,
                Some(e) if e.get_ref().is_empty() => {
                    return Err(ModelError::in_file(
                        Diagnostic::new("efolds: the list is empty: no N_* to predict at")
                            .with_span(Span::new(e.span().start, e.span().end), "empty")
                            .with_hint("write `efolds = [50, 55, 60]`, or leave the key out for those defaults"),
                        file,
                        text,
                    ))
                }
                Some(e) => Some(efolds(e.into_inner(), text, file)?),
            },
        })
    }

    /// A model given by flags alone.
    pub fn inline(potential: &str, kinetic: Option<&str>) -> ModelSpec {
        ModelSpec {
            name: "inline".to_string(),
            description: String::new(),
            field: "phi".to_string(),
            potential: Text::inline("--potential", potential),
            kinetic: Text::inline("--kinetic", kinetic.unwrap_or("1")),
            ..ModelSpec::default()
        }
    }

    /// Sets a parameter (replacing one of the same name), as `--param NAME=VALUE` does.
    pub fn set_param(&mut self, name: &str, value: &str) {
        let text = Text::inline(&format!("--param {name}"), value);
        match self.params.iter_mut().find(|p| p.name == name) {
            Some(p) => p.value = text,
            None => self.params.push(ParamSpec {
                name: name.to_string(),
                value: text,
                scan: None,
            }),
        }
    }
}

/// The default N_* values: each a finite, positive number of e-folds.
fn efolds(values: Vec<toml::Spanned<f64>>, text: &str, file: &str) -> Result<Vec<f64>, ModelError> {
    let mut out = Vec::with_capacity(values.len());
    for v in values {
        let (span, n) = (v.span(), *v.get_ref());
        finite_number(n, span.clone(), "efolds", "write `efolds = [50, 55, 60]`", text, file)?;
        if n <= 0.0 {
            return Err(ModelError::in_file(
                Diagnostic::new(format!("efolds: `{n}` is not a positive number of e-folds"))
                    .with_span(Span::new(span.start, span.end), "not positive")
                    .with_hint("write `efolds = [50, 55, 60]`"),
                file,
                text,
            ));
        }
        out.push(n);
    }
    Ok(out)
}

fn scan_range(range: &toml::Spanned<Vec<RawValue>>, text: &str, file: &str) -> Result<(f64, f64, bool), ModelError> {
    let bad = |why: &str| {
        ModelError::in_file(
            Diagnostic::new(format!("bad scan range: {why}"))
                .with_span(Span::new(range.span().start, range.span().end), "here")
                .with_hint("write `[lo, hi]` or `[lo, hi, \"log\"]` with numbers lo < hi"),
            file,
            text,
        )
    };
    let v = range.get_ref();
    let num = |x: &RawValue| match x {
        RawValue::Number(n) => Some(*n),
        RawValue::Text(_) => None,
    };
    let (lo, hi) = match (v.first().and_then(num), v.get(1).and_then(num)) {
        (Some(lo), Some(hi)) if lo < hi && lo.is_finite() && hi.is_finite() => (lo, hi),
        _ => return Err(bad("two increasing finite numbers expected")),
    };
    let log = match v.get(2) {
        None => false,
        Some(RawValue::Text(s)) if s == "log" => true,
        Some(RawValue::Text(s)) if s == "linear" => false,
        _ => return Err(bad("the third entry may only be \"log\" or \"linear\"")),
    };
    if log && lo <= 0.0 {
        return Err(bad("a logarithmic range must be positive"));
    }
    if v.len() > 3 {
        return Err(bad("too many entries"));
    }
    Ok((lo, hi, log))
}

fn check_identifier(name: &str, text: &str, file: &str, section: Option<&str>) -> Result<(), ModelError> {
    let ok = name.chars().next().is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
        && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
    let reserved = name == "pi" || Func::from_name(name).is_some() || name == "pow";
    if ok && !reserved {
        return Ok(());
    }
    let span = key_span(text, section, name).unwrap_or_default();
    let why = if reserved {
        "is a built-in name"
    } else {
        "is not a valid name"
    };
    Err(ModelError::in_file(
        Diagnostic::new(format!("`{name}` {why}"))
            .with_span(span, "here")
            .with_hint("names are letters, digits and _, starting with a letter, and not a function or `pi`"),
        file,
        text,
    ))
}

/// The top-level keys that are tables, written `[name]`.
const TABLE_KEYS: [&str; 3] = ["params", "scan", "settings"];

fn check_keys(table: &toml::Table, text: &str, file: &str) -> Result<(), ModelError> {
    let unknown = |key: &str, section: Option<&str>, known: &[&str]| {
        let span = key_span(text, section, key).unwrap_or_default();
        let mut d = Diagnostic::new(format!(
            "unknown key `{key}`{}",
            section.map(|s| format!(" in [{s}]")).unwrap_or_default()
        ))
        .with_span(span, "not a model key");
        if let Some(s) = closest(key, known.iter().copied()) {
            d = d.with_hint(format!("did you mean `{s}`?"));
        }
        ModelError::in_file(
            d.with_hint(format!("the keys here are: {}", known.join(", "))),
            file,
            text,
        )
    };
    // A table written as a header `[name]`: the error points at the header's own line.
    let unknown_table = |key: &str, span: Span| {
        let mut d = Diagnostic::new(format!("unknown table `[{key}]`")).with_span(span, "not a model table");
        if let Some(s) = closest(key, TABLE_KEYS) {
            d = d.with_hint(format!("did you mean `[{s}]`?"));
        } else if let Some(s) = closest(key, TOP_KEYS) {
            d = d.with_hint(format!("did you mean `{s}`?"));
        }
        let tables: Vec<String> = TABLE_KEYS.iter().map(|t| format!("[{t}]")).collect();
        ModelError::in_file(
            d.with_hint(format!("the tables are: {}", tables.join(", "))),
            file,
            text,
        )
    };
    let unknown_setting = |key: &str, span: Span| {
        let mut d = Diagnostic::new(format!("unknown setting `{key}`")).with_span(span, "not a setting");
        if let Some(s) = closest(key, SETTINGS_KEYS) {
            d = d.with_hint(format!("did you mean `{s}`?"));
        }
        ModelError::in_file(
            d.with_hint(format!("the settings are: {}", SETTINGS_KEYS.join(", "))),
            file,
            text,
        )
    };
    for (key, value) in table {
        if !TOP_KEYS.contains(&key.as_str()) {
            let header = matches!(value, toml::Value::Table(_) | toml::Value::Array(_))
                .then(|| header_span(text, &[key]))
                .flatten();
            return Err(match header {
                Some(span) if key_span(text, None, key).is_none() => unknown_table(key, span),
                _ => unknown(key, None, &TOP_KEYS),
            });
        }
    }
    if let Some(toml::Value::Table(s)) = table.get("settings") {
        for key in s.keys() {
            if !SETTINGS_KEYS.contains(&key.as_str()) {
                let span = key_span(text, Some("settings"), key)
                    .or_else(|| header_span(text, &["settings", key]))
                    .unwrap_or_default();
                return Err(unknown_setting(key, span));
            }
        }
    }
    if !table.contains_key("potential") {
        return Err(ModelError::in_file(
            Diagnostic::new("the model has no `potential`")
                .with_span(Span::new(0, 0), "")
                .with_hint("add a line such as `potential = \"phi^2/2\"`"),
            file,
            text,
        ));
    }
    Ok(())
}

/// The TOML parser's message for `e`, in efold's words: an unterminated string is named without
/// the closing quote the parser expected (the caret at the end of the line shows it), and a
/// duplicate key is named (the parser leaves the name to its span in `text`).
pub(crate) fn toml_message(e: &toml::de::Error, text: &str) -> String {
    let message = e.message().trim();
    let (what, _) = message.split_once(", expected").unwrap_or((message, ""));
    if what.ends_with(" string") && what.starts_with("invalid ") {
        return what.to_string();
    }
    if what == "duplicate key" {
        let key = e
            .span()
            .and_then(|s| text.get(s))
            .map(str::trim)
            .filter(|k| !k.is_empty());
        if let Some(key) = key {
            return format!("duplicate key `{key}`");
        }
    }
    message.to_string()
}

fn toml_error(e: toml::de::Error, text: &str, file: &str) -> ModelError {
    let message = toml_message(&e, text);
    let mut d = Diagnostic::new(format!("malformed model file: {message}"));
    if let Some(span) = e.span() {
        d = d.with_span(Span::new(span.start, span.end.max(span.start + 1)), "here");
    }
    ModelError::in_file(
        d.with_hint("the model file is TOML: `key = \"expression\"`, with [params] and [settings] tables"),
        file,
        text,
    )
}

/// A compiled model: one tape with outputs V, K, sqrt(K) and dV/dphi, and the parameter values.
#[derive(Debug, Clone)]
pub struct Model {
    /// The model as written.
    pub spec: ModelSpec,
    /// Field and parameter names.
    pub scope: Scope,
    /// Parameter values, in scope order.
    pub params: Vec<f64>,
    /// The compiled expressions: roots V, K, sqrt(K), dV/dphi.
    pub compiled: Compiled,
    /// The field interval given by the user, if any (infinite ends allowed).
    pub range: Option<(f64, f64)>,
}

/// Output index of V on the model's tape.
pub const OUT_V: usize = 0;
/// Output index of K.
pub const OUT_K: usize = 1;
/// Output index of sqrt(K).
pub const OUT_SQRT_K: usize = 2;
/// Output index of dV/dphi (the symbolic derivative), so that plain and batch f64 evaluation
/// give the slope without jets.
pub const OUT_DV: usize = 3;

impl Model {
    /// Compiles a model: parameters first (each an expression of `pi` and earlier ones), then V
    /// and K, then the range.
    pub fn build(spec: &ModelSpec, config: &Config) -> Result<Model, ModelError> {
        let (names, values) = resolve_params(spec, config)?.into_parts();
        let refs: Vec<&str> = names.iter().map(String::as_str).collect();
        let scope = Scope::new(&spec.field, &refs);
        let mut graph = Graph::new(scope.clone());
        let (v_ast, v) = lower_into(
            &mut graph,
            &spec.potential.origin.name,
            &spec.potential.text,
            &config.limits,
        )
        .map_err(|e| ModelError::from_expr(e, &spec.potential.origin))?;
        let (k_ast, k) = lower_into(
            &mut graph,
            &spec.kinetic.origin.name,
            &spec.kinetic.text,
            &config.limits,
        )
        .map_err(|e| ModelError::from_expr(e, &spec.kinetic.origin))?;
        let sqrt_k = graph.func(Func::Sqrt, k);
        let dv = graph.derivative(v);
        let roots = vec![v, k, sqrt_k, dv];
        let tape = Tape::compile(&graph, &roots);
        let range = resolve_range(spec, &names, &values, config)?;
        Ok(Model {
            spec: spec.clone(),
            scope,
            params: values,
            compiled: Compiled {
                asts: vec![v_ast, k_ast],
                graph,
                roots,
                tape,
            },
            range,
        })
    }

    /// Rebinds the model to new parameter values without compiling V and K again (the
    /// parameters are inputs of the compiled tape): each `(name, value)` replaces that
    /// parameter's value, then every parameter defined from others, and the range, are resolved
    /// again. A name the model does not have is an error; the model is then unchanged.
    ///
    /// ```
    /// use efold::config::Config;
    /// use efold::model::{Model, ModelSpec};
    /// let mut spec = ModelSpec::inline("lambda * phi^4", None);
    /// spec.set_param("m", "2");
    /// spec.set_param("lambda", "m^2 / 4");
    /// let mut model = Model::build(&spec, &Config::default())?;
    /// model.rebind(&[("m", 4.0)], &Config::default())?;
    /// assert_eq!(model.evaluator().eval(1.0), 4.0); // lambda followed m
    /// # Ok::<(), efold::model::ModelError>(())
    /// ```
    pub fn rebind(&mut self, assignments: &[(&str, f64)], config: &Config) -> Result<(), ModelError> {
        let mut spec = self.spec.clone();
        for &(name, value) in assignments {
            if !self.scope.params.iter().any(|p| p == name) {
                return Err(ModelError::plain(
                    Diagnostic::new(format!("the model has no parameter `{name}`"))
                        .with_hint("give it in the model's [params] table, or with --param NAME=VALUE"),
                ));
            }
            spec.set_param(name, &format!("{value:e}"));
        }
        let (names, values) = resolve_params(&spec, config)?.into_parts();
        debug_assert_eq!(names, self.scope.params, "set_param keeps the parameter order");
        self.range = resolve_range(&spec, &names, &values, config)?;
        self.params = values;
        self.spec = spec;
        Ok(())
    }

    /// An evaluator bound to the model's parameters: `eval(phi)` returns V, `output(1)` K,
    /// `output(2)` sqrt(K), `output(3)` dV/dphi.
    pub fn evaluator(&self) -> Evaluator<'_> {
        self.compiled.tape.evaluator(&self.params)
    }

    /// The field's name.
    pub fn field(&self) -> &str {
        &self.scope.field
    }

    /// Parameter names and values.
    pub fn param_pairs(&self) -> impl Iterator<Item = (&str, f64)> {
        self.scope
            .params
            .iter()
            .map(String::as_str)
            .zip(self.params.iter().copied())
    }

    /// V printed in normalised form.
    pub fn potential_ir(&self) -> String {
        self.compiled.graph.print(self.compiled.roots[OUT_V])
    }

    /// K printed in normalised form.
    pub fn kinetic_ir(&self) -> String {
        self.compiled.graph.print(self.compiled.roots[OUT_K])
    }
}

/// Every parameter's value, in order: each an expression of `pi` and earlier ones.
fn resolve_params(spec: &ModelSpec, config: &Config) -> Result<ParamTable, ModelError> {
    let mut table = ParamTable::default();
    for p in &spec.params {
        if p.name == spec.field {
            return Err(ModelError::plain(
                Diagnostic::new(format!("`{}` is both the field and a parameter", p.name))
                    .with_hint("rename the parameter, or the field with `field = ...`"),
            ));
        }
        if table.contains(&p.name) {
            return Err(ModelError::plain(
                Diagnostic::new(format!("parameter `{}` is given twice", p.name)).with_hint("give each parameter once"),
            ));
        }
        let v = constant(
            &p.value,
            &spec.field,
            &table,
            config,
            &format!("parameter `{}`", p.name),
        )
        .map_err(|e| later_hint(e, spec, table.names().len()))?;
        table.push(&p.name, v);
    }
    Ok(table)
}

/// The user's field interval, its ends evaluated with the parameters' values.
fn resolve_range(
    spec: &ModelSpec,
    names: &[String],
    values: &[f64],
    config: &Config,
) -> Result<Option<(f64, f64)>, ModelError> {
    Ok(match &spec.range {
        None => None,
        Some((lo, hi)) => {
            let table = ParamTable::from_parts(names.to_vec(), values.to_vec());
            let lo_v = range_end(lo, &spec.field, &table, config)?;
            let hi_v = range_end(hi, &spec.field, &table, config)?;
            if lo_v >= hi_v {
                return Err(ModelError::plain(
                    Diagnostic::new(format!("the range is empty: {lo_v} is not below {hi_v}"))
                        .with_hint("give the lower end first: --range LO HI"),
                ));
            }
            Some((lo_v, hi_v))
        }
    })
}

/// Parameters resolved so far: names in order, a hash index and values. Evaluating the next
/// value costs time in proportion to that expression alone, not to the number of parameters
/// before it: each expression is compiled over a scope of just the parameters it names.
#[derive(Debug, Clone, Default)]
pub struct ParamTable {
    names: Vec<String>,
    index: rustc_hash::FxHashMap<String, usize>,
    values: Vec<f64>,
}

/// Why [`ParamTable::evaluate`] gave no value.
#[derive(Debug, Clone, PartialEq)]
pub enum ConstantError {
    /// The expression does not parse, or names something unknown (rendered against the
    /// scope of all parameters so far, as if they had all been in scope).
    Expr(ExprError),
    /// The expression depends on the field.
    Varying,
    /// The value is not finite.
    NotFinite(f64),
}

impl ParamTable {
    /// A table from names and values in order (names distinct).
    pub fn from_parts(names: Vec<String>, values: Vec<f64>) -> ParamTable {
        let index = names.iter().enumerate().map(|(i, n)| (n.clone(), i)).collect();
        ParamTable { names, index, values }
    }

    /// The names and the values, in order.
    pub fn into_parts(self) -> (Vec<String>, Vec<f64>) {
        (self.names, self.values)
    }

    /// True if `name` is in the table.
    pub fn contains(&self, name: &str) -> bool {
        self.index.contains_key(name)
    }

    /// The names in order.
    pub fn names(&self) -> &[String] {
        &self.names
    }

    /// Adds a parameter (replacing the value of one already there).
    pub fn push(&mut self, name: &str, value: f64) {
        match self.index.get(name) {
            Some(&i) => self.values[i] = value,
            None => {
                self.index.insert(name.to_string(), self.names.len());
                self.names.push(name.to_string());
                self.values.push(value);
            }
        }
    }

    /// Evaluates `text`, an expression of numbers, `pi` and the parameters in the table, which
    /// must not depend on `field`.
    pub fn evaluate(
        &self,
        field: &str,
        origin: &str,
        text: &str,
        limits: &crate::config::Limits,
    ) -> Result<f64, ConstantError> {
        let full = || {
            // Only on the way to an error: the scope of every parameter so far, so that the
            // message lists them as it always has.
            let refs: Vec<&str> = self.names.iter().map(String::as_str).collect();
            let mut g = Graph::new(Scope::new(field, &refs));
            match lower_into(&mut g, origin, text, limits) {
                Err(e) => ConstantError::Expr(e),
                Ok(_) => unreachable!("an expression that fails over its own names fails over all of them"),
            }
        };
        let Ok(ast) = crate::language::syntax::parse(text, limits) else {
            return Err(full());
        };
        let mut used: Vec<usize> = Vec::new();
        collect_params(&ast, &self.index, &mut used);
        let names: Vec<&str> = used.iter().map(|&i| self.names[i].as_str()).collect();
        let values: Vec<f64> = used.iter().map(|&i| self.values[i]).collect();
        let mut g = Graph::new(Scope::new(field, &names));
        let Ok(id) = g.lower(&ast) else {
            return Err(full());
        };
        if g.is_varying(id) {
            return Err(ConstantError::Varying);
        }
        let v = Tape::compile(&g, &[id]).evaluator(&values).eval(0.0);
        if !v.is_finite() {
            return Err(ConstantError::NotFinite(v));
        }
        Ok(v)
    }
}

/// The table indices of the parameters an expression names, each once, in order of first use.
/// The recursion is over a syntax tree whose height the parser has bounded.
fn collect_params(
    e: &crate::language::syntax::Expr,
    index: &rustc_hash::FxHashMap<String, usize>,
    out: &mut Vec<usize>,
) {
    use crate::language::syntax::ExprKind;
    match &e.kind {
        ExprKind::Number(_) => {}
        ExprKind::Ident(name) => {
            if let Some(&i) = index.get(name.as_str()) {
                if !out.contains(&i) {
                    out.push(i);
                }
            }
        }
        ExprKind::Neg(a) => collect_params(a, index, out),
        ExprKind::Binary(_, a, b) => {
            collect_params(a, index, out);
            collect_params(b, index, out);
        }
        ExprKind::Call { args, .. } => {
            for a in args {
                collect_params(a, index, out);
            }
        }
    }
}

/// Evaluates a constant expression (a parameter or a range end).
fn constant(t: &Text, field: &str, table: &ParamTable, config: &Config, what: &str) -> Result<f64, ModelError> {
    // A plain number needs no compiler.
    if let Ok(v) = t.text.trim().parse::<f64>() {
        if v.is_finite()
            && t.text
                .trim()
                .starts_with(|c: char| c.is_ascii_digit() || c == '.' || c == '-')
        {
            return Ok(v);
        }
    }
    match table.evaluate(field, &t.origin.name, &t.text, &config.limits) {
        Ok(v) => Ok(v),
        Err(ConstantError::Expr(e)) => Err(ModelError::from_expr(e, &t.origin)),
        Err(ConstantError::Varying) => Err(ModelError::plain(
            Diagnostic::new(format!("{what}: `{}` depends on the field `{field}`", t.text.trim()))
                .with_hint("a value may use numbers, `pi` and parameters defined before it"),
        )),
        Err(ConstantError::NotFinite(v)) => Err(ModelError::plain(Diagnostic::new(format!(
            "{what}: `{}` is not a finite number ({v})",
            t.text.trim()
        )))),
    }
}

/// Adds a hint to an unknown-name error for parameter number `at` when the name is a
/// parameter defined after it.
fn later_hint(mut e: ModelError, spec: &ModelSpec, at: usize) -> ModelError {
    let msg = &e.diagnostic.message;
    let Some(name) = msg.strip_prefix("unknown name `").and_then(|r| r.strip_suffix('`')) else {
        return e;
    };
    if let Some(later) = spec.params.iter().skip(at + 1).find(|p| p.name == name) {
        let this = &spec.params[at].name;
        let hint = format!(
            "`{}` is a parameter defined after `{this}`: a value may use only earlier ones, so move `{this}` below it",
            later.name
        );
        e.diagnostic.hints.insert(0, hint);
    }
    e
}

fn range_end(t: &Text, field: &str, table: &ParamTable, config: &Config) -> Result<f64, ModelError> {
    match t.text.trim() {
        "inf" | "+inf" => Ok(f64::INFINITY),
        "-inf" => Ok(f64::NEG_INFINITY),
        _ => constant(t, field, table, config, "range"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn err(text: &str) -> String {
        ModelSpec::from_toml(text, "m.toml")
            .and_then(|s| Model::build(&s, &Config::default()).map(|_| ()))
            .unwrap_err()
            .render()
    }

    #[test]
    fn reads_a_full_model() {
        let text = r#"
name = "pole"
description = "a pole"
potential = "phi^2/(6*alpha)"
kinetic = "1/(1 - phi^2/(6*alpha))^2"
[params]
alpha = "1/3"
beta = "2*alpha"
[scan]
alpha = [0.1, 10, "log"]
[settings]
range = ["0", "sqrt(6*alpha)"]
start = "above"
efolds = [50, 60]
"#;
        let spec = ModelSpec::from_toml(text, "m.toml").unwrap();
        let m = Model::build(&spec, &Config::default()).unwrap();
        assert_eq!(m.params, vec![1.0 / 3.0, 2.0 / 3.0]);
        assert_eq!(m.range, Some((0.0, 2f64.sqrt())));
        assert_eq!(spec.params[0].scan, Some((0.1, 10.0, true)));
        assert_eq!(spec.start, Some(Side::Above));
        assert_eq!(spec.efolds, Some(vec![50.0, 60.0]));
    }

    #[test]
    fn header_spans_cover_the_name_in_the_header() {
        let text = "potential = \"phi^2\"\n[setings]\n  [[ zzz ]]\n[ \"settings\" . foo ]\n";
        let at = |path: &[&str]| header_span(text, path).map(|s| &text[s.start..s.end]);
        assert_eq!(at(&["setings"]), Some("setings"));
        assert_eq!(header_span(text, &["setings"]), Some(Span::new(21, 28)));
        assert_eq!(at(&["zzz"]), Some("zzz"));
        assert_eq!(at(&["settings", "foo"]), Some("foo"));
        assert_eq!(at(&["settings"]), Some("settings"));
        assert_eq!(at(&["potential"]), None);
        let e = err("potential = \"phi^2\"\n[param]\nalpha = 1\n");
        assert!(
            e.contains("unknown table `[param]`") && e.contains("--> m.toml:2:2"),
            "{e}"
        );
        assert!(e.contains("did you mean `[params]`?"), "{e}");
        let e = err("potential = \"phi^2\"\n[settings]\nrnge = [\"0\", \"1\"]\n");
        assert!(
            e.contains("unknown setting `rnge`") && e.contains("did you mean `range`?"),
            "{e}"
        );
    }

    #[test]
    fn errors_point_into_the_file() {
        let e = err("potential = \"phi^2 * tanhh(phi)\"\n");
        assert!(e.contains("--> m.toml:1:22"), "{e}");
        assert!(e.contains("did you mean `tanh`?"), "{e}");
        let e = err("potental = \"phi^2\"\n");
        assert!(
            e.contains("unknown key `potental`") && e.contains("did you mean `potential`?"),
            "{e}"
        );
        let e = err("potential = \"phi^2*a\"\n[params]\nb = 1\n");
        assert!(e.contains("unknown name `a`"), "{e}");
        let e = err("potential = \"phi^2\n");
        assert!(e.contains("malformed model file"), "{e}");
    }
    #[test]
    fn non_finite_and_mistyped_values_are_errors_at_their_place() {
        let e = err("potential = \"a*phi^2\"\n[params]\na = nan\n");
        assert!(
            e.contains("parameter `a`: `nan` is not a finite number") && e.contains("m.toml:3:5"),
            "{e}"
        );
        let e = err("potential = \"a*phi^2\"\n[params]\na = -inf\n");
        assert!(e.contains("`-inf` is not a finite number"), "{e}");
        let e = err("potential = \"a*phi^2\"\n[params]\na = true\n");
        assert!(
            e.contains("expected a number or a string expression") && e.contains("m.toml:3:5"),
            "{e}"
        );
        let e = err("potential = \"phi^2\"\n[settings]\nefolds = [50, inf]\n");
        assert!(
            e.contains("efolds: `inf` is not a finite number") && e.contains("m.toml:3:15"),
            "{e}"
        );
        let e = err("potential = \"phi^2\"\n[settings]\nefolds = []\n");
        assert!(e.contains("the list is empty") && e.contains("m.toml:3:10"), "{e}");
        let e = err("potential = \"phi^2\"\n[settings]\nefolds = [0]\n");
        assert!(e.contains("not a positive number of e-folds"), "{e}");
        let e = err("potential = \"phi^2\"\n[settings]\nrange = [nan, 1]\n");
        assert!(e.contains("range: `nan` is not a finite number"), "{e}");
        let e = err("potential = \"a*phi^2\"\n[params]\na = 1\n[scan]\na = [1, inf]\n");
        assert!(e.contains("two increasing finite numbers expected"), "{e}");
        // Infinite range ends are allowed.
        let spec = ModelSpec::from_toml("potential = \"phi^2\"\n[settings]\nrange = [0, inf]\n", "m.toml").unwrap();
        let m = Model::build(&spec, &Config::default()).unwrap();
        assert_eq!(m.range, Some((0.0, f64::INFINITY)));
    }

    #[test]
    fn toml_messages_name_the_unterminated_string_and_the_duplicate_key() {
        let message = |text: &str| toml_message(&toml::from_str::<toml::Table>(text).unwrap_err(), text);
        assert_eq!(message("potential = \"phi^2\n"), "invalid basic string");
        assert_eq!(message("potential = 'phi^2\n"), "invalid literal string");
        assert_eq!(
            message("potential = \"a\"\npotential = \"b\"\n"),
            "duplicate key `potential`"
        );
        // what the parser expected is kept where it is not just a closing quote
        assert!(
            message("potential = [1,\n").contains("expected `]`"),
            "{}",
            message("potential = [1,\n")
        );
    }

    #[test]
    fn model_files_beyond_the_size_limit_are_refused() {
        let dir = std::env::temp_dir().join(format!("efold-model-limit-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("big.toml");
        let text = format!("potential = \"phi^2\"\n# {}\n", "x".repeat(100));
        std::fs::write(&path, &text).unwrap();
        let limits = crate::config::Limits {
            max_file_bytes: 64,
            ..Default::default()
        };
        let e = ModelSpec::load_with(&path, &limits).unwrap_err().render();
        assert!(e.contains("larger than the limit of 64 bytes"), "{e}");
        assert!(ModelSpec::load(&path).is_ok());
        std::fs::remove_dir_all(&dir).ok();
    }
    #[test]
    fn ten_thousand_chained_parameters_resolve() {
        let mut text = String::from("potential = \"phi^2*p10000/10000\"\n[params]\np1 = 1\n");
        for i in 2..=10_000 {
            text.push_str(&format!("p{i} = \"p{} + 1\"\n", i - 1));
        }
        let spec = ModelSpec::from_toml(&text, "chain.toml").unwrap();
        let m = Model::build(&spec, &Config::default()).unwrap();
        assert_eq!(m.params.len(), 10_000);
        assert_eq!(m.params[9_999], 10_000.0);
        assert_eq!(m.evaluator().eval(3.0), 9.0);
        // The same through a table directly, with a value that names several earlier ones.
        let mut t = ParamTable::default();
        for i in 1..=10_000 {
            let v = if i == 1 {
                1.0
            } else {
                t.evaluate("phi", "p", &format!("p{} + 1", i - 1), &Config::default().limits)
                    .unwrap()
            };
            t.push(&format!("p{i}"), v);
        }
        let v = t
            .evaluate("phi", "q", "p10000 - p9999 + p1*pi", &Config::default().limits)
            .unwrap();
        assert_eq!(v, 1.0 + std::f64::consts::PI);
    }

    #[test]
    fn parameter_errors_keep_their_messages() {
        // A later parameter: unknown here, with the list of those in scope and a hint.
        let e = err("potential = \"a*phi^2\"\n[params]\na = \"2*b\"\nb = 1\n");
        assert!(e.contains("unknown name `b`"), "{e}");
        assert!(e.contains("`b` is a parameter defined after `a`"), "{e}");
        assert!(e.contains("--> m.toml:3:8"), "{e}");
        let e = err("potential = \"a*phi^2\"\n[params]\nz = 1\na = \"2*zz\"\n");
        assert!(e.contains("did you mean `z`?") && e.contains("parameters: `z`"), "{e}");
        let e = err("potential = \"a*phi^2\"\n[params]\na = \"2*phi\"\n");
        assert!(e.contains("parameter `a`: `2*phi` depends on the field `phi`"), "{e}");
        let e = err("potential = \"a*phi^2\"\n[params]\na = \"log(0)\"\n");
        assert!(e.contains("is not a finite number"), "{e}");
        let e = err("potential = \"a*phi^2\"\n[params]\na = \"exp\"\n");
        assert!(e.contains("`exp` is a function, not a value"), "{e}");
    }
}
