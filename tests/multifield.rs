//! The multi-field analyses against the independent reference calculation
//! tests/reference/multifield.json (written by tests/reference/gen_multifield.py; equations,
//! models A–F and stated accuracy in tests/reference/MULTIFIELD.md), on closed-form field
//! spaces of the same models.
//!
//! Tolerances: the reference states n_s to 1e-9, r and P to 3e-10 relative, alpha_s to 5e-8,
//! n_t to 5e-11, delta-N n_s, r, P_zeta to 1e-10 and f_NL to 1e-8; efold integrates at the same
//! tolerances with a different integrator (Dormand–Prince 5(4) against the reference's
//! DOP853), so each check allows a few times the larger of the two, rounded up to a power of
//! ten. The differences measured are printed with `--nocapture`.

use efold::analysis::multi::closed_form::{Diagonal, Disk, Metric1};
use efold::analysis::multi::predict::{predict, MultiReport, MultiSettings};
use efold::analysis::multi::FieldSpace;
use efold::config::MultiLimits;
use serde_json::Value;

fn reference() -> Value {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/multifield.json");
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// The closed-form field space of a reference model (MULTIFIELD.md, "Models").
fn space(name: &str) -> Diagonal {
    let pole = |a: f64, c: f64| (c, Metric1::Pole(a));
    let fields: Vec<(f64, Metric1)> = match name {
        "A" => vec![(0.5, Metric1::Flat); 2],
        "B" => vec![(0.5, Metric1::Flat), (4.5, Metric1::Flat)],
        // V = (x^2 + y^2)/(12 a), a = 1/2
        "C" => vec![pole(0.5, 1.0 / 6.0); 2],
        // V = sum u_i^2 / 14, a = 1/3
        "D" => vec![pole(1.0 / 3.0, 1.0 / 14.0); 7],
        // V = x^2/(6 a) + y^2/(6 b), a = 1/6, b = 2
        "E" => vec![pole(1.0 / 6.0, 1.0), pole(2.0, 1.0 / 12.0)],
        "F" => vec![(0.5, Metric1::Flat), (450.0, Metric1::Flat)],
        _ => unreachable!(),
    };
    Diagonal {
        c: fields.iter().map(|f| f.0).collect(),
        metric: fields.iter().map(|f| f.1).collect(),
    }
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect()
}

fn run(name: &str, n_stars: &[f64], settings: &MultiSettings) -> MultiReport {
    let r = reference();
    let m = &r["models"][name];
    let start = floats(&m["start"]);
    let velocity = floats(&m["start_velocity"]);
    let mut s = space(name);
    predict(&mut s, &start, Some(&velocity), n_stars, settings).unwrap()
}

fn no_delta_n() -> MultiSettings {
    MultiSettings {
        delta_n: false,
        ..MultiSettings::default()
    }
}

/// |a - b| <= tol, printed.
fn close(what: &str, a: f64, b: f64, tol: f64) {
    let d = a - b;
    eprintln!("{what}: {a:.12e} reference {b:.12e} difference {d:.2e} (allowed {tol:.0e})");
    assert!(d.abs() <= tol, "{what}: {a} against {b}: difference {d:e} beyond {tol:e}");
}

/// |a/b - 1| <= tol, printed.
fn close_rel(what: &str, a: f64, b: f64, tol: f64) {
    let d = a / b - 1.0;
    eprintln!("{what}: {a:.12e} reference {b:.12e} relative difference {d:.2e} (allowed {tol:.0e})");
    assert!(d.abs() <= tol, "{what}: {a} against {b}: relative difference {d:e} beyond {tol:e}");
}

/// The exact route at each N_* against the reference's exact predictions.
fn exact_against_reference(name: &str, report: &MultiReport) {
    let r = reference();
    let m = &r["models"][name];
    close_rel(&format!("{name} N_total"), report.n_total, m["N_total"].as_f64().unwrap(), 1e-9);
    for p in &report.predictions {
        let q = &m["predictions"][format!("{}", p.n_star)];
        let tag = format!("{name} N_*={}", p.n_star);
        close(&format!("{tag} n_s"), p.n_s, q["n_s"].as_f64().unwrap(), 1e-9);
        close_rel(&format!("{tag} r"), p.r, q["r"].as_f64().unwrap(), 1e-9);
        close(&format!("{tag} alpha_s"), p.alpha_s, q["alpha_s"].as_f64().unwrap(), 1e-7);
        close(&format!("{tag} n_t"), p.n_t, q["n_t"].as_f64().unwrap(), 1e-10);
        close_rel(&format!("{tag} P_zeta"), p.p_zeta, q["P_zeta"].as_f64().unwrap(), 1e-9);
        close(&format!("{tag} eps_H"), p.eps_h, q["eps_pivot"].as_f64().unwrap(), 1e-10);
        for (a, x) in p.fields_star.iter().enumerate() {
            close(&format!("{tag} phi^{a}_*"), *x, q["phi_pivot"][a].as_f64().unwrap(), 1e-8);
        }
    }
}

/// B: the mass ratio 9, every number of the reference, with delta-N.
#[test]
fn two_quadratics_with_mass_ratio_match_the_reference() {
    let report = run("B", &[50.0, 55.0, 60.0], &MultiSettings::default());
    exact_against_reference("B", &report);
    let r = reference();
    let m = &r["models"]["B"];
    for p in &report.predictions {
        let key = format!("{}", p.n_star);
        let q = &m["predictions"][&key];
        let tag = format!("B N_*={}", p.n_star);
        // P_iso is what is left of the decayed heavy mode (4e-15): stated to 2e-8 relative.
        close_rel(&format!("{tag} P_iso"), p.p_iso, q["P_iso"].as_f64().unwrap(), 1e-6);
        close(&format!("{tag} P_cross"), p.p_cross.unwrap(), q["P_cross"].as_f64().unwrap(), 1e-12);
        let d = &m["delta_N"][&key];
        close_rel(&format!("{tag} delta-N P_zeta"), p.p_zeta_delta_n.unwrap(), d["P_zeta"].as_f64().unwrap(), 1e-8);
        close_rel(&format!("{tag} delta-N r"), p.r_delta_n.unwrap(), d["r"].as_f64().unwrap(), 1e-8);
        close(&format!("{tag} delta-N n_s"), p.n_s_delta_n.unwrap(), d["n_s"].as_f64().unwrap(), 1e-9);
        close(&format!("{tag} delta-N f_NL"), p.f_nl.unwrap(), d["f_NL"].as_f64().unwrap(), 1e-8);
        let dn = p.delta_n.as_ref().unwrap();
        for a in 0..2 {
            close(&format!("{tag} N_{a}"), dn.n_a[a], d["N_a"][a].as_f64().unwrap(), 1e-8);
            for b in 0..2 {
                close(&format!("{tag} N_{a}{b}"), dn.n_ab[a][b], d["N_ab"][a][b].as_f64().unwrap(), 1e-6);
            }
        }
        // The analytic sum-separable f_NL (Vernizzi & Wands 2006, from memory; in the JSON):
        // slow roll and the numerical delta-N agree to 1e-4 in f_NL. (Their n_s and r differ by
        // the slow-roll approximation, 7e-4 and 6e-3 relative, MULTIFIELD.md.)
        let vw = &m["vernizzi_wands_analytic"][&key];
        close(&format!("{tag} f_NL against the analytic sum-separable"), p.f_nl.unwrap(), vw["f_NL"].as_f64().unwrap(), 1e-4);
        close(&format!("{tag} N_xx against the analytic 1/2"), dn.n_ab[0][0], vw["N_ab"][0][0].as_f64().unwrap(), 1e-3);
    }
    let t = &m["max_turn_rate"];
    close("B max turn rate", report.max_turn.turn_rate, t["eta_perp_over_H_max"].as_f64().unwrap(), 1e-8);
    close("B max turn N before end", report.max_turn.n_before_end, t["N_before_end"].as_f64().unwrap(), 1e-4);
}
