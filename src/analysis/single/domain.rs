//! The domain of the one field: where K > 0 and V is finite, the kind of each end (a pole of K,
//! a zero of K, a singularity of V, infinity, a range end), and the minima and negative regions
//! of V inside it. Units: reduced Planck units (M_p = 1).

use crate::analysis::error::{AnalysisError, ErrorKind, RangeDefect};
use crate::language::tape::Evaluator;
use crate::model::{Layout, Model};
use crate::numerics::roots::brent;
use serde::Serialize;

/// Where the one-field evaluators this module takes hold V, K, sqrt(K) and dV/dphi.
const OUT: Layout = Layout::ONE_FIELD;

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
    classify_status(v, ev.output(OUT.k()))
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
pub(crate) fn sqrt_k_batch(ev: &mut Evaluator<'_>, xs: &[f64], out: &mut [f64]) {
    ev.eval_batch(xs);
    out[..xs.len()].copy_from_slice(ev.batch_output(OUT.sqrt_k()));
}

/// Finds the domain. With a user range, checks it; otherwise surveys the real line.
pub fn find_domain(model: &Model, ev: &mut Evaluator<'_>) -> Result<Domain, AnalysisError> {
    let field = model.field().to_string();
    if let Some((lo, hi)) = model.range {
        return check_range(ev, lo, hi, &field);
    }
    let grid = survey_grid();
    let mut samples = vec![(0.0, 0.0); grid.len()];
    ev.eval_each(grid, |i, out| samples[i] = (out[OUT.v()], out[OUT.k()]));
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
        return Err(ErrorKind::NoDomain.into());
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
        EndKind::Pole => OUT.k(),
        EndKind::VSingular => OUT.v(),
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
            let k = ev.output(OUT.k());
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
        let j = ev.jet_output(OUT.k());
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
        let kx = ev.output(OUT.k());
        if !kx.is_finite() || kx > 1e12 * ka.max(kb) {
            return Some((x, EndKind::Pole));
        }
    } else if km < ka && km < kb {
        let x = brent(|x| dk(ev, x).1, a, b, 1e-16 * a.abs().max(b.abs()), 200)
            .ok()?
            .value;
        ev.eval(x);
        let kx = ev.output(OUT.k());
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
    ev.eval_each(&probes, |i, out| vk[i] = (out[OUT.v()], out[OUT.k()]));
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
            return Err(ErrorKind::KSingularInRange {
                field: field.to_string(),
                at: x,
                pole: kind == EndKind::Pole,
            }
            .into());
        }
    }
    for (&x, &(v, k)) in probes.iter().zip(&vk) {
        match classify_status(v, k) {
            Status::Good => {}
            s => {
                ev.eval(x);
                let k = ev.output(OUT.k());
                let defect = match s {
                    Status::KNonPositive if k == 0.0 => RangeDefect::KZero,
                    Status::KNonPositive => RangeDefect::KNegative(k),
                    Status::KNotFinite => RangeDefect::KNotFinite(k),
                    Status::VNotReal => RangeDefect::VNotReal,
                    _ => RangeDefect::VNotFinite(ev.eval(x)),
                };
                return Err(ErrorKind::BadInRange {
                    field: field.to_string(),
                    at: x,
                    defect,
                }
                .into());
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
        (v.abs(), ev.output(OUT.k()))
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
    ev.eval_each(&pts, |i, out| vd[i] = (out[OUT.v()], out[OUT.dv()]));
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
        ev.output(OUT.dv())
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
