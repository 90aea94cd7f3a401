//! The model in canonical variables: derivatives with respect to the canonical field chi
//! (d chi / d phi = sqrt(K)), the field-space domain, the canonical map chi(phi) and its
//! inverse, the poles of K, and the asymptotic shape of V(chi) toward each end of field space.
//! Units: reduced Planck units throughout (M_p = 1).

use crate::config::Config;
use crate::language::tape::{Evaluator, Jet, JET_LEN};
use crate::model::{Model, OUT_DV, OUT_K, OUT_SQRT_K, OUT_V};
use crate::numerics::quad::{gauss_kronrod_batch, tanh_sinh};
use crate::numerics::roots::{brent, safeguarded_newton};
use crate::numerics::{Estimate, NumericError};
use serde::Serialize;

/// V and its first four derivatives with respect to chi, at a point: `[V, V_chi, V_chichi,
/// V_chichichi, V_chi^4]`, from the jets of V and sqrt(K) by the chain rule
/// d/dchi = K^(-1/2) d/dphi (no inversion of chi(phi) needed). Entries above `order` are zero.
pub fn chi_derivatives(ev: &mut Evaluator<'_>, phi: f64, order: usize) -> [f64; 5] {
    let order = order.min(4);
    ev.eval_jet(phi, order);
    let v = *ev.jet_output(OUT_V);
    let s = *ev.jet_output(OUT_SQRT_K);
    chain_rule(&v, &s, order)
}

/// [`chi_derivatives`] of V scaled by the exact power of two that brings V at `phi` to [1, 2)
/// ([`crate::numerics::pow2_normaliser`]), and that factor. The chain rule is linear in V, so
/// the scaled derivatives are the unscaled ones times the factor, bit for bit wherever those
/// are normal numbers; ratios such as V_chi / V keep their bits, and products such as
/// V_chi V_chichichi no longer underflow or overflow when V itself is tiny or huge.
pub fn chi_derivatives_normalised(ev: &mut Evaluator<'_>, phi: f64, order: usize) -> ([f64; 5], f64) {
    let order = order.min(4);
    ev.eval_jet(phi, order);
    let mut v = *ev.jet_output(OUT_V);
    let s = *ev.jet_output(OUT_SQRT_K);
    let factor = crate::numerics::pow2_normaliser(v[0]);
    for c in v.iter_mut() {
        *c *= factor;
    }
    (chain_rule(&v, &s, order), factor)
}

/// The chain rule on truncated Taylor series: W_0 = V, W_{k+1} = (d W_k / d phi) / s, each
/// step losing one order.
pub fn chain_rule(v: &Jet, s: &Jet, order: usize) -> [f64; 5] {
    let mut out = [0.0; 5];
    let mut w = *v;
    out[0] = w[0];
    for k in 1..order.min(4) + 1 {
        let n = order - k; // orders left after this derivative
        let mut d = [0.0; JET_LEN];
        for j in 0..n + 1 {
            d[j] = (j + 1) as f64 * w[j + 1];
        }
        // divide by s, truncated at order n
        let mut q = [0.0; JET_LEN];
        for j in 0..n + 1 {
            let mut acc = d[j];
            for i in 0..j {
                acc -= q[i] * s[j - i];
            }
            q[j] = acc / s[0];
        }
        w = q;
        out[k] = w[0];
    }
    out
}

/// How an end of the field interval comes about.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case", tag = "kind")]
pub enum EndKind {
    /// The field is unbounded in this direction.
    Infinite,
    /// K diverges here.
    Pole,
    /// K vanishes here (a strong-coupling point).
    ZeroOfK,
    /// K changes sign here (a ghost beyond).
    KSignChange,
    /// V diverges here (a pole of V).
    VSingular,
    /// V grows beyond double precision past this point: in effect an unbounded end.
    VOverflow,
    /// V is not a real number beyond this point (log or sqrt of a negative number, ...).
    VNotReal,
    /// The end of the range the user gave.
    Range,
}

impl EndKind {
    /// A few words for people.
    pub fn words(self) -> &'static str {
        match self {
            EndKind::Infinite => "unbounded",
            EndKind::Pole => "pole of K",
            EndKind::ZeroOfK => "zero of K (strong coupling)",
            EndKind::KSignChange => "K changes sign (ghost beyond)",
            EndKind::VSingular => "pole of V",
            EndKind::VOverflow => "V exceeds double precision (effectively unbounded)",
            EndKind::VNotReal => "V is not real (log or sqrt of a negative number?)",
            EndKind::Range => "end of the given range",
        }
    }
}

/// An interval of field space where K > 0 and finite and V finite.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Interval {
    /// Lower end (may be -inf).
    #[serde(serialize_with = "ser_f64")]
    pub lo: f64,
    /// Upper end (may be +inf).
    #[serde(serialize_with = "ser_f64")]
    pub hi: f64,
    /// What the lower end is.
    pub lo_kind: EndKind,
    /// What the upper end is.
    pub hi_kind: EndKind,
}

impl Interval {
    /// True if `x` lies strictly inside.
    pub fn contains(&self, x: f64) -> bool {
        x > self.lo && x < self.hi
    }
}

/// Serialises non-finite numbers as the strings "inf", "-inf" and "nan" (JSON has no such
/// numbers).
pub fn ser_f64<S: serde::Serializer>(x: &f64, s: S) -> Result<S::Ok, S::Error> {
    if x.is_finite() {
        s.serialize_f64(*x)
    } else if x.is_nan() {
        s.serialize_str("nan")
    } else if *x > 0.0 {
        s.serialize_str("inf")
    } else {
        s.serialize_str("-inf")
    }
}

/// A failure of the canonical analysis, with a diagnosis.
#[derive(Debug, Clone, PartialEq)]
pub struct AnalysisError {
    /// What went wrong.
    pub message: String,
    /// How to fix or what it means.
    pub hints: Vec<String>,
}

impl AnalysisError {
    fn new(message: impl Into<String>, hint: impl Into<String>) -> AnalysisError {
        AnalysisError {
            message: message.into(),
            hints: vec![hint.into()],
        }
    }

    /// As a diagnostic.
    pub fn diagnostic(&self) -> crate::diag::Diagnostic {
        let mut d = crate::diag::Diagnostic::new(self.message.clone());
        for h in &self.hints {
            d = d.with_hint(h.clone());
        }
        d
    }
}

impl std::fmt::Display for AnalysisError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for AnalysisError {}

impl From<NumericError> for AnalysisError {
    fn from(e: NumericError) -> Self {
        AnalysisError::new(
            format!("numerical failure: {e}"),
            "tighten the range with --range, or report the model",
        )
    }
}

/// Status of a field value: usable, or why not.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Status {
    Good,
    KNonPositive,
    KNotFinite,
    VNotFinite,
    VNotReal,
}

fn status(ev: &mut Evaluator<'_>, x: f64) -> Status {
    let v = ev.eval(x);
    classify_status(v, ev.output(OUT_K))
}

fn classify_status(v: f64, k: f64) -> Status {
    if !k.is_finite() {
        Status::KNotFinite
    } else if k <= 0.0 {
        Status::KNonPositive
    } else if v.is_nan() {
        Status::VNotReal
    } else if !v.is_finite() {
        Status::VNotFinite
    } else {
        Status::Good
    }
}

/// The field-space domain: the interval used, the other admissible intervals, and where V
/// is negative.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Domain {
    /// The interval the analysis uses.
    pub interval: Interval,
    /// Other intervals where K > 0 and V is finite (not used; pick one with --range).
    pub others: Vec<Interval>,
    /// Sub-intervals of the domain where V < 0.
    pub negative_v: Vec<(f64, f64)>,
    /// Points inside the domain where K touches zero or diverges without changing the domain
    /// (none in a well-formed domain; listed for diagnosis).
    pub notes: Vec<String>,
}

/// Sample points used to survey the real line: 0 and +-10^(k/10) for 1e-5 <= |x| <= 1e6.
fn survey_grid() -> &'static [f64] {
    static GRID: std::sync::OnceLock<Vec<f64>> = std::sync::OnceLock::new();
    GRID.get_or_init(|| {
        let mut g: Vec<f64> = (-50..=60).map(|k| 10f64.powf(k as f64 / 10.0)).collect();
        let neg: Vec<f64> = g.iter().map(|x| -x).collect();
        g.extend(neg);
        g.push(0.0);
        g.sort_by(f64::total_cmp);
        g
    })
}

/// Bisects between a point with status `good` and one without, to rounding.
fn bisect_status(ev: &mut Evaluator<'_>, mut good: f64, mut bad: f64) -> f64 {
    let floor = 1e-17 * (good - bad).abs();
    for _ in 0..200 {
        let m = 0.5 * (good + bad);
        if m == good || m == bad || (good - bad).abs() <= floor {
            if good * bad <= 0.0 {
                return 0.0;
            }
            break;
        }
        if status(ev, m) == Status::Good {
            good = m;
        } else {
            bad = m;
        }
    }
    0.5 * (good + bad)
}

/// Locates a sign change of `g` between a and b by bisection; a non-finite value means the
/// singular point itself was hit.
fn bisect_sign(mut g: impl FnMut(f64) -> f64, mut a: f64, mut b: f64) -> Option<f64> {
    let (mut ga, gb) = (g(a), g(b));
    if !(ga.is_finite() && gb.is_finite()) || ga.signum() == gb.signum() {
        return None;
    }
    let floor = 1e-17 * (b - a).abs();
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        if m == a || m == b || (b - a).abs() <= floor {
            break;
        }
        let gm = g(m);
        if !gm.is_finite() || gm == 0.0 {
            return Some(m);
        }
        if gm.signum() == ga.signum() {
            a = m;
            ga = gm;
        } else {
            b = m;
        }
    }
    // A bracket shrunk onto zero from both sides: the point is 0 itself.
    Some(if a * b <= 0.0 { 0.0 } else { 0.5 * (a + b) })
}

/// sqrt(K) at up to [`crate::language::tape::BATCH`] points: the integrand of chi(phi).
fn sqrt_k_batch(ev: &mut Evaluator<'_>, xs: &[f64], out: &mut [f64]) {
    ev.eval_batch(xs);
    out[..xs.len()].copy_from_slice(ev.batch_output(OUT_SQRT_K));
}

/// Finds the domain. With a user range, checks it; otherwise surveys the real line.
pub fn find_domain(model: &Model, ev: &mut Evaluator<'_>) -> Result<Domain, AnalysisError> {
    let field = model.field().to_string();
    if let Some((lo, hi)) = model.range {
        return check_range(ev, lo, hi, &field);
    }
    let grid = survey_grid();
    let mut samples = vec![(0.0, 0.0); grid.len()];
    ev.eval_each(grid, |i, out| samples[i] = (out[OUT_V], out[OUT_K]));
    let st: Vec<Status> = samples.iter().map(|&(v, k)| classify_status(v, k)).collect();
    // Cut points: transitions of status, and hidden poles or zeros of K between good samples.
    let mut cuts: Vec<(f64, EndKind)> = Vec::new();
    for i in 0..grid.len() - 1 {
        let (a, b) = (grid[i], grid[i + 1]);
        match (st[i] == Status::Good, st[i + 1] == Status::Good) {
            (true, false) => {
                let x = bisect_status(ev, a, b);
                let kind = end_kind_beyond(ev, x, b, st[i + 1]);
                cuts.push(refine_end(ev, x, -1.0, kind));
            }
            (false, true) => {
                let x = bisect_status(ev, b, a);
                let kind = end_kind_beyond(ev, x, a, st[i]);
                cuts.push(refine_end(ev, x, 1.0, kind));
            }
            _ => {}
        }
    }
    for i in 1..grid.len() - 1 {
        if st[i - 1] != Status::Good || st[i] != Status::Good || st[i + 1] != Status::Good {
            continue;
        }
        let ks = [samples[i - 1].1, samples[i].1, samples[i + 1].1];
        if let Some(c) = hidden_singularity(ev, [grid[i - 1], grid[i], grid[i + 1]], ks) {
            cuts.push(c);
        }
    }
    cuts.sort_by(|a, b| a.0.total_cmp(&b.0));
    cuts.dedup_by(|a, b| (a.0 - b.0).abs() <= 1e-12 * a.0.abs().max(1e-300));
    // Intervals between consecutive cuts whose interior is good.
    let mut bounds: Vec<(f64, EndKind)> = vec![(f64::NEG_INFINITY, EndKind::Infinite)];
    bounds.extend(cuts.iter().copied());
    bounds.push((f64::INFINITY, EndKind::Infinite));
    let mut intervals = Vec::new();
    for w in bounds.windows(2) {
        let (lo, hi) = (w[0].0, w[1].0);
        let probe = interior_probe(lo, hi, grid);
        if status(ev, probe) == Status::Good {
            intervals.push(Interval {
                lo,
                hi,
                lo_kind: w[0].1,
                hi_kind: w[1].1,
            });
        }
    }
    if intervals.is_empty() {
        return Err(AnalysisError {
            message: "no interval of field space has K > 0 with V finite".to_string(),
            hints: vec![
                "check the kinetic function: L = 1/2 K (d phi)^2 - V needs K > 0".to_string(),
                "or give the interval with --range LO HI".to_string(),
            ],
        });
    }
    // The interval to use: one whose V has a minimum with V >= 0 inside (where inflation can
    // end), the lowest such; failing that, the one holding phi = 0; failing that, the first.
    // (From the survey samples: a sample lower than both neighbours, all inside.)
    let mut best: Option<(usize, f64)> = None;
    for (i, iv) in intervals.iter().enumerate() {
        for j in 1..grid.len() - 1 {
            let (a, m, b) = (samples[j - 1].0, samples[j].0, samples[j + 1].0);
            let inside = iv.contains(grid[j - 1]) && iv.contains(grid[j + 1]);
            if inside && m <= a && m <= b && m >= 0.0 && best.is_none_or(|(_, bv)| m < bv) {
                best = Some((i, m));
            }
        }
    }
    let pick = best
        .map(|(i, _)| i)
        .or_else(|| intervals.iter().position(|iv| iv.contains(0.0)))
        .unwrap_or(0);
    let interval = intervals.remove(pick);
    Ok(Domain {
        interval,
        others: intervals,
        negative_v: Vec::new(),
        notes: Vec::new(),
    })
}

/// A point inside (lo, hi) to test, preferring a survey point.
fn interior_probe(lo: f64, hi: f64, grid: &[f64]) -> f64 {
    let inside: Vec<f64> = grid.iter().copied().filter(|&x| x > lo && x < hi).collect();
    if !inside.is_empty() {
        return inside[inside.len() / 2];
    }
    match (lo.is_finite(), hi.is_finite()) {
        (true, true) => 0.5 * (lo + hi),
        (true, false) => lo + lo.abs().max(1.0),
        (false, true) => hi - hi.abs().max(1.0),
        (false, false) => 0.0,
    }
}

/// A boundary found where K or V stops being finite may only be where double precision
/// overflows: a pole at x_p with f ~ a |x - x_p|^(-p) overflows a little before x_p. From
/// h = f/f' = -(x - x_p)/p at two points on the good side (direction `inward`) it finds p and
/// x_p; with no consistent finite p the growth is faster than any power (V overflows).
fn refine_end(ev: &mut Evaluator<'_>, xb: f64, inward: f64, kind: EndKind) -> (f64, EndKind) {
    let out = match kind {
        EndKind::Pole => OUT_K,
        EndKind::VSingular => OUT_V,
        _ => return (xb, kind),
    };
    let w = 1e-6 * xb.abs().max(1.0);
    let mut h = |x: f64| {
        ev.eval_jet(x, 1);
        let j = ev.jet_output(out);
        j[0] / j[1]
    };
    let (x1, x2) = (xb + inward * w, xb + inward * 2.0 * w);
    let (h1, h2) = (h(x1), h(x2));
    let p = -(x1 - x2) / (h1 - h2);
    let xp = x1 + p * h1;
    if !(p.is_finite() && xp.is_finite()) || p <= 0.0 || p > 64.0 || (xp - xb).abs() > w {
        // Faster than any power: overflow of V (or of K) rather than a pole.
        return (
            xb,
            if kind == EndKind::VSingular {
                EndKind::VOverflow
            } else {
                kind
            },
        );
    }
    // Keep the bisected point when it is already the better location (a pole that the
    // bisection resolved to rounding), else the extrapolated one; snap to 0 at rounding size.
    let xp = if xp.abs() < 1e-14 * w { 0.0 } else { xp };
    let at_xb = {
        ev.eval(xb);
        ev.output(out).abs()
    };
    // Only an overflow (finite but huge at the bisected point) moves the end; a point where
    // the function is exactly infinite is the singularity itself.
    if at_xb.is_finite() && at_xb >= 1e200 && (xp - xb) * inward <= 0.0 {
        (xp, kind)
    } else {
        (xb, kind)
    }
}

fn end_kind_beyond(ev: &mut Evaluator<'_>, x: f64, beyond: f64, st: Status) -> EndKind {
    match st {
        Status::VNotFinite => EndKind::VSingular,
        Status::VNotReal => EndKind::VNotReal,
        Status::KNotFinite => EndKind::Pole,
        Status::KNonPositive => {
            // K -> 0 continuously (a zero), or K -> +inf then negative (an odd pole)?
            let inside = x + (x - beyond) * 1e-6;
            ev.eval(inside);
            let k = ev.output(OUT_K);
            if k > 1e6 {
                EndKind::Pole
            } else if k < 1e-6 {
                EndKind::ZeroOfK
            } else {
                EndKind::KSignChange
            }
        }
        Status::Good => EndKind::Range,
    }
}

/// Between three good samples with the middle one extreme: a pole of K (1/K touches zero) or a
/// zero of K (K touches zero), located where d(1/K)/dphi or dK/dphi changes sign.
fn hidden_singularity(ev: &mut Evaluator<'_>, x: [f64; 3], k: [f64; 3]) -> Option<(f64, EndKind)> {
    let [a, _, b] = x;
    let [ka, km, kb] = k;
    let dk = |ev: &mut Evaluator<'_>, x: f64| {
        ev.eval_jet(x, 1);
        let j = ev.jet_output(OUT_K);
        (j[0], j[1])
    };
    if km > ka && km > kb {
        // Possible pole: d(1/K)/dphi = -K'/K^2 changes sign at the maximum of K.
        let x = brent(
            |x| {
                let (k0, k1) = dk(ev, x);
                if k0.is_finite() {
                    -k1 / (k0 * k0)
                } else {
                    0.0
                }
            },
            a,
            b,
            1e-16 * a.abs().max(b.abs()),
            200,
        )
        .ok()?
        .value;
        ev.eval(x);
        let kx = ev.output(OUT_K);
        if !kx.is_finite() || kx > 1e12 * ka.max(kb) {
            return Some((x, EndKind::Pole));
        }
    } else if km < ka && km < kb {
        let x = brent(|x| dk(ev, x).1, a, b, 1e-16 * a.abs().max(b.abs()), 200)
            .ok()?
            .value;
        ev.eval(x);
        let kx = ev.output(OUT_K);
        if kx <= 1e-12 * ka.max(kb) {
            return Some((x, EndKind::ZeroOfK));
        }
    }
    None
}

fn check_range(ev: &mut Evaluator<'_>, lo: f64, hi: f64, field: &str) -> Result<Domain, AnalysisError> {
    // Probe the interior densely enough to find a bad stretch: 256 points, evenly spaced in a
    // variable that maps infinite ends to finite ones.
    let map = |u: f64| -> f64 {
        match (lo.is_finite(), hi.is_finite()) {
            (true, true) => lo + (hi - lo) * u,
            (true, false) => lo + u / (1.0 - u) * lo.abs().max(1.0),
            (false, true) => hi - (1.0 - u) / u * hi.abs().max(1.0),
            (false, false) => (u - 0.5) / (u * (1.0 - u)),
        }
    };
    let probes: Vec<f64> = (1..256).map(|i| map(i as f64 / 256.0)).collect();
    let mut vk = vec![(0.0, 0.0); probes.len()];
    ev.eval_each(&probes, |i, out| vk[i] = (out[OUT_V], out[OUT_K]));
    // Toward an infinite end, V or K may leave double precision (V0 (1 - exp(-b phi))^2 at
    // phi -> -inf): the end is then where they do, of the kind the survey gives it.
    let ends = overflowing_ends(ev, lo, hi, &probes, &vk);
    let (lo, hi) = (ends[0].map_or(lo, |e| e.0), ends[1].map_or(hi, |e| e.0));
    let (probes, vk) = if ends.iter().any(Option::is_some) {
        let keep: Vec<usize> = (0..probes.len())
            .filter(|&i| probes[i] > lo && probes[i] < hi)
            .collect();
        (
            keep.iter().map(|&i| probes[i]).collect::<Vec<f64>>(),
            keep.iter().map(|&i| vk[i]).collect::<Vec<(f64, f64)>>(),
        )
    } else {
        (probes, vk)
    };
    for i in 1..probes.len().saturating_sub(1) {
        let k3 = [vk[i - 1].1, vk[i].1, vk[i + 1].1];
        if k3.iter().any(|k| !(k.is_finite() && *k > 0.0)) {
            continue;
        }
        let x3 = [probes[i - 1], probes[i], probes[i + 1]];
        if let Some((x, kind)) = hidden_singularity(ev, x3, k3) {
            let what = if kind == EndKind::Pole {
                "K has a pole"
            } else {
                "K vanishes"
            };
            return Err(AnalysisError {
                message: format!(
                    "{what} at {field} = {} inside the range",
                    crate::report::numfmt::number(x)
                ),
                hints: vec![
                    "the kinetic term must be positive and finite inside the range".to_string(),
                    "end the range at this point with --range, or leave it out to let efold find the domain"
                        .to_string(),
                ],
            });
        }
    }
    for (&x, &(v, k)) in probes.iter().zip(&vk) {
        match classify_status(v, k) {
            Status::Good => {}
            s => {
                ev.eval(x);
                let k = ev.output(OUT_K);
                let what = match s {
                    Status::KNonPositive if k == 0.0 => format!("K = 0 at {field} = {x} inside the range"),
                    Status::KNonPositive => format!("K = {k} <= 0 at {field} = {x} inside the range"),
                    Status::KNotFinite => format!("K is {k} at {field} = {x} inside the range (a pole?)"),
                    Status::VNotReal => format!("V is not real (NaN) at {field} = {x} inside the range"),
                    _ => format!("V is {} at {field} = {x} inside the range", ev.eval(x)),
                };
                return Err(AnalysisError {
                    message: what,
                    hints: vec![
                        "the kinetic term must be positive and V finite everywhere in the range".to_string(),
                        "narrow it with --range LO HI, or leave it out to let efold find the domain".to_string(),
                    ],
                });
            }
        }
    }
    let classify = |ev: &mut Evaluator<'_>, end: f64, inward: f64| -> EndKind {
        if !end.is_finite() {
            return EndKind::Infinite;
        }
        probe_end(ev, end, inward, hi - lo)
    };
    let interval = Interval {
        lo,
        hi,
        lo_kind: ends[0].map_or_else(|| classify(ev, lo, 1.0), |e| e.1),
        hi_kind: ends[1].map_or_else(|| classify(ev, hi, -1.0), |e| e.1),
    };
    Ok(Domain {
        interval,
        others: Vec::new(),
        negative_v: Vec::new(),
        notes: Vec::new(),
    })
}

/// For each infinite end of a range `[lo, hi]`: if the probes from that end inward are all
/// infinite in V or K up to the first good one (an overflow, not a singularity inside), the
/// point where they stop being finite and its kind, located as the survey locates them.
fn overflowing_ends(
    ev: &mut Evaluator<'_>,
    lo: f64,
    hi: f64,
    probes: &[f64],
    vk: &[(f64, f64)],
) -> [Option<(f64, EndKind)>; 2] {
    let mut out = [None, None];
    let infinite = |x: f64| x.is_infinite();
    if !(infinite(lo) || infinite(hi)) {
        return out;
    }
    let st: Vec<Status> = vk.iter().map(|&(v, k)| classify_status(v, k)).collect();
    let overflow = |s: &Status| matches!(s, Status::VNotFinite | Status::KNotFinite);
    let n = probes.len();
    if lo == f64::NEG_INFINITY {
        if let Some(j) = st.iter().position(|s| *s == Status::Good) {
            if j > 0 && st[..j].iter().all(overflow) {
                let x = bisect_status(ev, probes[j], probes[j - 1]);
                let kind = end_kind_beyond(ev, x, probes[j - 1], st[j - 1]);
                out[0] = Some(refine_end(ev, x, 1.0, kind));
            }
        }
    }
    if hi == f64::INFINITY {
        if let Some(j) = st.iter().rposition(|s| *s == Status::Good) {
            if j + 1 < n && st[j + 1..].iter().all(overflow) {
                let x = bisect_status(ev, probes[j], probes[j + 1]);
                let kind = end_kind_beyond(ev, x, probes[j + 1], st[j + 1]);
                out[1] = Some(refine_end(ev, x, -1.0, kind));
            }
        }
    }
    out
}

/// What a finite end of a given range is, from the local powers of K and V approaching it:
/// K ~ d^(-p) with p > 0.9 is a pole, K ~ d^p a zero; V ~ d^(-p) a pole of V.
fn probe_end(ev: &mut Evaluator<'_>, end: f64, inward: f64, width: f64) -> EndKind {
    let w = width.min(end.abs().max(1.0));
    let (d1, d2) = (1e-7 * w, 1e-5 * w);
    let mut at = |d: f64| {
        let v = ev.eval(end + inward * d);
        (v.abs(), ev.output(OUT_K))
    };
    let ((v1, k1), (v2, k2)) = (at(d1), at(d2));
    let power = |f1: f64, f2: f64| (f1 / f2).ln() / (d2 / d1).ln();
    let pk = power(k1, k2);
    if pk > 0.9 {
        EndKind::Pole
    } else if pk < -0.9 {
        EndKind::ZeroOfK
    } else if power(v1, v2) > 0.9 {
        EndKind::VSingular
    } else {
        EndKind::Range
    }
}

/// Stretches of the interval where V < 0, located to rounding.
pub fn negative_regions(ev: &mut Evaluator<'_>, iv: &Interval) -> Vec<(f64, f64)> {
    let mut pts: Vec<f64> = survey_grid().iter().copied().filter(|&x| iv.contains(x)).collect();
    // also sample a little inside finite ends
    for (end, dir) in [(iv.lo, 1.0), (iv.hi, -1.0)] {
        if end.is_finite() {
            let w = (iv.hi - iv.lo).min(end.abs().max(1.0));
            for k in 1..8 {
                pts.push(end + dir * w * 10f64.powi(-k));
            }
        }
    }
    pts.sort_by(f64::total_cmp);
    let mut out = Vec::new();
    let mut start: Option<f64> = None;
    let mut prev = (iv.lo, f64::NAN);
    for &x in &pts {
        let v = ev.eval(x);
        let neg = v < 0.0;
        match (start, neg) {
            (None, true) => {
                let s = if prev.1.is_finite() {
                    bisect_sign(|t| ev.eval(t), prev.0, x).unwrap_or(x)
                } else {
                    iv.lo
                };
                start = Some(s);
            }
            (Some(s), false) => {
                let e = bisect_sign(|t| ev.eval(t), prev.0, x).unwrap_or(x);
                out.push((s, e));
                start = None;
            }
            _ => {}
        }
        prev = (x, v);
    }
    if let Some(s) = start {
        out.push((s, iv.hi));
    }
    out
}

/// The minimum of V inside the interval: the lowest of the local minima, found where V'
/// changes sign from negative to positive between survey points (so a degenerate minimum, V''
/// = 0 as for phi^4, is found as well as an ordinary one), refined by Brent's method on the
/// compiled dV/dphi. A finite end of a given range where V is lowest (a range chosen to end at
/// the minimum) also counts. Only points where V is resolved count: V finite and below
/// [`V_RESOLVED`] in size, so the point where V overflows double precision is never a minimum.
/// Minima whose V agree to rounding are ranked by distance from phi = 0, then by position.
/// None if V only falls toward an end (a runaway).
pub fn minimum_of_v(ev: &mut Evaluator<'_>, iv: &Interval) -> Option<f64> {
    let mut pts: Vec<f64> = survey_grid().iter().copied().filter(|&x| iv.contains(x)).collect();
    for (end, dir) in [(iv.lo, 1.0), (iv.hi, -1.0)] {
        if end.is_finite() {
            let w = (iv.hi - iv.lo).min(end.abs().max(1.0));
            for k in 1..12 {
                pts.push(end + dir * w * 10f64.powi(-k));
            }
        }
    }
    pts.sort_by(f64::total_cmp);
    pts.dedup();
    if pts.len() < 3 {
        let m = interior_probe(iv.lo, iv.hi, &pts);
        pts = vec![iv.lo.max(m - 1.0), m, iv.hi.min(m + 1.0)];
        pts.retain(|x| iv.contains(*x));
    }
    let mut vd = vec![(f64::NAN, f64::NAN); pts.len()];
    ev.eval_each(&pts, |i, out| vd[i] = (out[OUT_V], out[OUT_DV]));
    let resolved = |v: f64, d: f64| v.is_finite() && v.abs() < V_RESOLVED && d.is_finite();
    // The sign of V' where it is significant against the rounding of V (as for branches).
    let sign = |x: f64, v: f64, d: f64| -> f64 {
        if !resolved(v, d) || d.abs() * x.abs().max(1.0) <= 1e-10 * v.abs() {
            0.0
        } else {
            d.signum()
        }
    };
    let signs: Vec<f64> = pts.iter().zip(&vd).map(|(&x, &(v, d))| sign(x, v, d)).collect();
    let mut dv = |x: f64| {
        ev.eval(x);
        ev.output(OUT_DV)
    };
    let mut cands: Vec<f64> = Vec::new();
    let mut prev: Option<usize> = None;
    for i in 0..pts.len() {
        if signs[i] == 0.0 {
            continue;
        }
        if let Some(j) = prev {
            if signs[j] < 0.0 && signs[i] > 0.0 {
                // A sample between them where V' is exactly zero is the stationary point.
                if let Some(k) = (j + 1..i).find(|&k| vd[k].1 == 0.0 && resolved(vd[k].0, 0.0)) {
                    cands.push(pts[k]);
                } else {
                    let (a, b) = (pts[j], pts[i]);
                    let tol = 1e-16 * a.abs().max(b.abs());
                    let x = brent(&mut dv, a, b, tol, 200).map(|r| r.value).unwrap_or(0.5 * (a + b));
                    // a minimum at the origin, found to rounding (M_p = 1 sets the scale)
                    cands.push(if x.abs() < 1e-12 { 0.0 } else { x });
                }
            }
        }
        prev = Some(i);
    }
    // A finite end of a given range, where V falls toward the end (or is flat there): the
    // minimum on the boundary. Ends that are poles, zeros of K or overflows are not places
    // where the field can sit.
    let first = signs.iter().position(|s| *s != 0.0);
    let last = signs.iter().rposition(|s| *s != 0.0);
    for (end, kind, falls) in [
        (iv.lo, iv.lo_kind, first.is_none_or(|i| signs[i] > 0.0)),
        (iv.hi, iv.hi_kind, last.is_none_or(|i| signs[i] < 0.0)),
    ] {
        if end.is_finite() && kind == EndKind::Range && falls {
            cands.push(end);
        }
    }
    let mut best: Option<(f64, f64)> = None;
    for x in cands {
        let v = ev.eval(x);
        if !resolved(v, 0.0) {
            continue;
        }
        best = match best {
            None => Some((x, v)),
            Some((bx, bv)) => {
                let tie = (v - bv).abs() <= 1e-12 * v.abs().max(bv.abs());
                let closer = x.abs() < bx.abs() || (x.abs() == bx.abs() && x < bx);
                if (tie && closer) || (!tie && v < bv) {
                    Some((x, v))
                } else {
                    Some((bx, bv))
                }
            }
        };
    }
    best.map(|(x, _)| x)
}

/// V at the minimum `phi_min` when it is positive beyond rounding: above 1e-12 of the
/// largest |V| at phi_min +- 1 and +- 10 (inside the interval). A positive vacuum energy means
/// the field settles where V > 0: inflation resumes there, or never really ends.
pub fn positive_minimum(ev: &mut Evaluator<'_>, iv: &Interval, phi_min: f64) -> Option<f64> {
    let v_min = ev.eval(phi_min);
    if !(v_min > 0.0 && v_min.is_finite()) {
        return None;
    }
    let mut scale: f64 = 0.0;
    for d in [-10.0, -1.0, 1.0, 10.0] {
        let x = phi_min + d;
        let x = if iv.contains(x) {
            x
        } else if d < 0.0 && iv.lo.is_finite() {
            0.5 * (iv.lo + phi_min)
        } else if d > 0.0 && iv.hi.is_finite() {
            0.5 * (iv.hi + phi_min)
        } else {
            continue;
        };
        let v = ev.eval(x);
        if v.is_finite() && v.abs() < V_RESOLVED {
            scale = scale.max(v.abs());
        }
    }
    (v_min > 1e-12 * scale).then_some(v_min)
}

/// Values of V at or beyond this size are not resolved: the potential is about to overflow
/// double precision, and such a point is an end of field space in effect, never a minimum.
pub const V_RESOLVED: f64 = 1e300;

/// The canonical map: chi(phi) = integral of sqrt(K) from a reference point.
pub struct CanonicalMap<'m> {
    ev: Evaluator<'m>,
    /// The field value where chi = 0.
    pub phi_ref: f64,
    tol: crate::numerics::quad::Tolerance,
}

impl<'m> CanonicalMap<'m> {
    /// A map with chi = 0 at `phi_ref`.
    pub fn new(model: &'m Model, phi_ref: f64, config: &Config) -> CanonicalMap<'m> {
        CanonicalMap {
            ev: model.evaluator(),
            phi_ref,
            tol: config.quad,
        }
    }

    /// chi between two points of the interior (adaptive Gauss–Kronrod, relative tolerance
    /// `config.quad.rel`), with its error estimate.
    pub fn between(&mut self, a: f64, b: f64) -> Result<Estimate, NumericError> {
        let ev = &mut self.ev;
        gauss_kronrod_batch(|xs, ys| sqrt_k_batch(ev, xs, ys), a, b, &self.tol)
    }

    /// chi(phi), measured from `phi_ref`.
    pub fn chi(&mut self, phi: f64) -> Result<Estimate, NumericError> {
        self.between(self.phi_ref, phi)
    }

    /// chi from `phi_ref` to a finite end of the interval where sqrt(K) may be singular
    /// (double-exponential rule); `Ok(None)` if the integral diverges (an infinite distance).
    pub fn to_end(&mut self, end: f64) -> Result<Estimate, NumericError> {
        let ev = &mut self.ev;
        let (a, b) = (self.phi_ref.min(end), self.phi_ref.max(end));
        let r = tanh_sinh(
            |x, _| {
                ev.eval(x);
                ev.output(OUT_SQRT_K)
            },
            a,
            b,
            &self.tol,
        )?;
        let sign = if end >= self.phi_ref { 1.0 } else { -1.0 };
        Ok(Estimate {
            value: sign * r.value,
            error: r.error,
        })
    }

    /// The inverse map phi(chi) inside (lo, hi), by Newton's method on chi(phi) - target with
    /// d chi/d phi = sqrt(K), safeguarded by bisection.
    pub fn phi_of_chi(&mut self, target: f64, lo: f64, hi: f64) -> Result<Estimate, NumericError> {
        // Expand a bracket from phi_ref toward the side of the target.
        let dir = if target >= 0.0 { 1.0 } else { -1.0 };
        let limit = if dir > 0.0 { hi } else { lo };
        let mut a = self.phi_ref;
        let mut chi_a = 0.0;
        let mut step = 0.1 * self.phi_ref.abs().max(1.0);
        let mut b;
        let mut chi_b;
        loop {
            b = a + dir * step;
            if (dir > 0.0 && b >= limit) || (dir < 0.0 && b <= limit) {
                b = if limit.is_finite() { a + 0.5 * (limit - a) } else { b };
            }
            if step > 1e12 || (b - a).abs() < 1e-15 * b.abs().max(1.0) {
                return Err(NumericError::NoConvergence {
                    what: "bracketing phi(chi): chi does not reach the target inside the interval",
                    estimate: b,
                    error: f64::INFINITY,
                    iterations: 0,
                });
            }
            chi_b = chi_a + self.between(a, b)?.value;
            if (chi_b - target) * dir >= 0.0 {
                break;
            }
            a = b;
            chi_a = chi_b;
            step *= 2.0;
        }
        let (base, chi_base) = (a, chi_a);
        let tol = self.tol;
        let ev = &mut self.ev;
        let mut chi_at = |x: f64| {
            let r = gauss_kronrod_batch(|ts, ys| sqrt_k_batch(ev, ts, ys), base, x, &tol);
            let c = r.map(|e| e.value).unwrap_or(f64::NAN);
            ev.eval(x);
            (chi_base + c - target, ev.output(OUT_SQRT_K))
        };
        safeguarded_newton(
            &mut chi_at,
            a.min(b),
            a.max(b),
            0.5 * (a + b),
            1e-14 * b.abs().max(1.0),
            100,
        )
    }
}

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
    let jet = *ev.jet_output(OUT_V);
    let v_p = jet[0];
    if jet.iter().all(|c| c.is_finite()) && v_p != 0.0 {
        let scale: f64 = (1..jet.len())
            .map(|k| (jet[k] * w.powi(k as i32)).abs())
            .fold(0.0, f64::max);
        let first = (1..jet.len()).find(|&k| (jet[k] * w.powi(k as i32)).abs() > 1e-10 * scale.max(1e-300));
        if let Some(m) = first {
            let c = if m == 1 {
                ev.eval_jet(end + inward * 1e-9 * w, 1);
                let v = ev.jet_output(OUT_V);
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
        let j = ev.jet_output(OUT_V);
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
        let j = ev.jet_output(OUT_K);
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
    let set = |out: &mut Asymptote, kind, u: f64| {
        out.kind = kind;
        out.uncertainty = u;
        out.confidence = confidence(u);
    };
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
    let m_est: Vec<f64> = s.iter().map(|x| -x.vt / x.vtt).collect();
    let vmax = s.iter().fold(0.0f64, |m, x| m.max(x.v.abs()));
    // Exponential plateau: M = -V_t / V_tt stable and positive, V -> V_inf != 0.
    if let Some((j, rel)) = best_stable(&m_est) {
        let m = m_est[j];
        let height = s[j].v + m * s[j].vt;
        if m > 0.0 && rel < 1e-3 && height.abs() > 1e-6 * vmax && (ell[j] * m).abs() < 1e-2 {
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
            set(&mut out, AsymptoteKind::ExponentialPlateau, rel);
            return out;
        }
    }
    // Power plateau: q + 1 = kappa^2 / (dkappa/dt) stable, with V_t / V -> 0.
    let q_est: Vec<f64> = s
        .iter()
        .map(|x| {
            let kappa = x.vtt / x.vt;
            let dk = x.vttt / x.vt - kappa * kappa;
            kappa * kappa / dk - 1.0
        })
        .collect();
    if let Some((j, rel)) = best_stable(&q_est) {
        let q = q_est[j];
        let kappa = s[j].vtt / s[j].vt;
        let height = s[j].v - s[j].vt * (q + 1.0) / (q * kappa);
        if q > 0.0 && rel < 1e-2 && ell[j].abs() < 1e-2 && height.abs() > 1e-6 * vmax {
            out.height = Some(height);
            out.power = Some(q);
            set(&mut out, AsymptoteKind::PowerPlateau, rel);
            return out;
        }
    }
    // Exponential growth or decay: V_t / V stable and not tending to zero.
    if let Some((j, rel)) = best_stable(&ell) {
        if rel < 1e-4 && ell[j].abs() > 1e-6 {
            out.rate = Some(ell[j].abs());
            let kind = if ell[j] > 0.0 {
                AsymptoteKind::ExponentialGrowth
            } else {
                AsymptoteKind::ExponentialDecay
            };
            set(&mut out, kind, rel);
            return out;
        }
    }
    // Power-law growth or decay: n = ell^2 / (ell^2 - V_tt/V) stable.
    let n_est: Vec<f64> = s.iter().zip(&ell).map(|(x, l)| l * l / (l * l - x.vtt / x.v)).collect();
    if let Some((j, rel)) = best_stable(&n_est) {
        if rel < 1e-3 {
            out.power = Some(n_est[j]);
            let kind = if n_est[j] > 0.0 {
                AsymptoteKind::PowerGrowth
            } else {
                AsymptoteKind::PowerDecay
            };
            set(&mut out, kind, rel);
            return out;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn chain_rule_on_a_canonical_field_is_plain_differentiation() {
        // s = 1: the chi-derivatives are the phi-derivatives, V = exp(phi) at 0.
        let mut v = [0.0; JET_LEN];
        let mut f = 1.0;
        for (k, c) in v.iter_mut().enumerate().take(5) {
            if k > 0 {
                f *= k as f64;
            }
            *c = 1.0 / f;
        }
        let mut s = [0.0; JET_LEN];
        s[0] = 1.0;
        assert_eq!(chain_rule(&v, &s, 4), [1.0, 1.0, 1.0, 1.0, 1.0]);
    }
}
