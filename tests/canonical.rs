//! The canonical analysis against published closed forms (sources beside each check).

use efold::canonical::{analyse_pole, AsymptoteKind, CanonicalMap};
use efold::config::Config;
use efold::inspect::inspect;
use efold::model::{Model, ModelSpec};

fn model(potential: &str, kinetic: &str, params: &[(&str, &str)], range: Option<(&str, &str)>) -> Model {
    let mut spec = ModelSpec::inline(potential, Some(kinetic));
    for (n, v) in params {
        spec.set_param(n, v);
    }
    if let Some((lo, hi)) = range {
        spec.range = Some((
            efold::model::Text::inline("lo", lo),
            efold::model::Text::inline("hi", hi),
        ));
    }
    Model::build(&spec, &Config::default()).unwrap()
}

fn pole_model(alpha: &str) -> Model {
    model(
        "phi^2/(6*alpha)",
        "1/(1 - phi^2/(6*alpha))^2",
        &[("alpha", alpha)],
        None,
    )
}

/// Order-2 pole: chi = sqrt(6 alpha) artanh(phi / sqrt(6 alpha)) (check-values section 3;
/// Kallosh & Linde, JCAP 07 (2013) 002), to 1e-12 relative.
#[test]
fn pole_canonical_map_closed_form() {
    let config = Config::default();
    for (alpha_text, alpha) in [("1/3", 1.0 / 3.0), ("1", 1.0), ("10", 10.0)] {
        let m = pole_model(alpha_text);
        let mut map = CanonicalMap::new(&m, 0.0, &config);
        let s = (6.0f64 * alpha).sqrt();
        // Up to 0.999 of the way to the pole the integrand sqrt(K) = 1/(1 - phi^2/(6 alpha)) is
        // well conditioned; at 0.999999 its own rounding (1 - x^2 ~ 2e-6 carries an absolute
        // error ~ 1e-16) limits any f64 evaluation to ~ 1e-11, checked separately below.
        for frac in [-0.999, -0.5, 0.01, 0.3, 0.9, 0.99, 0.999] {
            let phi = frac * s;
            // artanh(phi/s) = ln((s + phi)/(s - phi))/2, with s - phi exact near the pole.
            let want = 0.5 * s * ((s + phi) / (s - phi)).ln();
            let got = map.chi(phi).unwrap();
            let rel = ((got.value - want) / want).abs();
            assert!(
                rel < 1e-12,
                "alpha {alpha}, phi {phi}: {} vs {want} (rel {rel:e})",
                got.value
            );
            assert!(got.error <= 1e-11 * want.abs(), "error estimate {:?}", got);
        }
        let phi = 0.999999 * s;
        let want = 0.5 * s * ((s + phi) / (s - phi)).ln();
        assert!(((map.chi(phi).unwrap().value - want) / want).abs() < 1e-10);
        // and back: phi(chi) by Newton on the jets
        let target = 0.8 * s;
        let chi = s * (0.8f64).atanh();
        let back = map.phi_of_chi(chi, -s, s).unwrap();
        assert!((back.value - target).abs() < 1e-12 * s, "{back:?}");
    }
}

/// Non-minimal coupling, xi = 100: chi(phi) (check-values section 5; closed form of
/// Garcia-Bellido, Figueroa & Rubio, Phys. Rev. D 79, 063531 (2009)), to 1e-12 relative.
#[test]
fn nonminimal_canonical_map_closed_form() {
    let m = model(
        "lambda*phi^4/(4*(1 + xi*phi^2)^2)",
        "(1 + xi*phi^2 + 6*xi^2*phi^2)/(1 + xi*phi^2)^2",
        &[("lambda", "1"), ("xi", "100")],
        None,
    );
    let mut map = CanonicalMap::new(&m, 0.0, &Config::default());
    for (phi, want) in [
        (0.01, 0.0164909131597873),
        (0.1, 0.857890549292608),
        (1.0, 5.66600503388995),
    ] {
        let got = map.chi(phi).unwrap().value;
        assert!(((got - want) / want).abs() < 1e-12, "chi({phi}) = {got}, want {want}");
    }
}

/// K = 1/(1 - phi^2/(6 alpha))^2 has a pole of order 2 with a_2 = 3 alpha / 2 at
/// phi = sqrt(6 alpha); K = 3/(2 rho^2) has a_2 = 3/2 at rho = 0 (check-values section 3;
/// Galante, Kallosh, Linde & Roest, Phys. Rev. Lett. 114, 141302 (2015)).
#[test]
fn pole_order_and_residue() {
    let config = Config::default();
    for (alpha_text, alpha) in [("1/3", 1.0 / 3.0), ("1", 1.0), ("10", 10.0)] {
        let m = pole_model(alpha_text);
        let ins = inspect(&m, &config, None).unwrap();
        assert_eq!(ins.poles.len(), 2);
        let s = (6.0f64 * alpha).sqrt();
        let upper = ins.poles.iter().find(|p| p.phi > 0.0).unwrap();
        assert!((upper.phi - s).abs() < 1e-14 * s, "{}", upper.phi);
        assert_eq!(upper.order, 2.0);
        assert!((upper.order_measured - 2.0).abs() < 1e-7, "{}", upper.order_measured);
        let rel = (upper.residue - 1.5 * alpha).abs() / (1.5 * alpha);
        assert!(rel < 1e-8, "a_2 = {} vs {}", upper.residue, 1.5 * alpha);
        assert!(upper.infinite_distance);
    }
    let m = model("(1 - phi)^2", "3/(2*phi^2)", &[], Some(("0", "1")));
    let mut ev = m.evaluator();
    let p = analyse_pole(&mut ev, 0.0, 1.0, 1.0).unwrap();
    assert_eq!(p.order, 2.0);
    assert!((p.residue - 1.5).abs() < 1e-12, "{}", p.residue);
    // Leading order of the pole alone, p = 2: n_s = 1 - 2/N, r = 8 a_2 / N^2 (same source).
    let (ns, r) = p.leading_order.unwrap().predict(55.0);
    assert!((ns - (1.0 - 2.0 / 55.0)).abs() < 1e-15);
    assert!((r - 12.0 / 55.0f64.powi(2)).abs() < 1e-14);
}

/// The plateau of the order-2 pole model, V = tanh^2(chi / sqrt(6 alpha)), is approached as
/// exp(-chi/M) with M = sqrt(3 alpha / 2) (check-values section 3), to 1e-6.
#[test]
fn pole_plateau_scale() {
    let config = Config::default();
    for (alpha_text, alpha) in [("1/3", 1.0 / 3.0), ("1", 1.0), ("10", 10.0)] {
        let ins = inspect(&pole_model(alpha_text), &config, None).unwrap();
        let want = (1.5f64 * alpha).sqrt();
        for a in &ins.asymptotics {
            assert_eq!(a.kind, AsymptoteKind::ExponentialPlateau, "alpha {alpha}: {a:?}");
            let m = a.scale.unwrap();
            assert!(((m - want) / want).abs() < 1e-6, "alpha {alpha}: M = {m}, want {want}");
            assert!((a.alpha.unwrap() - alpha).abs() < 2e-6 * alpha);
            assert!((a.height.unwrap() - 1.0).abs() < 1e-9);
        }
    }
}

/// Non-minimal model toward large phi: from K ~ (1 + 6 xi)/(xi phi^2) and
/// V ~ (1 - 2/(xi phi^2))/xi^2 (derived here, not from a source), M = sqrt((1 + 6 xi)/(4 xi)),
/// which tends to sqrt(3/2) as xi grows.
#[test]
fn nonminimal_plateau_scale() {
    let config = Config::default();
    let mut last = 0.0;
    for xi in [1.0f64, 100.0, 1e4] {
        let m = model(
            "lambda*phi^4/(4*(1 + xi*phi^2)^2)",
            "(1 + xi*phi^2 + 6*xi^2*phi^2)/(1 + xi*phi^2)^2",
            &[("lambda", "1"), ("xi", &xi.to_string())],
            Some(("0", "inf")),
        );
        let ins = inspect(&m, &config, None).unwrap();
        let up = &ins.asymptotics[1];
        assert_eq!(up.kind, AsymptoteKind::ExponentialPlateau, "xi {xi}: {up:?}");
        let want = ((1.0 + 6.0 * xi) / (4.0 * xi)).sqrt();
        let got = up.scale.unwrap();
        assert!(((got - want) / want).abs() < 1e-6, "xi {xi}: M = {got}, want {want}");
        let height = 1.0 / (4.0 * xi * xi);
        assert!(((up.height.unwrap() - height) / height).abs() < 1e-6);
        last = got;
    }
    assert!((last - 1.5f64.sqrt()).abs() < 1e-4);
}

/// Other shapes of V(chi) at the ends, from forms whose canonical behaviour is known in
/// closed form (common practice): a monomial grows as a power, the exponential plateau in the
/// pole variable K = 3/(2 rho^2) is approached with M = sqrt(3/2), an order-4 pole gives a
/// plateau approached as chi^(-q) with q = 2/(p - 2) = 1 (derived in DEVELOPERS.md), and a
/// cosine oscillates.
#[test]
fn asymptotic_kinds() {
    let config = Config::default();
    let kinds = |m: Model| {
        let ins = inspect(&m, &config, None).unwrap();
        ins.asymptotics
            .iter()
            .map(|a| (a.kind, a.power, a.scale))
            .collect::<Vec<_>>()
    };
    let q = kinds(model("phi^4", "1", &[], None));
    assert!(
        q.iter()
            .all(|(k, p, _)| *k == AsymptoteKind::PowerGrowth && (p.unwrap() - 4.0).abs() < 1e-6),
        "{q:?}"
    );
    let e = kinds(model("(1 - phi)^2", "3/(2*phi^2)", &[], Some(("0", "1"))));
    assert_eq!(e[0].0, AsymptoteKind::ExponentialPlateau);
    assert!((e[0].2.unwrap() - 1.5f64.sqrt()).abs() < 1e-6);
    let p4 = kinds(model("(1 - phi)^2", "1/phi^4", &[], Some(("0", "1"))));
    assert_eq!(p4[0].0, AsymptoteKind::PowerPlateau);
    assert!((p4[0].1.unwrap() - 1.0).abs() < 1e-3, "{p4:?}");
    let c = kinds(model("1 + cos(phi)", "1", &[], Some(("-inf", "inf"))));
    assert!(c.iter().all(|(k, _, _)| *k == AsymptoteKind::Oscillating), "{c:?}");
    let x = kinds(model("exp(-phi)", "1", &[], None));
    assert_eq!(x[1].0, AsymptoteKind::ExponentialDecay);
}
