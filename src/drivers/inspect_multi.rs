//! `efold inspect` on a model of several fields: the metric as written, the geometry and the
//! potential at the start point, the pole of each diagonal entry that depends on its own field
//! alone (the single-field pole analysis along that field, the others held at the start), and
//! the trajectory of the multi-field background from the start (no modes, no delta-N).

use crate::analysis::error::{AnalysisError, ErrorKind};
use crate::analysis::multi::alpha_eff::{alpha_eff, AlphaEff};
use crate::analysis::multi::background::{eps_h, run, start_state, Flow};
use crate::analysis::multi::space::ModelFieldSpace;
use crate::analysis::multi::trajectory::{max_turn, profile, stages, MaxTurn, Stage};
use crate::analysis::multi::{FieldSpace, Local};
use crate::analysis::single::domain::{find_domain, EndKind};
use crate::analysis::single::pole::analyse_pole;
use crate::config::{Config, Limits, MultiLimits};
use crate::language::syntax::parse;
use crate::model::{Model, ModelError, ModelSpec, ParamSpec, Text};
use serde::Serialize;

/// One entry of the `[metric]` table as written.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MetricText {
    /// The key: one field's name (G_aa) or two separated by a space (G_ab).
    pub key: String,
    /// The expression.
    pub value: String,
}

/// The model at its start point.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StartPoint {
    /// The fields, in field order.
    pub point: Vec<f64>,
    /// dphi^a/dN used: the `[start.velocity]` given, or the slow-roll attractor's.
    pub velocity: Vec<f64>,
    /// True when the velocity is the slow-roll attractor's (none was given).
    pub attractor: bool,
    /// V.
    pub v: f64,
    /// eps_H = G_ab pi^a pi^b / 2.
    pub eps_h: f64,
    /// G_ab, row by row.
    pub metric: Vec<Vec<f64>>,
    /// det G.
    pub determinant: f64,
    /// The scalar curvature R = G^bd R^a_bad.
    pub ricci_scalar: f64,
}

/// A pole of one diagonal entry G_aa along its own field, the other fields at the start.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FieldPole {
    /// The field.
    pub field: String,
    /// Where the pole is (value of that field).
    pub at: f64,
    /// The order p of G_aa ~ a_p / rho^p.
    pub order: f64,
    /// The residue a_p.
    pub residue: f64,
    /// For p = 2, alpha = 2 a_p / 3 (G_aa = 3 alpha / (2 rho^2) near the pole).
    pub alpha: Option<f64>,
}

/// The trajectory of the background from the start to the end of inflation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TrajectorySummary {
    /// e-folds from the start to the end of inflation (eps_H = 1).
    pub n_total: f64,
    /// The stretches along one direction.
    pub stages: Vec<Stage>,
    /// The largest turn.
    pub max_turn: MaxTurn,
}

/// Everything `inspect` reports on a model of several fields.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MultiInspection {
    /// The model's name.
    pub name: String,
    /// The field names, in order.
    pub fields: Vec<String>,
    /// The `[metric]` entries as written.
    pub metric: Vec<MetricText>,
    /// True when no off-diagonal entry is written.
    pub diagonal: bool,
    /// The start point.
    pub start: StartPoint,
    /// Fields whose diagonal entry names no other field: checked symbolically, on the parsed
    /// expression's names.
    pub separable: Vec<String>,
    /// The poles of those fields' diagonal entries.
    pub poles: Vec<FieldPole>,
    /// The background's trajectory.
    pub trajectory: TrajectorySummary,
    /// The effective alpha along the start's direction of motion
    /// ([`crate::analysis::multi::alpha_eff`]).
    pub alpha_eff: AlphaEff,
}

/// An error of `inspect` on several fields.
#[derive(Debug)]
pub enum MultiInspectError {
    /// An analysis failed.
    Analysis(AnalysisError),
    /// The one-field model along a field did not build.
    Model(ModelError),
}

impl From<AnalysisError> for MultiInspectError {
    fn from(e: AnalysisError) -> Self {
        MultiInspectError::Analysis(e)
    }
}

impl From<ModelError> for MultiInspectError {
    fn from(e: ModelError) -> Self {
        MultiInspectError::Model(e)
    }
}

/// The scalar curvature R = G^bd R^a_bad of the Riemann tensor in `at`.
pub fn ricci_scalar(at: &Local) -> f64 {
    let n = at.n();
    let mut r = 0.0;
    for a in 0..n {
        for b in 0..n {
            for d in 0..n {
                r += at.g_inv[(b, d)] * at.riemann(a, b, a, d);
            }
        }
    }
    r
}

/// Inspects a model of several fields (`None` for a model of one field).
pub fn inspect_multi(model: &Model, config: &Config) -> Option<Result<MultiInspection, MultiInspectError>> {
    let mut space = ModelFieldSpace::new(model)?;
    Some(inspect_space(model, &mut space, config))
}

/// [`inspect_multi`] on the model's field space.
fn inspect_space(
    model: &Model,
    space: &mut ModelFieldSpace<'_>,
    config: &Config,
) -> Result<MultiInspection, MultiInspectError> {
    let fields = space.field_names();
    let (phi, velocity) = space.start()?;
    let mut at = Local::zeros(fields.len());
    space.local(&phi, &mut at)?;
    let n = fields.len();
    let start = StartPoint {
        point: phi.clone(),
        attractor: model.start_velocity().is_none(),
        v: at.v,
        eps_h: eps_h(&at, &velocity),
        metric: (0..n).map(|a| (0..n).map(|b| at.g[(a, b)]).collect()).collect(),
        determinant: at.g.determinant(),
        ricci_scalar: ricci_scalar(&at),
        velocity,
    };
    check_finite(&fields, &start)?;
    let metric: Vec<MetricText> = model
        .spec
        .metric
        .iter()
        .map(|e| MetricText {
            key: e.key.text.trim().to_string(),
            value: e.value.text.clone(),
        })
        .collect();
    let diagonal = metric.iter().all(|e| !e.key.contains(char::is_whitespace));
    let separable: Vec<String> = fields
        .iter()
        .filter(|f| diagonal_entry(model, f).is_some_and(|e| names_only(e, f, &fields, &config.limits)))
        .cloned()
        .collect();
    let mut poles = Vec::new();
    for f in &separable {
        poles.extend(poles_along(model, f, &phi, config)?);
    }
    let trajectory = trajectory(space, &start, &MultiLimits::default())?;
    let alpha_eff = alpha_eff(model, &start.point, &start.velocity, config);
    Ok(MultiInspection {
        name: model.spec.name.clone(),
        fields,
        metric,
        diagonal,
        start,
        separable,
        poles,
        trajectory,
        alpha_eff,
    })
}

/// An error naming the first number of the start's report that is not finite.
fn check_finite(fields: &[String], s: &StartPoint) -> Result<(), AnalysisError> {
    let named = [
        ("eps_H", s.eps_h),
        ("det G", s.determinant),
        ("the scalar curvature R", s.ricci_scalar),
    ];
    match named.iter().find(|(_, x)| !x.is_finite()) {
        Some((what, value)) => Err(ErrorKind::FieldSpaceNotFinite {
            fields: fields.to_vec(),
            point: s.point.clone(),
            what: what.to_string(),
            value: *value,
        }
        .into()),
        None => Ok(()),
    }
}

/// The `[metric]` entry G_ff.
fn diagonal_entry<'a>(model: &'a Model, f: &str) -> Option<&'a Text> {
    model
        .spec
        .metric
        .iter()
        .find(|e| e.key.text.trim() == f)
        .map(|e| &e.value)
}

/// True when the expression `e` names no field but `f`.
fn names_only(e: &Text, f: &str, fields: &[String], limits: &Limits) -> bool {
    let Ok(expr) = parse(&e.text, limits) else {
        return false;
    };
    expr.names().iter().all(|n| *n == f || !fields.iter().any(|g| g == n))
}

/// The poles of G_ff along the field `f`, the other fields at `phi`: the one-field model with
/// K = G_ff and V restricted, the other fields made parameters with their start values.
fn poles_along(model: &Model, f: &str, phi: &[f64], config: &Config) -> Result<Vec<FieldPole>, MultiInspectError> {
    let Some(entry) = diagonal_entry(model, f) else {
        return Ok(Vec::new());
    };
    let mut params: Vec<ParamSpec> = model.param_pairs().map(|(name, v)| number_param(name, v)).collect();
    for (g, v) in model.field_names().iter().zip(phi) {
        if g != f {
            params.push(number_param(g, *v));
        }
    }
    let spec = ModelSpec {
        name: format!("{} along {f}", model.spec.name),
        field: f.to_string(),
        potential: model.spec.potential.clone(),
        kinetic: entry.clone(),
        params,
        ..ModelSpec::default()
    };
    let one = Model::build(&spec, config)?;
    let mut ev = one.evaluator();
    let iv = find_domain(&one, &mut ev)?.interval;
    let width = iv.hi - iv.lo;
    let mut out = Vec::new();
    for (end, kind, inward) in [(iv.lo, iv.lo_kind, 1.0), (iv.hi, iv.hi_kind, -1.0)] {
        if kind != EndKind::Pole {
            continue;
        }
        // A pole whose order or residue could not be measured is not reported.
        let measured =
            analyse_pole(&mut ev, end, inward, width).filter(|p| p.order.is_finite() && p.residue.is_finite());
        if let Some(p) = measured {
            out.push(FieldPole {
                field: f.to_string(),
                at: p.phi,
                order: p.order,
                residue: p.residue,
                alpha: (p.order == 2.0).then_some(2.0 * p.residue / 3.0),
            });
        }
    }
    Ok(out)
}

/// A parameter set to a number, written exactly (shortest round-trip form).
fn number_param(name: &str, v: f64) -> ParamSpec {
    ParamSpec {
        name: name.to_string(),
        value: Text::inline(name, &format!("{v:?}")),
        scan: None,
    }
}

/// The background from the start and its trajectory's summary.
fn trajectory(
    space: &mut ModelFieldSpace<'_>,
    start: &StartPoint,
    limits: &MultiLimits,
) -> Result<TrajectorySummary, AnalysisError> {
    let mut flow = Flow::new(space);
    let y0 = start_state(&mut flow, &start.point, Some(&start.velocity))?;
    let bg = run(&mut flow, &y0, limits)?;
    let samples = profile(&mut flow, &bg)?;
    Ok(TrajectorySummary {
        n_total: bg.n_end,
        max_turn: max_turn(&mut flow, &bg, &samples, limits)?,
        stages: stages(&mut flow, &bg, &samples, limits)?,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn build(text: &str) -> Model {
        Model::build(&ModelSpec::from_toml(text, "m.toml").unwrap(), &Config::default()).unwrap()
    }

    /// The unit sphere, G = diag(1, sin(theta)^2): R = 2 (handbook value, the 2-sphere of
    /// radius 1 in the convention positive on a sphere).
    #[test]
    fn scalar_curvature_of_the_unit_sphere() {
        let model = build(
            "fields = [\"t\", \"p\"]\npotential = \"1 + t^2\"\n[metric]\nt = 1\np = \"sin(t)^2\"\n[start]\nt = 1\np = 0\n",
        );
        let mut space = ModelFieldSpace::new(&model).unwrap();
        let mut at = Local::zeros(2);
        space.local(&[0.7, 0.3], &mut at).unwrap();
        assert!((ricci_scalar(&at) - 2.0).abs() < 1e-12, "{}", ricci_scalar(&at));
    }

    /// An entry naming another field is not along its own field alone; parameters do not count.
    #[test]
    fn entries_naming_other_fields() {
        let fields = ["x".to_string(), "y".to_string()];
        let limits = Limits::default();
        let e = |s: &str| Text::inline("m", s);
        assert!(names_only(&e("1/(1 - x^2/(6*a))^2"), "x", &fields, &limits));
        assert!(!names_only(&e("exp(2*y) + x"), "x", &fields, &limits));
        assert!(names_only(&e("1"), "y", &fields, &limits));
    }
}
