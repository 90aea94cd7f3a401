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
use crate::report::numfmt::number as fmt;
use serde::Serialize;

// The inspection's rendering, where it was before it moved to `report`.
pub use crate::report::inspect::text;

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

/// Extra points to mark on the figure (end of inflation, pivot points), in the field.
#[derive(Debug, Clone, Default)]
pub struct FigureMarks {
    /// (phi, label)
    pub points: Vec<(f64, String)>,
}

/// The numbers of the figure: V along the plot window against phi and against chi, and the
/// marks placed on both.
#[derive(Debug, Clone, Default)]
pub struct FigureData {
    /// (phi, V) along the window.
    pub vs_phi: Vec<(f64, f64)>,
    /// (chi, V) at the same points.
    pub vs_chi: Vec<(f64, f64)>,
    /// The marks at (phi, chi, V), with their labels.
    pub marks: Vec<(f64, f64, f64, String)>,
}

/// The figure's numbers: 400 points of V across the plot window, in phi and in chi, and
/// `marks` placed on both curves.
pub fn figure_data(
    model: &Model,
    ins: &Inspection,
    marks: &FigureMarks,
    config: &Config,
) -> Result<FigureData, AnalysisError> {
    let iv = &ins.domain.interval;
    let (a, b) = plot_window(model, iv, ins.chi_origin);
    let n = 400;
    let mut ev = model.evaluator();
    let mut map = CanonicalMap::new(model, ins.chi_origin, config);
    let mut data = FigureData {
        vs_phi: Vec::with_capacity(n),
        vs_chi: Vec::with_capacity(n),
        marks: Vec::with_capacity(marks.points.len()),
    };
    let mut prev: Option<(f64, f64)> = None;
    for i in 0..n {
        let phi = a + (b - a) * i as f64 / (n - 1) as f64;
        let chi = match prev {
            None => map.chi(phi)?.value,
            Some((p, c)) => c + map.between(p, phi)?.value,
        };
        prev = Some((phi, chi));
        let v = ev.eval(phi);
        data.vs_phi.push((phi, v));
        data.vs_chi.push((chi, v));
    }
    for (phi, label) in &marks.points {
        let v = ev.eval(*phi);
        let chi = map.chi(*phi)?.value;
        data.marks.push((*phi, chi, v, label.clone()));
    }
    Ok(data)
}

/// The figure: V against phi, and V against chi, with poles, the minimum and `marks`
/// ([`figure_data`] drawn by [`crate::report::inspect::figure`]).
pub fn figure(
    model: &Model,
    ins: &Inspection,
    marks: &FigureMarks,
    config: &Config,
    width_pt: f64,
) -> Result<String, AnalysisError> {
    let data = figure_data(model, ins, marks, config)?;
    Ok(crate::report::inspect::figure(ins, &data, width_pt))
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
