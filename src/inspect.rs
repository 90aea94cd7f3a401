//! `efold inspect`: what a model is in canonical variables. Domain, minimum, poles of K with
//! their leading-order predictions, the asymptotics of V(chi) at both ends, an optional table
//! of (phi, chi, V), and a figure of V against phi and against chi.

use crate::canonical::{
    analyse_pole, asymptote, find_domain, minimum_of_v, negative_regions, ser_f64, AnalysisError, Asymptote,
    CanonicalMap, Domain, EndKind, Pole,
};
use crate::config::Config;
use crate::ir::format_number;
use crate::model::Model;
use crate::plot::{self, Marker, Panel, Series, VLine};
use serde::Serialize;
use std::fmt::Write as _;

/// The model as compiled, for reports.
#[derive(Debug, Clone, Serialize)]
pub struct ModelSummary {
    /// Name.
    pub name: String,
    /// One line.
    pub description: String,
    /// Field name.
    pub field: String,
    /// V as written.
    pub potential: String,
    /// K as written.
    pub kinetic: String,
    /// Parameter values.
    pub params: indexmap::IndexMap<String, f64>,
}

impl ModelSummary {
    /// From a compiled model.
    pub fn of(model: &Model) -> ModelSummary {
        ModelSummary {
            name: model.spec.name.clone(),
            description: model.spec.description.clone(),
            field: model.field().to_string(),
            potential: model.spec.potential.text.clone(),
            kinetic: model.spec.kinetic.text.clone(),
            params: model.param_pairs().map(|(n, v)| (n.to_string(), v)).collect(),
        }
    }
}

/// The minimum of V.
#[derive(Debug, Clone, Serialize)]
pub struct Minimum {
    /// Where.
    pub phi: f64,
    /// V there.
    pub v: f64,
}

/// One row of the (phi, chi, V) table.
#[derive(Debug, Clone, Serialize)]
pub struct Row {
    /// Field value.
    pub phi: f64,
    /// Canonical field (0 at the reference point).
    pub chi: f64,
    /// Potential.
    pub v: f64,
}

/// Everything `inspect` reports.
#[derive(Debug, Clone, Serialize)]
pub struct Inspection {
    /// The model.
    pub model: ModelSummary,
    /// The field-space domain.
    pub domain: Domain,
    /// The minimum of V in the domain, if interior.
    pub minimum: Option<Minimum>,
    /// Where chi = 0.
    #[serde(serialize_with = "ser_f64")]
    pub chi_origin: f64,
    /// Poles of K at the ends of the domain.
    pub poles: Vec<Pole>,
    /// Zeros of K at the ends of the domain.
    pub zeros_of_k: Vec<f64>,
    /// V(chi) toward the lower and the upper end.
    pub asymptotics: Vec<Asymptote>,
    /// (phi, chi, V) on request.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub table: Option<Vec<Row>>,
    /// Things the user should know.
    pub warnings: Vec<String>,
}

/// Runs the canonical analysis. `table` asks for that many rows of (phi, chi, V).
pub fn inspect(model: &Model, config: &Config, table: Option<usize>) -> Result<Inspection, AnalysisError> {
    let mut ev = model.evaluator();
    let mut domain = find_domain(model, &mut ev)?;
    domain.negative_v = negative_regions(&mut ev, &domain.interval);
    let iv = domain.interval;
    let field = model.field();
    let min_phi = minimum_of_v(&mut ev, &iv);
    let chi_origin = min_phi.unwrap_or_else(|| default_origin(&iv));
    let minimum = min_phi.map(|phi| Minimum { phi, v: ev.eval(phi) });
    let mut poles = Vec::new();
    let mut zeros = Vec::new();
    let mut warnings = Vec::new();
    let width = iv.hi - iv.lo;
    for (end, kind, inward) in [(iv.lo, iv.lo_kind, 1.0), (iv.hi, iv.hi_kind, -1.0)] {
        match kind {
            EndKind::Pole => {
                if let Some(p) = analyse_pole(&mut ev, end, inward, width) {
                    poles.push(p);
                }
            }
            EndKind::ZeroOfK => {
                zeros.push(end);
                warnings.push(format!(
                    "K vanishes at {field} = {} (strong coupling): the kinetic term degenerates at this end",
                    format_number(end)
                ));
            }
            EndKind::VNotReal => warnings.push(format!(
                "V is not a real number beyond {field} = {}: the domain stops there",
                format_number(end)
            )),
            EndKind::KSignChange => warnings.push(format!(
                "K changes sign at {field} = {}: beyond it the field is a ghost",
                format_number(end)
            )),
            _ => {}
        }
    }
    for (a, b) in &domain.negative_v {
        warnings.push(format!(
            "V < 0 for {} < {field} < {}",
            format_number(*a),
            format_number(*b)
        ));
    }
    if !domain.others.is_empty() {
        warnings.push(format!(
            "{} other interval(s) of field space have K > 0; this one holds the lowest V (choose with --range)",
            domain.others.len()
        ));
    }
    let asymptotics = vec![
        asymptote(model, &mut ev, &iv, false, chi_origin, config),
        asymptote(model, &mut ev, &iv, true, chi_origin, config),
    ];
    let table = match table {
        None => None,
        Some(n) => Some(make_table(model, &iv, chi_origin, n.max(2), config)?),
    };
    Ok(Inspection {
        model: ModelSummary::of(model),
        domain,
        minimum,
        chi_origin,
        poles,
        zeros_of_k: zeros,
        asymptotics,
        table,
        warnings,
    })
}

fn default_origin(iv: &crate::canonical::Interval) -> f64 {
    match (iv.lo.is_finite(), iv.hi.is_finite()) {
        (true, true) => 0.5 * (iv.lo + iv.hi),
        (true, false) => iv.lo + iv.lo.abs().max(1.0),
        (false, true) => iv.hi - iv.hi.abs().max(1.0),
        (false, false) => 0.0,
    }
}

/// The stretch of field space worth drawing: up to near a finite end, or outward from the
/// origin until V levels off (plateau) or has grown by 10^4.
pub fn plot_window(model: &Model, iv: &crate::canonical::Interval, origin: f64) -> (f64, f64) {
    let mut ev = model.evaluator();
    let mut ends = [iv.lo, iv.hi];
    for (i, dir) in [(0usize, -1.0), (1usize, 1.0)] {
        let end = ends[i];
        if end.is_finite() {
            let w = (iv.hi - iv.lo).min(end.abs().max(1.0));
            ends[i] = end - dir * 1e-3 * w;
            continue;
        }
        let h = 0.05 * origin.abs().max(1.0);
        let v0 = ev.eval(origin).abs();
        let scale = ev.eval(origin + dir * h).abs().max(v0).max(1e-300);
        let mut prev = ev.eval(origin);
        let mut x = origin + dir * h;
        for k in 1..40 {
            x = origin + dir * h * 2f64.powi(k);
            let v = ev.eval(x);
            if !v.is_finite() || v.abs() > 1e4 * scale || (v - prev).abs() < 1e-3 * v.abs() {
                break;
            }
            prev = v;
        }
        ends[i] = x;
    }
    (ends[0], ends[1])
}

fn make_table(
    model: &Model,
    iv: &crate::canonical::Interval,
    origin: f64,
    n: usize,
    config: &Config,
) -> Result<Vec<Row>, AnalysisError> {
    let (a, b) = plot_window(model, iv, origin);
    let mut map = CanonicalMap::new(model, origin, config);
    let mut ev = model.evaluator();
    let mut rows = Vec::with_capacity(n);
    let mut prev: Option<(f64, f64)> = None;
    for i in 0..n {
        let phi = a + (b - a) * i as f64 / (n - 1) as f64;
        let chi = match prev {
            None => map.chi(phi)?.value,
            Some((p, c)) => c + map.between(p, phi)?.value,
        };
        prev = Some((phi, chi));
        rows.push(Row {
            phi,
            chi,
            v: ev.eval(phi),
        });
    }
    Ok(rows)
}

/// A number for the human reports: `decimals` places in fixed notation between 1e-4 and
/// `10^fixed_below`, 7 significant digits in exponent notation outside, trailing zeros dropped,
/// infinities as inf / -inf.
pub fn fmt_number(x: f64, decimals: usize, fixed_below: i32) -> String {
    if x.is_infinite() {
        return if x > 0.0 { "inf".into() } else { "-inf".into() };
    }
    let a = x.abs();
    if a != 0.0 && !(1e-4..10f64.powi(fixed_below)).contains(&a) {
        format!("{x:.6e}")
    } else {
        let s = format!("{x:.decimals$}");
        let s = s.trim_end_matches('0');
        s.trim_end_matches('.').to_string()
    }
}

fn fmt(x: f64) -> String {
    fmt_number(x, 9, 6)
}

/// The aligned human report.
pub fn text(ins: &Inspection) -> String {
    let mut o = String::new();
    let m = &ins.model;
    let f = &m.field;
    let _ = writeln!(
        o,
        "model       {}",
        if m.name.is_empty() { "(unnamed)" } else { &m.name }
    );
    if !m.description.is_empty() {
        let _ = writeln!(o, "            {}", m.description);
    }
    let _ = writeln!(o, "V({f})      {}", m.potential);
    let _ = writeln!(o, "K({f})      {}", m.kinetic);
    if !m.params.is_empty() {
        let ps: Vec<String> = m.params.iter().map(|(k, v)| format!("{k} = {}", fmt(*v))).collect();
        let _ = writeln!(o, "parameters  {}", ps.join(", "));
    }
    let iv = &ins.domain.interval;
    let _ = writeln!(o, "\ndomain      {} < {f} < {}", fmt(iv.lo), fmt(iv.hi));
    let _ = writeln!(o, "  lower end {}", iv.lo_kind.words());
    let _ = writeln!(o, "  upper end {}", iv.hi_kind.words());
    match &ins.minimum {
        Some(mn) => {
            let _ = writeln!(o, "minimum     V = {} at {f} = {}", fmt(mn.v), fmt(mn.phi));
        }
        None => {
            let _ = writeln!(o, "minimum     none inside the domain (V falls toward an end)");
        }
    }
    let _ = writeln!(
        o,
        "chi = 0 at  {f} = {}   (chi = integral of sqrt(K) d{f})",
        fmt(ins.chi_origin)
    );
    let _ = writeln!(o, "\npoles of K");
    if ins.poles.is_empty() {
        let _ = writeln!(o, "  none at the ends of the domain");
    }
    for p in &ins.poles {
        let _ = writeln!(
            o,
            "  at {f} = {}: order {}, residue a_p = {} (+- {:.0e} rel), canonical distance {}",
            fmt(p.phi),
            fmt(p.order),
            fmt(p.residue),
            p.residue_uncertainty.max(1e-16),
            if p.infinite_distance { "infinite" } else { "finite" }
        );
        match &p.leading_order {
            Some(lo) => {
                let (ns, r) = lo.predict(55.0);
                let formula = if p.order == 2.0 {
                    format!("n_s = 1 - 2/N, r = 8 a_2/N^2 = {}/N^2", fmt(8.0 * p.residue))
                } else {
                    format!(
                        "n_s = 1 - {}/N, r from a_p and c = {} (see docs)",
                        fmt(p.order / (p.order - 1.0)),
                        fmt(lo.slope)
                    )
                };
                let _ = writeln!(
                    o,
                    "    pole alone, leading order: {formula}; at N = 55: n_s = {:.6}, r = {}",
                    ns,
                    fmt(r)
                );
            }
            None => {
                let _ = writeln!(
                    o,
                    "    no leading-order prediction: needs order > 1 and V > 0 falling away from the pole"
                );
            }
        }
    }
    let _ = writeln!(o, "\nV(chi) toward each end");
    for a in &ins.asymptotics {
        let mut details = Vec::new();
        if let Some(h) = a.height {
            details.push(format!("height {}", fmt(h)));
        }
        if let Some(s) = a.scale {
            details.push(format!("M = {}", fmt(s)));
        }
        if let Some(al) = a.alpha {
            details.push(format!("alpha = 2M^2/3 = {}", fmt(al)));
        }
        if let Some(p) = a.power {
            details.push(format!("power {}", fmt(p)));
        }
        if let Some(r) = a.rate {
            details.push(format!("rate {}", fmt(r)));
        }
        if let Some(d) = a.chi_distance {
            details.push(format!("distance {}", fmt(d)));
        }
        let _ = writeln!(
            o,
            "  {f} -> {:<12} {:<20} {}  [{} confidence]",
            fmt(a.end),
            a.kind.word(),
            details.join(", "),
            a.confidence
        );
    }
    if let Some(rows) = &ins.table {
        let _ = writeln!(o, "\n{:>18} {:>18} {:>18}", f, "chi", "V");
        for r in rows {
            let _ = writeln!(o, "{:>18} {:>18} {:>18}", fmt(r.phi), fmt(r.chi), fmt(r.v));
        }
    }
    if !ins.warnings.is_empty() {
        let _ = writeln!(o);
        for w in &ins.warnings {
            let _ = writeln!(o, "warning: {w}");
        }
    }
    o
}

/// Extra points to mark on the figure (end of inflation, pivot points), in the field.
#[derive(Debug, Clone, Default)]
pub struct FigureMarks {
    /// (phi, label)
    pub points: Vec<(f64, String)>,
}

/// The figure: V against phi, and V against chi, with poles, the minimum and `marks`.
pub fn figure(model: &Model, ins: &Inspection, marks: &FigureMarks, config: &Config) -> Result<String, AnalysisError> {
    let iv = &ins.domain.interval;
    let (a, b) = plot_window(model, iv, ins.chi_origin);
    let n = 400;
    let mut ev = model.evaluator();
    let mut map = CanonicalMap::new(model, ins.chi_origin, config);
    let mut vs_phi = Vec::with_capacity(n);
    let mut vs_chi = Vec::with_capacity(n);
    let mut prev: Option<(f64, f64)> = None;
    let mut chi_of = Vec::new();
    for i in 0..n {
        let phi = a + (b - a) * i as f64 / (n - 1) as f64;
        let chi = match prev {
            None => map.chi(phi)?.value,
            Some((p, c)) => c + map.between(p, phi)?.value,
        };
        prev = Some((phi, chi));
        let v = ev.eval(phi);
        vs_phi.push((phi, v));
        vs_chi.push((chi, v));
        chi_of.push((phi, chi));
    }
    let f = &ins.model.field;
    let mut left = Panel {
        title: format!("V({f})"),
        x_label: f.clone(),
        y_label: "V".into(),
        series: vec![Series {
            name: "V".into(),
            points: vs_phi,
            color: "#1f5fa8".into(),
            dashed: false,
        }],
        ..Panel::default()
    };
    let mut right = Panel {
        title: "V(chi), canonical field".into(),
        x_label: "chi".into(),
        y_label: "V".into(),
        series: vec![Series {
            name: "V".into(),
            points: vs_chi,
            color: "#1f5fa8".into(),
            dashed: false,
        }],
        ..Panel::default()
    };
    for p in &ins.poles {
        left.vlines.push(VLine {
            x: p.phi,
            label: format!("pole p={}", fmt(p.order)),
            color: "#b03030".into(),
        });
    }
    if let Some(mn) = &ins.minimum {
        left.markers.push(Marker {
            x: mn.phi,
            y: mn.v,
            label: "minimum".into(),
            color: "#2a8a2a".into(),
        });
        right.markers.push(Marker {
            x: 0.0,
            y: mn.v,
            label: "minimum".into(),
            color: "#2a8a2a".into(),
        });
    }
    for (phi, label) in &marks.points {
        let v = ev.eval(*phi);
        let chi = map.chi(*phi)?.value;
        left.markers.push(Marker {
            x: *phi,
            y: v,
            label: label.clone(),
            color: "#8a4a00".into(),
        });
        right.markers.push(Marker {
            x: chi,
            y: v,
            label: label.clone(),
            color: "#8a4a00".into(),
        });
    }
    let title = if ins.model.name.is_empty() {
        "efold".to_string()
    } else {
        ins.model.name.clone()
    };
    Ok(plot::render(&title, &[left, right]))
}
