//! The exact background and Mukhanov–Sasaki solver against power-law inflation, whose
//! perturbations are solved by Hankel functions (check-values section 6: Lucchin & Matarrese,
//! Phys. Rev. D 32, 1316 (1985); Lyth & Stewart, Phys. Lett. B 274, 168 (1992)).

use efold::config::Config;
use efold::exact::{mode, run_background, state_at, tilts, Background, Pivot, Settings};
use efold::model::{Model, ModelSpec};

/// Gamma(x) for x > 0.5 by the Lanczos approximation (g = 7, nine coefficients; the standard
/// table, as in Press et al., *Numerical Recipes*, 3rd ed., section 6.1 — coefficients from
/// memory, checked below against Gamma(1/2) = sqrt(pi) and integer factorials).
fn gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const C: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        return std::f64::consts::PI / ((std::f64::consts::PI * x).sin() * gamma(1.0 - x));
    }
    let x = x - 1.0;
    let mut a = C[0];
    let t = x + G + 0.5;
    for (i, c) in C.iter().enumerate().skip(1) {
        a += c / (x + i as f64);
    }
    (2.0 * std::f64::consts::PI).sqrt() * t.powf(x + 0.5) * (-t).exp() * a
}

#[test]
fn gamma_is_right() {
    assert!((gamma(0.5) - std::f64::consts::PI.sqrt()).abs() < 1e-14);
    assert!((gamma(5.0) - 24.0).abs() < 1e-12);
    assert!((gamma(1.5) - std::f64::consts::PI.sqrt() / 2.0).abs() < 1e-14);
}

fn power_law(p: f64) -> Model {
    let mut spec = ModelSpec::inline("exp(-lam*phi)", None);
    spec.set_param("lam", &format!("sqrt(2/{p})"));
    Model::build(&spec, &Config::default()).unwrap()
}

/// V = exp(-lambda phi), p = 2/lambda^2: n_s - 1 = n_t = -2/(p-1), r = 16/p exactly, and
/// P_R = 2^(2nu-3) (Gamma(nu)/Gamma(3/2))^2 (1-eps)^(2nu-1) H_k^2 / (8 pi^2 eps) with
/// nu = 3/2 + 1/(p-1), eps = 1/p, H_k the Hubble rate when k = aH (derived in DEVELOPERS.md
/// from the Hankel solution; the Gamma prefactor as in Lyth & Stewart 1992).
#[test]
fn power_law_spectrum() {
    for p in [10.0f64, 20.0, 60.0] {
        let model = power_law(p);
        let bg = Background::new(&model);
        let settings = Settings::default();
        let start = [0.0, bg.attractor(0.0)];
        let run = run_background(&bg, start, 40.0, &settings).unwrap();
        assert!(run.n_end.is_none(), "power-law inflation never ends");
        let n_piv = 15.0;
        let y = state_at(&bg, &run, n_piv, &settings).unwrap();
        let piv = Pivot {
            n: n_piv,
            h: bg.point(&y).h,
        };
        let h = 0.05;
        let modes: Vec<_> = (-2..=2)
            .map(|j| mode(&bg, &run, piv, (j as f64 * h).exp(), &settings).unwrap())
            .collect();
        let ln_s: [f64; 5] = std::array::from_fn(|i| modes[i].p_s.ln());
        let ln_t: [f64; 5] = std::array::from_fn(|i| modes[i].p_t.ln());
        let (ns1, _) = tilts(&ln_s, h);
        let (nt, _) = tilts(&ln_t, h);
        let want = -2.0 / (p - 1.0);
        assert!((ns1 - want).abs() < 1e-6, "p {p}: n_s - 1 = {ns1}, want {want}");
        assert!((nt - want).abs() < 1e-6, "p {p}: n_t = {nt}");
        let r = modes[2].p_t / modes[2].p_s;
        assert!((r - 16.0 / p).abs() < 1e-6 * 16.0 / p, "p {p}: r = {r}");
        let eps = 1.0 / p;
        let nu = 1.5 + 1.0 / (p - 1.0);
        let amp = 2f64.powf(2.0 * nu - 3.0)
            * (gamma(nu) / gamma(1.5)).powi(2)
            * (1.0 - eps).powf(2.0 * nu - 1.0)
            * piv.h.powi(2)
            / (8.0 * std::f64::consts::PI.powi(2) * eps);
        let rel = (modes[2].p_s / amp - 1.0).abs();
        assert!(
            rel < 1e-6,
            "p {p}: P_R = {:e}, closed form {amp:e} (rel {rel:e})",
            modes[2].p_s
        );
        assert!(modes.iter().all(|m| m.drift < 1e-5), "frozen");
    }
}

fn pole_model() -> Model {
    let mut spec = ModelSpec::inline("phi^2/(6*alpha)", Some("1/(1 - phi^2/(6*alpha))^2"));
    spec.set_param("alpha", "1");
    Model::build(&spec, &Config::default()).unwrap()
}

fn quadratic() -> Model {
    let mut spec = ModelSpec::inline("phi^2/2", None);
    spec.range = Some((
        efold::model::Text::inline("lo", "0"),
        efold::model::Text::inline("hi", "inf"),
    ));
    Model::build(&spec, &Config::default()).unwrap()
}

fn exact_report(m: &Model, settings: Settings, n: &[f64]) -> efold::predict::Report {
    let opts = efold::predict::Options {
        n_stars: n.to_vec(),
        exact: Some(settings),
        ..Default::default()
    };
    efold::predict::predict(m, &opts, &Config::default()).unwrap_or_else(|e| panic!("{}", e.message))
}

/// Exact n_s and r agree with the second-order formulas (check-values section 7, evaluated
/// with the exact Hubble-flow parameters at the pivot's exit) to the size of the third-order
/// terms, max(eps_1, eps_2)^3 up to a factor 3; first order is off by second-order terms.
#[test]
fn exact_against_second_order() {
    for m in [pole_model(), quadratic()] {
        let rep = exact_report(&m, Settings::default(), &[50.0, 60.0]);
        for p in &rep.predictions {
            let e = p.exact.unwrap();
            let third = e.eps_1.abs().max(e.eps_2.abs()).powi(3);
            assert!(
                (p.n_s - e.n_s_second_order).abs() < 3.0 * third,
                "n_s {} vs {} (eps^3 {third:e})",
                p.n_s,
                e.n_s_second_order
            );
            assert!(
                ((p.r - e.r_second_order) / p.r).abs() < 3.0 * e.eps_2.abs().powi(2),
                "r {} vs {}",
                p.r,
                e.r_second_order
            );
            let second = e.eps_1.abs().max(e.eps_2.abs()).powi(2);
            assert!((p.n_s - e.n_s_slow_roll).abs() < 10.0 * second);
            assert!(e.freeze_drift < 1e-5);
        }
    }
}

/// The exact end (eps_H = 1) comes after the slow-roll one (eps_V = 1), by a fraction of an
/// e-fold: for V = phi^2/2 the field goes from sqrt 2 down to about 1.0 (common practice; the
/// slow-roll e-folds between them, (phi_a^2 - phi_b^2)/4, are about a quarter).
#[test]
fn exact_end_of_inflation() {
    let rep = exact_report(&quadratic(), Settings::default(), &[55.0]);
    let p = &rep.predictions[0];
    let e = p.exact.unwrap();
    assert!((e.phi_end_slow_roll - 2f64.sqrt()).abs() < 1e-12);
    assert!(p.phi_end < e.phi_end_slow_roll && p.phi_end > 0.9, "{}", p.phi_end);
    let dn = (e.phi_end_slow_roll.powi(2) - p.phi_end.powi(2)) / 4.0;
    assert!(dn > 0.1 && dn < 0.5, "{dn}");
}

/// Convergence: halving the tolerances moves n_s by less than 1e-7; starting the modes at
/// k/aH = 1000 instead of 100 and stopping at 1e-4 instead of 1e-3 moves P_zeta by less than
/// 1e-5 relative.
#[test]
fn exact_converges() {
    let m = pole_model();
    let base = Settings::default();
    let tight = Settings {
        ode: efold::numerics::ode::Options {
            rtol: base.ode.rtol / 2.0,
            h_max: base.ode.h_max / 2.0,
            ..base.ode
        },
        ..base
    };
    let (a, b) = (exact_report(&m, base, &[55.0]), exact_report(&m, tight, &[55.0]));
    assert!((a.predictions[0].n_s - b.predictions[0].n_s).abs() < 1e-7);
    let loose = Settings {
        k_start: 100.0,
        k_stop: 1e-3,
        ..base
    };
    let strict = Settings {
        k_start: 1000.0,
        k_stop: 1e-4,
        ..base
    };
    let p = |s: Settings| exact_report(&m, s, &[55.0]).predictions[0].exact.unwrap().p_s_unscaled;
    let (pl, ps) = (p(loose), p(strict));
    assert!(((pl - ps) / ps).abs() < 1e-5, "{pl:e} vs {ps:e}");
}

/// The shipped model with an inflection shelf: its spectrum peaks far above the CMB value,
/// slow roll misses the peak (height and place), and the peak is stable under the same
/// refinements as above (tolerances halved; start 100 -> 1000, stop 1e-3 -> 1e-4).
#[test]
fn inflection_shelf_peak() {
    let path = format!(
        "{}/models/plateau-with-inflection-shelf.toml",
        env!("CARGO_MANIFEST_DIR")
    );
    let m = Model::build(
        &ModelSpec::load(std::path::Path::new(&path)).unwrap(),
        &Config::default(),
    )
    .unwrap();
    let ks: Vec<f64> = (0..9).map(|i| 1e10 * 10f64.powf(i as f64 / 16.0)).collect();
    let spec = |s: Settings| {
        let mut phi_at = |n: f64| {
            let opts = efold::predict::Options {
                n_stars: vec![n],
                ..Default::default()
            };
            Ok(efold::predict::predict(&m, &opts, &Config::default())?.predictions[0].phi_star)
        };
        let (_, run) = efold::exact::start_with_room(&m, 55.0 + 18.0, &s, &mut phi_at).unwrap();
        efold::exact::spectrum(&m, &run, 55.0, &ks, 2.1e-9, 0.05, &s).unwrap()
    };
    let base = spec(Settings::default());
    assert!(base.peak.p_zeta > 100.0 * 2.1e-9, "{:e}", base.peak.p_zeta);
    let sr = base.peak.p_zeta_slow_roll;
    assert!(
        base.peak.p_zeta / sr > 3.0,
        "slow roll misses the peak: {:e} vs {sr:e}",
        base.peak.p_zeta
    );
    let d = Settings::default();
    let tight = Settings {
        ode: efold::numerics::ode::Options {
            rtol: d.ode.rtol / 2.0,
            h_max: d.ode.h_max / 2.0,
            ..d.ode
        },
        ..d
    };
    let strict = Settings {
        k_start: 1000.0,
        k_stop: 1e-4,
        ..d
    };
    let loose = Settings {
        k_start: 100.0,
        k_stop: 1e-3,
        ..d
    };
    for other in [spec(tight), spec(strict), spec(loose)] {
        assert_eq!(other.peak.k_mpc, base.peak.k_mpc);
        let rel = (other.peak.p_zeta / base.peak.p_zeta - 1.0).abs();
        assert!(rel < 1e-5, "peak moved by {rel:e}");
    }
}
