//! A prediction of several fields as JSON, CSV and text. Field values are keyed by field name;
//! the delta-N numbers sit in a `delta_n` object beside the exact ones.

use crate::analysis::multi::predict::{MultiPrediction, MultiReport};
use crate::analysis::multi::trajectory::{MaxTurn, STRAIGHT_TURN};
use crate::report::numfmt;
use serde_json::{json, Map, Value};

/// The values of `x` keyed by the field names, in field order.
fn by_field(names: &[String], x: &[f64]) -> Value {
    let mut m = Map::new();
    for (n, v) in names.iter().zip(x) {
        m.insert(n.clone(), json!(v));
    }
    Value::Object(m)
}

/// One prediction as a JSON object; `a_s` is the observed amplitude that fixes the scale of V.
fn prediction_json(names: &[String], p: &MultiPrediction, a_s: f64) -> Value {
    json!({
        "n_star": p.n_star,
        "fields_star": by_field(names, &p.fields_star),
        "fields_end": by_field(names, &p.fields_end),
        "n_s": p.n_s,
        "r": p.r,
        "alpha_s": p.alpha_s,
        "n_t": p.n_t,
        "p_zeta_unscaled": p.p_zeta,
        "potential_scale": a_s / p.p_zeta,
        "p_iso": p.p_iso,
        "p_cross": p.p_cross,
        "beta_iso": p.beta_iso,
        "f_nl": p.f_nl,
        "eps_h": p.eps_h,
        "turn_rate": p.turn_rate,
        "entropic_mass2": p.entropic_mass2,
        "n_total": p.n_total,
        "delta_n": {
            "n_s": p.n_s_delta_n,
            "r": p.r_delta_n,
            "f_nl": p.f_nl,
            "p_zeta_unscaled": p.p_zeta_delta_n,
        },
    })
}

/// The whole report as JSON: the model's name, the fields, the trajectory (`n_total`,
/// `stages`, `max_turn`) and one object per N_*. P_iso and P_cross are, like P_zeta, those of
/// V as written (`p_zeta_unscaled`); `potential_scale` is the factor on V that gives the
/// observed A_s.
pub fn json(model: &str, rep: &MultiReport, a_s: f64) -> String {
    let names = &rep.fields;
    let max_turn = json!({
        "turn_rate": rep.max_turn.turn_rate,
        "n_before_end": rep.max_turn.n_before_end,
        "fields": by_field(names, &rep.max_turn.fields),
    });
    let v = json!({
        "model": model,
        "method": "exact",
        "fields": names,
        "n_total": rep.n_total,
        "stages": rep.stages,
        "max_turn": max_turn,
        "predictions": rep.predictions.iter().map(|p| prediction_json(names, p, a_s)).collect::<Vec<_>>(),
    });
    format!("{}\n", serde_json::to_string_pretty(&v).expect("serialisable"))
}

/// The CSV columns after the fields at the pivot.
pub const CSV_KEYS: [&str; 12] = [
    "n_s",
    "r",
    "alpha_s",
    "n_t",
    "p_zeta_unscaled",
    "p_iso",
    "beta_iso",
    "f_nl",
    "eps_h",
    "turn_rate",
    "n_s_delta_n",
    "r_delta_n",
];

/// A header and one row per N_*: `n_star`, the fields at the pivot (`FIELD_star`), then
/// [`CSV_KEYS`]; an absent value is an empty cell.
pub fn csv(rep: &MultiReport) -> String {
    let mut cols = vec!["n_star".to_string()];
    cols.extend(rep.fields.iter().map(|f| format!("{f}_star")));
    cols.extend(CSV_KEYS.iter().map(|k| k.to_string()));
    let mut o = cols.join(",") + "\n";
    let cell = |x: Option<f64>| x.map(|v| format!("{v:e}")).unwrap_or_default();
    for p in &rep.predictions {
        let mut row = vec![format!("{}", p.n_star)];
        row.extend(p.fields_star.iter().map(|v| format!("{v:e}")));
        let values = [
            Some(p.n_s),
            Some(p.r),
            Some(p.alpha_s),
            Some(p.n_t),
            Some(p.p_zeta),
            Some(p.p_iso),
            Some(p.beta_iso),
            p.f_nl,
            Some(p.eps_h),
            Some(p.turn_rate),
            p.n_s_delta_n,
            p.r_delta_n,
        ];
        row.extend(values.into_iter().map(cell));
        o.push_str(&(row.join(",") + "\n"));
    }
    o
}

/// The report for people: the trajectory, then one column per N_*.
pub fn text(model: &str, rep: &MultiReport) -> String {
    use std::fmt::Write as _;
    let mut o = String::new();
    let with_delta_n = rep.predictions.iter().any(|p| p.n_s_delta_n.is_some());
    let _ = writeln!(
        o,
        "{model}: {} fields ({}), exact background and Mukhanov–Sasaki modes{}",
        rep.fields.len(),
        rep.fields.join(", "),
        if with_delta_n {
            ", slow-roll delta-N beside"
        } else {
            " (delta-N only for models of at most config::MultiLimits::delta_n_max_fields fields)"
        }
    );
    let _ = writeln!(o, "inflation lasts {} e-folds", numfmt::number(rep.n_total));
    let _ = writeln!(o, "{}", largest_turn(&rep.max_turn, None));
    for (i, s) in rep.stages.iter().enumerate() {
        let _ = writeln!(
            o,
            "stage {}: from {} to {} e-folds before the end ({} e-folds)",
            i + 1,
            numfmt::number(s.from_n_before_end),
            numfmt::number(s.to_n_before_end),
            numfmt::number(s.efolds)
        );
    }
    o.push_str(&table(rep));
    o
}

/// The rows of the text report: a label and one value per N_*.
fn table(rep: &MultiReport) -> String {
    let ps = &rep.predictions;
    let mut rows: Vec<(String, Vec<Option<f64>>)> = vec![("N_*".into(), ps.iter().map(|p| Some(p.n_star)).collect())];
    for (a, f) in rep.fields.iter().enumerate() {
        rows.push((format!("{f}_*"), ps.iter().map(|p| Some(p.fields_star[a])).collect()));
    }
    let col =
        |label: &str, g: &dyn Fn(&MultiPrediction) -> Option<f64>| (label.to_string(), ps.iter().map(g).collect());
    rows.extend([
        col("n_s", &|p| Some(p.n_s)),
        col("r", &|p| Some(p.r)),
        col("alpha_s", &|p| Some(p.alpha_s)),
        col("n_t", &|p| Some(p.n_t)),
        col("P_iso / P_zeta", &|p| Some(p.p_iso / p.p_zeta)),
        col("f_NL (delta-N)", &|p| p.f_nl),
        col("n_s (delta-N)", &|p| p.n_s_delta_n),
        col("r (delta-N)", &|p| p.r_delta_n),
        col("eta_perp/H", &|p| Some(p.turn_rate)),
    ]);
    let width = rows.iter().map(|(l, _)| l.len()).max().unwrap_or(0);
    let cells: Vec<Vec<String>> = rows
        .iter()
        .map(|(_, values)| {
            let finite: Vec<f64> = values.iter().map(|v| v.unwrap_or(f64::NAN)).collect();
            let cells = numfmt::row(&finite, numfmt::DEFAULT_DIGITS);
            values
                .iter()
                .zip(cells)
                .map(|(v, c)| if v.is_some() { c } else { "-".to_string() })
                .collect()
        })
        .collect();
    let cw = cells.iter().flatten().map(String::len).max().unwrap_or(0);
    let mut o = String::new();
    for ((label, _), row) in rows.iter().zip(&cells) {
        let line: Vec<String> = row.iter().map(|c| format!("{c:>cw$}")).collect();
        o.push_str(&format!("  {label:<width$}  {}\n", line.join("  ")));
    }
    o
}

/// The line on the largest turn: where it is and how large, or that the trajectory runs
/// straight where the largest eta_perp/H is below [`STRAIGHT_TURN`] (rounding: a trajectory
/// on a line of symmetry turns by some 1e-16, at no meaningful place). With the field names,
/// the point is given too.
pub fn largest_turn(t: &MaxTurn, names: Option<&[String]>) -> String {
    if t.turn_rate < STRAIGHT_TURN {
        return format!(
            "the trajectory runs straight: eta_perp/H stays below {} everywhere",
            numfmt::number(STRAIGHT_TURN)
        );
    }
    let at = names.map_or_else(String::new, |names| {
        let point: Vec<String> = names
            .iter()
            .zip(&t.fields)
            .map(|(n, v)| format!("{n} = {}", numfmt::number(*v)))
            .collect();
        format!(" ({})", point.join(", "))
    });
    format!(
        "largest turn eta_perp/H = {} at {} e-folds before the end{at}",
        numfmt::number(t.turn_rate),
        numfmt::number(t.n_before_end)
    )
}
