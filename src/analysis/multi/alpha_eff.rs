//! The effective alpha along the direction the trajectory takes at a point.
//!
//! Definition: u is the unit velocity dphi^a/dN at the point phi_* (field coordinates,
//! G_ab u^a u^b = 1). On the straight line phi(t) = phi_* + t u the kinetic function along
//! the line is K_u(t) = G_ab(phi(t)) u^a u^b, and V_u(t) = V(phi(t)): a model of one field t.
//! The one-field domain survey and pole analysis ([`crate::analysis::single::domain`],
//! [`crate::analysis::single::pole`]) run on (V_u, K_u), towards decreasing t (behind: where
//! the field comes from) and increasing t (ahead). A pole of order 2, K_u ~ a_2/rho^2, has
//! alpha = 2 a_2 / 3 (K = 3 alpha / (2 rho^2) near the pole, the one-field convention of
//! `inspect`). The residue of an order-2 pole does not change when t is rescaled
//! (t -> c t multiplies K_u by 1/c^2 and rho^2 by c^2), so the normalisation of u does not
//! matter.
//!
//! alpha_eff is the alpha of the order-2 pole behind the point, or failing that, of the one
//! ahead; it is absent, with a reason, where the line meets no pole of order 2 within the
//! domain. Where the line meets several poles of the fields' own metrics at once (a line
//! along the diagonal of equal pole fields), their residues add: alpha_eff is the sum of
//! their alphas.
//!
//! Accuracy: that of [`crate::analysis::single::pole::analyse_pole`] (extrapolation of the
//! local order and residue to the pole; its `residue_uncertainty` is reported).

use super::space::ModelFieldSpace;
use super::{FieldSpace, Local};
use crate::analysis::single::domain::{find_domain, EndKind, Interval};
use crate::analysis::single::pole::analyse_pole;
use crate::config::Config;
use crate::language::syntax::{parse, Expr, ExprKind};
use crate::model::{Model, ModelSpec, ParamSpec, Text};
use serde::Serialize;

/// What the line meets at one end of its domain.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LineEnd {
    /// The end's parameter t (field distance from the point, measured at the point); infinite
    /// for an unbounded end.
    #[serde(serialize_with = "crate::analysis::single::domain::ser_f64")]
    pub t: f64,
    /// What the end is (`kind`).
    #[serde(flatten)]
    pub kind: EndKind,
    /// The fields there, where finite.
    pub point: Option<Vec<f64>>,
    /// The order p of K_u ~ a_p / rho^p, for a pole.
    pub order: Option<f64>,
    /// The residue a_p, for a pole.
    pub residue: Option<f64>,
    /// Its relative uncertainty.
    pub residue_uncertainty: Option<f64>,
    /// alpha = 2 a_2 / 3 for a pole of order 2.
    pub alpha: Option<f64>,
}

/// The effective alpha at a point (module docs).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AlphaEff {
    /// alpha_eff, where an order-2 pole is met.
    pub alpha: Option<f64>,
    /// Why there is none, when there is none.
    pub reason: Option<String>,
    /// The unit direction u (field coordinates).
    pub direction: Vec<f64>,
    /// The end towards decreasing t.
    pub behind: Option<LineEnd>,
    /// The end towards increasing t.
    pub ahead: Option<LineEnd>,
}

impl AlphaEff {
    fn none(reason: impl Into<String>, direction: Vec<f64>) -> AlphaEff {
        AlphaEff {
            alpha: None,
            reason: Some(reason.into()),
            direction,
            behind: None,
            ahead: None,
        }
    }
}

/// The effective alpha of `model` at `phi` along the velocity `velocity` (module docs).
pub fn alpha_eff(model: &Model, phi: &[f64], velocity: &[f64], config: &Config) -> AlphaEff {
    let Some(mut space) = ModelFieldSpace::new(model) else {
        return AlphaEff::none("the model has one field", Vec::new());
    };
    let mut at = Local::zeros(phi.len());
    if let Err(e) = space.local(phi, &mut at) {
        return AlphaEff::none(format!("the geometry at the point is not defined: {e}"), Vec::new());
    }
    let n = phi.len();
    let norm2: f64 = (0..n)
        .flat_map(|a| (0..n).map(move |b| (a, b)))
        .map(|(a, b)| at.g[(a, b)] * velocity[a] * velocity[b])
        .sum();
    if !(norm2 > 0.0 && norm2.is_finite()) {
        return AlphaEff::none(
            "the velocity is zero: there is no direction of motion",
            velocity.to_vec(),
        );
    }
    let u: Vec<f64> = velocity.iter().map(|v| v / norm2.sqrt()).collect();
    let one = match line_model(model, phi, &u, config) {
        Ok(m) => m,
        Err(why) => return AlphaEff::none(why, u),
    };
    let mut ev = one.evaluator();
    let domain = match find_domain(&one, &mut ev) {
        Ok(d) => d,
        Err(e) => return AlphaEff::none(format!("the line has no domain: {e}"), u),
    };
    let Some(iv) = std::iter::once(domain.interval)
        .chain(domain.others)
        .find(|iv| iv.contains(0.0))
    else {
        return AlphaEff::none("the point lies on an end of the line's domain", u);
    };
    let behind = line_end(&mut ev, &iv, true, phi, &u);
    let ahead = line_end(&mut ev, &iv, false, phi, &u);
    let alpha = behind.alpha.or(ahead.alpha);
    let reason = alpha.is_none().then(|| {
        format!(
            "the line along the motion meets no pole of order 2 of the kinetic function (behind: {}; ahead: {})",
            end_words(&behind),
            end_words(&ahead)
        )
    });
    AlphaEff {
        alpha,
        reason,
        direction: u,
        behind: Some(behind),
        ahead: Some(ahead),
    }
}

/// One end of the interval, analysed as a pole of K_u where it is one.
fn line_end(
    ev: &mut crate::language::tape::Evaluator<'_>,
    iv: &Interval,
    lower: bool,
    phi: &[f64],
    u: &[f64],
) -> LineEnd {
    let (t, kind, inward) = if lower {
        (iv.lo, iv.lo_kind, 1.0)
    } else {
        (iv.hi, iv.hi_kind, -1.0)
    };
    let point = t
        .is_finite()
        .then(|| phi.iter().zip(u).map(|(p, d)| p + t * d).collect());
    let mut end = LineEnd {
        t,
        kind,
        point,
        order: None,
        residue: None,
        residue_uncertainty: None,
        alpha: None,
    };
    if kind == EndKind::Pole {
        let pole = analyse_pole(ev, t, inward, iv.hi - iv.lo).filter(|p| p.order.is_finite() && p.residue.is_finite());
        if let Some(p) = pole {
            end.order = Some(p.order);
            end.residue = Some(p.residue);
            end.residue_uncertainty = Some(p.residue_uncertainty);
            end.alpha = (p.order == 2.0).then_some(2.0 * p.residue / 3.0);
        }
    }
    end
}

/// An end in words, for the reason of an absent alpha_eff.
fn end_words(e: &LineEnd) -> String {
    match (e.kind, e.order) {
        (EndKind::Pole, Some(p)) => format!("a pole of order {}", crate::report::numfmt::number(p)),
        (kind, _) => kind.words().to_string(),
    }
}

/// The one-field model of the line phi_* + t u: V and K_u as expressions of t.
fn line_model(model: &Model, phi: &[f64], u: &[f64], config: &Config) -> Result<Model, String> {
    let fields = model.field_names();
    let used = |name: &str| fields.iter().any(|f| f == name) || model.param_pairs().any(|(p, _)| p == name);
    let t = ["t", "t_line", "t_along_the_line"]
        .into_iter()
        .find(|n| !used(n))
        .ok_or("every name for the line's parameter is taken")?;
    let sub = |text: &str| substitute(text, fields, phi, u, t, config);
    let mut terms = Vec::new();
    for e in &model.spec.metric {
        let names: Vec<&str> = e.key.text.split_whitespace().collect();
        let index = |n: &str| fields.iter().position(|f| f == n);
        let (a, b) = match names[..] {
            [x] => (index(x), index(x)),
            [x, y] => (index(x), index(y)),
            _ => (None, None),
        };
        let (Some(a), Some(b)) = (a, b) else {
            return Err(format!("the metric key `{}` names no component", e.key.text));
        };
        let c = if a == b { u[a] * u[a] } else { 2.0 * u[a] * u[b] };
        if c != 0.0 {
            terms.push(format!("({c:?})*({})", sub(&e.value.text)?));
        }
    }
    let mut params: Vec<ParamSpec> = model
        .param_pairs()
        .map(|(name, v)| ParamSpec {
            name: name.to_string(),
            value: Text::inline(name, &format!("{v:?}")),
            scan: None,
        })
        .collect();
    params.retain(|p| p.name != t);
    let spec = ModelSpec {
        name: format!("{} along the motion", model.spec.name),
        field: t.to_string(),
        potential: Text::inline("V along the line", &sub(&model.spec.potential.text)?),
        kinetic: Text::inline("K along the line", &terms.join(" + ")),
        params,
        ..ModelSpec::default()
    };
    Model::build(&spec, config).map_err(|e| format!("the line's one-field model did not build: {e}"))
}

/// `text` with every field name replaced by `(phi_a + (u_a)*t)`.
fn substitute(
    text: &str,
    fields: &[String],
    phi: &[f64],
    u: &[f64],
    t: &str,
    config: &Config,
) -> Result<String, String> {
    let expr = parse(text, &config.limits).map_err(|e| format!("`{text}` does not parse: {e}"))?;
    let mut spans = Vec::new();
    field_spans(&expr, fields, &mut spans);
    spans.sort_by_key(|s| std::cmp::Reverse(s.0));
    let mut out = text.to_string();
    for (start, end, a) in spans {
        if text.get(start..end) != Some(fields[a].as_str()) {
            return Err(format!(
                "the name `{}` in `{text}` is not where its span says",
                fields[a]
            ));
        }
        out.replace_range(start..end, &format!("({:?} + ({:?})*{t})", phi[a], u[a]));
    }
    Ok(out)
}

/// The spans (start, end, field index) of the names of fields in `e`.
fn field_spans(e: &Expr, fields: &[String], out: &mut Vec<(usize, usize, usize)>) {
    match &e.kind {
        ExprKind::Ident(n) => {
            if let Some(a) = fields.iter().position(|f| f == n) {
                // the span may take in the blanks after the name
                out.push((e.span.start, e.span.start + n.len(), a));
            }
        }
        ExprKind::Neg(a) => field_spans(a, fields, out),
        ExprKind::Binary(_, a, b) => {
            field_spans(a, fields, out);
            field_spans(b, fields, out);
        }
        ExprKind::Call { args, .. } => args.iter().for_each(|a| field_spans(a, fields, out)),
        ExprKind::Number(_) => {}
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The substitution keeps everything but the fields' names, including names that contain
    /// a field's name.
    #[test]
    fn substitution_replaces_whole_names_only() {
        let fields = vec!["x".to_string(), "y".to_string()];
        let s = substitute(
            "x^2 + xy*y - exp(x)",
            &fields,
            &[1.0, -2.0],
            &[0.5, 0.25],
            "t",
            &Config::default(),
        )
        .unwrap();
        assert_eq!(s, "(1.0 + (0.5)*t)^2 + xy*(-2.0 + (0.25)*t) - exp((1.0 + (0.5)*t))");
    }

    /// K = 1/(1 - x^2/(6a))^2 on one axis, the other field flat: along x the line meets the
    /// pole at x = sqrt(6a) with alpha = a (K = 6a/(4 rho^2) = (3a/2)/rho^2 there, own
    /// derivation); along y it meets none.
    #[test]
    fn one_pole_axis() {
        let text = "fields = [\"x\", \"y\"]\npotential = \"x^2 + y^2\"\n[params]\na = 0.25\n\
                    [metric]\nx = \"1/(1 - x^2/(6*a))^2\"\ny = 1\n[start]\nx = 0.5\ny = 1\n";
        let model = Model::build(&ModelSpec::from_toml(text, "m.toml").unwrap(), &Config::default()).unwrap();
        let along_x = alpha_eff(&model, &[0.5, 1.0], &[-1.0, 0.0], &Config::default());
        let alpha = along_x.alpha.unwrap();
        assert!((alpha - 0.25).abs() < 1e-9, "{along_x:?}");
        let along_y = alpha_eff(&model, &[0.5, 1.0], &[0.0, -1.0], &Config::default());
        assert!(along_y.alpha.is_none(), "{along_y:?}");
        assert!(along_y.reason.unwrap().contains("no pole of order 2"));
    }
}
