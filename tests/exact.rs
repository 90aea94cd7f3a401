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
