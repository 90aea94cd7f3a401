//! Hostile input through the real binary: extreme overall scales of V, non-finite values that
//! must not reach an output, malformed and oversized data and model files, long parameter
//! chains, infinite range ends. Error texts are pinned by insta snapshots.

mod common;
use common::efold;
use serde_json::Value;

fn json(args: &[&str]) -> Value {
    let run = efold(args);
    assert_eq!(run.code, 0, "{args:?}: {}", run.stderr);
    serde_json::from_str(&run.stdout).expect("JSON output")
}

fn num(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("`{key}` is not a number: {v}"))
}

#[track_caller]
fn close(got: f64, want: f64, rel: f64, what: &str) {
    let err = ((got - want) / want).abs();
    assert!(err <= rel, "{what}: {got} vs {want} (relative {err:e})");
}

/// The overall scale of V does not enter the slow-roll parameters. For V = c phi^2 at first
/// order (Liddle & Lyth 2000, ch. 3): n_s = 1 - 4/(2N+1), r = 16/(2N+1),
/// alpha_s = -8/(2N+1)^2 whatever c; the unscaled amplitude V/(24 pi^2 eps_V) is proportional
/// to c, so the factor that gives the observed A_s goes as 1/c.
#[test]
fn the_scale_of_v_does_not_matter_to_slow_roll() {
    let base = json(&["predict", "--potential", "phi^2", "--format", "json"]);
    for c in ["1e-200", "1e200", "1e-300"] {
        let potential = format!("{c}*phi^2");
        let rep = json(&["predict", "--potential", &potential, "--format", "json"]);
        let factor: f64 = c.parse().unwrap();
        for (p, q) in rep["predictions"]
            .as_array()
            .unwrap()
            .iter()
            .zip(base["predictions"].as_array().unwrap())
        {
            let n = num(p, "n_star");
            let m = 2.0 * n + 1.0;
            close(num(p, "n_s"), 1.0 - 4.0 / m, 1e-10, &format!("{c}: n_s"));
            close(num(p, "r"), 16.0 / m, 1e-10, &format!("{c}: r"));
            close(num(p, "alpha_s"), -8.0 / (m * m), 1e-8, &format!("{c}: alpha_s"));
            // xi2_V and omega3_V vanish for a quadratic (V''' = 0): zeros, not nulls.
            assert_eq!(num(p, "xi2_v"), 0.0, "{c}");
            assert_eq!(num(p, "omega3_v"), 0.0, "{c}");
            close(
                num(p, "a_s_unscaled"),
                factor * num(q, "a_s_unscaled"),
                1e-10,
                &format!("{c}: A_s"),
            );
            close(
                num(p, "potential_scale"),
                num(q, "potential_scale") / factor,
                1e-10,
                &format!("{c}: scale on V"),
            );
        }
    }
}

/// The exact route at extreme scales gives the same spectrum as at scale 1 (the Mukhanov–
/// Sasaki equations see V only through k/aH and the amplitude, which scales as V).
#[test]
fn the_scale_of_v_does_not_matter_to_the_exact_route() {
    let args = |p: &str| {
        vec![
            "predict".to_string(),
            "--potential".to_string(),
            p.to_string(),
            "--method".to_string(),
            "exact".to_string(),
            "--efolds".to_string(),
            "55".to_string(),
            "--format".to_string(),
            "json".to_string(),
        ]
    };
    let run = |p: &str| {
        let a = args(p);
        let a: Vec<&str> = a.iter().map(String::as_str).collect();
        json(&a)["predictions"][0].clone()
    };
    let base = run("phi^2");
    for c in ["1e-300", "1e300"] {
        let p = run(&format!("{c}*phi^2"));
        let factor: f64 = c.parse().unwrap();
        for key in ["n_s", "r", "n_t"] {
            close(num(&p, key), num(&base, key), 1e-8, &format!("{c}: {key}"));
        }
        // alpha_s is a second difference of ln P over five modes: its rounding, measured at
        // scale 1 against 1e-200 and 1e-300, is about 1e-7 relative.
        close(
            num(&p, "alpha_s"),
            num(&base, "alpha_s"),
            1e-6,
            &format!("{c}: alpha_s"),
        );
        close(
            num(&p["exact"], "p_s_unscaled"),
            factor * num(&base["exact"], "p_s_unscaled"),
            1e-8,
            &format!("{c}: P_s"),
        );
    }
}

/// A wiggle of amplitude 1e-250 and frequency 1e80 leaves V, V' and V'' as they are but makes
/// the fourth derivative overflow: omega3_V is then not a number, and that is an error naming
/// it and N_*, not a `null` in the JSON.
#[test]
fn a_non_finite_prediction_is_an_error() {
    let wiggle = "phi^2 + 1e-250*sin(1e80*phi)";
    for format in ["json", "csv", "text"] {
        let r = efold(&["predict", "--potential", wiggle, "--format", format]);
        assert_eq!(r.code, 2, "{format}: {}", r.stdout);
        assert!(r.stdout.is_empty(), "{format}: {}", r.stdout);
        assert!(r.stderr.contains("omega3_v is not a finite number"), "{}", r.stderr);
    }
    let r = efold(&["predict", "--potential", wiggle]);
    insta::assert_snapshot!("hostile_non_finite_prediction", r.stderr);
    let r = efold(&["predict", "--potential", wiggle, "--method", "exact", "--efolds", "55"]);
    assert_eq!(r.code, 2, "{}", r.stdout);
    assert!(
        r.stderr.contains("omega3_v is not a finite number") && r.stderr.contains("N_* = 55"),
        "{}",
        r.stderr
    );
}

/// A scratch directory for one test.
fn scratch(name: &str) -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("efold-hostile-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

const DATA: &str = include_str!("../data/planck2018-bk18.toml");

/// Runs `predict` on a shipped model with the built-in data file edited; returns stderr with
/// the scratch path replaced.
fn predict_with_data(name: &str, from: &str, to: &str) -> String {
    assert!(DATA.contains(from), "{from}");
    let dir = scratch(name);
    let path = dir.join("data.toml");
    std::fs::write(&path, DATA.replacen(from, to, 1)).unwrap();
    let out = dir.join("out.json");
    let r = efold(&[
        "predict",
        "models/quadratic-monomial.toml",
        "--data",
        path.to_str().unwrap(),
        "--format",
        "json",
    ]);
    assert_eq!(r.code, 2, "{to}: {}", r.stdout);
    assert!(r.stdout.is_empty());
    assert!(!out.exists());
    let text = r.stderr.replace(&dir.display().to_string(), "TMP");
    std::fs::remove_dir_all(&dir).ok();
    text
}

#[test]
fn bad_data_files_are_errors_at_the_value() {
    insta::assert_snapshot!(
        "hostile_data_zero_sigma",
        predict_with_data("sigma", "sigma = 0.0042", "sigma = 0")
    );
    insta::assert_snapshot!(
        "hostile_data_nan_mean",
        predict_with_data("nan", "mean = 0.9649", "mean = nan")
    );
    insta::assert_snapshot!(
        "hostile_data_zero_planck_mass",
        predict_with_data(
            "mass",
            "reduced_planck_mass_gev = 2.435e18",
            "reduced_planck_mass_gev = 0"
        )
    );
    insta::assert_snapshot!(
        "hostile_data_negative_r_limit",
        predict_with_data("rlim", "upper = 0.036", "upper = -0.036")
    );
    insta::assert_snapshot!(
        "hostile_data_thresholds_in_wrong_order",
        predict_with_data("order", "excluded_sigma = 3.0", "excluded_sigma = 1.0")
    );
    insta::assert_snapshot!(
        "hostile_data_confidence_as_percent",
        predict_with_data("conf", "confidence = 0.95", "confidence = 95")
    );
}

/// Writes a model file into a scratch directory and runs `inspect` on it.
fn inspect_file(name: &str, text: &str) -> (i32, String) {
    let dir = scratch(name);
    let path = dir.join("m.toml");
    std::fs::write(&path, text).unwrap();
    let r = efold(&["inspect", path.to_str().unwrap()]);
    let stderr = r.stderr.replace(&dir.display().to_string(), "TMP");
    std::fs::remove_dir_all(&dir).ok();
    (r.code, stderr)
}

#[test]
fn non_finite_and_mistyped_model_values_are_errors_at_their_line() {
    let (code, e) = inspect_file("nan", "potential = \"a*phi^2\"\n[params]\na = nan\n");
    assert_eq!(code, 2);
    insta::assert_snapshot!("hostile_model_nan_param", e);
    let (code, e) = inspect_file("inf", "potential = \"phi^2\"\n[settings]\nefolds = [50, inf]\n");
    assert_eq!(code, 2);
    insta::assert_snapshot!("hostile_model_inf_efolds", e);
    let (code, e) = inspect_file("type", "potential = \"a*phi^2\"\n[params]\na = true\n");
    assert_eq!(code, 2);
    insta::assert_snapshot!("hostile_model_wrong_type", e);
}

#[test]
fn endless_and_oversized_files_are_refused() {
    if std::path::Path::new("/dev/zero").exists() {
        let r = efold(&["inspect", "/dev/zero"]);
        assert_eq!(r.code, 2);
        insta::assert_snapshot!("hostile_model_dev_zero", r.stderr);
        let r = efold(&["predict", "models/quadratic-monomial.toml", "--data", "/dev/zero"]);
        assert_eq!(r.code, 2);
        assert!(
            r.stderr.contains("larger than the limit of 1048576 bytes"),
            "{}",
            r.stderr
        );
    }
    // 1 MiB and one byte of comment after a valid model.
    let big = format!("potential = \"phi^2\"\n#{}\n", "x".repeat(1 << 20));
    let (code, e) = inspect_file("big", &big);
    assert_eq!(code, 2);
    assert!(e.contains("larger than the limit of 1048576 bytes"), "{e}");
    // Just under the limit is read.
    let fits = format!("potential = \"phi^2\"\n#{}\n", "x".repeat((1 << 20) - 30));
    let (code, e) = inspect_file("fits", &fits);
    assert_eq!(code, 0, "{e}");
}

/// An infinite end where V overflows double precision is an end of the kind the survey gives
/// it, not an error: V0 (1 - exp(-b phi))^2 overflows where the square does, where
/// exp(-b phi) passes sqrt(f64::MAX), phi = -ln(f64::MAX) / (2 b) = -434.65, with or without
/// a range.
#[test]
fn an_infinite_range_end_where_v_overflows_is_an_end() {
    let survey = json(&["inspect", "models/exponential-plateau.toml", "--format", "json"]);
    let ranged = json(&[
        "inspect",
        "models/exponential-plateau.toml",
        "--range",
        "-inf",
        "10",
        "--format",
        "json",
    ]);
    let (a, b) = (&survey["domain"]["interval"], &ranged["domain"]["interval"]);
    assert_eq!(a["lo_kind"]["kind"], "v-overflow");
    assert_eq!(b["lo_kind"]["kind"], "v-overflow");
    assert_eq!(num(a, "lo"), num(b, "lo"));
    let b_param = (2.0f64 / 3.0).sqrt();
    close(num(b, "lo"), -f64::MAX.ln() / (2.0 * b_param), 1e-9, "overflow point");
    assert_eq!(num(b, "hi"), 10.0);
    assert_eq!(b["hi_kind"]["kind"], "range");
    // The prediction on the branch from 10 down is that of the whole plateau (the field never
    // goes above phi_* ~ 5.5).
    let whole = json(&["predict", "models/exponential-plateau.toml", "--format", "json"]);
    let part = json(&[
        "predict",
        "models/exponential-plateau.toml",
        "--range",
        "-inf",
        "10",
        "--format",
        "json",
    ]);
    for (p, q) in part["predictions"]
        .as_array()
        .unwrap()
        .iter()
        .zip(whole["predictions"].as_array().unwrap())
    {
        for key in ["phi_star", "n_s", "r", "alpha_s"] {
            close(num(p, key), num(q, key), 1e-9, key);
        }
    }
    // The same on the other side: K = exp(phi^2) overflows at |phi| = 26.64, which the survey
    // reports as the ends of the domain.
    let k = json(&[
        "inspect",
        "--potential",
        "phi^2",
        "--kinetic",
        "exp(phi^2)",
        "--range",
        "0",
        "inf",
        "--format",
        "json",
    ]);
    let hi = num(&k["domain"]["interval"], "hi");
    // exp(x^2) overflows at x^2 = ln(f64::MAX).
    close(hi, f64::MAX.ln().sqrt(), 1e-9, "K overflow");
}

/// --start-phi outside the domain says so, with the domain.
#[test]
fn a_start_outside_the_domain_is_named() {
    let r = efold(&[
        "predict",
        "models/pole-order-2-quadratic.toml",
        "--method",
        "exact",
        "--start-phi",
        "3",
    ]);
    assert_eq!(r.code, 2);
    insta::assert_snapshot!("hostile_start_outside_domain", r.stderr);
    let r = efold(&[
        "spectrum",
        "models/pole-order-2-quadratic.toml",
        "--start-phi",
        "-2.5",
        "--points",
        "3",
    ]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("the start phi = -2.5 lies outside the domain"),
        "{}",
        r.stderr
    );
}

/// The spectrum of 1e-300 phi^2, scaled to the observed A_s, is that of phi^2: the scale of V
/// cancels between P_zeta and the factor on V.
#[test]
fn the_scale_of_v_does_not_matter_to_the_spectrum() {
    let rows = |p: &str| {
        let v = json(&["spectrum", "--potential", p, "--points", "3", "--format", "json"]);
        v["spectrum"]["rows"].as_array().unwrap().clone()
    };
    let (base, tiny) = (rows("phi^2"), rows("1e-300*phi^2"));
    assert_eq!(base.len(), 3);
    for (a, b) in base.iter().zip(&tiny) {
        for key in ["k_mpc", "p_zeta", "p_t", "p_zeta_slow_roll", "n_before_end"] {
            close(num(b, key), num(a, key), 1e-9, key);
        }
    }
}
