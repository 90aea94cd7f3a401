//! Frame couplings of several fields (src/analysis/multi/couplings.rs) against the sympy
//! calculation tests/reference/gen_couplings.py (its output tests/reference/couplings.json:
//! symbolic Christoffel symbols and covariant derivatives, the symmetrised third derivative,
//! the frame T, N), on a curved non-diagonal metric, the flat plane and the plane in polar
//! coordinates; and on the merging demo, the fall of the entropic couplings on the plateau.

mod common;
use common::efold;
use efold::analysis::multi::couplings::couplings;
use efold::config::Config;
use efold::model::{Model, ModelSpec};
use serde_json::Value;

fn reference() -> Value {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/couplings.json");
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn build(text: &str) -> Model {
    Model::build(&ModelSpec::from_toml(text, "m.toml").unwrap(), &Config::default()).unwrap()
}

const KEYS: [&str; 8] = ["V_T", "V_TT", "V_TN", "V_NN", "V_TTT", "V_TTN", "V_TNN", "V_NNN"];

fn against(case: &str, model: &Model) {
    let r = reference();
    let c = &r[case];
    let floats = |v: &Value| -> Vec<f64> { v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect() };
    let f = couplings(model, &floats(&c["point"]), &floats(&c["velocity"])).unwrap();
    let got = serde_json::to_value(f.couplings).unwrap();
    for key in KEYS {
        let (g, w) = (got[key].as_f64().unwrap(), c["couplings"][key].as_f64().unwrap());
        let d = (g - w) / w;
        eprintln!("{case} {key}: {g:.15e} sympy {w:.15e} relative difference {d:.2e} (allowed 1e-10)");
        assert!(d.abs() < 1e-10, "{case} {key}: {g} against {w}");
    }
    for (a, (t, n)) in f.tangent.iter().zip(&f.normal).enumerate() {
        assert!((t - c["tangent"][a].as_f64().unwrap()).abs() < 1e-14, "{case} T");
        assert!((n - c["normal"][a].as_f64().unwrap()).abs() < 1e-14, "{case} N");
    }
}

/// G = [[1 + y^2, x y/2], [x y/2, exp(x)]] (scalar curvature -0.537 at the point, sympy),
/// V = 2 + x^2 + 3/10 x y^3 + cos(y): every coupling to 1e-10 relative.
#[test]
fn curved_metric_matches_sympy() {
    let m = build(
        "fields = [\"x\", \"y\"]\npotential = \"2 + x^2 + 3/10*x*y^3 + cos(y)\"\n\
         [metric]\nx = \"1 + y^2\"\n\"x y\" = \"x*y/2\"\ny = \"exp(x)\"\n[start]\nx = 0.4\ny = -0.7\n",
    );
    against("curved", &m);
}

/// G = 1, the same V: every coupling to 1e-10 relative.
#[test]
fn flat_metric_matches_sympy() {
    let m = build(
        "fields = [\"x\", \"y\"]\npotential = \"2 + x^2 + 3/10*x*y^3 + cos(y)\"\n\
         [metric]\nx = 1\ny = 1\n[start]\nx = 0.4\ny = -0.7\n",
    );
    against("flat", &m);
}

/// The plane in polar coordinates, G = diag(1, r^2): flat with Christoffel symbols.
#[test]
fn polar_coordinates_match_sympy() {
    let m = build(
        "fields = [\"r\", \"t\"]\npotential = \"1 + r^2*cos(t)/5 + r^3*sin(t)^2/7\"\n\
         [metric]\nr = 1\nt = \"r^2\"\n[start]\nr = 1.3\nt = 0.6\n",
    );
    against("polar", &m);
}

/// The merging demo on its diagonal: the entropic couplings V_NN/V and V_TNN/V fall in size
/// as N_* grows (the pivot moves up the plateau, nearer the poles, where a unit step in the
/// canonical fields is a smaller step in x and y: the suppression of couplings on the plateau
/// is the expected trend, common practice; here about as 1/N_*); V_TN/V,
/// V_TTN/V and V_NNN/V are zero by the x <-> y symmetry.
#[test]
fn entropic_couplings_fall_on_the_plateau() {
    let m = format!(
        "{}/models/several-fields/two-pole-fields-merging.toml",
        env!("CARGO_MANIFEST_DIR")
    );
    let r = efold(&[
        "predict", &m, "--efolds", "40,50,60", "--method", "delta-n", "--format", "json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).unwrap();
    let ps = v["predictions"].as_array().unwrap();
    let c = |i: usize, k: &str| {
        ps[i]["couplings"][k]
            .as_f64()
            .unwrap_or_else(|| panic!("{k}: {}", ps[i]))
    };
    for k in ["V_NN", "V_TNN"] {
        let sizes: Vec<f64> = (0..3).map(|i| c(i, k).abs()).collect();
        eprintln!("merging |{k}| at N_* = 40, 50, 60: {sizes:?}");
        assert!(
            sizes[0] > sizes[1] && sizes[1] > sizes[2] && sizes[2] > 0.0,
            "{k}: {sizes:?}"
        );
    }
    for i in 0..3 {
        for k in ["V_TN", "V_TTN", "V_NNN"] {
            assert!(c(i, k).abs() < 1e-12 * c(i, "V_NN").abs().max(1.0), "{k}: {}", c(i, k));
        }
    }
}
