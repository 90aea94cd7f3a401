//! `efold inspect`: what a model is in canonical variables. Domain, minimum, poles of K with
//! their leading-order predictions, the asymptotics of V(chi) at both ends, an optional table
//! of (phi, chi, V), and a figure of V against phi and against chi.

use crate::analysis::error::AnalysisError;
use crate::analysis::single::asymptote::{asymptote, Asymptote};
use crate::analysis::single::canonical::CanonicalMap;
use crate::analysis::single::domain::{positive_minimum, ser_f64, Domain, EndKind};
use crate::analysis::single::pole::{analyse_pole, Pole};
use crate::config::Config;
use crate::drivers::prepared::Prepared;
use crate::model::Model;
use crate::report::numfmt;
use crate::report::plot::{self, Marker, Panel, Series, VLine};
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
    /// Which parameter values were written as plain numbers (the others are expressions).
    #[serde(skip)]
    pub params_typed: Vec<bool>,
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
            params_typed: model
                .param_pairs()
                .map(|(n, _)| {
                    let spec = model.spec.params.iter().find(|p| p.name == n);
                    spec.is_some_and(|p| p.value.text.trim().parse::<f64>().is_ok())
                })
                .collect(),
        }
    }

    /// The parameters for people, `name = value`: a value written as a plain number as typed,
    /// one computed from an expression to the default significant digits.
    pub fn params_text(&self) -> Vec<String> {
        self.params
            .iter()
            .enumerate()
            .map(|(i, (k, v))| {
                if self.params_typed.get(i).copied().unwrap_or(false) {
                    format!("{k} = {}", numfmt::typed(*v))
                } else {
                    format!("{k} = {}", numfmt::number(*v))
                }
            })
            .collect()
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

/// Runs the canonical analysis: prepares the model's analysis ([`Prepared`]) and inspects it.
/// `table` asks for that many rows of (phi, chi, V).
pub fn inspect(model: &Model, config: &Config, table: Option<usize>) -> Result<Inspection, AnalysisError> {
    Prepared::new(model).inspect(config, table)
}

/// The canonical analysis of a prepared model, whose domain, negative regions and minimum of V
/// are surveyed once ([`Prepared::inspect`] calls it). `table` asks for that many rows of
/// (phi, chi, V).
pub fn inspect_prepared(
    prep: &Prepared<'_>,
    config: &Config,
    table: Option<usize>,
) -> Result<Inspection, AnalysisError> {
    let model = prep.model();
    let mut domain = prep.domain()?.clone();
    domain.negative_v = prep.negative_regions()?.to_vec();
    let mut ev = model.evaluator();
    let iv = domain.interval;
    let field = model.field();
    let min_phi = prep.minimum_of_v()?;
    let chi_origin = min_phi.unwrap_or_else(|| default_origin(&iv));
    let minimum = min_phi.map(|phi| Minimum { phi, v: ev.eval(phi) });
    let mut poles = Vec::new();
    let mut zeros = Vec::new();
    let mut warnings = Vec::new();
    if let Some(v) = min_phi.and_then(|phi| positive_minimum(&mut ev, &iv, phi)) {
        warnings.push(positive_minimum_warning(field, min_phi.unwrap_or_default(), v, &iv));
    }
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
                    fmt(end)
                ));
            }
            EndKind::VNotReal => warnings.push(format!(
                "V is not a real number beyond {field} = {}: the domain stops there",
                fmt(end)
            )),
            EndKind::KSignChange => warnings.push(format!(
                "K changes sign at {field} = {}: beyond it the field is a ghost",
                fmt(end)
            )),
            _ => {}
        }
    }
    for (a, b) in &domain.negative_v {
        warnings.push(format!("V < 0 for {} < {field} < {}", fmt(*a), fmt(*b)));
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
    let ins = Inspection {
        model: ModelSummary::of(model),
        domain,
        minimum,
        chi_origin,
        poles,
        zeros_of_k: zeros,
        asymptotics,
        table,
        warnings,
    };
    check_finite(&ins, field)?;
    Ok(ins)
}

/// Every number of an inspection that must be finite, with its key. May be infinite, and are
/// not listed: the ends of the domain and of the other intervals (`domain`, `asymptotics[].end`)
/// and an asymptote's `uncertainty` when there was no estimate to compare.
pub fn numbers(ins: &Inspection) -> Vec<(String, f64)> {
    let mut v = vec![("chi_origin".to_string(), ins.chi_origin)];
    if let Some(m) = &ins.minimum {
        v.push(("minimum.phi".into(), m.phi));
        v.push(("minimum.v".into(), m.v));
    }
    for (i, p) in ins.poles.iter().enumerate() {
        v.push((format!("poles[{i}].phi"), p.phi));
        v.push((format!("poles[{i}].order"), p.order));
        v.push((format!("poles[{i}].order_measured"), p.order_measured));
        v.push((format!("poles[{i}].residue"), p.residue));
        v.push((format!("poles[{i}].residue_uncertainty"), p.residue_uncertainty));
    }
    for (i, z) in ins.zeros_of_k.iter().enumerate() {
        v.push((format!("zeros_of_k[{i}]"), *z));
    }
    for (i, a) in ins.asymptotics.iter().enumerate() {
        let opt = [
            ("height", a.height),
            ("scale", a.scale),
            ("alpha", a.alpha),
            ("power", a.power),
            ("rate", a.rate),
            ("chi_distance", a.chi_distance),
        ];
        for (key, x) in opt {
            if let Some(x) = x {
                v.push((format!("asymptotics[{i}].{key}"), x));
            }
        }
        if a.uncertainty.is_nan() {
            v.push((format!("asymptotics[{i}].uncertainty"), a.uncertainty));
        }
    }
    for (i, r) in ins.table.iter().flatten().enumerate() {
        v.push((format!("table[{i}].phi"), r.phi));
        v.push((format!("table[{i}].chi"), r.chi));
        v.push((format!("table[{i}].v"), r.v));
    }
    v
}

/// The last check before an inspection is reported: a number that should be finite and is not
/// is an error naming it, never a `null` in the output.
fn check_finite(ins: &Inspection, field: &str) -> Result<(), AnalysisError> {
    match numbers(ins).into_iter().find(|(_, x)| !x.is_finite()) {
        None => Ok(()),
        Some((key, value)) => Err(crate::analysis::error::ErrorKind::InspectionNotFinite {
            key,
            value,
            field: field.to_string(),
        }
        .into()),
    }
}

/// The warning for a minimum of V above zero (at an end of the given range: the range cuts
/// V off before it reaches its minimum).
pub fn positive_minimum_warning(
    field: &str,
    phi: f64,
    v: f64,
    iv: &crate::analysis::single::domain::Interval,
) -> String {
    if phi == iv.lo || phi == iv.hi {
        format!(
            "V = {} > 0 at the end of the given range ({field} = {}), where V is lowest: the range ends before V reaches a minimum, so after inflation the field would leave the range",
            fmt(v),
            fmt(phi)
        )
    } else {
        format!(
            "V = {} > 0 at its minimum ({field} = {}): the field settles where V is positive, so inflation resumes in the vacuum (or never really ends) unless this vacuum energy is negligible",
            fmt(v),
            fmt(phi)
        )
    }
}

fn default_origin(iv: &crate::analysis::single::domain::Interval) -> f64 {
    match (iv.lo.is_finite(), iv.hi.is_finite()) {
        (true, true) => 0.5 * (iv.lo + iv.hi),
        (true, false) => iv.lo + iv.lo.abs().max(1.0),
        (false, true) => iv.hi - iv.hi.abs().max(1.0),
        (false, false) => 0.0,
    }
}

/// The stretch of field space worth drawing: up to near a finite end, or outward from the
/// origin until V levels off (plateau) or has grown by 10^4.
pub fn plot_window(model: &Model, iv: &crate::analysis::single::domain::Interval, origin: f64) -> (f64, f64) {
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
    iv: &crate::analysis::single::domain::Interval,
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

fn fmt(x: f64) -> String {
    numfmt::number(x)
}

/// How an end of the domain comes about, as a sentence (the field value where it helps).
fn end_sentence(kind: EndKind, field: &str, end: f64) -> String {
    match kind {
        EndKind::VOverflow => format!(
            "V exceeds double precision beyond {field} = {} (effectively unbounded)",
            fmt(end)
        ),
        EndKind::VNotReal => format!(
            "V is not real beyond {field} = {} (log or sqrt of a negative number?)",
            fmt(end)
        ),
        k => k.words().to_string(),
    }
}

/// Lines of cells as columns: every column but the last padded to its widest cell, two spaces
/// between columns.
fn columns(lines: &[Vec<String>], indent: &str) -> String {
    let n = lines.iter().map(Vec::len).max().unwrap_or(0);
    let widths: Vec<usize> = (0..n)
        .map(|j| {
            lines
                .iter()
                .filter_map(|l| l.get(j))
                .map(|c| c.chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    let mut o = String::new();
    for l in lines {
        let mut line = indent.to_string();
        for (j, c) in l.iter().enumerate() {
            if widths[j] == 0 {
                continue; // a column empty on every line takes no room
            }
            if j + 1 < l.len() {
                let _ = write!(line, "{c:<w$}  ", w = widths[j]);
            } else {
                line.push_str(c);
            }
        }
        let _ = writeln!(o, "{}", line.trim_end());
    }
    o
}

/// The aligned human report.
pub fn text(ins: &Inspection) -> String {
    let mut o = String::new();
    let m = &ins.model;
    let f = &m.field;
    let (v_label, k_label) = (format!("V({f})"), format!("K({f})"));
    let w = ["chi = 0 at", v_label.as_str(), k_label.as_str()]
        .iter()
        .map(|l| l.chars().count())
        .max()
        .unwrap_or(0);
    let line = |o: &mut String, label: &str, rest: &str| {
        let _ = writeln!(o, "{label:<w$}  {rest}");
    };
    line(&mut o, "model", if m.name.is_empty() { "(unnamed)" } else { &m.name });
    if !m.description.is_empty() {
        line(&mut o, "", &m.description);
    }
    line(&mut o, &v_label, &m.potential);
    line(&mut o, &k_label, &m.kinetic);
    if !m.params.is_empty() {
        line(&mut o, "parameters", &m.params_text().join(", "));
    }
    let iv = &ins.domain.interval;
    o.push('\n');
    line(&mut o, "domain", &format!("{} < {f} < {}", fmt(iv.lo), fmt(iv.hi)));
    let _ = writeln!(o, "  lower end: {}", end_sentence(iv.lo_kind, f, iv.lo));
    let _ = writeln!(o, "  upper end: {}", end_sentence(iv.hi_kind, f, iv.hi));
    match &ins.minimum {
        Some(mn) => line(
            &mut o,
            "minimum",
            &format!("V = {} at {f} = {}", fmt(mn.v), fmt(mn.phi)),
        ),
        None => line(&mut o, "minimum", "none inside the domain (V falls toward an end)"),
    }
    line(
        &mut o,
        "chi = 0 at",
        &format!("{f} = {}   (chi = integral of sqrt(K) d{f})", fmt(ins.chi_origin)),
    );
    let _ = writeln!(o, "\npoles of K");
    if ins.poles.is_empty() {
        let _ = writeln!(o, "  none at the ends of the domain");
    }
    for p in &ins.poles {
        let _ = writeln!(
            o,
            "  at {f} = {}: order {}, residue a_p = {} (+- {} rel), canonical distance {}",
            fmt(p.phi),
            fmt(p.order),
            fmt(p.residue),
            numfmt::scientific(p.residue_uncertainty.max(1e-16), 1),
            if p.infinite_distance { "infinite" } else { "finite" }
        );
        match &p.leading_order {
            Some(lo) => {
                let (ns, r) = lo.predict(55.0);
                let (pp, m) = (lo.order, lo.flatness);
                let formula = if pp == 2.0 && m == 1.0 {
                    format!("n_s = 1 - 2/N, r = 8 a_2/N^2 = {}/N^2", fmt(8.0 * p.residue))
                } else if pp == 2.0 && m == 2.0 {
                    format!("n_s = 1 - 2/N, r = 2 a_2/N^2 = {}/N^2", fmt(2.0 * p.residue))
                } else {
                    format!(
                        "n_s = 1 - {}/N, r from a_p and c = {} (see docs)",
                        fmt((2.0 * m + pp - 2.0) / (pp + m - 2.0)),
                        fmt(lo.slope)
                    )
                };
                let _ = writeln!(
                    o,
                    "    pole alone, leading order (V = V_p (1 - c rho^m) with m = {}): {formula}; at N = 55: n_s = {}, r = {}",
                    fmt(m),
                    fmt(ns),
                    fmt(r)
                );
            }
            None => {
                let why = p.no_leading_order.map_or("", |w| w.words());
                let _ = writeln!(o, "    no leading-order prediction of the pole alone: {why}");
            }
        }
    }
    let _ = writeln!(o, "\nV(chi) toward each end");
    let lines: Vec<Vec<String>> = ins
        .asymptotics
        .iter()
        .map(|a| {
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
            vec![
                format!("{f} -> {}", fmt(a.end)),
                a.kind.word().to_string(),
                details.join(", "),
                format!("[{} confidence]", a.confidence),
            ]
        })
        .collect();
    o.push_str(&columns(&lines, "  "));
    if let Some(rows) = &ins.table {
        // One style per column, right-aligned, so that decimal points line up.
        let d = numfmt::DEFAULT_DIGITS;
        let cols = [
            (
                f.as_str(),
                numfmt::row(&rows.iter().map(|r| r.phi).collect::<Vec<_>>(), d),
            ),
            ("chi", numfmt::row(&rows.iter().map(|r| r.chi).collect::<Vec<_>>(), d)),
            ("V", numfmt::row(&rows.iter().map(|r| r.v).collect::<Vec<_>>(), d)),
        ];
        let widths: Vec<usize> = cols
            .iter()
            .map(|(h, c)| c.iter().map(String::len).chain([h.chars().count()]).max().unwrap_or(0))
            .collect();
        let _ = writeln!(o);
        let header: Vec<String> = cols.iter().zip(&widths).map(|((h, _), w)| format!("{h:>w$}")).collect();
        let _ = writeln!(o, "  {}", header.join("  "));
        for i in 0..rows.len() {
            let cells: Vec<String> = cols
                .iter()
                .zip(&widths)
                .map(|((_, c), w)| format!("{:>w$}", c[i]))
                .collect();
            let _ = writeln!(o, "  {}", cells.join("  "));
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
pub fn figure(
    model: &Model,
    ins: &Inspection,
    marks: &FigureMarks,
    config: &Config,
    width_pt: f64,
) -> Result<String, AnalysisError> {
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
        title: format!("$V$({})", plot::symbol(f)),
        x_label: plot::symbol(f),
        y_label: "$V$ [$M$_p^4]".into(),
        series: vec![Series {
            name: "V".into(),
            points: vs_phi,
            color: "#1f5fa8".into(),
            dashed: false,
        }],
        ..Panel::default()
    };
    let mut right = Panel {
        title: "$V$($\\chi$), canonical field".into(),
        x_label: "$\\chi$ [$M$_p]".into(),
        y_label: "$V$ [$M$_p^4]".into(),
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
            label: format!("pole, $p$ = {}", fmt(p.order)),
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
    Ok(plot::render(&title, &[left, right], width_pt))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::ModelSpec;

    #[test]
    fn a_non_finite_number_in_an_inspection_is_an_error() {
        let spec = ModelSpec::inline("phi^2", None);
        let model = Model::build(&spec, &Config::default()).unwrap();
        let ins = inspect(&model, &Config::default(), Some(5)).unwrap();
        // Infinite domain ends are allowed and not checked.
        assert!(ins.domain.interval.hi.is_infinite());
        assert!(check_finite(&ins, "phi").is_ok());
        let mut bad = ins.clone();
        bad.table.as_mut().unwrap()[3].chi = f64::NAN;
        let e = check_finite(&bad, "phi").unwrap_err();
        assert_eq!(e.message, "table[3].chi is not a finite number (NaN)");
        let mut bad = ins.clone();
        bad.minimum.as_mut().unwrap().v = f64::INFINITY;
        assert!(check_finite(&bad, "phi").unwrap_err().message.starts_with("minimum.v"));
        // No estimate: an infinite uncertainty is allowed, a NaN is not.
        let mut bad = ins;
        bad.asymptotics[0].uncertainty = f64::INFINITY;
        assert!(check_finite(&bad, "phi").is_ok());
        bad.asymptotics[0].uncertainty = f64::NAN;
        assert!(check_finite(&bad, "phi").is_err());
    }
}
