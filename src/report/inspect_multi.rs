//! `inspect` on a model of several fields, as text for people and as JSON (field values keyed
//! by field name).

use crate::drivers::inspect_multi::{FieldPole, MultiInspection, StartPoint};
use crate::drivers::plane::PlaneFigure;
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
    let _ = writeln!(o, "{}", crate::report::multi::largest_turn(&t.max_turn, Some(names)));
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

/// Pivots closer than this fraction of the window (in both directions) share one label.
const PIVOT_MERGE: f64 = 0.025;

/// The pivots' dots and labels: each labelled by its N_*, those that (nearly) coincide on the
/// plane by one label listing their N_*, on the first of them.
fn pivot_labels(f: &PlaneFigure) -> Vec<((f64, f64), String)> {
    let span = |v: &[f64]| (v[v.len() - 1] - v[0]).abs().max(1e-300);
    let (wx, wy) = (span(&f.grid.xs), span(&f.grid.ys));
    let near =
        |p: (f64, f64), q: (f64, f64)| (p.0 - q.0).abs() < PIVOT_MERGE * wx && (p.1 - q.1).abs() < PIVOT_MERGE * wy;
    let mut out: Vec<((f64, f64), String)> = Vec::new();
    let mut groups: Vec<((f64, f64), Vec<f64>)> = Vec::new();
    for &(n, at) in &f.pivots {
        match groups.iter_mut().find(|(p, _)| near(*p, at)) {
            Some(g) => {
                g.1.push(n);
                out.push((at, String::new()));
            }
            None => groups.push((at, vec![n])),
        }
    }
    for (at, ns) in groups {
        let list: Vec<String> = ns.iter().map(|n| numfmt::typed(*n)).collect();
        out.push((at, list.join(", ")));
    }
    out
}

/// Contour levels of V in the plane figure.
const PLANE_LEVELS: usize = 14;
/// V spanning more than this ratio (all positive) is contoured and coloured in its logarithm.
const LOG_SPAN: f64 = 100.0;

/// The figure of V over a plane of two fields: contour lines coloured by V (colour bar, in
/// the logarithm where V spans decades), the trajectory projected on the plane, its start, the
/// end of inflation and each pivot marked.
pub fn figure(f: &PlaneFigure, width_pt: f64) -> String {
    use crate::report::contour::levels;
    use crate::report::plot::{self, ColorBar, Marker, Panel, Series, Shape};
    let finite: Vec<f64> = f.grid.z.iter().copied().filter(|v| v.is_finite()).collect();
    let lo = finite.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = finite.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let log = lo > 0.0 && hi / lo > LOG_SPAN;
    let frac = |v: f64| {
        if log {
            (v.ln() - lo.ln()) / (hi.ln() - lo.ln())
        } else {
            (v - lo) / (hi - lo)
        }
    };
    let mut shapes = Vec::new();
    for level in levels(lo, hi, PLANE_LEVELS, log) {
        let color = plot::sequential(frac(level));
        for line in f.grid.lines(level) {
            shapes.push(Shape {
                points: line,
                color: color.clone(),
                width: 1.1,
            });
        }
    }
    let marker = |(x, y): (f64, f64), label: String, color: &str| Marker {
        x,
        y,
        label,
        color: color.into(),
    };
    let mut markers = vec![
        marker(f.start, "start".into(), "#303030"),
        marker(f.end, "end of inflation".into(), "#b03030"),
    ];
    for (at, label) in pivot_labels(f) {
        markers.push(marker(at, label, "#8a4a00"));
    }
    let held: Vec<String> = f
        .held
        .iter()
        .map(|(n, v)| format!("{} = {}", plot::symbol(n), plot::plain(&numfmt::number(*v))))
        .collect();
    let [a, b] = &f.axes;
    let title = if held.is_empty() {
        format!("$V$({}, {}); pivots by $N$_*", plot::symbol(a), plot::symbol(b))
    } else if held.len() <= 2 {
        format!("$V$ at {} (start); pivots by $N$_*", held.join(", "))
    } else {
        // Many held fields would run past the figure's edges: name them by count.
        format!("$V$, {} other fields at the start; pivots by $N$_*", held.len())
    };
    let panel = Panel {
        title,
        x_label: plot::symbol(a),
        y_label: plot::symbol(b),
        series: vec![Series {
            name: "trajectory".into(),
            points: f.path.clone(),
            color: "black".into(),
            dashed: false,
        }],
        markers,
        shapes,
        colorbar: Some(ColorBar {
            label: "$V$ [$M$_p^4]".into(),
            lo,
            hi,
            log,
            colors: (0..=8).map(|i| plot::sequential(i as f64 / 8.0)).collect(),
        }),
        ..Panel::default()
    };
    plot::render(&f.name, &[panel], width_pt)
}
