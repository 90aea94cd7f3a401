//! A multi-field spectrum as text, CSV and JSON.

use crate::drivers::spectrum_multi::{MultiSpectrum, MultiSpectrumRow};
use crate::report::numfmt::{self, number, typed};
use crate::report::spectrum::columns;
use std::fmt::Write as _;

/// The spectrum as an aligned table under the pivot, the scale and the fields.
pub fn text(sp: &MultiSpectrum, name: &str) -> String {
    let mut o = String::new();
    let _ = writeln!(
        o,
        "model    {name} ({} fields: {})",
        sp.fields.len(),
        sp.fields.join(", ")
    );
    let _ = writeln!(
        o,
        "pivot    k_* = {} Mpc^-1 exits {} e-folds before the end (eps_H = 1); {} e-folds in all",
        typed(sp.k_star_mpc),
        typed(sp.n_star),
        number(sp.n_total)
    );
    let _ = writeln!(
        o,
        "scale    V multiplied by {} to give the observed A_s at the pivot (every power scaled alike)",
        number(sp.potential_scale)
    );
    let _ = writeln!(o, "powers   at the end of inflation\n");
    let d = numfmt::DEFAULT_DIGITS;
    let column = |g: &dyn Fn(&MultiSpectrumRow) -> f64| numfmt::row(&sp.rows.iter().map(g).collect::<Vec<_>>(), d);
    let mut cols = vec![
        ("k [Mpc^-1]", column(&|r| r.k_mpc)),
        ("P_zeta", column(&|r| r.p_zeta)),
        ("P_iso", column(&|r| r.p_iso)),
    ];
    if sp.rows.iter().any(|r| r.p_cross.is_some()) {
        let cross: Vec<Option<f64>> = sp.rows.iter().map(|r| r.p_cross).collect();
        cols.push(("P_cross", numfmt::row_opt(&cross, d)));
    }
    cols.push(("P_t", column(&|r| r.p_t)));
    cols.push(("N to end [e-folds]", column(&|r| r.n_before_end)));
    o.push_str(&columns(&cols, sp.rows.len()));
    o
}

/// The spectrum as CSV: a header and one row per k (`p_cross` for two fields only).
pub fn csv(sp: &MultiSpectrum) -> String {
    let cross = sp.rows.iter().any(|r| r.p_cross.is_some());
    let mut o = String::from(if cross {
        "k_mpc,p_zeta,p_iso,p_cross,p_t,n_before_end\n"
    } else {
        "k_mpc,p_zeta,p_iso,p_t,n_before_end\n"
    });
    for r in &sp.rows {
        let mut cells = vec![
            format!("{:e}", r.k_mpc),
            format!("{:e}", r.p_zeta),
            format!("{:e}", r.p_iso),
        ];
        if cross {
            cells.push(r.p_cross.map(|c| format!("{c:e}")).unwrap_or_default());
        }
        cells.push(format!("{:e}", r.p_t));
        cells.push(format!("{:e}", r.n_before_end));
        o.push_str(&cells.join(","));
        o.push('\n');
    }
    o
}

/// The spectrum as one JSON object: the model's name and the spectrum.
pub fn json(sp: &MultiSpectrum, name: &str) -> String {
    let obj = serde_json::json!({ "model": name, "spectrum": sp });
    format!("{}\n", serde_json::to_string_pretty(&obj).expect("serialisable"))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample(cross: Option<f64>) -> MultiSpectrum {
        let row = |k: f64| MultiSpectrumRow {
            k_mpc: k,
            p_zeta: 2.1e-9,
            p_iso: 4e-26,
            p_cross: cross,
            p_t: 3e-10,
            n_before_end: 55.0,
        };
        MultiSpectrum {
            fields: vec!["x".into(), "y".into()],
            n_star: 55.0,
            k_star_mpc: 0.05,
            potential_scale: 1e-11,
            n_total: 72.85,
            rows: vec![row(0.01), row(0.05)],
        }
    }

    #[test]
    fn the_cross_power_has_a_column_only_when_there_is_one() {
        let t = text(&sample(Some(6e-18)), "m");
        let header = t.lines().find(|l| l.contains("k [Mpc^-1]")).unwrap();
        let titles: Vec<&str> = header.split("  ").map(str::trim).filter(|s| !s.is_empty()).collect();
        assert_eq!(
            titles,
            ["k [Mpc^-1]", "P_zeta", "P_iso", "P_cross", "P_t", "N to end [e-folds]"]
        );
        assert!(csv(&sample(Some(6e-18))).starts_with("k_mpc,p_zeta,p_iso,p_cross,p_t,n_before_end\n1e-2,"));
        let c = csv(&sample(None));
        assert!(c.starts_with("k_mpc,p_zeta,p_iso,p_t,n_before_end\n"), "{c}");
        assert_eq!(c.lines().nth(1).unwrap().split(',').count(), 5);
        assert!(!text(&sample(None), "m").contains("P_cross"));
        assert!(!json(&sample(None), "m").contains("p_cross"));
    }
}
