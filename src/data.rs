//! Observational constraints and the physical constants that go with them, read from a TOML
//! data file. The default file, `data/planck2018-bk18.toml`, is compiled in; `--data FILE`
//! replaces it. No number of this kind appears in the logic.

use crate::diag::{Diagnostic, Source, Span};
use serde::{Deserialize, Serialize};

/// A data set: constraints, pivot, units.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct DataSet {
    /// What the data are.
    pub name: String,
    /// The pivot scale.
    pub pivot: Pivot,
    /// The scalar amplitude.
    pub amplitude: Amplitude,
    /// The scalar spectral index.
    pub n_s: Gaussian,
    /// The running.
    pub running: Gaussian,
    /// The tensor-to-scalar ratio.
    pub r: UpperLimit,
    /// Unit conversions.
    pub units: Units,
    /// Today's radiation, for the reheating matching.
    pub today: Today,
    /// Verdict thresholds.
    pub verdict: Verdict,
    /// Where the data came from (a path, or "built-in").
    #[serde(skip)]
    pub source: String,
}

/// The pivot scale.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Pivot {
    /// k_* in Mpc^-1.
    pub k_mpc: f64,
}

/// ln(10^10 A_s) with its error.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Amplitude {
    /// ln(10^10 A_s).
    pub ln_1e10_as: f64,
    /// 1-sigma error.
    pub sigma: f64,
}

/// A Gaussian constraint.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Gaussian {
    /// Mean.
    pub mean: f64,
    /// 1-sigma error.
    pub sigma: f64,
}

/// An upper limit.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct UpperLimit {
    /// The limit.
    pub upper: f64,
    /// Its confidence level.
    pub confidence: f64,
}

/// Unit conversions.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Units {
    /// Reduced Planck mass in GeV.
    pub reduced_planck_mass_gev: f64,
    /// hbar c in GeV m.
    pub hbar_c_gev_m: f64,
    /// One megaparsec in metres.
    pub megaparsec_m: f64,
    /// Boltzmann's constant in GeV/K.
    pub boltzmann_gev_per_k: f64,
}

/// Radiation today.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Today {
    /// T_CMB in kelvin.
    pub cmb_temperature_k: f64,
    /// g_{s,0}.
    pub entropy_dof: f64,
}

/// Verdict thresholds in sigma.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Verdict {
    /// Beyond this: tension.
    pub tension_sigma: f64,
    /// Beyond this: excluded.
    pub excluded_sigma: f64,
}

const DEFAULT: &str = include_str!("../data/planck2018-bk18.toml");

/// Why a data file cannot be used: the diagnostic, and the file text its span points into.
#[derive(Debug, Clone, PartialEq)]
pub struct DataError {
    /// The error in words, with its place and hints.
    pub diagnostic: Box<Diagnostic>,
    /// The file it points into: (name, text).
    pub source: Option<(String, String)>,
}

impl DataError {
    /// Drawn by the one renderer, with carets under the value when it points into the file.
    pub fn render(&self) -> String {
        match &self.source {
            Some((name, text)) => self.diagnostic.render(Some(&Source::new(name, text))),
            None => self.diagnostic.render(None),
        }
    }

    fn in_file(d: Box<Diagnostic>, name: &str, text: &str) -> DataError {
        DataError {
            diagnostic: d,
            source: Some((name.to_string(), text.to_string())),
        }
    }
}

impl std::fmt::Display for DataError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.diagnostic.message)
    }
}

impl std::error::Error for DataError {}

/// What a value of the data file must be.
#[derive(Clone, Copy)]
enum Rule {
    /// Any finite number.
    Finite,
    /// A finite number above zero.
    Positive,
    /// A number strictly between 0 and 1.
    Fraction,
}

impl DataSet {
    /// The built-in default (`data/planck2018-bk18.toml`), parsed and validated once.
    pub fn builtin() -> DataSet {
        static BUILTIN: std::sync::OnceLock<DataSet> = std::sync::OnceLock::new();
        BUILTIN
            .get_or_init(|| {
                let mut d =
                    DataSet::parse(DEFAULT, "data/planck2018-bk18.toml").expect("the built-in data file is valid");
                d.source = "built-in (data/planck2018-bk18.toml)".to_string();
                d
            })
            .clone()
    }

    /// Reads a data file (at most the default [`crate::config::Limits::max_file_bytes`]);
    /// errors are rendered against it.
    pub fn load(path: &std::path::Path) -> Result<DataSet, DataError> {
        DataSet::load_with(path, &crate::config::Limits::default())
    }

    /// Reads a data file within `limits.max_file_bytes`; errors are rendered against it.
    pub fn load_with(path: &std::path::Path, limits: &crate::config::Limits) -> Result<DataSet, DataError> {
        let name = path.display().to_string();
        let text = limits.read_file(path).map_err(|e| {
            let mut d = Diagnostic::new(format!("cannot read data file `{name}`: {e}"));
            if let crate::config::ReadError::TooLarge(_) = e {
                d = d.with_hint("a data file is a few lines of TOML: check the path");
            }
            DataError {
                diagnostic: Box::new(d.with_hint("give the path of a TOML data file (see data/ for the format)")),
                source: None,
            }
        })?;
        let mut d = DataSet::parse(&text, &name)?;
        d.source = name;
        Ok(d)
    }

    /// Parses and validates data-file text; `name` names it in errors.
    pub fn parse(text: &str, name: &str) -> Result<DataSet, DataError> {
        let d: DataSet = toml::from_str(text).map_err(|e| {
            let mut diag = Diagnostic::new(format!("bad data file: {}", crate::model::toml_message(&e, text)));
            if let Some(s) = e.span() {
                diag = diag.with_span(Span::new(s.start, s.end.max(s.start + 1)), "here");
            }
            let diag = diag.with_hint("start from data/planck2018-bk18.toml: every table and key there is required");
            DataError::in_file(Box::new(diag), name, text)
        })?;
        d.validate(text).map_err(|diag| DataError::in_file(diag, name, text))?;
        Ok(d)
    }

    /// Every value checked: finite; errors, the pivot, masses, temperatures, degrees of freedom
    /// and unit conversions positive; the r limit positive, its confidence in (0, 1); the
    /// verdict thresholds 0 < tension_sigma < excluded_sigma; A_s, k_* and T_0 in reduced
    /// Planck units positive normal doubles. The
    /// diagnostic points at the value in `text` when the key is on a line of its own under its
    /// table.
    fn validate(&self, text: &str) -> Result<(), Box<Diagnostic>> {
        use Rule::*;
        let checks: [(&str, &str, f64, Rule); 17] = [
            ("pivot", "k_mpc", self.pivot.k_mpc, Positive),
            ("amplitude", "ln_1e10_as", self.amplitude.ln_1e10_as, Finite),
            ("amplitude", "sigma", self.amplitude.sigma, Positive),
            ("n_s", "mean", self.n_s.mean, Finite),
            ("n_s", "sigma", self.n_s.sigma, Positive),
            ("running", "mean", self.running.mean, Finite),
            ("running", "sigma", self.running.sigma, Positive),
            ("r", "upper", self.r.upper, Positive),
            ("r", "confidence", self.r.confidence, Fraction),
            (
                "units",
                "reduced_planck_mass_gev",
                self.units.reduced_planck_mass_gev,
                Positive,
            ),
            ("units", "hbar_c_gev_m", self.units.hbar_c_gev_m, Positive),
            ("units", "megaparsec_m", self.units.megaparsec_m, Positive),
            ("units", "boltzmann_gev_per_k", self.units.boltzmann_gev_per_k, Positive),
            ("today", "cmb_temperature_k", self.today.cmb_temperature_k, Positive),
            ("today", "entropy_dof", self.today.entropy_dof, Positive),
            ("verdict", "tension_sigma", self.verdict.tension_sigma, Positive),
            ("verdict", "excluded_sigma", self.verdict.excluded_sigma, Positive),
        ];
        for (table, key, x, rule) in checks {
            let why = match rule {
                _ if !x.is_finite() => Some("a finite number"),
                Positive if x <= 0.0 => Some("a positive number"),
                Fraction if !(x > 0.0 && x < 1.0) => Some("a number strictly between 0 and 1"),
                _ => None,
            };
            if let Some(why) = why {
                return Err(bad_value(
                    text,
                    table,
                    key,
                    x,
                    &format!("must be {why}"),
                    hint_for(table, key),
                ));
            }
        }
        if self.verdict.tension_sigma >= self.verdict.excluded_sigma {
            return Err(bad_value(
                text,
                "verdict",
                "excluded_sigma",
                self.verdict.excluded_sigma,
                &format!(
                    "must be larger than tension_sigma = {}",
                    crate::report::numfmt::typed(self.verdict.tension_sigma)
                ),
                "a prediction is in tension beyond tension_sigma and excluded beyond excluded_sigma, e.g. 2 and 3",
            ));
        }
        // The derived scales must be usable too (a megaparsec of 1e308 m underflows k_*).
        let k_star = self.k_star_planck();
        if !(k_star.is_normal() && k_star > 0.0) {
            return Err(bad_value(
                text,
                "pivot",
                "k_mpc",
                self.pivot.k_mpc,
                &format!("gives k_* = {k_star:e} in reduced Planck units with these [units], not a usable scale"),
                "check the pivot and the unit conversions: k_* is k_mpc hbar c / (Mpc M_p)",
            ));
        }
        let t0 = self.t0_planck();
        if !(t0.is_normal() && t0 > 0.0) {
            return Err(bad_value(
                text,
                "today",
                "cmb_temperature_k",
                self.today.cmb_temperature_k,
                &format!("gives T_0 = {t0:e} in reduced Planck units with these [units], not a usable temperature"),
                "check the temperature and the unit conversions: T_0 is T k_B / M_p",
            ));
        }
        let a_s = self.a_s();
        if !(a_s.is_finite() && a_s > 0.0) {
            return Err(bad_value(
                text,
                "amplitude",
                "ln_1e10_as",
                self.amplitude.ln_1e10_as,
                &format!("gives A_s = {a_s:e}, not a usable amplitude"),
                "ln(10^10 A_s) is about 3 for the CMB",
            ));
        }
        Ok(())
    }

    /// A_s from ln(10^10 A_s).
    pub fn a_s(&self) -> f64 {
        self.amplitude.ln_1e10_as.exp() * 1e-10
    }

    /// k_* in reduced Planck units.
    pub fn k_star_planck(&self) -> f64 {
        let mpc_inverse_gev = self.units.hbar_c_gev_m / self.units.megaparsec_m;
        self.pivot.k_mpc * mpc_inverse_gev / self.units.reduced_planck_mass_gev
    }

    /// T_CMB today in reduced Planck units.
    pub fn t0_planck(&self) -> f64 {
        self.today.cmb_temperature_k * self.units.boltzmann_gev_per_k / self.units.reduced_planck_mass_gev
    }
}

fn hint_for(table: &str, key: &str) -> &'static str {
    match (table, key) {
        (_, "sigma") => "a 1-sigma error is a positive number",
        ("r", "upper") => "the upper limit on r is a positive number, e.g. 0.036",
        ("r", "confidence") => "the confidence level is a fraction, e.g. 0.95 for 95%",
        ("verdict", _) => "the thresholds are numbers of sigma, e.g. tension_sigma = 2, excluded_sigma = 3",
        ("units", _) | ("pivot", _) => "masses, lengths, conversions and the pivot scale are positive numbers",
        ("today", _) => "the temperature (kelvin) and the degrees of freedom are positive numbers",
        _ => "write a plain number such as 0.9649",
    }
}

/// A diagnostic for a bad value, `[table] key`, pointing at it in `text` when it can be found.
fn bad_value(text: &str, table: &str, key: &str, x: f64, what: &str, hint: &str) -> Box<Diagnostic> {
    let shown = if x.is_nan() {
        "nan".to_string()
    } else {
        crate::report::numfmt::typed(x)
    };
    let mut d = Diagnostic::new(format!("bad data file: `{key}` in [{table}] {what}, not {shown}"));
    if let Some(span) = value_span(text, table, key) {
        d = d.with_span(span, "this value");
    }
    Box::new(d.with_hint(hint))
}

/// The span of the value of `key = value` on a line of its own under `[table]` (without a
/// trailing comment), if the file is written that way.
fn value_span(text: &str, table: &str, key: &str) -> Option<Span> {
    let mut current = String::new();
    let mut offset = 0;
    for line in text.split_inclusive('\n') {
        let trimmed = line.trim_start();
        if let Some(rest) = trimmed.strip_prefix('[') {
            current = rest.split(']').next().unwrap_or("").trim().to_string();
        } else if current == table {
            if let Some((k, v)) = trimmed.split_once('=') {
                if k.trim().trim_matches(|c| c == '"' || c == '\'') == key {
                    let v_start = offset + (line.len() - v.len());
                    let value = v.split('#').next().unwrap_or("");
                    let lead = value.len() - value.trim_start().len();
                    let len = value.trim().len().max(1);
                    return Some(Span::new(v_start + lead, v_start + lead + len));
                }
            }
        }
        offset += line.len();
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The built-in file with one line replaced.
    fn edited(from: &str, to: &str) -> String {
        assert!(DEFAULT.contains(from), "{from}");
        DEFAULT.replacen(from, to, 1)
    }

    fn error(from: &str, to: &str) -> String {
        DataSet::parse(&edited(from, to), "d.toml").unwrap_err().render()
    }

    #[test]
    fn the_built_in_file_is_valid_and_parsed_once() {
        let a = DataSet::builtin();
        assert_eq!(a, DataSet::builtin());
        assert!(a.source.starts_with("built-in"));
        assert!(DataSet::parse(DEFAULT, "d.toml").is_ok());
    }

    #[test]
    fn every_value_is_checked_at_its_line() {
        let cases = [
            (
                "k_mpc = 0.05",
                "k_mpc = 0",
                "`k_mpc` in [pivot] must be a positive number, not 0",
            ),
            (
                "ln_1e10_as = 3.044",
                "ln_1e10_as = nan",
                "`ln_1e10_as` in [amplitude] must be a finite number, not nan",
            ),
            ("ln_1e10_as = 3.044", "ln_1e10_as = 800", "gives A_s = inf"),
            (
                "sigma = 0.014",
                "sigma = -0.014",
                "`sigma` in [amplitude] must be a positive number",
            ),
            (
                "mean = 0.9649",
                "mean = inf",
                "`mean` in [n_s] must be a finite number, not inf",
            ),
            (
                "sigma = 0.0042",
                "sigma = 0",
                "`sigma` in [n_s] must be a positive number",
            ),
            (
                "mean = -0.0045",
                "mean = nan",
                "`mean` in [running] must be a finite number",
            ),
            (
                "sigma = 0.0067",
                "sigma = 0.0",
                "`sigma` in [running] must be a positive number",
            ),
            (
                "upper = 0.036",
                "upper = -0.036",
                "`upper` in [r] must be a positive number",
            ),
            (
                "confidence = 0.95",
                "confidence = 1",
                "`confidence` in [r] must be a number strictly between 0 and 1",
            ),
            (
                "reduced_planck_mass_gev = 2.435e18",
                "reduced_planck_mass_gev = 0",
                "`reduced_planck_mass_gev` in [units]",
            ),
            (
                "hbar_c_gev_m = 1.973269804e-16",
                "hbar_c_gev_m = -1",
                "`hbar_c_gev_m` in [units]",
            ),
            (
                "megaparsec_m = 3.0856775814913673e22",
                "megaparsec_m = inf",
                "`megaparsec_m` in [units]",
            ),
            (
                "boltzmann_gev_per_k = 8.617333262e-14",
                "boltzmann_gev_per_k = 0",
                "`boltzmann_gev_per_k`",
            ),
            (
                "cmb_temperature_k = 2.7255",
                "cmb_temperature_k = -2.7255",
                "`cmb_temperature_k` in [today]",
            ),
            (
                "entropy_dof = 3.909090909090909",
                "entropy_dof = 0",
                "`entropy_dof` in [today]",
            ),
            (
                "tension_sigma = 2.0",
                "tension_sigma = 0",
                "`tension_sigma` in [verdict] must be a positive number",
            ),
            (
                "excluded_sigma = 3.0",
                "excluded_sigma = 2.0",
                "`excluded_sigma` in [verdict] must be larger than tension_sigma = 2",
            ),
        ];
        for (from, to, want) in cases {
            let e = error(from, to);
            assert!(e.contains(want), "{to}: {e}");
            // The caret line points at the edited line.
            let value = to.split(" = ").nth(1).unwrap();
            assert!(e.contains(&format!("| {to}")), "{to}: {e}");
            assert!(e.contains(&"^".repeat(value.len())), "{to}: {e}");
        }
        // Derived scales out of double precision: pointed at the value they derive from.
        let e = error("megaparsec_m = 3.0856775814913673e22", "megaparsec_m = 1e308");
        assert!(
            e.contains("`k_mpc` in [pivot] gives k_* = ") && e.contains("| k_mpc = 0.05"),
            "{e}"
        );
        let e = error("boltzmann_gev_per_k = 8.617333262e-14", "boltzmann_gev_per_k = 1e-300");
        assert!(e.contains("`cmb_temperature_k` in [today] gives T_0 = "), "{e}");
    }
}
