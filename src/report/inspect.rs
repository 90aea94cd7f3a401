//! An inspection as aligned text and as a figure (the JSON is the inspection serialized).

use crate::analysis::single::domain::EndKind;
use crate::analysis::single::pole::Pole;
use crate::drivers::inspect::{FigureData, Inspection, Row};
use crate::report::numfmt::{self, number};
use crate::report::params_text;
use crate::report::plot::{self, Marker, Panel, Series, VLine};
use std::fmt::Write as _;

/// How an end of the domain comes about, as a sentence (the field value where it helps).
fn end_sentence(kind: EndKind, field: &str, end: f64) -> String {
    match kind {
        EndKind::VOverflow => format!(
            "V exceeds double precision beyond {field} = {} (effectively unbounded)",
            number(end)
        ),
        EndKind::VNotReal => format!(
            "V is not real beyond {field} = {} (log or sqrt of a negative number?)",
            number(end)
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
    let mut o = model_and_domain(ins);
    let f = &ins.model.field;
    let _ = writeln!(o, "\npoles of K");
    if ins.poles.is_empty() {
        let _ = writeln!(o, "  none at the ends of the domain");
    }
    for p in &ins.poles {
        o.push_str(&pole(p, f));
    }
    let _ = writeln!(o, "\nV(chi) toward each end");
    o.push_str(&asymptotics(ins));
    if let Some(rows) = &ins.table {
        o.push_str(&table(rows, f));
    }
    if !ins.warnings.is_empty() {
        let _ = writeln!(o);
        for w in &ins.warnings {
            let _ = writeln!(o, "warning: {w}");
        }
    }
    o
}

/// The model, its domain, the minimum and the origin of chi, labels in one column.
fn model_and_domain(ins: &Inspection) -> String {
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
        line(&mut o, "parameters", &params_text(m).join(", "));
    }
    let iv = &ins.domain.interval;
    o.push('\n');
    line(
        &mut o,
        "domain",
        &format!("{} < {f} < {}", number(iv.lo), number(iv.hi)),
    );
    let _ = writeln!(o, "  lower end: {}", end_sentence(iv.lo_kind, f, iv.lo));
    let _ = writeln!(o, "  upper end: {}", end_sentence(iv.hi_kind, f, iv.hi));
    match &ins.minimum {
        Some(mn) => line(
            &mut o,
            "minimum",
            &format!("V = {} at {f} = {}", number(mn.v), number(mn.phi)),
        ),
        None => line(&mut o, "minimum", "none inside the domain (V falls toward an end)"),
    }
    line(
        &mut o,
        "chi = 0 at",
        &format!("{f} = {}   (chi = integral of sqrt(K) d{f})", number(ins.chi_origin)),
    );
    o
}

/// One pole of K: where, its order and residue, and the pole-alone prediction.
fn pole(p: &Pole, f: &str) -> String {
    let mut o = String::new();
    let _ = writeln!(
        o,
        "  at {f} = {}: order {}, residue a_p = {} (+- {} rel), canonical distance {}",
        number(p.phi),
        number(p.order),
        number(p.residue),
        numfmt::scientific(p.residue_uncertainty.max(1e-16), 1),
        if p.infinite_distance { "infinite" } else { "finite" }
    );
    match &p.leading_order {
        Some(lo) => {
            let (ns, r) = lo.predict(55.0);
            let (pp, m) = (lo.order, lo.flatness);
            let formula = if pp == 2.0 && m == 1.0 {
                format!("n_s = 1 - 2/N, r = 8 a_2/N^2 = {}/N^2", number(8.0 * p.residue))
            } else if pp == 2.0 && m == 2.0 {
                format!("n_s = 1 - 2/N, r = 2 a_2/N^2 = {}/N^2", number(2.0 * p.residue))
            } else {
                format!(
                    "n_s = 1 - {}/N, r from a_p and c = {} (see docs)",
                    number((2.0 * m + pp - 2.0) / (pp + m - 2.0)),
                    number(lo.slope)
                )
            };
            let _ = writeln!(
                o,
                "    pole alone, leading order (V = V_p (1 - c rho^m) with m = {}): {formula}; at N = 55: n_s = {}, r = {}",
                number(m),
                number(ns),
                number(r)
            );
        }
        None => {
            let why = p.no_leading_order.map_or("", |w| w.words());
            let _ = writeln!(o, "    no leading-order prediction of the pole alone: {why}");
        }
    }
    o
}

/// V(chi) toward each end, one line each, in columns.
fn asymptotics(ins: &Inspection) -> String {
    let f = &ins.model.field;
    let lines: Vec<Vec<String>> = ins
        .asymptotics
        .iter()
        .map(|a| {
            let details: Vec<String> = [
                ("height ", a.height),
                ("M = ", a.scale),
                ("alpha = 2M^2/3 = ", a.alpha),
                ("power ", a.power),
                ("rate ", a.rate),
                ("distance ", a.chi_distance),
            ]
            .iter()
            .filter_map(|(label, x)| x.map(|x| format!("{label}{}", number(x))))
            .collect();
            vec![
                format!("{f} -> {}", number(a.end)),
                a.kind.word().to_string(),
                details.join(", "),
                format!("[{} confidence]", a.confidence),
            ]
        })
        .collect();
    columns(&lines, "  ")
}

/// The (phi, chi, V) table: one style per column, right-aligned, so that decimal points line
/// up.
fn table(rows: &[Row], f: &str) -> String {
    let mut o = String::new();
    let d = numfmt::DEFAULT_DIGITS;
    let cols = [
        (f, numfmt::row(&rows.iter().map(|r| r.phi).collect::<Vec<_>>(), d)),
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
    o
}

/// One curve of V in the figure's colour.
fn curve(points: Vec<(f64, f64)>) -> Vec<Series> {
    vec![Series {
        name: "V".into(),
        points,
        color: "#1f5fa8".into(),
        dashed: false,
    }]
}

/// The figure: V against phi, and V against chi, with poles, the minimum and the marks of
/// `data` ([`crate::drivers::inspect::figure_data`]).
pub fn figure(ins: &Inspection, data: &FigureData, width_pt: f64) -> String {
    let f = &ins.model.field;
    let mut left = Panel {
        title: format!("$V$({})", plot::symbol(f)),
        x_label: plot::symbol(f),
        y_label: "$V$ [$M$_p^4]".into(),
        series: curve(data.vs_phi.clone()),
        ..Panel::default()
    };
    let mut right = Panel {
        title: "$V$($\\chi$), canonical field".into(),
        x_label: "$\\chi$ [$M$_p]".into(),
        y_label: "$V$ [$M$_p^4]".into(),
        series: curve(data.vs_chi.clone()),
        ..Panel::default()
    };
    for p in &ins.poles {
        left.vlines.push(VLine {
            x: p.phi,
            label: format!("pole, $p$ = {}", number(p.order)),
            color: "#b03030".into(),
        });
    }
    let marker = |x: f64, y: f64, label: &str, color: &str| Marker {
        x,
        y,
        label: label.into(),
        color: color.into(),
    };
    if let Some(mn) = &ins.minimum {
        left.markers.push(marker(mn.phi, mn.v, "minimum", "#2a8a2a"));
        right.markers.push(marker(0.0, mn.v, "minimum", "#2a8a2a"));
    }
    for (phi, chi, v, label) in &data.marks {
        left.markers.push(marker(*phi, *v, label, "#8a4a00"));
        right.markers.push(marker(*chi, *v, label, "#8a4a00"));
    }
    let title = if ins.model.name.is_empty() {
        "efold".to_string()
    } else {
        ins.model.name.clone()
    };
    plot::render(&title, &[left, right], width_pt)
}
