//! A `predict` report as a human table and as CSV (the JSON is the report serialized).

use crate::analysis::perturbations::ExactExtras;
use crate::drivers::predict::{Method, NStarFrom, Prediction, Report};
use crate::report::numfmt::{self, number};
use std::fmt::Write as _;

/// The human table: one column per N_*, with units.
pub fn text(rep: &Report) -> String {
    let mut o = header(rep);
    let rows = rows(rep);
    o.push_str(&table(&rows, rep.predictions.len()));
    if let Some(q) = rep.predictions.iter().find_map(|x| x.pole_only) {
        let _ = writeln!(
            o,
            "\npole alone: leading order in 1/N from the pole of order {} with residue {} at the top of the branch, where V = V_p (1 - c rho^m) with m = {}",
            number(q.order),
            number(q.residue),
            number(q.flatness)
        );
    }
    for w in &rep.warnings {
        let _ = writeln!(o, "warning: {w}");
    }
    o
}

/// The lines above the table: model, branches, method, data and units.
fn header(rep: &Report) -> String {
    let mut o = String::new();
    let m = &rep.model;
    let f = &m.field;
    let params = crate::report::params_text(m);
    let _ = writeln!(
        o,
        "model    {}{}",
        if m.name.is_empty() { "(unnamed)" } else { &m.name },
        if params.is_empty() {
            String::new()
        } else {
            format!("   ({})", params.join(", "))
        }
    );
    let b = &rep.branch;
    let _ = writeln!(
        o,
        "branch   {} of {}: {f} rolls from {} to {}",
        b.index,
        b.count,
        number(b.branch.top),
        number(b.branch.bottom)
    );
    for ob in &rep.other_branches {
        let _ = writeln!(
            o,
            "         other: {} of {}, {f} from {} to {} (choose with --branch {})",
            ob.index,
            ob.count,
            number(ob.branch.top),
            number(ob.branch.bottom),
            ob.index
        );
    }
    let method = match rep.method {
        Method::Exact => "exact background and Mukhanov-Sasaki spectra (N_* from eps_H = 1)".to_string(),
        Method::SlowRoll => format!("slow roll, {} order", if rep.order == 2 { "second" } else { "first" }),
    };
    let _ = writeln!(o, "method   {method}; N_* {}", rep.n_star_from);
    let _ = writeln!(o, "data     {} [{}]", rep.data.name, rep.data.source);
    let _ = writeln!(o, "units    reduced Planck units (M_p = 1) unless marked GeV\n");
    o
}

/// One labelled row of the table: a cell per N_*.
type Row = (String, Vec<String>);

/// Every row of the table, each one style across its N_* columns (numfmt's rule).
fn rows(rep: &Report) -> Vec<Row> {
    let f = &rep.model.field;
    let p = &rep.predictions;
    let d = numfmt::DEFAULT_DIGITS;
    let mut rows: Vec<Row> = Vec::new();
    let mut row = |label: &str, vals: Vec<String>| rows.push((label.to_string(), vals));
    let num = |g: &dyn Fn(&Prediction) -> f64| numfmt::row(&p.iter().map(g).collect::<Vec<_>>(), d);
    let opt = |g: &dyn Fn(&Prediction) -> Option<f64>| numfmt::row_opt(&p.iter().map(g).collect::<Vec<_>>(), d);
    let col = |g: &dyn Fn(&Prediction) -> String| p.iter().map(g).collect::<Vec<_>>();
    if rep.n_star_from == NStarFrom::Given {
        row("N_*", col(&|x| numfmt::typed(x.n_star)));
    } else {
        row("N_*", num(&|x| x.n_star));
    }
    row(&format!("{f}_*"), num(&|x| x.phi_star));
    row(&format!("{f}_end"), num(&|x| x.phi_end));
    row("n_s", num(&|x| x.n_s));
    row("r", num(&|x| x.r));
    row("alpha_s", num(&|x| x.alpha_s));
    row("n_t", num(&|x| x.n_t));
    row("eps_V", num(&|x| x.eps_v));
    row("eta_V", num(&|x| x.eta_v));
    row("xi2_V", num(&|x| x.xi2_v));
    row("delta chi", num(&|x| x.delta_chi));
    row(&format!("delta {f}"), num(&|x| x.delta_phi));
    row("N_* sqrt(r/8)", num(&|x| x.lyth_bound));
    row("scale on V", num(&|x| x.potential_scale));
    row("V_*^1/4 [GeV]", num(&|x| x.v_star_quarter_gev));
    row("H_* [GeV]", num(&|x| x.h_star_gev));
    row("H_*/2pi [GeV]", num(&|x| x.t_ds_gev));
    row("V_end^1/4 [GeV]", num(&|x| x.v_end_quarter_gev));
    // A pull is read to an absolute 0.01 sigma, not to significant digits.
    row("n_s pull [sigma]", col(&|x| numfmt::signed_fixed(x.n_s_pull, 2)));
    row("r limit", col(&|x| format!("< {}", numfmt::typed(x.r_limit))));
    row("verdict", col(&|x| x.verdict.to_string()));
    if p.iter().any(|x| x.pole_only.is_some()) {
        row("pole alone: n_s", opt(&|x| x.pole_only.map(|q| q.n_s)));
        row("pole alone: r", opt(&|x| x.pole_only.map(|q| q.r)));
    }
    if p.iter().any(|x| x.exact.is_some()) {
        rows.extend(exact_rows(rep));
    }
    if p.iter().any(|x| x.reheating.is_some()) {
        rows.push(("N_reh".into(), opt(&|x| x.reheating.map(|m| m.n_reh))));
        rows.push(("T_reh [GeV]".into(), opt(&|x| x.reheating.map(|m| m.t_reh_gev))));
    }
    rows
}

/// The rows the exact route adds: the slow-roll values beside it, the Hubble-flow parameters
/// and the freeze check.
fn exact_rows(rep: &Report) -> Vec<Row> {
    let f = &rep.model.field;
    let p = &rep.predictions;
    let d = numfmt::DEFAULT_DIGITS;
    let ex = |g: &dyn Fn(&ExactExtras) -> f64| {
        numfmt::row_opt(&p.iter().map(|x| x.exact.as_ref().map(g)).collect::<Vec<_>>(), d)
    };
    vec![
        ("slow roll: n_s".into(), ex(&|e| e.n_s_slow_roll)),
        ("slow roll: r".into(), ex(&|e| e.r_slow_roll)),
        (format!("slow roll: {f}_end"), ex(&|e| e.phi_end_slow_roll)),
        ("eps_1, at exit".into(), ex(&|e| e.eps_1)),
        ("eps_2".into(), ex(&|e| e.eps_2)),
        ("eps_3".into(), ex(&|e| e.eps_3)),
        ("2nd order: n_s".into(), ex(&|e| e.n_s_second_order)),
        ("2nd order: r".into(), ex(&|e| e.r_second_order)),
        // a tolerance-like number: two digits, always scientific
        (
            "freeze drift".into(),
            p.iter()
                .map(|x| {
                    x.exact
                        .as_ref()
                        .map(|e| numfmt::scientific(e.freeze_drift, 2))
                        .unwrap_or_default()
                })
                .collect(),
        ),
    ]
}

/// The rows laid out: labels left-aligned, each N_* column right-aligned to at least 12.
fn table(rows: &[Row], columns: usize) -> String {
    let mut o = String::new();
    let w0 = rows.iter().map(|r| r.0.len()).max().unwrap_or(0);
    let wc: Vec<usize> = (0..columns)
        .map(|j| rows.iter().map(|r| r.1[j].len()).max().unwrap_or(0).max(12))
        .collect();
    for (label, vals) in rows {
        let _ = write!(o, "{label:<w0$}");
        for (j, v) in vals.iter().enumerate() {
            let _ = write!(o, "  {v:>w$}", w = wc[j]);
        }
        let _ = writeln!(o);
    }
    o
}

/// The keys of the CSV output, in order (stable; documented in the README).
pub const CSV_KEYS: [&str; 27] = [
    "n_star",
    "phi_star",
    "phi_end",
    "n_s",
    "r",
    "alpha_s",
    "n_t",
    "eps_v",
    "eta_v",
    "xi2_v",
    "omega3_v",
    "delta_chi",
    "delta_phi",
    "lyth_bound",
    "a_s_unscaled",
    "potential_scale",
    "v_star_quarter_gev",
    "h_star_gev",
    "t_ds_gev",
    "v_end",
    "v_end_quarter_gev",
    "n_s_pull",
    "r_limit",
    "verdict",
    "pole_n_s",
    "pole_r",
    "n_reh",
];

/// The CSV keys that are not fields of [`Prediction`] but come from its nested parts (the
/// last three of [`CSV_KEYS`]), with their values (`None` where they do not apply).
pub fn nested_csv_values(p: &Prediction) -> [(&'static str, Option<f64>); 3] {
    [
        ("pole_n_s", p.pole_only.map(|q| q.n_s)),
        ("pole_r", p.pole_only.map(|q| q.r)),
        ("n_reh", p.reheating.map(|m| m.n_reh)),
    ]
}

/// The values of one prediction in the order of [`CSV_KEYS`].
pub fn csv_values(p: &Prediction) -> Vec<String> {
    let mut v = vec![
        format!("{}", p.n_star),
        format!("{:e}", p.phi_star),
        format!("{:e}", p.phi_end),
        format!("{:e}", p.n_s),
        format!("{:e}", p.r),
        format!("{:e}", p.alpha_s),
        format!("{:e}", p.n_t),
        format!("{:e}", p.eps_v),
        format!("{:e}", p.eta_v),
        format!("{:e}", p.xi2_v),
        format!("{:e}", p.omega3_v),
        format!("{:e}", p.delta_chi),
        format!("{:e}", p.delta_phi),
        format!("{:e}", p.lyth_bound),
        format!("{:e}", p.a_s_unscaled),
        format!("{:e}", p.potential_scale),
        format!("{:e}", p.v_star_quarter_gev),
        format!("{:e}", p.h_star_gev),
        format!("{:e}", p.t_ds_gev),
        format!("{:e}", p.v_end),
        format!("{:e}", p.v_end_quarter_gev),
        format!("{:e}", p.n_s_pull),
        format!("{:e}", p.r_limit),
        p.verdict.to_string(),
    ];
    v.extend(
        nested_csv_values(p)
            .iter()
            .map(|(_, x)| x.map(|x| format!("{x:e}")).unwrap_or_default()),
    );
    v
}

/// One CSV row per N_*, with a header.
pub fn csv(rep: &Report) -> String {
    let mut o = CSV_KEYS.join(",");
    o.push('\n');
    for p in &rep.predictions {
        o.push_str(&csv_values(p).join(","));
        o.push('\n');
    }
    o
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The CSV's keys are the prediction's JSON keys that hold a number or a word, then the
    /// three taken from its nested parts, in that order.
    #[test]
    fn csv_keys_follow_the_prediction() {
        let model = crate::model::Model::build(
            &crate::model::ModelSpec::inline("phi^2", None),
            &crate::config::Config::default(),
        )
        .unwrap();
        let rep = crate::drivers::predict::predict(&model, &Default::default(), &Default::default()).unwrap();
        let p = &rep.predictions[0];
        let serde_json::Value::Object(o) = serde_json::to_value(p).unwrap() else {
            panic!("a prediction serializes to an object")
        };
        let mut keys: Vec<&str> = o
            .iter()
            .filter(|(_, v)| !v.is_object())
            .map(|(k, _)| k.as_str())
            .collect();
        keys.sort_unstable();
        let mut flat: Vec<&str> = CSV_KEYS[..CSV_KEYS.len() - 3].to_vec();
        flat.sort_unstable();
        assert_eq!(keys, flat);
        let nested: Vec<&str> = nested_csv_values(p).iter().map(|(k, _)| *k).collect();
        assert_eq!(nested, CSV_KEYS[CSV_KEYS.len() - 3..]);
        assert_eq!(csv_values(p).len(), CSV_KEYS.len());
    }
}
