//! `inspect` on a model of several fields, as text for people and as JSON (field values keyed
//! by field name).

use crate::drivers::inspect_multi::{FieldPole, MultiInspection, StartPoint};
use crate::report::numfmt;
use serde_json::{json, Map, Value};
use std::fmt::Write as _;

/// The values of `x` keyed by the field names, in field order.
fn by_field(names: &[String], x: &[f64]) -> Value {
    let mut m = Map::new();
    for (n, v) in names.iter().zip(x) {
        m.insert(n.clone(), json!(v));
    }
    Value::Object(m)
}

/// The start point as a JSON object.
fn start_json(names: &[String], s: &StartPoint) -> Value {
    json!({
        "point": by_field(names, &s.point),
        "velocity": by_field(names, &s.velocity),
        "velocity_from": if s.attractor { "attractor" } else { "given" },
        "v": s.v,
        "eps_h": s.eps_h,
        "metric": s.metric,
        "determinant": s.determinant,
        "ricci_scalar": s.ricci_scalar,
    })
}

/// One pole as a JSON object.
fn pole_json(p: &FieldPole) -> Value {
    json!({
        "field": p.field,
        "at": p.at,
        "order": p.order,
        "residue": p.residue,
        "alpha": p.alpha,
    })
}

/// The inspection as JSON.
pub fn json(ins: &MultiInspection) -> Value {
    let names = &ins.fields;
    let mut metric = Map::new();
    for e in &ins.metric {
        metric.insert(e.key.clone(), json!(e.value));
    }
    let t = &ins.trajectory;
    json!({
        "model": ins.name,
        "fields": names,
        "metric": metric,
        "diagonal": ins.diagonal,
        "start": start_json(names, &ins.start),
        "separable": ins.separable,
        "poles": ins.poles.iter().map(pole_json).collect::<Vec<_>>(),
        "alpha_eff": ins.alpha_eff.alpha,
        "alpha_eff_line": crate::report::multi::alpha_eff_line_json(names, &ins.alpha_eff),
        "trajectory": {
            "n_total": t.n_total,
            "stages": t.stages,
            "max_turn": {
                "turn_rate": t.max_turn.turn_rate,
                "n_before_end": t.max_turn.n_before_end,
                "fields": by_field(names, &t.max_turn.fields),
            },
        },
    })
}

/// `name = value` for each field, comma-separated.
fn point(names: &[String], x: &[f64]) -> String {
    names
        .iter()
        .zip(x)
        .map(|(n, v)| format!("{n} = {}", numfmt::number(*v)))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The start point's lines.
fn start_text(o: &mut String, names: &[String], s: &StartPoint) {
    let _ = writeln!(o, "start: {}", point(names, &s.point));
    let from = if s.attractor { "slow-roll attractor" } else { "given" };
    let _ = writeln!(o, "  dphi/dN ({from}): {}", point(names, &s.velocity));
    let _ = writeln!(o, "  V = {}, eps_H = {}", numfmt::number(s.v), numfmt::number(s.eps_h));
    for (name, row) in names.iter().zip(&s.metric) {
        let _ = writeln!(
            o,
            "  G[{name}] = [{}]",
            row.iter().map(|g| numfmt::number(*g)).collect::<Vec<_>>().join(", ")
        );
    }
    let _ = writeln!(
        o,
        "  det G = {}, scalar curvature R = {}",
        numfmt::number(s.determinant),
        numfmt::number(s.ricci_scalar)
    );
}

/// The poles' lines.
fn poles_text(o: &mut String, ins: &MultiInspection) {
    if ins.separable.is_empty() {
        let _ = writeln!(o, "no diagonal entry depends on its own field alone: no pole analysis");
        return;
    }
    for f in &ins.separable {
        let mut any = false;
        for p in ins.poles.iter().filter(|p| &p.field == f) {
            any = true;
            let alpha = p
                .alpha
                .map_or(String::new(), |a| format!(", alpha = {}", numfmt::number(a)));
            let _ = writeln!(
                o,
                "pole of G[{f}] at {f} = {} (others at the start): order {}, residue {}{alpha}",
                numfmt::number(p.at),
                numfmt::number(p.order),
                numfmt::number(p.residue)
            );
        }
        if !any {
            let _ = writeln!(o, "G[{f}] has no pole along {f} (others at the start)");
        }
    }
}

/// The inspection as text for people.
pub fn text(ins: &MultiInspection) -> String {
    let mut o = String::new();
    let names = &ins.fields;
    let _ = writeln!(o, "{}: {} fields ({})", ins.name, names.len(), names.join(", "));
    let shape = if ins.diagonal { "diagonal" } else { "not diagonal" };
    let _ = writeln!(o, "metric ({shape}):");
    for e in &ins.metric {
        let _ = writeln!(o, "  G[{}] = {}", e.key, e.value);
    }
    start_text(&mut o, names, &ins.start);
    poles_text(&mut o, ins);
    let t = &ins.trajectory;
    let _ = writeln!(
        o,
        "inflation lasts {} e-folds from the start",
        numfmt::number(t.n_total)
    );
    let _ = writeln!(
        o,
        "largest turn eta_perp/H = {} at {} e-folds before the end ({})",
        numfmt::number(t.max_turn.turn_rate),
        numfmt::number(t.max_turn.n_before_end),
        point(names, &t.max_turn.fields)
    );
    for (i, s) in t.stages.iter().enumerate() {
        let _ = writeln!(
            o,
            "stage {}: from {} to {} e-folds before the end ({} e-folds)",
            i + 1,
            numfmt::number(s.from_n_before_end),
            numfmt::number(s.to_n_before_end),
            numfmt::number(s.efolds)
        );
    }
    o
}
