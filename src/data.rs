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

impl DataSet {
    /// The built-in default (`data/planck2018-bk18.toml`).
    pub fn builtin() -> DataSet {
        let mut d: DataSet = toml::from_str(DEFAULT).expect("the built-in data file parses");
        d.source = "built-in (data/planck2018-bk18.toml)".to_string();
        d
    }

    /// Reads a data file; errors are rendered against it.
    pub fn load(path: &std::path::Path) -> Result<DataSet, String> {
        let name = path.display().to_string();
        let text = std::fs::read_to_string(path).map_err(|e| {
            Diagnostic::new(format!("cannot read data file `{name}`: {e}"))
                .with_hint("give the path of a TOML data file (see data/ for the format)")
                .render(None)
        })?;
        let mut d: DataSet = toml::from_str(&text).map_err(|e| {
            let mut diag = Diagnostic::new(format!("bad data file: {}", e.message().trim()));
            if let Some(s) = e.span() {
                diag = diag.with_span(Span::new(s.start, s.end.max(s.start + 1)), "here");
            }
            diag.with_hint("start from data/planck2018-bk18.toml: every table and key there is required")
                .render(Some(&Source::new(&name, &text)))
        })?;
        d.source = name;
        Ok(d)
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
