//! Models of several fields: the geometry compiled into the tape (Christoffel symbols, Riemann
//! tensor, gradient and covariant Hessian of V) against the independent sympy reference of
//! `tests/reference/gen_geometry.py` (`geometry.json`) and closed forms; the start velocity
//! against `tests/reference/gen_multifield.py` (`multifield.json`); a one-field model written
//! with `fields` against the same model written with `field` and `kinetic`.

use efold::analysis::multi::space::{attractor_velocity, ModelFieldSpace};
use efold::analysis::multi::{FieldSpace, Local};
use efold::config::Config;
use efold::model::{Model, ModelSpec};
use serde_json::Value;

mod common;
use common::efold;

fn reference(file: &str) -> Value {
    let path = format!("{}/tests/reference/{file}", env!("CARGO_MANIFEST_DIR"));
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn model(text: &str) -> Model {
    Model::build(&ModelSpec::from_toml(text, "m.toml").unwrap(), &Config::default()).unwrap()
}

fn shipped(name: &str) -> Model {
    let path = format!("{}/models/several-fields/{name}.toml", env!("CARGO_MANIFEST_DIR"));
    Model::build(
        &ModelSpec::load(std::path::Path::new(&path)).unwrap(),
        &Config::default(),
    )
    .unwrap()
}

fn local_at(m: &Model, phi: &[f64]) -> Local {
    let mut space = ModelFieldSpace::new(m).expect("several fields");
    let mut at = Local::zeros(phi.len());
    space.local(phi, &mut at).unwrap();
    at
}

/// `|a - b| <= rel * max(|b|, scale)`: relative, with an absolute floor at `scale` for the
/// components that are zero.
fn close(a: f64, b: f64, rel: f64, scale: f64) -> bool {
    (a - b).abs() <= rel * b.abs().max(scale)
}

/// The index key of geometry.json ("a,b,c") as indices.
fn indices(key: &str) -> Vec<usize> {
    key.split(',').map(|i| i.parse().unwrap()).collect()
}

/// Every Gamma^a_bc and R^a_bcd of `at` against the values of `block` in geometry.json.
fn assert_matches_geometry(at: &Local, block: &Value, rel: f64) {
    let mut worst: f64 = 0.0;
    let mut note = |got: f64, want: f64| worst = worst.max((got - want).abs() / want.abs().max(1.0));
    let gammas = block["Gamma_at_point"].as_object().unwrap();
    assert_eq!(gammas.len(), 8);
    for (key, want) in gammas {
        let i = indices(key);
        let (got, want) = (at.gamma(i[0], i[1], i[2]), want.as_f64().unwrap());
        note(got, want);
        assert!(close(got, want, rel, 1.0), "Gamma^{key}: {got} against {want}");
    }
    let riemann = block["Riemann_at_point"].as_object().unwrap();
    assert_eq!(riemann.len(), 16);
    for (key, want) in riemann {
        let i = indices(key);
        let (got, want) = (at.riemann(i[0], i[1], i[2], i[3]), want.as_f64().unwrap());
        note(got, want);
        assert!(close(got, want, rel, 1.0), "R^{key}: {got} against {want}");
    }
    eprintln!("largest difference of Gamma and R from geometry.json: {worst:e} (relative, floor 1)");
    for (key, want) in block["metric_at_point"].as_object().unwrap() {
        let i = indices(key);
        assert!(close(at.g[(i[0], i[1])], want.as_f64().unwrap(), rel, 1.0), "G_{key}");
    }
}

/// The Ricci scalar R = G^bd R^a_bad (the convention of MULTIFIELD.md).
fn ricci_scalar(at: &Local) -> f64 {
    let n = at.n();
    let mut r = 0.0;
    for a in 0..n {
        for b in 0..n {
            for d in 0..n {
                r += at.g_inv[(b, d)] * at.riemann(a, b, a, d);
            }
        }
    }
    r
}

const POINCARE_DISK: &str = r#"
fields = ["x", "y"]
potential = "x^2 + y^2"
[params]
alpha = 1
[metric]
x = "6*alpha/(1 - x^2 - y^2)^2"
y = "6*alpha/(1 - x^2 - y^2)^2"
[start]
x = 0.3
y = -0.2
"#;

/// The Poincaré disk G = 6 alpha (dx^2 + dy^2)/(1 - x^2 - y^2)^2, alpha = 1, at (0.3, -0.2):
/// every component of Gamma and R against geometry.json (source: gen_geometry.py, sympy,
/// exact and rounded to double) to 1e-12 relative.
#[test]
fn the_poincare_disk_matches_the_symbolic_reference() {
    let geometry = reference("geometry.json");
    let block = &geometry["poincare_disk"];
    assert_eq!(block["point"]["alpha"].as_f64(), Some(1.0));
    let m = model(POINCARE_DISK);
    let at = local_at(&m, &[0.3, -0.2]);
    assert_matches_geometry(&at, block, 1e-12);
    // R = -4/(3 alpha) (from memory; gen_geometry.py confirms it symbolically, and its value at
    // the point is geometry.json's Ricci_scalar_at_point).
    let r = ricci_scalar(&at);
    eprintln!("Ricci scalar {r:e}, minus -4/3: {:e}", r + 4.0 / 3.0);
    assert!(close(r, -4.0 / 3.0, 1e-12, 1.0), "R = {r}");
    assert!(close(r, block["Ricci_scalar_at_point"].as_f64().unwrap(), 1e-12, 1.0));
    // A space of constant curvature: R_abcd = K (G_ac G_bd - G_ad G_bc) with K = -2/(3 alpha)
    // (gen_geometry.py checks the same identity symbolically).
    let k = -2.0 / 3.0;
    for a in 0..2 {
        for b in 0..2 {
            for c in 0..2 {
                for d in 0..2 {
                    let lowered: f64 = (0..2).map(|e| at.g[(a, e)] * at.riemann(e, b, c, d)).sum();
                    let want = k * (at.g[(a, c)] * at.g[(b, d)] - at.g[(a, d)] * at.g[(b, c)]);
                    assert!(
                        close(lowered, want, 1e-12, 1.0),
                        "R_{a}{b}{c}{d}: {lowered} against {want}"
                    );
                }
            }
        }
    }
}

/// The product of pole metrics diag(g_a(x), g_b(y)), g_a(u) = (1 - u^2/(6a))^-2, a = 1/2,
/// b = 1/3, at (0.3, -0.2): flat (every R^a_bcd zero to rounding), its Gamma against
/// geometry.json (gen_geometry.py, sympy).
#[test]
fn the_product_of_pole_metrics_is_flat() {
    let geometry = reference("geometry.json");
    let block = &geometry["product_of_pole_metrics"];
    let m = model(
        r#"
fields = ["x", "y"]
potential = "x^2 + y^2"
[params]
a = "1/2"
b = "1/3"
[metric]
x = "(1 - x^2/(6*a))^(-2)"
y = "(1 - y^2/(6*b))^(-2)"
[start]
x = 0.3
y = -0.2
"#,
    );
    let at = local_at(&m, &[0.3, -0.2]);
    assert_matches_geometry(&at, block, 1e-12);
    assert!(at.riemann.iter().all(|r| r.abs() < 1e-14), "{:?}", at.riemann);
    assert!(ricci_scalar(&at).abs() < 1e-14);
    // The same flatness at points that are not the reference's, where nothing is tabulated.
    for phi in [[0.9, 0.1], [-1.2, 0.75], [0.0, 0.0]] {
        let at = local_at(&m, &phi);
        assert!(at.riemann.iter().all(|r| r.abs() < 1e-13), "{phi:?}: {:?}", at.riemann);
    }
}

/// Model C (`two-pole-fields-merging`, a = 1/2): V = (x^2 + y^2)/6, g(u) = (1 - u^2/3)^-2.
/// Closed forms (own derivation): d_x V = x/3, d_x d_x V = 1/3, d_x d_y V = 0;
/// Gamma^x_xx = g'/(2g) = 2x/(3 - x^2) (the form of geometry.json's Gamma_symbolic with
/// a = 1/2), so V_;xx = 1/3 - 2x^2/(3 (3 - x^2)), V_;xy = 0; the same in y.
#[test]
fn gradient_and_covariant_hessian_of_the_merging_pole_fields() {
    let m = shipped("two-pole-fields-merging");
    for phi in [[0.7, -0.4], [1.5, 1.2], [-0.1, 1.6]] {
        let at = local_at(&m, &phi);
        let hessian = at.covariant_hessian();
        for (i, u) in phi.iter().enumerate() {
            assert!(
                close(at.dv[i], u / 3.0, 1e-14, 1e-300),
                "{phi:?}: d_{i} V = {}",
                at.dv[i]
            );
            assert!(close(at.ddv[(i, i)], 1.0 / 3.0, 1e-14, 1.0));
            let gamma = 2.0 * u / (3.0 - u * u);
            assert!(
                close(at.gamma(i, i, i), gamma, 1e-13, 1.0),
                "{phi:?}: {}",
                at.gamma(i, i, i)
            );
            let want = 1.0 / 3.0 - 2.0 * u * u / (3.0 * (3.0 - u * u));
            assert!(
                close(hessian[(i, i)], want, 1e-13, 1.0),
                "{phi:?}: V_;{i}{i} = {}",
                hessian[(i, i)]
            );
        }
        assert_eq!((at.ddv[(0, 1)], hessian[(0, 1)]), (0.0, 0.0));
        let v = (phi[0] * phi[0] + phi[1] * phi[1]) / 6.0;
        assert!(close(at.v, v, 1e-15, 1.0));
    }
}

/// Model B (`two-field-quadratic-mass-ratio`): V = (x^2 + 9 y^2)/2 on flat field space:
/// gradient (x, 9y), Hessian diag(1, 9), no Christoffel symbols (closed forms, common
/// practice).
#[test]
fn gradient_and_hessian_of_the_quadratic_mass_ratio() {
    let m = shipped("two-field-quadratic-mass-ratio");
    let at = local_at(&m, &[3.0, -2.0]);
    assert_eq!(at.v, (9.0 + 9.0 * 4.0) / 2.0);
    assert_eq!(at.dv, vec![3.0, -18.0]);
    assert_eq!(
        at.covariant_hessian(),
        nalgebra::DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, 9.0])
    );
    assert!(at.gamma.iter().chain(&at.riemann).all(|&x| x == 0.0));
}

/// The start velocity of each shipped model of several fields, on the slow-roll attractor
/// dphi^a/dN = -G^ab V_b / V, against multifield.json's `start_velocity` (gen_multifield.py)
/// for models B, C, D and E, and its start point against `start`.
#[test]
fn start_points_and_attractor_velocities_match_the_reference() {
    let multifield = reference("multifield.json");
    let cases = [
        ("B", "two-field-quadratic-mass-ratio"),
        ("C", "two-pole-fields-merging"),
        ("D", "seven-equal-pole-fields"),
        ("E", "two-alphas-turning"),
    ];
    for (key, file) in cases {
        let m = shipped(file);
        let want = &multifield["models"][key];
        let floats = |v: &Value| -> Vec<f64> { v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect() };
        let (start, velocity) = (floats(&want["start"]), floats(&want["start_velocity"]));
        assert_eq!(m.n_fields(), start.len(), "{key}");
        let mut space = ModelFieldSpace::new(&m).unwrap();
        assert_eq!(space.n_fields(), start.len());
        let (phi, pi) = space.start().unwrap();
        let worst = (0..start.len())
            .map(|a| ((pi[a] - velocity[a]) / velocity[a]).abs())
            .fold(0.0, f64::max);
        eprintln!("{key}: largest relative difference of the attractor velocity: {worst:e}");
        for a in 0..start.len() {
            assert!(
                close(phi[a], start[a], 1e-15, 1.0),
                "{key}: start {a}: {} against {}",
                phi[a],
                start[a]
            );
            assert!(
                close(pi[a], velocity[a], 1e-12, 1e-300),
                "{key}: velocity {a}: {} against {}",
                pi[a],
                velocity[a]
            );
        }
        let mut at = Local::zeros(start.len());
        space.local(&phi, &mut at).unwrap();
        assert_eq!(attractor_velocity(&at), pi);
    }
}

/// A given [start.velocity] is the start's, and a rebind moves a start written from
/// parameters.
#[test]
fn a_given_velocity_and_a_rebound_start() {
    let text = "fields = [\"x\", \"y\"]\npotential = \"x^2 + y^2\"\n[params]\ns = 2\n\
                [metric]\nx = 1\ny = 1\n\"x y\" = \"1/2\"\n[start]\nx = \"s\"\ny = 1\n\
                [start.velocity]\nx = -0.5\ny = 0\n";
    let mut m = model(text);
    assert_eq!(m.layout(), efold::model::Layout::full(2).unwrap().with_geometry());
    assert_eq!(
        (m.start(), m.start_velocity()),
        (Some(&[2.0, 1.0][..]), Some(&[-0.5, 0.0][..]))
    );
    m.rebind(&[("s", 3.0)], &Config::default()).unwrap();
    assert_eq!(m.start(), Some(&[3.0, 1.0][..]));
    let at = local_at(&m, &[0.1, 0.2]);
    assert_eq!(at.g[(0, 1)], 0.5);
    // G^-1 of [[1, 1/2], [1/2, 1]] is [[4/3, -2/3], [-2/3, 4/3]] (the adjugate over det = 3/4).
    assert!(close(at.g_inv[(0, 0)], 4.0 / 3.0, 1e-15, 1.0) && close(at.g_inv[(0, 1)], -2.0 / 3.0, 1e-15, 1.0));
}

/// A point where the metric stops being positive definite is a typed error naming the point
/// and the row, never a NaN; a point outside the domain of V names V.
#[test]
fn failures_at_a_point_are_typed_errors() {
    let m = model(POINCARE_DISK);
    let mut space = ModelFieldSpace::new(&m).unwrap();
    let mut at = Local::zeros(2);
    let e = space.local(&[1.0, 0.0], &mut at).unwrap_err();
    assert!(
        e.message.contains("G_xx is not a finite number (inf)") && e.message.contains("(x, y) = (1, 0)"),
        "{}",
        e.message
    );
    let m = model(
        "fields = [\"x\", \"y\"]\npotential = \"log(x)\"\n[metric]\nx = 1\ny = \"1 - x^2\"\n[start]\nx = 0.5\ny = 0\n",
    );
    let mut space = ModelFieldSpace::new(&m).unwrap();
    let e = space.local(&[2.0, 0.0], &mut at).unwrap_err();
    assert!(
        matches!(*e.kind, efold::canonical::ErrorKind::MetricNotPositiveDefinite { row: 1, pivot, .. } if pivot == -3.0),
        "{e:?}"
    );
    assert!(e.message.contains("pivot of row y"), "{}", e.message);
    let e = space.local(&[-0.5, 0.0], &mut at).unwrap_err();
    assert!(
        e.message
            .starts_with("V is not a finite number (NaN) at (x, y) = (-0.5, 0)"),
        "{}",
        e.message
    );
    assert!(space.local(&[1.0], &mut at).is_err());
}

/// A one-field model written with `fields = ["phi"]` and `[metric] phi = ...` is today's
/// model: the same tape and the same predictions, bit for bit.
#[test]
fn one_field_written_with_fields_is_the_one_field_model() {
    let dir = std::env::temp_dir().join(format!("efold-one-as-fields-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let plain = std::fs::read_to_string(format!(
        "{}/models/pole-order-2-quadratic.toml",
        env!("CARGO_MANIFEST_DIR")
    ))
    .unwrap();
    let fields = plain
        .replace("potential = ", "fields = [\"phi\"]\npotential = ")
        .replace("kinetic = \"1/(1 - phi^2/(6*alpha))^2\"\n", "")
        .replace("[params]", "[metric]\nphi = \"1/(1 - phi^2/(6*alpha))^2\"\n\n[params]");
    assert!(fields.contains("[metric]") && !fields.contains("kinetic ="), "{fields}");
    let (a, b) = (dir.join("plain.toml"), dir.join("fields.toml"));
    std::fs::write(&a, &plain).unwrap();
    std::fs::write(&b, &fields).unwrap();
    let (ma, mb) = (
        Model::build(&ModelSpec::load(&a).unwrap(), &Config::default()).unwrap(),
        Model::build(&ModelSpec::load(&b).unwrap(), &Config::default()).unwrap(),
    );
    assert_eq!(mb.n_fields(), 1);
    assert_eq!(ma.layout(), mb.layout());
    assert_eq!(ma.compiled.tape.to_string(), mb.compiled.tape.to_string());
    assert!(ModelFieldSpace::new(&mb).is_none());
    for args in [
        &["predict", "--format", "json"][..],
        &["predict", "--second-order", "--format", "csv"],
        &["inspect", "--format", "json"],
        &["predict", "--method", "exact", "--efolds", "55", "--format", "json"],
    ] {
        let run = |p: &std::path::Path| {
            let mut v = vec![args[0], p.to_str().unwrap()];
            v.extend(&args[1..]);
            efold(&v)
        };
        let (ra, rb) = (run(&a), run(&b));
        assert_eq!((ra.code, rb.code), (0, 0), "{args:?}: {}", rb.stderr);
        assert_eq!(ra.stdout, rb.stdout, "{args:?}");
    }
    std::fs::remove_dir_all(&dir).ok();
}

/// The tape of seven fields holds V, 7 slopes, 7 components, 7 square roots, 28 Hessian
/// entries, 49 first and 196 second partials of the metric.
#[test]
fn seven_fields_compile_their_whole_geometry() {
    let m = shipped("seven-equal-pole-fields");
    assert_eq!(m.compiled.tape.n_outputs(), 1 + 7 + 7 + 7 + 28 + 49 + 196);
    assert_eq!(m.field_names(), ["u1", "u2", "u3", "u4", "u5", "u6", "u7"]);
    let at = local_at(&m, m.start().unwrap());
    assert!(at.riemann.iter().all(|r| r.abs() < 1e-14));
}
