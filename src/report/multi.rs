//! A prediction of several fields as JSON, CSV and text. Field values are keyed by field name;
//! the delta-N numbers sit in a `delta_n` object beside the exact ones.

use crate::analysis::multi::alpha_eff::AlphaEff;
use crate::analysis::multi::at_pivot::PivotExtras;
use crate::analysis::multi::delta_n_route::{DeltaNPrediction, DeltaNReport};
use crate::analysis::multi::predict::{MultiPrediction, MultiReport};
use crate::analysis::multi::trajectory::{MaxTurn, Stage, STRAIGHT_TURN};
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
    json_with(model, rep, &[], a_s)
}

/// [`json()`] with the geometry around each pivot (`extras`, one per prediction, or none):
/// `alpha_eff` (null where there is none) and `alpha_eff_line` (the direction, what the line
/// meets behind and ahead, and the reason for an absent alpha_eff).
pub fn json_with(model: &str, rep: &MultiReport, extras: &[PivotExtras], a_s: f64) -> String {
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
        "predictions": rep
            .predictions
            .iter()
            .enumerate()
            .map(|(i, p)| with_extras(names, prediction_json(names, p, a_s), extras.get(i)))
            .collect::<Vec<_>>(),
    });
    format!("{}\n", serde_json::to_string_pretty(&v).expect("serialisable"))
}

/// A prediction's object with the keys of its [`PivotExtras`] added.
fn with_extras(names: &[String], mut p: Value, extras: Option<&PivotExtras>) -> Value {
    let (Some(x), Some(obj)) = (extras, p.as_object_mut()) else {
        return p;
    };
    obj.insert("alpha_eff".into(), json!(x.alpha_eff.alpha));
    obj.insert("alpha_eff_line".into(), alpha_eff_line_json(names, &x.alpha_eff));
    let mut c = serde_json::to_value(x.couplings.couplings).expect("serialisable");
    if let Some(m) = c.as_object_mut() {
        m.insert("tangent".into(), by_field(names, &x.couplings.tangent));
        m.insert("normal".into(), by_field(names, &x.couplings.normal));
    }
    obj.insert("couplings".into(), c);
    p
}

/// The line of an [`AlphaEff`] as JSON: the unit direction by field, what the line meets
/// behind and ahead, and the reason for an absent alpha_eff (null when there is one).
pub fn alpha_eff_line_json(names: &[String], a: &AlphaEff) -> Value {
    json!({
        "direction": by_field(names, &a.direction),
        "behind": a.behind,
        "ahead": a.ahead,
        "reason": a.reason,
    })
}

/// The couplings in the frame of the trajectory, in the order of the text table.
pub const COUPLING_KEYS: [&str; 8] = ["V_T", "V_TT", "V_TN", "V_NN", "V_TTT", "V_TTN", "V_TNN", "V_NNN"];

/// The rows of the geometry around each pivot, and the notes under the table (why an
/// alpha_eff is absent).
fn extras_rows(n_stars: &[f64], extras: &[PivotExtras]) -> (Vec<Row>, String) {
    if extras.is_empty() {
        return (Vec::new(), String::new());
    }
    let mut rows = vec![(
        "alpha_eff".to_string(),
        extras.iter().map(|x| x.alpha_eff.alpha).collect(),
    )];
    let c = |x: &PivotExtras| serde_json::to_value(x.couplings.couplings).expect("serialisable");
    let all: Vec<Value> = extras.iter().map(c).collect();
    for key in COUPLING_KEYS {
        rows.push((format!("{key}/V"), all.iter().map(|v| v[key].as_f64()).collect()));
    }
    let mut notes = String::new();
    for (n, x) in n_stars.iter().zip(extras) {
        if let Some(why) = &x.alpha_eff.reason {
            notes.push_str(&format!("alpha_eff at N_* = {}: none, {why}\n", numfmt::typed(*n)));
        }
    }
    (rows, notes)
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
    text_with(model, rep, &[])
}

/// [`text()`] with the geometry around each pivot: rows after the spectra's, notes below.
pub fn text_with(model: &str, rep: &MultiReport, extras: &[PivotExtras]) -> String {
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
    o.push_str(&trajectory_text(rep.n_total, &rep.max_turn, &rep.stages));
    let n_stars: Vec<f64> = rep.predictions.iter().map(|p| p.n_star).collect();
    let (more, notes) = extras_rows(&n_stars, extras);
    let mut rows = table(rep);
    rows.extend(more);
    o.push_str(&render_rows(&rows));
    o.push_str(&notes);
    o
}

/// The trajectory's lines of a text report: its length, the largest turn, the stages.
fn trajectory_text(n_total: f64, max_turn: &MaxTurn, stages: &[Stage]) -> String {
    use std::fmt::Write as _;
    let mut o = String::new();
    let _ = writeln!(o, "inflation lasts {} e-folds", numfmt::number(n_total));
    let _ = writeln!(o, "{}", largest_turn(max_turn, None));
    for (i, s) in stages.iter().enumerate() {
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

/// A row of a text table: a label and one value per N_* (`None`: not computed, drawn `-`).
type Row = (String, Vec<Option<f64>>);

/// The rows of the text report: a label and one value per N_*.
fn table(rep: &MultiReport) -> Vec<Row> {
    let ps = &rep.predictions;
    let mut rows: Vec<Row> = vec![("N_*".into(), ps.iter().map(|p| Some(p.n_star)).collect())];
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
    rows
}

/// The rows drawn as aligned columns, each row in one style (numfmt's rule).
fn render_rows(rows: &[Row]) -> String {
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

/// The delta-N numbers of one prediction, as the exact route's `delta_n` object has them,
/// with N and its derivatives.
fn delta_n_json(names: &[String], p: &DeltaNPrediction) -> Value {
    let d = &p.delta_n;
    let n_ab: Map<String, Value> = names
        .iter()
        .zip(&d.n_ab)
        .map(|(name, row)| (name.clone(), by_field(names, row)))
        .collect();
    json!({
        "n_s": p.observables.n_s,
        "r": p.observables.r,
        "f_nl": p.observables.f_nl,
        "p_zeta_unscaled": p.observables.p_zeta,
        "n": d.n,
        "n_a": by_field(names, &d.n_a),
        "n_ab": n_ab,
        "error_n_a": d.error_n_a,
        "error_n_ab": d.error_n_ab,
    })
}

/// One delta-N prediction as a JSON object: the keys of the exact route's, those the modes
/// give (`alpha_s`, `n_t`, `p_iso`, `p_cross`, `beta_iso`) null, n_s, r, f_NL and P_zeta those
/// of delta-N.
fn delta_n_prediction_json(names: &[String], p: &DeltaNPrediction, a_s: f64) -> Value {
    let o = &p.observables;
    json!({
        "n_star": p.n_star,
        "fields_star": by_field(names, &p.fields_star),
        "fields_end": by_field(names, &p.fields_end),
        "n_s": o.n_s,
        "r": o.r,
        "alpha_s": null,
        "n_t": null,
        "p_zeta_unscaled": o.p_zeta,
        "potential_scale": a_s / o.p_zeta,
        "p_iso": null,
        "p_cross": null,
        "beta_iso": null,
        "f_nl": o.f_nl,
        "eps_h": p.eps_h,
        "turn_rate": p.turn_rate,
        "entropic_mass2": p.entropic_mass2,
        "n_total": p.n_total,
        "delta_n": delta_n_json(names, p),
    })
}

/// The delta-N route's report as JSON, in the exact route's layout with `"method": "delta-n"`.
pub fn json_delta_n(model: &str, rep: &DeltaNReport, extras: &[PivotExtras], a_s: f64) -> String {
    let names = &rep.fields;
    let v = json!({
        "model": model,
        "method": "delta-n",
        "fields": names,
        "n_total": rep.n_total,
        "stages": rep.stages,
        "max_turn": {
            "turn_rate": rep.max_turn.turn_rate,
            "n_before_end": rep.max_turn.n_before_end,
            "fields": by_field(names, &rep.max_turn.fields),
        },
        "predictions": rep
            .predictions
            .iter()
            .enumerate()
            .map(|(i, p)| with_extras(names, delta_n_prediction_json(names, p, a_s), extras.get(i)))
            .collect::<Vec<_>>(),
    });
    format!("{}\n", serde_json::to_string_pretty(&v).expect("serialisable"))
}

/// The CSV columns of the delta-N route after the fields at the pivot.
pub const CSV_KEYS_DELTA_N: [&str; 6] = ["n_s", "r", "p_zeta_unscaled", "f_nl", "eps_h", "turn_rate"];

/// The delta-N route as CSV: `n_star`, the fields at the pivot, then [`CSV_KEYS_DELTA_N`].
pub fn csv_delta_n(rep: &DeltaNReport) -> String {
    let mut cols = vec!["n_star".to_string()];
    cols.extend(rep.fields.iter().map(|f| format!("{f}_star")));
    cols.extend(CSV_KEYS_DELTA_N.iter().map(|k| k.to_string()));
    let mut o = cols.join(",") + "\n";
    for p in &rep.predictions {
        let mut row = vec![format!("{}", p.n_star)];
        let o_ = &p.observables;
        let values = [o_.n_s, o_.r, o_.p_zeta, o_.f_nl, p.eps_h, p.turn_rate];
        row.extend(p.fields_star.iter().chain(&values).map(|v| format!("{v:e}")));
        o.push_str(&(row.join(",") + "\n"));
    }
    o
}

/// The delta-N route for people: the trajectory, then one column per N_*.
pub fn text_delta_n(model: &str, rep: &DeltaNReport, extras: &[PivotExtras]) -> String {
    let mut o = format!(
        "{model}: {} fields ({}), slow-roll delta-N on the exact background (no Mukhanov–Sasaki modes)\n",
        rep.fields.len(),
        rep.fields.join(", ")
    );
    o.push_str(&trajectory_text(rep.n_total, &rep.max_turn, &rep.stages));
    let ps = &rep.predictions;
    let mut rows: Vec<Row> = vec![("N_*".into(), ps.iter().map(|p| Some(p.n_star)).collect())];
    for (a, f) in rep.fields.iter().enumerate() {
        rows.push((format!("{f}_*"), ps.iter().map(|p| Some(p.fields_star[a])).collect()));
    }
    let col = |label: &str, g: &dyn Fn(&DeltaNPrediction) -> f64| {
        (label.to_string(), ps.iter().map(|p| Some(g(p))).collect())
    };
    rows.extend([
        col("n_s", &|p| p.observables.n_s),
        col("r", &|p| p.observables.r),
        col("f_NL", &|p| p.observables.f_nl),
        col("P_zeta", &|p| p.observables.p_zeta),
        col("eps_H", &|p| p.eps_h),
        col("eta_perp/H", &|p| p.turn_rate),
    ]);
    let n_stars: Vec<f64> = ps.iter().map(|p| p.n_star).collect();
    let (more, notes) = extras_rows(&n_stars, extras);
    rows.extend(more);
    o.push_str(&render_rows(&rows));
    o.push_str(&notes);
    o
}
