//! Branches of V along the one field: the intervals between stationary points of V (or ends of
//! the domain) on which the field rolls one way, found by a survey of V' on a grid refined where
//! the sign changes crowd.

use crate::analysis::single::domain::Interval;
use crate::language::tape::Evaluator;
use crate::model::Layout;
use crate::numerics::roots::brent;
use serde::Serialize;

/// Where the one-field evaluators this module takes hold V, K, sqrt(K) and dV/dphi.
const OUT: Layout = Layout::ONE_FIELD;

/// A stretch of field space along which V is monotonic: the field rolls from `top` down to
/// `bottom`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Branch {
    /// Where the field comes from (a maximum of V or an end of the domain).
    #[serde(serialize_with = "crate::analysis::single::domain::ser_f64")]
    pub top: f64,
    /// Where it rolls to (a minimum of V or an end of the domain).
    #[serde(serialize_with = "crate::analysis::single::domain::ser_f64")]
    pub bottom: f64,
}

impl Branch {
    /// +1 if the field rolls toward larger phi.
    pub fn direction(&self) -> f64 {
        if self.bottom > self.top {
            1.0
        } else {
            -1.0
        }
    }

    /// The branch's lower and upper field values.
    pub fn span(&self) -> (f64, f64) {
        (self.top.min(self.bottom), self.top.max(self.bottom))
    }
}

/// Points inside (lo, hi): dense near finite ends (down to 1e-13 of the width) and spread
/// geometrically toward infinite ones. Ascending.
pub fn sample_points(lo: f64, hi: f64) -> Vec<f64> {
    // The field's natural scale is M_p = 1: a logarithmic grid around 0 from 1e-5 to 1e8,
    // plus refinements toward each end of the interval (powers of ten precomputed once).
    static GRID: std::sync::OnceLock<(Vec<f64>, Vec<f64>, Vec<f64>)> = std::sync::OnceLock::new();
    let (log_grid, near_end, outward) = GRID.get_or_init(|| {
        let mut g: Vec<f64> = (-30..=48)
            .flat_map(|k| {
                let x = 10f64.powf(k as f64 / 6.0);
                [x, -x]
            })
            .collect();
        g.push(0.0);
        g.sort_by(f64::total_cmp);
        let near: Vec<f64> = (2..=26).map(|k| 10f64.powf(-k as f64 / 2.0)).collect();
        let out: Vec<f64> = (0..=48).map(|k| 10f64.powf(-1.0 + k as f64 / 6.0)).collect();
        (g, near, out)
    });
    let mut pts: Vec<f64> = Vec::with_capacity(log_grid.len() + 2 * near_end.len() + outward.len());
    pts.extend(log_grid.iter().copied().filter(|x| *x > lo && *x < hi));
    // Each run below is pushed in ascending order; `runs` marks where each starts, and the
    // runs are merged at the end (cheaper than sorting).
    let mut runs = vec![0, pts.len()];
    match (lo.is_finite(), hi.is_finite()) {
        (true, true) => {
            let w = hi - lo;
            pts.extend(near_end.iter().rev().map(|f| lo + w * f));
            runs.push(pts.len());
            pts.extend(near_end.iter().map(|f| hi - w * f));
            runs.push(pts.len());
            pts.extend((1..32).map(|i| lo + w * i as f64 / 32.0));
        }
        (true, false) => {
            let w = lo.abs().max(1.0);
            pts.extend(near_end.iter().rev().chain(outward.iter()).map(|f| lo + w * f));
        }
        (false, true) => {
            let w = hi.abs().max(1.0);
            pts.extend(outward.iter().rev().chain(near_end.iter()).map(|f| hi - w * f));
        }
        (false, false) => {}
    }
    runs.push(pts.len());
    let mut merged = Vec::with_capacity(pts.len());
    for r in 1..runs.len() - 1 {
        merged.clear();
        merge_ascending(&pts[..runs[r]], &pts[runs[r]..runs[r + 1]], &mut merged);
        pts[..runs[r + 1]].copy_from_slice(&merged);
    }
    debug_assert!(pts.is_sorted_by(|a, b| a.total_cmp(b).is_le()));
    pts.retain(|x| *x > lo && *x < hi && x.is_finite());
    pts.dedup();
    pts
}

/// Merges two ascending runs (by `f64::total_cmp`) into `out`.
fn merge_ascending(a: &[f64], b: &[f64], out: &mut Vec<f64>) {
    let (mut i, mut j) = (0, 0);
    while i < a.len() && j < b.len() {
        if b[j].total_cmp(&a[i]).is_lt() {
            out.push(b[j]);
            j += 1;
        } else {
            out.push(a[i]);
            i += 1;
        }
    }
    out.extend_from_slice(&a[i..]);
    out.extend_from_slice(&b[j..]);
}

/// The branches of an interval, and how far the survey could resolve V.
#[derive(Debug, Clone, PartialEq)]
pub struct BranchSurvey {
    /// The branches, in ascending order of position.
    pub branches: Vec<Branch>,
    /// Where the survey stopped because V varies faster than its samples (below, above): the
    /// ends of the interval when it did not stop.
    pub resolved: (f64, f64),
    /// The period of V, when its stationary points repeat with one period and the same values;
    /// then only the branches of the period around phi = 0 are kept.
    pub period: Option<f64>,
}

/// The branches of the interval: stretches between stationary points of V (and the ends),
/// in ascending order of position.
pub fn branches(ev: &mut Evaluator<'_>, iv: &Interval) -> Vec<Branch> {
    branch_survey(ev, iv).branches
}

/// The sign of V' where it is significant: a slope below rounding of V over the scale of x
/// (V' |x| < 1e-10 |V|) is numerical noise on a plateau, not a direction. 0 marks "none".
fn slope_sign(x: f64, v: f64, d: f64) -> f64 {
    if !(v.is_finite() && d.is_finite()) || d.abs() * x.abs().max(1.0) <= 1e-10 * v.abs() {
        0.0
    } else {
        d.signum()
    }
}

/// Samples (indices into `signs`, significant ones only) where V' changes sign on both sides:
/// stationary points in two neighbouring sample intervals, closer together than the samples
/// can tell apart reliably.
fn crowded(signs: &[f64]) -> Vec<usize> {
    let sig: Vec<usize> = (0..signs.len()).filter(|&i| signs[i] != 0.0).collect();
    sig.windows(3)
        .filter(|w| signs[w[0]] != signs[w[1]] && signs[w[1]] != signs[w[2]])
        .map(|w| w[1])
        .collect()
}

/// The branches of the interval, surveyed only where the samples resolve V.
///
/// Samples are those of [`sample_points`]. Where V' changes sign in two neighbouring sample
/// intervals, the stationary points are closer than the samples resolve; both intervals are
/// halved, up to three times. Where they are still crowded, V varies faster than the samples
/// can follow (an oscillating potential far from the origin): the survey stops at the first
/// such sample on either side of phi = 0, the branches beyond are not listed, and the pieces
/// cut off at the stopping points are dropped. When the stationary points found repeat with
/// one period P and the same values of V, only the branches whose middle lies within P/2 of
/// phi = 0 are kept.
pub fn branch_survey(ev: &mut Evaluator<'_>, iv: &Interval) -> BranchSurvey {
    let (pts, signs) = refined_samples(ev, iv);
    let centre = if iv.contains(0.0) {
        0.0
    } else {
        0.5 * (pts[0] + pts[pts.len() - 1])
    };
    let stationary = stationary_points(ev, &pts, &signs);
    let (lo_cut, hi_cut) = resolution_cuts(&stationary, centre);
    let stationary: Vec<f64> = stationary
        .iter()
        .map(|s| s.0)
        .filter(|&x| x > lo_cut && x < hi_cut)
        .collect();
    let mut edges = Vec::new();
    if lo_cut == f64::NEG_INFINITY {
        edges.push(iv.lo);
    }
    edges.extend(stationary.iter().copied());
    if hi_cut == f64::INFINITY {
        edges.push(iv.hi);
    }
    let mut out = branches_between(&edges, &pts, &signs);
    // The period, from the five stationary points nearest the centre (far out the samples
    // may not resolve an oscillating V).
    let mut inner = stationary.clone();
    inner.sort_by(|a, b| (a - centre).abs().total_cmp(&(b - centre).abs()));
    inner.truncate(5);
    inner.sort_by(f64::total_cmp);
    let period = period_of(ev, &inner);
    if let Some(p) = period {
        out.retain(|b| (0.5 * (b.top + b.bottom) - centre).abs() <= 0.5 * p);
    }
    BranchSurvey {
        branches: out,
        resolved: (lo_cut.max(iv.lo), hi_cut.min(iv.hi)),
        period,
    }
}

/// The samples of [`sample_points`] with the sign of V' at each ([`slope_sign`]), the
/// crowded intervals halved up to three times (see [`branch_survey`]).
fn refined_samples(ev: &mut Evaluator<'_>, iv: &Interval) -> (Vec<f64>, Vec<f64>) {
    let mut pts = sample_points(iv.lo, iv.hi);
    let mut signs = vec![0.0; pts.len()];
    ev.eval_each(&pts, |i, out| {
        signs[i] = slope_sign(pts[i], out[OUT.v()], out[OUT.dv()])
    });
    let mut hidden = crowded(&signs);
    for _ in 0..3 {
        if hidden.is_empty() {
            break;
        }
        let mut mids: Vec<f64> = Vec::new();
        for &i in &hidden {
            for (a, b) in [(i.saturating_sub(1), i), (i, (i + 1).min(pts.len() - 1))] {
                let m = 0.5 * (pts[a] + pts[b]);
                if m > pts[a] && m < pts[b] && mids.last() != Some(&m) {
                    mids.push(m);
                }
            }
        }
        mids.sort_by(f64::total_cmp);
        mids.dedup();
        let mut ms = vec![0.0; mids.len()];
        ev.eval_each(&mids, |i, out| ms[i] = slope_sign(mids[i], out[OUT.v()], out[OUT.dv()]));
        let mut merged: Vec<(f64, f64)> = Vec::with_capacity(pts.len() + mids.len());
        let (mut i, mut j) = (0, 0);
        while i < pts.len() || j < mids.len() {
            if j >= mids.len() || (i < pts.len() && pts[i] < mids[j]) {
                merged.push((pts[i], signs[i]));
                i += 1;
            } else {
                merged.push((mids[j], ms[j]));
                j += 1;
            }
        }
        pts = merged.iter().map(|p| p.0).collect();
        signs = merged.iter().map(|p| p.1).collect();
        hidden = crowded(&signs);
    }
    (pts, signs)
}

/// Sign changes between consecutive significant samples, refined by Brent on V'; with the
/// half-width of the samples around each: (x, spacing).
fn stationary_points(ev: &mut Evaluator<'_>, pts: &[f64], signs: &[f64]) -> Vec<(f64, f64)> {
    let mut dv = |x: f64| {
        ev.eval(x);
        ev.output(OUT.dv())
    };
    let mut stationary: Vec<(f64, f64)> = Vec::new();
    let mut prev: Option<usize> = None;
    for i in 0..pts.len() {
        if signs[i] == 0.0 {
            continue;
        }
        if let Some(j) = prev {
            if signs[j] != signs[i] {
                let r = brent(
                    &mut dv,
                    pts[j],
                    pts[i],
                    1e-15 * pts[j].abs().max(pts[i].abs()).max(1e-300),
                    300,
                );
                let x = r.map(|r| r.value).unwrap_or(0.5 * (pts[j] + pts[i]));
                // a stationary point at the origin, found to rounding (M_p = 1 sets the scale)
                let x = if x.abs() < 1e-12 { 0.0 } else { x };
                stationary.push((x, (pts[i] - pts[j]) / (i - j) as f64));
            }
        }
        prev = Some(i);
    }
    stationary
}

/// Outward from the centre, the survey stops at the first stationary point closer to its
/// inner neighbour than 1.5 times the local sample spacing: beyond, the samples no longer
/// resolve V (an oscillating potential far out). (lower cut, upper cut), infinite where none.
fn resolution_cuts(stationary: &[(f64, f64)], centre: f64) -> (f64, f64) {
    let close = |a: usize, b: usize| stationary[b].0 - stationary[a].0 < 1.5 * stationary[a].1.max(stationary[b].1);
    let split = stationary.partition_point(|s| s.0 < centre);
    let mut hi_cut = f64::INFINITY;
    for k in split.max(1)..stationary.len() {
        if close(k - 1, k) {
            hi_cut = stationary[k].0;
            break;
        }
    }
    let mut lo_cut = f64::NEG_INFINITY;
    for k in (0..split.min(stationary.len().saturating_sub(1))).rev() {
        if close(k, k + 1) {
            lo_cut = stationary[k].0;
            break;
        }
    }
    (lo_cut, hi_cut)
}

/// A branch between each pair of neighbouring edges that holds a significant sample, rolling
/// the way the middle one of them says.
fn branches_between(edges: &[f64], pts: &[f64], signs: &[f64]) -> Vec<Branch> {
    let mut out = Vec::new();
    for w in edges.windows(2) {
        let (a, b) = (w[0], w[1]);
        // The direction of roll: the sign of V' at the middle significant sample inside.
        let inside: Vec<usize> = (0..pts.len())
            .filter(|&i| pts[i] > a && pts[i] < b && signs[i] != 0.0)
            .collect();
        let Some(&i) = inside.get(inside.len() / 2) else {
            continue;
        };
        // V' > 0: V grows with phi, so the field rolls down toward smaller phi.
        out.push(if signs[i] > 0.0 {
            Branch { top: b, bottom: a }
        } else {
            Branch { top: a, bottom: b }
        });
    }
    out
}

/// The period of V from its stationary points: at least five, every second one P apart
/// (relative 1e-6), with V equal at every second one (1e-9 of the range of V). None otherwise.
fn period_of(ev: &mut Evaluator<'_>, s: &[f64]) -> Option<f64> {
    if s.len() < 5 {
        return None;
    }
    let p = s[2] - s[0];
    if p.is_nan() || p <= 0.0 || s.windows(3).any(|w| ((w[2] - w[0]) - p).abs() > 1e-6 * p) {
        return None;
    }
    let vs: Vec<f64> = s.iter().map(|&x| ev.eval(x)).collect();
    let range = vs.iter().copied().fold(f64::NEG_INFINITY, f64::max) - vs.iter().copied().fold(f64::INFINITY, f64::min);
    let same = vs.windows(3).all(|w| (w[2] - w[0]).abs() <= 1e-9 * range);
    same.then_some(p)
}
