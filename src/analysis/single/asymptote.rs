//! The asymptotic shape of V(chi) toward each end of field space: a plateau, an exponential
//! approach, a power law, or growth. Units: reduced Planck units (M_p = 1).

use crate::analysis::single::canonical::chi_derivatives;
use crate::analysis::single::canonical::CanonicalMap;
use crate::analysis::single::domain::ser_f64;
use crate::analysis::single::domain::{EndKind, Interval};
use crate::config::Config;
use crate::language::tape::Evaluator;
use crate::model::Model;
use serde::Serialize;

/// How V(chi) behaves toward one end of field space.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Asymptote {
    /// The end, as a field value (or +-inf).
    #[serde(serialize_with = "ser_f64")]
    pub end: f64,
    /// The classification.
    pub kind: AsymptoteKind,
    /// Plateau height V_inf (plateaus).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub height: Option<f64>,
    /// Scale M in V ~ V_inf (1 - c exp(-chi/M)) (exponential plateaus).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub scale: Option<f64>,
    /// alpha = 2 M^2 / 3 (exponential plateaus).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub alpha: Option<f64>,
    /// Power: q in V ~ V_inf (1 - c chi^-q) (power plateaus), or n in V ~ chi^n (power-law
    /// growth or decay).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub power: Option<f64>,
    /// Rate lambda in V ~ exp(lambda chi) (exponential growth or decay).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rate: Option<f64>,
    /// Canonical distance from the reference point to the end, when finite.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub chi_distance: Option<f64>,
    /// Relative change of the main number between the two best sample points: how certain.
    /// Infinite (`"inf"` in JSON) when there was no estimate to compare.
    #[serde(serialize_with = "ser_f64")]
    pub uncertainty: f64,
    /// "high" (uncertainty < 1e-6), "medium" (< 1e-3) or "low".
    pub confidence: &'static str,
}

/// The kinds of asymptotic behaviour.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum AsymptoteKind {
    /// V -> V_inf with V_inf - V ~ exp(-chi/M).
    ExponentialPlateau,
    /// V -> V_inf with V_inf - V ~ chi^(-q).
    PowerPlateau,
    /// V ~ chi^n, n > 0.
    PowerGrowth,
    /// V ~ exp(lambda chi), lambda > 0.
    ExponentialGrowth,
    /// V ~ chi^n -> 0.
    PowerDecay,
    /// V ~ exp(-lambda chi) -> 0.
    ExponentialDecay,
    /// V becomes negative.
    Negative,
    /// V' changes sign again and again.
    Oscillating,
    /// Field space ends at a finite canonical distance.
    FiniteDistance,
    /// None of the above could be established.
    Unclassified,
}

impl AsymptoteKind {
    /// The word used in reports and JSON.
    pub fn word(self) -> &'static str {
        match self {
            AsymptoteKind::ExponentialPlateau => "exponential-plateau",
            AsymptoteKind::PowerPlateau => "power-plateau",
            AsymptoteKind::PowerGrowth => "power-growth",
            AsymptoteKind::ExponentialGrowth => "exponential-growth",
            AsymptoteKind::PowerDecay => "power-decay",
            AsymptoteKind::ExponentialDecay => "exponential-decay",
            AsymptoteKind::Negative => "negative",
            AsymptoteKind::Oscillating => "oscillating",
            AsymptoteKind::FiniteDistance => "finite-distance",
            AsymptoteKind::Unclassified => "unclassified",
        }
    }
}

fn confidence(u: f64) -> &'static str {
    if u < 1e-6 {
        "high"
    } else if u < 1e-3 {
        "medium"
    } else {
        "low"
    }
}

/// One sample on the way to an end: V and its derivatives along t (t = +-chi, increasing
/// toward the end), and the canonical distance from the previous sample.
#[derive(Debug, Clone, Copy)]
struct Sample {
    v: f64,
    vt: f64,
    vtt: f64,
    vttt: f64,
    dchi: f64,
}

/// Classifies V(chi) toward the end `end` of the interval (the `upper` end if true).
pub fn asymptote(
    model: &Model,
    ev: &mut Evaluator<'_>,
    iv: &Interval,
    upper: bool,
    phi_ref: f64,
    config: &Config,
) -> Asymptote {
    let end = if upper { iv.hi } else { iv.lo };
    let tau = if upper { 1.0 } else { -1.0 };
    let kind = if upper { iv.hi_kind } else { iv.lo_kind };
    if end.is_finite() && matches!(kind, EndKind::Range | EndKind::ZeroOfK | EndKind::KSignChange) {
        // Field space is cut off here at a finite canonical distance.
        let mut map = CanonicalMap::new(model, phi_ref, config);
        let (dist, u) = match map.to_end(end) {
            Ok(e) => (e.value.abs(), e.error / e.value.abs().max(1e-300)),
            Err(_) => (f64::NAN, f64::INFINITY),
        };
        return Asymptote {
            end,
            kind: AsymptoteKind::FiniteDistance,
            height: Some(ev.eval(end)).filter(|v| v.is_finite()),
            scale: None,
            alpha: None,
            power: None,
            rate: None,
            chi_distance: Some(dist),
            uncertainty: u,
            confidence: confidence(u),
        };
    }
    let pts: Vec<f64> = if end.is_finite() {
        let w = (iv.hi - iv.lo).min(end.abs().max(1.0));
        (4..=36).map(|j| end - tau * w * 10f64.powf(-j as f64 / 4.0)).collect()
    } else {
        // Sampled outward from phi = 0 where the interval holds it, so that a potential symmetric
        // under phi -> -phi is sampled at mirror points whatever its reference point.
        let base = if iv.contains(0.0) || !phi_ref.is_finite() {
            0.0
        } else {
            phi_ref
        };
        (0..=28).map(|j| base + tau * 10f64.powf(j as f64 / 4.0)).collect()
    };
    let mut map = CanonicalMap::new(model, phi_ref, config);
    let mut samples: Vec<Sample> = Vec::new();
    let mut prev: Option<f64> = None;
    for &x in &pts {
        if !iv.contains(x) {
            continue;
        }
        let d = chi_derivatives(ev, x, 3);
        // Stop where V or its derivatives leave the range of doubles (overflow, or underflow
        // of a decaying V, which would read as a flat zero).
        if d.iter().take(4).any(|v| !v.is_finite()) || d[0].abs() < 1e-280 || d[1] == 0.0 {
            break;
        }
        let dchi = match prev {
            Some(p) => map.between(p, x).map(|e| e.value.abs()).unwrap_or(f64::NAN),
            None => map.chi(x).map(|e| e.value.abs()).unwrap_or(f64::NAN),
        };
        prev = Some(x);
        samples.push(Sample {
            v: d[0],
            vt: tau * d[1],
            vtt: d[2],
            vttt: tau * d[3],
            dchi,
        });
    }
    classify(end, &samples, kind == EndKind::VOverflow)
}

fn best_stable(est: &[f64]) -> Option<(usize, f64)> {
    // The consecutive pair whose estimates agree best (relative), preferring later points.
    let mut best: Option<(usize, f64)> = None;
    for j in 1..est.len() {
        let (a, b) = (est[j - 1], est[j]);
        if !(a.is_finite() && b.is_finite()) || b == 0.0 {
            continue;
        }
        let rel = ((a - b) / b).abs();
        if best.is_none_or(|(_, r)| rel <= r) {
            best = Some((j, rel));
        }
    }
    best
}

/// Sets the kind and its certainty.
fn set(out: &mut Asymptote, kind: AsymptoteKind, u: f64) {
    out.kind = kind;
    out.uncertainty = u;
    out.confidence = confidence(u);
}

fn classify(end: f64, s: &[Sample], unbounded: bool) -> Asymptote {
    let mut out = Asymptote {
        end,
        kind: AsymptoteKind::Unclassified,
        height: None,
        scale: None,
        alpha: None,
        power: None,
        rate: None,
        chi_distance: None,
        uncertainty: f64::INFINITY,
        confidence: "low",
    };
    if s.len() < 4 {
        return out;
    }
    let last = s[s.len() - 1];
    // Falling below zero.
    if last.v < 0.0 {
        set(&mut out, AsymptoteKind::Negative, 0.0);
        return out;
    }
    // Oscillation: the slope changes sign at least twice in the last three decades of the
    // approach (stationary points nearer the reference point are features, not the asymptote).
    let flips = s[s.len().saturating_sub(13)..]
        .windows(2)
        .filter(|w| w[0].vt.signum() != w[1].vt.signum() && w[1].vt != 0.0)
        .count();
    if flips >= 2 {
        set(&mut out, AsymptoteKind::Oscillating, 0.0);
        return out;
    }
    // Finite canonical distance: the increments of chi shrink geometrically.
    let n = s.len();
    let incr: Vec<f64> = s.iter().map(|x| x.dchi).collect();
    let total: f64 = incr.iter().sum();
    let tail = incr[n - 3..].iter().sum::<f64>();
    let shrinking = incr[n - 3..].windows(2).all(|w| w[1] < 0.8 * w[0]);
    if !unbounded && total.is_finite() && shrinking && tail < 1e-3 * total {
        // Add the geometric tail beyond the last sample.
        let q = incr[n - 1] / incr[n - 2];
        let total = total + incr[n - 1] * q / (1.0 - q);
        out.chi_distance = Some(total);
        set(&mut out, AsymptoteKind::FiniteDistance, tail / total);
        return out;
    }
    let ell: Vec<f64> = s.iter().map(|x| x.vt / x.v).collect();
    let vmax = s.iter().fold(0.0f64, |m, x| m.max(x.v.abs()));
    if exponential_plateau(&mut out, s, &ell, vmax) || power_plateau(&mut out, s, &ell, vmax) {
        return out;
    }
    growth_or_decay(&mut out, s, &ell);
    out
}

/// Exponential plateau: M = -V_t / V_tt stable and positive, V -> V_inf != 0. True if found.
fn exponential_plateau(out: &mut Asymptote, s: &[Sample], ell: &[f64], vmax: f64) -> bool {
    let m_est: Vec<f64> = s.iter().map(|x| -x.vt / x.vtt).collect();
    let Some((j, rel)) = best_stable(&m_est) else {
        return false;
    };
    let m = m_est[j];
    let height = s[j].v + m * s[j].vt;
    if !(m > 0.0 && rel < 1e-3 && height.abs() > 1e-6 * vmax && (ell[j] * m).abs() < 1e-2) {
        return false;
    }
    // Extrapolate M to the plateau against u = M |V_t| / V (the relative distance).
    let u = |k: usize| (m_est[k] * s[k].vt / s[k].v).abs();
    let (u1, u2) = (u(j - 1), u(j));
    let m0 = if (u1 - u2).abs() > 0.0 {
        m_est[j] - u2 * (m_est[j] - m_est[j - 1]) / (u2 - u1)
    } else {
        m
    };
    let m0 = if ((m0 - m) / m).abs() < 10.0 * rel.max(1e-9) {
        m0
    } else {
        m
    };
    out.height = Some(s[j].v + m0 * s[j].vt);
    out.scale = Some(m0);
    out.alpha = Some(2.0 * m0 * m0 / 3.0);
    set(out, AsymptoteKind::ExponentialPlateau, rel);
    true
}

/// Power plateau: q + 1 = kappa^2 / (dkappa/dt) stable, with V_t / V -> 0. True if found.
fn power_plateau(out: &mut Asymptote, s: &[Sample], ell: &[f64], vmax: f64) -> bool {
    let q_est: Vec<f64> = s
        .iter()
        .map(|x| {
            let kappa = x.vtt / x.vt;
            let dk = x.vttt / x.vt - kappa * kappa;
            kappa * kappa / dk - 1.0
        })
        .collect();
    let Some((j, rel)) = best_stable(&q_est) else {
        return false;
    };
    let q = q_est[j];
    let kappa = s[j].vtt / s[j].vt;
    let height = s[j].v - s[j].vt * (q + 1.0) / (q * kappa);
    if q > 0.0 && rel < 1e-2 && ell[j].abs() < 1e-2 && height.abs() > 1e-6 * vmax {
        out.height = Some(height);
        out.power = Some(q);
        set(out, AsymptoteKind::PowerPlateau, rel);
        return true;
    }
    false
}

/// Exponential growth or decay (V_t / V stable and not tending to zero), else power-law
/// growth or decay (n = ell^2 / (ell^2 - V_tt/V) stable); `out` unchanged if neither.
fn growth_or_decay(out: &mut Asymptote, s: &[Sample], ell: &[f64]) {
    if let Some((j, rel)) = best_stable(ell) {
        if rel < 1e-4 && ell[j].abs() > 1e-6 {
            out.rate = Some(ell[j].abs());
            let kind = if ell[j] > 0.0 {
                AsymptoteKind::ExponentialGrowth
            } else {
                AsymptoteKind::ExponentialDecay
            };
            set(out, kind, rel);
            return;
        }
    }
    let n_est: Vec<f64> = s.iter().zip(ell).map(|(x, l)| l * l / (l * l - x.vtt / x.v)).collect();
    if let Some((j, rel)) = best_stable(&n_est) {
        if rel < 1e-3 {
            out.power = Some(n_est[j]);
            let kind = if n_est[j] > 0.0 {
                AsymptoteKind::PowerGrowth
            } else {
                AsymptoteKind::PowerDecay
            };
            set(out, kind, rel);
        }
    }
}
