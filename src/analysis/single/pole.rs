//! Poles of K at an end of the domain: the order p of K ~ a / rho^p, the residue a, the
//! flatness m of V = V_p (1 - c rho^m) there, and the leading-order predictions of the pole
//! alone. Units: reduced Planck units (M_p = 1).

use crate::language::tape::Evaluator;
use crate::model::Layout;
use serde::Serialize;

/// Where the one-field evaluators this module takes hold V, K, sqrt(K) and dV/dphi.
const OUT: Layout = Layout::ONE_FIELD;

/// A pole of K at a finite end of the domain: K ~ residue / |phi - phi_p|^order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Pole {
    /// Where.
    pub phi: f64,
    /// The order p (rounded to a multiple of 1/2 when within 1e-6 of one).
    pub order: f64,
    /// The order as measured before rounding.
    pub order_measured: f64,
    /// The residue a_p.
    pub residue: f64,
    /// Relative uncertainty of the residue (from two extrapolations).
    pub residue_uncertainty: f64,
    /// True if the canonical distance to the pole is infinite (p >= 2).
    pub infinite_distance: bool,
    /// The leading-order predictions of the pole alone, if they exist.
    pub leading_order: Option<PoleLeadingOrder>,
    /// Why there is no leading-order prediction, when there is none.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub no_leading_order: Option<NoLeadingOrder>,
}

/// Why a pole of K gives no leading-order prediction of its own.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum NoLeadingOrder {
    /// V grows without bound toward the pole: in the canonical field there is no plateau.
    VUnbounded,
    /// V decreases toward the pole: the field rolls into it instead of away from it.
    VFallsToward,
    /// V is zero or negative at the pole.
    VNotPositive,
    /// p + m <= 2: the e-folds near the pole do not grow as a power of 1/rho.
    TooWeak,
    /// The approach of V to its value at the pole could not be measured.
    Unresolved,
}

impl NoLeadingOrder {
    /// Why, in words for people.
    pub fn words(self) -> &'static str {
        match self {
            NoLeadingOrder::VUnbounded => {
                "V grows without bound toward the pole, so there is no plateau in the canonical field"
            }
            NoLeadingOrder::VFallsToward => {
                "V decreases toward the pole, so the field rolls into it instead of away from it"
            }
            NoLeadingOrder::VNotPositive => "V is not positive at the pole",
            NoLeadingOrder::TooWeak => "the pole is too weak (order p plus the power m of V's approach is at most 2)",
            NoLeadingOrder::Unresolved => "the approach of V to the pole could not be resolved",
        }
    }
}

/// Leading order in 1/N from a pole of K, K = a_p / rho^p (rho = |phi - phi_p|), with V finite
/// and positive there and falling away from it as V = V_p (1 - c rho^m + ...), m > 0 the
/// power of the first term that does not vanish (m = 1 for a V with a slope at the pole; m = 2
/// where V is flat there). For p + m > 2 (derived in DEVELOPERS.md, "The pole of order p
/// alone"):
///
/// ```text
/// N = a_p rho^(2-p-m) / (m c (p+m-2)),   eps_V = m^2 c^2 rho^(2m-2+p) / (2 a_p),
/// n_s = 1 - (2m + p - 2) / ((p + m - 2) N),
/// r = 8 m^2 c^2 rho_*^(2m-2+p) / a_p   with   rho_*^(p+m-2) = a_p / (m c (p+m-2) N).
/// ```
///
/// For m = 1 and p = 2: n_s = 1 - 2/N, r = 8 a_2 / N^2, whatever the potential; for m = 2 and
/// p = 2: n_s = 1 - 2/N, r = 2 a_2 / N^2.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PoleLeadingOrder {
    /// c in V = V_p (1 - c rho^m).
    pub slope: f64,
    /// The pole order p used.
    pub order: f64,
    /// The residue a_p used.
    pub residue: f64,
    /// m: the power of rho in the first term of V - V_p that does not vanish.
    pub flatness: f64,
}

impl PoleLeadingOrder {
    /// (n_s, r) at N e-folds.
    pub fn predict(&self, n: f64) -> (f64, f64) {
        let (p, m, a, c) = (self.order, self.flatness, self.residue, self.slope);
        if m == 1.0 {
            let ns = 1.0 - p / ((p - 1.0) * n);
            let r = 8.0 * c.powf((p - 2.0) / (p - 1.0)) * a.powf(1.0 / (p - 1.0)) / ((p - 1.0) * n).powf(p / (p - 1.0));
            return (ns, r);
        }
        let q = p + m - 2.0;
        let ns = 1.0 - (2.0 * m + p - 2.0) / (q * n);
        let rho = (a / (m * c * q * n)).powf(1.0 / q);
        let r = 8.0 * m * m * c * c * rho.powf(2.0 * m - 2.0 + p) / a;
        (ns, r)
    }
}

/// f(0) from f(d), f(2d), f(4d) by quadratic extrapolation.
fn extrapolate(f1: f64, f2: f64, f4: f64) -> f64 {
    (8.0 * f1 - 6.0 * f2 + f4) / 3.0
}

/// Rounds to a multiple of 1/2 when within 1e-6 of one.
fn round_half(x: f64) -> f64 {
    let rounded = (2.0 * x).round() / 2.0;
    if (x - rounded).abs() < 1e-6 {
        rounded
    } else {
        x
    }
}

/// How V approaches its value at a pole of K: V = V_p (1 - c rho^m), as (m, c, V_p).
///
/// Where V is analytic at the pole (its jet there is finite), m is the order of the first
/// Taylor coefficient above rounding (relative 1e-10 on the scale `w`) and c is read off it;
/// for m = 1, c comes from the slope a hair inside (as it always has). Otherwise m is measured
/// as the local power m(rho) = 1 + rho V_rhorho / V_rho, extrapolated to rho = 0 (a negative
/// m: V grows without bound toward the pole).
fn flatness_at_pole(ev: &mut Evaluator<'_>, end: f64, inward: f64, w: f64) -> Option<(f64, f64, f64)> {
    ev.eval_jet(end, crate::language::tape::MAX_ORDER);
    let jet = *ev.jet_output(OUT.v());
    let v_p = jet[0];
    if jet.iter().all(|c| c.is_finite()) && v_p != 0.0 {
        let scale: f64 = (1..jet.len())
            .map(|k| (jet[k] * w.powi(k as i32)).abs())
            .fold(0.0, f64::max);
        let first = (1..jet.len()).find(|&k| (jet[k] * w.powi(k as i32)).abs() > 1e-10 * scale.max(1e-300));
        if let Some(m) = first {
            let c = if m == 1 {
                ev.eval_jet(end + inward * 1e-9 * w, 1);
                let v = ev.jet_output(OUT.v());
                -inward * v[1] / v[0]
            } else {
                -jet[m] * inward.powi(m as i32) / v_p
            };
            return Some((m as f64, c, v_p));
        }
        return None;
    }
    // Not analytic at the pole: measure the local power, and V_p = V - rho V_rho / m.
    let local = |ev: &mut Evaluator<'_>, d: f64| {
        ev.eval_jet(end + inward * d, 2);
        let j = ev.jet_output(OUT.v());
        let (v, v1, v2) = (j[0], inward * j[1], 2.0 * j[2]);
        (1.0 + d * v2 / v1, v, v1)
    };
    let est = |ev: &mut Evaluator<'_>, d: f64| {
        let (m1, _, _) = local(ev, d);
        let (m2, _, _) = local(ev, 2.0 * d);
        let (m4, _, _) = local(ev, 4.0 * d);
        extrapolate(m1, m2, m4)
    };
    let d = 1e-4 * w;
    let m = round_half(est(ev, d));
    if !m.is_finite() {
        return None;
    }
    let (_, v, v1) = local(ev, d);
    if m <= 0.0 {
        return Some((m, f64::NAN, f64::INFINITY));
    }
    let v_p = v - d * v1 / m;
    let c = -v1 / (m * v_p * d.powf(m - 1.0));
    Some((m, c, v_p))
}

/// Order and residue of a pole of K at `end`, approached from the side `inward` (+1: the
/// interior lies above the pole), and the leading order of the pole alone where V has a
/// plateau there.
pub fn analyse_pole(ev: &mut Evaluator<'_>, end: f64, inward: f64, width: f64) -> Option<Pole> {
    let w = width.min(end.abs().max(1.0));
    let at = |ev: &mut Evaluator<'_>, d: f64| {
        let x = end + inward * d;
        ev.eval_jet(x, 1);
        let j = ev.jet_output(OUT.k());
        // local order -dlnK/dln(rho), rho = inward (x - end)
        (-inward * d * j[1] / j[0], j[0])
    };
    let est = |ev: &mut Evaluator<'_>, d: f64| {
        let (p1, _) = at(ev, d);
        let (p2, _) = at(ev, 2.0 * d);
        let (p4, _) = at(ev, 4.0 * d);
        extrapolate(p1, p2, p4)
    };
    let (pa, pb) = (est(ev, 1e-4 * w), est(ev, 3e-4 * w));
    if !(pa.is_finite() && pb.is_finite()) || pa <= 0.0 {
        return None;
    }
    let measured = pa;
    let order = round_half(pa);
    let residue_at = |ev: &mut Evaluator<'_>, d: f64| {
        let f = |ev: &mut Evaluator<'_>, d: f64| at(ev, d).1 * d.powf(order);
        extrapolate(f(ev, d), f(ev, 2.0 * d), f(ev, 4.0 * d))
    };
    let (ra, rb) = (residue_at(ev, 1e-4 * w), residue_at(ev, 3e-4 * w));
    let residue = ra;
    let residue_uncertainty = ((ra - rb) / ra).abs();
    let (leading_order, no_leading_order) = match flatness_at_pole(ev, end, inward, w) {
        None => (None, Some(NoLeadingOrder::Unresolved)),
        Some((m, _, _)) if m <= 0.0 => (None, Some(NoLeadingOrder::VUnbounded)),
        Some((_, _, v_p)) if !v_p.is_finite() => (None, Some(NoLeadingOrder::VUnbounded)),
        Some((_, _, v_p)) if v_p <= 0.0 => (None, Some(NoLeadingOrder::VNotPositive)),
        Some((_, c, _)) if c.is_nan() || c <= 0.0 => (None, Some(NoLeadingOrder::VFallsToward)),
        Some((m, _, _)) if order + m <= 2.0 => (None, Some(NoLeadingOrder::TooWeak)),
        Some((m, c, _)) => (
            Some(PoleLeadingOrder {
                slope: c,
                order,
                residue,
                flatness: m,
            }),
            None,
        ),
    };
    Some(Pole {
        phi: end,
        order,
        order_measured: measured,
        residue,
        residue_uncertainty,
        infinite_distance: order >= 2.0,
        leading_order,
        no_leading_order,
    })
}
