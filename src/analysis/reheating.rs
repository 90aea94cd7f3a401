//! N_* from the history after inflation: the matching of the pivot scale, from entropy
//! conservation. Reduced Planck units (M_p = 1).
//!
//! The pivot left the horizon when k_* = a_* H_*. Writing a_*/a_0 = (a_*/a_end)(a_end/a_reh)
//! (a_reh/a_0):
//!
//! ```text
//! N_* = ln(a_end/a_*) = ln(a_0 H_* / k_*) - N_reh + ln(a_reh / a_0)
//! ```
//!
//! During reheating the fluid has equation of state w, so rho ~ a^(-3(1+w)) and
//! N_reh = ln(rho_end / rho_reh) / (3 (1 + w)). From then on entropy is conserved,
//! g_s T^3 a^3 = const, so a_reh/a_0 = (g_s0 / g_*)^(1/3) T_0 / T_reh, with
//! rho_reh = (pi^2/30) g_* T_reh^4 and rho_end = (3/2) V_end (eps_H = 1 at the end; common
//! practice). This is the matching equation of Liddle & Leach, Phys. Rev. D 68, 103503 (2003)
//! and of the Planck 2018 inflation paper (A&A 641, A10, section 2), which writes it as
//! N_* = 67 - ln(k_*/(a_0 H_0)) + 1/4 ln(V_*^2/(M_p^4 rho_end)) + (1-3w)/(12(1+w)) ln(rho_reh/rho_end)
//! - 1/12 ln(g_*) (from memory): for w = 1/3 the reheating temperature drops out.

use crate::data::DataSet;
use serde::Serialize;
use std::f64::consts::PI;

/// The history between the end of inflation and radiation domination.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "history", rename_all = "kebab-case")]
pub enum Reheating {
    /// Radiation right at the end of inflation.
    Instant {
        /// Relativistic degrees of freedom at reheating.
        g_star: f64,
    },
    /// A fluid of equation of state w until the temperature T_reh (GeV).
    Temperature {
        /// Equation of state during reheating.
        w: f64,
        /// Reheating temperature in GeV.
        t_reh_gev: f64,
        /// Relativistic degrees of freedom at reheating.
        g_star: f64,
    },
    /// A fluid of equation of state w for N_reh e-folds.
    Efolds {
        /// Equation of state during reheating.
        w: f64,
        /// e-folds of reheating.
        n_reh: f64,
        /// Relativistic degrees of freedom at reheating.
        g_star: f64,
    },
}

/// The matching's outcome.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Matching {
    /// The pivot's e-folds before the end.
    pub n_star: f64,
    /// e-folds of reheating.
    pub n_reh: f64,
    /// Reheating temperature in GeV.
    pub t_reh_gev: f64,
    /// Equation of state used.
    pub w: f64,
    /// g_* used.
    pub g_star: f64,
    /// Energy density at the end of inflation, GeV^4.
    pub rho_end_gev4: f64,
}

/// Why the matching failed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum MatchingError {
    /// The equation of state is outside (-1/3, 1].
    BadW {
        /// The equation of state.
        w: f64,
    },
    /// g_* is not positive.
    BadGStar {
        /// g_*.
        g_star: f64,
    },
    /// The reheating temperature is above the energy at the end of inflation.
    TooHot {
        /// The highest reheating temperature possible, GeV.
        t_max_gev: f64,
    },
}

impl std::fmt::Display for MatchingError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            MatchingError::BadW { w } => write!(
                f,
                "equation of state w = {w} is outside (-1/3, 1]: the universe would still be inflating"
            ),
            MatchingError::BadGStar { g_star } => write!(f, "g_* = {g_star} must be positive"),
            MatchingError::TooHot { t_max_gev } => write!(
                f,
                "the reheating temperature is above the energy at the end of inflation: T_reh can be at most {} GeV",
                crate::report::numfmt::number(*t_max_gev)
            ),
        }
    }
}

impl std::error::Error for MatchingError {}

impl Reheating {
    /// N_* for a pivot that exits with Hubble rate `h_star` when inflation ends with potential
    /// `v_end` (both in reduced Planck units, for the potential as normalised to the data).
    pub fn match_pivot(&self, h_star: f64, v_end: f64, data: &DataSet) -> Result<Matching, MatchingError> {
        let rho_end = 1.5 * v_end;
        let (w, g, rho_reh) = match *self {
            Reheating::Instant { g_star } => (1.0 / 3.0, g_star, rho_end),
            Reheating::Temperature { w, t_reh_gev, g_star } => {
                let t = t_reh_gev / data.units.reduced_planck_mass_gev;
                (w, g_star, PI * PI / 30.0 * g_star * t.powi(4))
            }
            Reheating::Efolds { w, n_reh, g_star } => (w, g_star, rho_end * (-3.0 * (1.0 + w) * n_reh).exp()),
        };
        if !(w > -1.0 / 3.0 && w <= 1.0) {
            return Err(MatchingError::BadW { w });
        }
        if g <= 0.0 {
            return Err(MatchingError::BadGStar { g_star: g });
        }
        if rho_reh > rho_end * (1.0 + 1e-12) {
            let t_max = (30.0 * rho_end / (PI * PI * g)).powf(0.25) * data.units.reduced_planck_mass_gev;
            return Err(MatchingError::TooHot { t_max_gev: t_max });
        }
        let n_reh = (rho_end / rho_reh).ln() / (3.0 * (1.0 + w));
        let t_reh = (30.0 * rho_reh / (PI * PI * g)).powf(0.25);
        let a_reh_over_a0 = (data.today.entropy_dof / g).cbrt() * data.t0_planck() / t_reh;
        let n_star = (h_star / data.k_star_planck()).ln() - n_reh + a_reh_over_a0.ln();
        let mp = data.units.reduced_planck_mass_gev;
        Ok(Matching {
            n_star,
            n_reh,
            t_reh_gev: t_reh * mp,
            w,
            g_star: g,
            rho_end_gev4: rho_end * mp.powi(4),
        })
    }

    /// One line saying what was assumed.
    pub fn describe(&self) -> String {
        match self {
            Reheating::Instant { g_star } => format!("instant reheating, g_* = {g_star}"),
            Reheating::Temperature { w, t_reh_gev, g_star } => {
                format!("reheating with w = {w} until T_reh = {t_reh_gev:e} GeV, g_* = {g_star}")
            }
            Reheating::Efolds { w, n_reh, g_star } => {
                format!("reheating with w = {w} for {n_reh} e-folds, g_* = {g_star}")
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The matching's refusals against the messages built by hand before they were typed (the
    /// old `format!` calls kept as the reference), and the refusals themselves.
    #[test]
    fn refusals_keep_their_messages() {
        let data = DataSet::builtin();
        let bad_w = Reheating::Efolds {
            w: -0.5,
            n_reh: 1.0,
            g_star: 100.0,
        };
        let e = bad_w.match_pivot(1e-5, 1e-10, &data).unwrap_err();
        assert_eq!(e, MatchingError::BadW { w: -0.5 });
        assert_eq!(
            e.to_string(),
            format!(
                "equation of state w = {} is outside (-1/3, 1]: the universe would still be inflating",
                -0.5
            )
        );
        let e = Reheating::Instant { g_star: 0.0 }
            .match_pivot(1e-5, 1e-10, &data)
            .unwrap_err();
        assert_eq!(e.to_string(), format!("g_* = {} must be positive", 0.0));
        // T_reh = 1e19 GeV is above the energy of V_end = 1e-10 (in M_p^4).
        let hot = Reheating::Temperature {
            w: 0.0,
            t_reh_gev: 1e19,
            g_star: 100.0,
        };
        let e = hot.match_pivot(1e-5, 1e-10, &data).unwrap_err();
        let MatchingError::TooHot { t_max_gev } = e else {
            panic!("{e:?}")
        };
        assert!(t_max_gev < 1e19);
        assert_eq!(
            e.to_string(),
            format!(
                "the reheating temperature is above the energy at the end of inflation: T_reh can be at most {} GeV",
                crate::report::numfmt::number(t_max_gev)
            )
        );
    }
}
