//! A model as written: [`ModelSpec`] and its parts, read from TOML with every error pointing
//! into the file (the key checks, the spans of quoted expressions), or built from flags.

use super::error::ModelError;
use crate::diag::{closest, Diagnostic, Span};
use crate::language::ir::Func;
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

/// One entry of a model's `[metric]` table (or of a `--metric` flag): G_aa under a field's
/// name, G_ab under two names separated by a space.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct MetricEntry {
    /// The key as written (its origin points at the key in the file, or at the flag).
    pub key: Text,
    /// The component's expression in the fields and parameters.
    pub value: Text,
}

/// A value given for one field by name: an entry of `[start]` or `[start.velocity]`, or of a
/// `--start` flag.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct FieldValue {
    /// The field's name as written (its origin points at the key).
    pub name: Text,
    /// The value, an expression of numbers, `pi` and parameters.
    pub value: Text,
}

/// A model as a program gives it, every part a string ([`ModelSpec::from_parts`]): what a
/// model file holds, without the file.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ModelParts {
    /// A name (default `inline`).
    pub name: Option<String>,
    /// V, an expression of the field(s) and parameters.
    pub potential: String,
    /// K of one field (default `1`); a model of several fields gives `metric` instead.
    pub kinetic: Option<String>,
    /// The one field's name (default `phi`, or the first of `fields`).
    pub field: Option<String>,
    /// The fields of a model of several fields, in order (empty: one field).
    pub fields: Vec<String>,
    /// The metric's components: `x` for G_xx, `x y` for G_xy.
    pub metric: Vec<(String, String)>,
    /// The start of a model of several fields, one expression per field.
    pub start: Vec<(String, String)>,
    /// The start velocity dphi^a/dN, per field (empty: the slow-roll attractor).
    pub velocity: Vec<(String, String)>,
    /// Parameters in order, each an expression of numbers, `pi` and earlier parameters.
    pub params: Vec<(String, String)>,
    /// The field interval, two expressions (`-inf`, `inf` allowed).
    pub range: Option<(String, String)>,
    /// Default N_* values.
    pub efolds: Option<Vec<f64>>,
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
    /// The fields of a model written with `fields = [...]` (or repeated `--field`), each with
    /// its origin; empty for a model written with `field` (one field, `kinetic`).
    pub fields: Vec<Text>,
    /// The `[metric]` table of a model written with `fields`.
    pub metric: Vec<MetricEntry>,
    /// The `[start]` point of a model written with `fields`.
    pub start_point: Vec<FieldValue>,
    /// The `[start.velocity]` table, dphi^a/dN (empty: the slow-roll attractor).
    pub start_velocity: Vec<FieldValue>,
}

/// The keys of a model of several fields, accepted beside [`TOP_KEYS`] (and listed in hints
/// when the file declares `fields`).
const FIELDS_KEYS: [&str; 3] = ["fields", "metric", "start"];
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
    fields: Option<toml::Spanned<Vec<toml::Spanned<String>>>>,
    #[serde(default)]
    metric: IndexMap<String, toml::Spanned<RawValue>>,
    #[serde(default)]
    start: IndexMap<String, toml::Spanned<RawStartEntry>>,
}

/// An entry of `[start]`: a field's value, or the `velocity` table.
enum RawStartEntry {
    Value(RawValue),
    Table(IndexMap<String, toml::Spanned<RawValue>>),
}

impl<'de> Deserialize<'de> for RawStartEntry {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<RawStartEntry, D::Error> {
        struct Visitor;
        impl<'de> serde::de::Visitor<'de> for Visitor {
            type Value = RawStartEntry;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a number, a string expression, or the table `velocity`")
            }
            fn visit_f64<E>(self, x: f64) -> Result<RawStartEntry, E> {
                Ok(RawStartEntry::Value(RawValue::Number(x)))
            }
            fn visit_i64<E>(self, x: i64) -> Result<RawStartEntry, E> {
                Ok(RawStartEntry::Value(RawValue::Number(x as f64)))
            }
            fn visit_u64<E>(self, x: u64) -> Result<RawStartEntry, E> {
                Ok(RawStartEntry::Value(RawValue::Number(x as f64)))
            }
            fn visit_str<E>(self, s: &str) -> Result<RawStartEntry, E> {
                Ok(RawStartEntry::Value(RawValue::Text(s.to_string())))
            }
            fn visit_map<M: serde::de::MapAccess<'de>>(self, mut m: M) -> Result<RawStartEntry, M::Error> {
                let mut out = IndexMap::new();
                while let Some(k) = m.next_key::<String>()? {
                    let v = m.next_value::<toml::Spanned<RawValue>>()?;
                    out.insert(k, v);
                }
                Ok(RawStartEntry::Table(out))
            }
        }
        d.deserialize_any(Visitor)
    }
}

/// `range` as written: a list of spanned values.
type RawRange = toml::Spanned<Vec<toml::Spanned<RawValue>>>;

#[derive(Deserialize)]
struct RawSettings {
    range: Option<RawRange>,
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
        let reader = Reader {
            text,
            file,
            shared: std::sync::Arc::from(text),
        };
        let params = reader.params(&raw.params, &raw.scan)?;
        let several = reader.several_fields(&raw)?;
        let settings = raw.settings.unwrap_or(RawSettings {
            range: None,
            start: None,
            efolds: None,
        });
        let range = reader.range(settings.range.as_ref())?;
        let start = reader.start(settings.start.as_ref())?;
        let first = several.fields.first().map(|f| f.text.clone());
        let field = raw
            .field
            .map(|f| f.into_inner())
            .or(first)
            .unwrap_or_else(|| "phi".to_string());
        if several.fields.is_empty() {
            check_identifier(&field, text, file, None)?;
        }
        Ok(ModelSpec {
            fields: several.fields,
            metric: several.metric,
            start_point: several.start_point,
            start_velocity: several.start_velocity,
            name: raw.name.unwrap_or_default(),
            description: raw.description.unwrap_or_default(),
            field,
            potential: reader.origin_of(&raw.potential, "potential"),
            kinetic: raw
                .kinetic
                .as_ref()
                .map(|k| reader.origin_of(k, "kinetic"))
                .unwrap_or_else(|| Text::inline("kinetic (default)", "1")),
            params,
            range,
            start,
            efolds: reader.efolds(settings.efolds)?,
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

    /// A model given by a program as strings ([`ModelParts`]), without a file: each expression's
    /// errors point into the expression itself, under the name of its part (`potential`,
    /// `kinetic`, `params.alpha`, `metric.x y`, `start.x`, `range`). With `fields` it is a model
    /// of several fields (its `metric` and `start` as in a model file), otherwise one field
    /// (`field`, default `phi`, and `kinetic`, default `1`). It is checked when built
    /// ([`crate::model::Model::build`]), as a file's spec is.
    ///
    /// ```
    /// use efold::config::Config;
    /// use efold::model::{Model, ModelParts, ModelSpec};
    /// let parts = ModelParts {
    ///     potential: "m^2 * phi^2 / 2".into(),
    ///     params: vec![("m".into(), "0.5".into())],
    ///     ..ModelParts::default()
    /// };
    /// let model = Model::build(&ModelSpec::from_parts(&parts), &Config::default())?;
    /// assert_eq!(model.evaluator().eval(2.0), 0.5);
    /// # Ok::<(), efold::model::ModelError>(())
    /// ```
    pub fn from_parts(p: &ModelParts) -> ModelSpec {
        let value = |name: &str, text: &str| Text::inline(name, text);
        let field_values = |table: &str, entries: &[(String, String)]| -> Vec<FieldValue> {
            entries
                .iter()
                .map(|(k, v)| FieldValue {
                    name: value(&format!("{table}.{k}"), k),
                    value: value(&format!("{table}.{k}"), v),
                })
                .collect()
        };
        ModelSpec {
            name: p.name.clone().unwrap_or_else(|| "inline".to_string()),
            description: String::new(),
            field: p
                .field
                .clone()
                .or_else(|| p.fields.first().cloned())
                .unwrap_or_else(|| "phi".to_string()),
            potential: value("potential", &p.potential),
            kinetic: match &p.kinetic {
                Some(k) => value("kinetic", k),
                None => value("kinetic (default)", "1"),
            },
            params: p
                .params
                .iter()
                .map(|(n, v)| ParamSpec {
                    name: n.clone(),
                    value: value(&format!("params.{n}"), v),
                    scan: None,
                })
                .collect(),
            range: p
                .range
                .as_ref()
                .map(|(lo, hi)| (value("range[0]", lo), value("range[1]", hi))),
            start: None,
            efolds: p.efolds.clone(),
            fields: p.fields.iter().map(|f| value("fields", f)).collect(),
            metric: p
                .metric
                .iter()
                .map(|(k, v)| MetricEntry {
                    key: value(&format!("metric.{k}"), k),
                    value: value(&format!("metric.{k}"), v),
                })
                .collect(),
            start_point: field_values("start", &p.start),
            start_velocity: field_values("start.velocity", &p.velocity),
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

/// The parts of a model file that only a model of several fields has.
#[derive(Default)]
struct SeveralFields {
    fields: Vec<Text>,
    metric: Vec<MetricEntry>,
    start_point: Vec<FieldValue>,
    start_velocity: Vec<FieldValue>,
}

/// Byte range of a key inside `[section]`, bare or quoted (`"x y" = ...`).
fn table_key_span(file: &str, section: &str, key: &str) -> Option<Span> {
    let mut current: Option<String> = None;
    let mut offset = 0;
    for line in file.split_inclusive('\n') {
        let trimmed = line.trim_start();
        let lead = offset + line.len() - trimmed.len();
        if let Some(rest) = trimmed.strip_prefix('[') {
            current = rest.split(']').next().map(|s| s.replace(' ', ""));
        } else if current.as_deref() == Some(section) {
            let quote = trimmed.chars().next().filter(|c| *c == '"' || *c == '\'');
            let found = match quote {
                Some(q) => trimmed[1..].find(q).map(|end| (1, &trimmed[1..1 + end])),
                None => trimmed.split(['=', ' ', '\t']).next().map(|n| (0, n)),
            };
            if let Some((skip, name)) = found {
                if name == key {
                    return Some(Span::new(lead + skip, lead + skip + key.len()));
                }
            }
        }
        offset += line.len();
    }
    None
}

/// The text of a model file being read, its name, and the copy every expression of it shares.
struct Reader<'a> {
    text: &'a str,
    file: &'a str,
    shared: std::sync::Arc<str>,
}

impl Reader<'_> {
    /// A key of `[section]` as a text whose origin points at the key (at the value's place
    /// when the key cannot be found, as for an inline table).
    fn key_text(&self, section: &str, key: &str, value_span: std::ops::Range<usize>) -> Text {
        let at = table_key_span(self.text, section, key).map_or(value_span.start, |s| s.start);
        Text {
            text: key.to_string(),
            origin: Origin {
                name: self.file.to_string(),
                file_text: Some(self.shared.clone()),
                offset: at,
            },
        }
    }

    /// An error at `span` of the file.
    fn error_at(&self, span: Span, message: String, label: &str, hint: &str) -> ModelError {
        ModelError::in_file(
            Diagnostic::new(message).with_span(span, label).with_hint(hint),
            self.file,
            self.text,
        )
    }

    /// `fields`, `[metric]` and `[start]`: read as written; checked against each other when
    /// the model is built (so that flags can complete them).
    fn several_fields(&self, raw: &RawModel) -> Result<SeveralFields, ModelError> {
        let Some(fields) = &raw.fields else {
            let stray = [("metric", !raw.metric.is_empty()), ("start", !raw.start.is_empty())];
            if let Some((key, _)) = stray.iter().find(|(_, given)| *given) {
                let span = header_span(self.text, &[key]).unwrap_or_default();
                return Err(self.error_at(
                    span,
                    format!("`[{key}]` belongs to a model of several fields, and this one has no `fields`"),
                    "needs `fields = [...]`",
                    "declare the fields with `fields = [\"x\", \"y\"]`; a one-field model uses `field` and `kinetic`",
                ));
            }
            return Ok(SeveralFields::default());
        };
        for (key, given) in [("field", raw.field.is_some()), ("kinetic", raw.kinetic.is_some())] {
            if given {
                let span = key_span(self.text, None, key).unwrap_or_default();
                return Err(self.error_at(
                    span,
                    format!("`{key}` and `fields` are given together"),
                    "leave this out",
                    "with `fields = [...]` the kinetic part is the [metric] table; `field` and `kinetic` are the one-field form",
                ));
            }
        }
        if fields.get_ref().is_empty() {
            let span = fields.span();
            return Err(self.error_at(
                Span::new(span.start, span.end),
                "`fields` is empty".to_string(),
                "no field",
                "list the fields, e.g. `fields = [\"x\", \"y\"]`",
            ));
        }
        let mut out = SeveralFields {
            fields: fields.get_ref().iter().map(|f| self.origin_of(f, "fields")).collect(),
            ..SeveralFields::default()
        };
        for (key, value) in &raw.metric {
            out.metric.push(MetricEntry {
                key: self.key_text("metric", key, value.span()),
                value: self.raw_text(value, &format!("metric.{key}")),
            });
        }
        for (key, entry) in &raw.start {
            match entry.get_ref() {
                RawStartEntry::Value(v) => out.start_point.push(FieldValue {
                    name: self.key_text("start", key, entry.span()),
                    value: self.raw_text(&toml::Spanned::new(entry.span(), v.clone()), &format!("start.{key}")),
                }),
                RawStartEntry::Table(t) if key == "velocity" => {
                    for (name, v) in t {
                        out.start_velocity.push(FieldValue {
                            name: self.key_text("start.velocity", name, v.span()),
                            value: self.raw_text(v, &format!("start.velocity.{name}")),
                        });
                    }
                }
                RawStartEntry::Table(_) => {
                    let span = header_span(self.text, &["start", key])
                        .or_else(|| table_key_span(self.text, "start", key))
                        .unwrap_or_default();
                    return Err(self.error_at(
                        span,
                        format!("unknown table `[start.{key}]`"),
                        "not a start table",
                        "[start] holds a value for each field, and the table [start.velocity]",
                    ));
                }
            }
        }
        Ok(out)
    }

    /// An expression of the file: its errors point into the file where the string appears
    /// verbatim, at the string itself otherwise.
    fn origin_of(&self, s: &toml::Spanned<String>, key: &str) -> Text {
        let value = s.get_ref().clone();
        match verbatim_offset(self.text, s.span(), &value) {
            Some(offset) => Text {
                text: value,
                origin: Origin {
                    name: self.file.to_string(),
                    file_text: Some(self.shared.clone()),
                    offset,
                },
            },
            None => Text::inline(&format!("{}: {key}", self.file), &value),
        }
    }

    /// A number or an expression of the file, as an expression.
    fn raw_text(&self, v: &toml::Spanned<RawValue>, key: &str) -> Text {
        match v.get_ref() {
            RawValue::Number(x) => Text::inline(
                &format!("{}: {key}", self.file),
                &crate::language::ir::format_number(*x),
            ),
            RawValue::Text(s) => self.origin_of(&toml::Spanned::new(v.span(), s.clone()), key),
        }
    }

    /// The [params] table, with the ranges of [scan] attached.
    fn params(
        &self,
        params: &IndexMap<String, toml::Spanned<RawValue>>,
        scan: &IndexMap<String, toml::Spanned<Vec<RawValue>>>,
    ) -> Result<Vec<ParamSpec>, ModelError> {
        let (text, file) = (self.text, self.file);
        let mut out = Vec::new();
        for (name, value) in params {
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
            out.push(ParamSpec {
                name: name.clone(),
                value: self.raw_text(value, &format!("params.{name}")),
                scan: None,
            });
        }
        for (name, range) in scan {
            let Some(p) = out.iter_mut().find(|p| &p.name == name) else {
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
        Ok(out)
    }

    /// `range` in [settings]: two ends, each a number or an expression; infinite allowed.
    fn range(&self, range: Option<&RawRange>) -> Result<Option<(Text, Text)>, ModelError> {
        let (text, file) = (self.text, self.file);
        let Some(r) = range else {
            return Ok(None);
        };
        let v = r.get_ref();
        if v.len() != 2 {
            return Err(ModelError::in_file(
                Diagnostic::new("`range` needs two values")
                    .with_span(Span::new(r.span().start, r.span().end), "here")
                    .with_hint("write `range = [\"0\", \"sqrt(6*alpha)\"]`"),
                file,
                text,
            ));
        }
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
        Ok(Some((
            self.raw_text(&v[0], "settings.range"),
            self.raw_text(&v[1], "settings.range"),
        )))
    }

    /// `start` in [settings]: "above" or "below".
    fn start(&self, start: Option<&toml::Spanned<String>>) -> Result<Option<Side>, ModelError> {
        let Some(s) = start else {
            return Ok(None);
        };
        match s.get_ref().as_str() {
            "above" => Ok(Some(Side::Above)),
            "below" => Ok(Some(Side::Below)),
            other => Err(ModelError::in_file(
                Diagnostic::new(format!("unknown start side `{other}`"))
                    .with_span(
                        Span::new(s.span().start, s.span().end),
                        "expected \"above\" or \"below\"",
                    )
                    .with_hint("\"above\": the field starts at larger values than the minimum of V"),
                self.file,
                self.text,
            )),
        }
    }

    /// `efolds` in [settings]: a non-empty list of positive numbers.
    fn efolds(&self, e: Option<toml::Spanned<Vec<toml::Spanned<f64>>>>) -> Result<Option<Vec<f64>>, ModelError> {
        match e {
            None => Ok(None),
            Some(e) if e.get_ref().is_empty() => Err(ModelError::in_file(
                Diagnostic::new("efolds: the list is empty: no N_* to predict at")
                    .with_span(Span::new(e.span().start, e.span().end), "empty")
                    .with_hint("write `efolds = [50, 55, 60]`, or leave the key out for those defaults"),
                self.file,
                self.text,
            )),
            Some(e) => Ok(Some(efolds(e.into_inner(), self.text, self.file)?)),
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
    // The keys of several fields are listed only to a file that declares `fields`, so that
    // a one-field file's hints stay as they are.
    let several = table.contains_key("fields");
    let all_keys: Vec<&str> = TOP_KEYS.iter().chain(&FIELDS_KEYS).copied().collect();
    let top_keys: &[&str] = if several { &all_keys } else { &TOP_KEYS };
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
        if !TOP_KEYS.contains(&key.as_str()) && !FIELDS_KEYS.contains(&key.as_str()) {
            let header = matches!(value, toml::Value::Table(_) | toml::Value::Array(_))
                .then(|| header_span(text, &[key]))
                .flatten();
            return Err(match header {
                Some(span) if key_span(text, None, key).is_none() => unknown_table(key, span),
                _ => unknown(key, None, top_keys),
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

#[cfg(test)]
mod tests {
    #[test]
    fn toml_messages_name_the_unterminated_string_and_the_duplicate_key() {
        let message = |text: &str| super::toml_message(&toml::from_str::<toml::Table>(text).unwrap_err(), text);
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

    use super::*;
    use crate::config::Config;
    use crate::model::Model;

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
}
