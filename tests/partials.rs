//! Expressions of several fields: the IR's symbolic partial derivatives and the tape's jets
//! along a direction of field space against sympy (tests/reference/gen_partials.py, committed
//! with its output: `diff` for the partials, `series` in t of f(p + t d) for the jets); the
//! structure-of-arrays batches against point-by-point evaluation, bit for bit; tapes of more
//! than eight outputs; and the one-field entry points against their field-space forms.

use efold::compile::{compile, compile_one, Compiled};
use efold::config::Limits;
use efold::ir::{Scope, ScopeError};
use efold::tape::{Tape, BATCH, MAX_ORDER};
use serde_json::Value;

struct Case {
    expr: String,
    scope: Scope,
    values: Vec<f64>,
    point: Vec<f64>,
    direction: Vec<f64>,
    value: f64,
    gradient: Vec<f64>,
    hessian: Vec<Vec<f64>>,
    jet: Vec<f64>,
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect()
}

/// The cases, each with its scope: the fields in the order the script lists them, the
/// parameters in the JSON's (sorted) key order.
fn reference_cases() -> Vec<Case> {
    let json: Value = serde_json::from_str(include_str!("reference/partials.json")).unwrap();
    json.as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let params = c["params"].as_object().unwrap();
            let names: Vec<&str> = params.keys().map(String::as_str).collect();
            let fields: Vec<&str> = c["fields"]
                .as_array()
                .unwrap()
                .iter()
                .map(|f| f.as_str().unwrap())
                .collect();
            Case {
                expr: c["expr"].as_str().unwrap().to_string(),
                scope: Scope::with_fields(&fields, &names).unwrap(),
                values: params.values().map(|v| v.as_f64().unwrap()).collect(),
                point: floats(&c["point"]),
                direction: floats(&c["direction"]),
                value: c["value"].as_f64().unwrap(),
                gradient: floats(&c["gradient"]),
                hessian: c["hessian"].as_array().unwrap().iter().map(floats).collect(),
                jet: floats(&c["jet"]),
            }
        })
        .collect()
}

fn compiled(case: &Case) -> Compiled {
    compile_one(&case.expr, &case.scope).unwrap_or_else(|e| panic!("{}", e.render()))
}

/// |got - want| against the size of `scale` (a derivative that is zero by accident is judged
/// against its neighbours' size), 1e-13 relative.
fn close(got: f64, want: f64, scale: f64, what: &str) {
    let s = scale.max(want.abs()).max(1e-300);
    let err = (got - want).abs() / s;
    assert!(err <= 1e-13, "{what}: {got} vs {want} (rel {err:e})");
}

fn max_abs(v: &[f64]) -> f64 {
    v.iter().fold(0.0f64, |m, x| m.max(x.abs()))
}

/// Values, first and second partial derivatives, each partial compiled to its own tape from
/// `Graph::partial`, against sympy's `diff` (30 digits, rounded to double).
#[test]
fn symbolic_partials_match_sympy() {
    for case in reference_cases() {
        let scope = &case.scope;
        let mut c = compiled(&case);
        let n = scope.n_fields();
        let value = c.tape.evaluator(&case.values).eval_at(&case.point);
        close(value, case.value, 0.0, &format!("{} value", case.expr));
        let g_scale = max_abs(&case.gradient);
        let h_scale = case.hessian.iter().map(|r| max_abs(r)).fold(0.0, f64::max);
        for i in 0..n {
            let di = c.graph.partial(c.roots[0], i);
            let got = Tape::compile(&c.graph, &[di])
                .evaluator(&case.values)
                .eval_at(&case.point);
            close(
                got,
                case.gradient[i],
                g_scale,
                &format!("{} d/d{}", case.expr, scope.fields[i]),
            );
            for j in 0..n {
                let dij = c.graph.partial(di, j);
                let got = Tape::compile(&c.graph, &[dij])
                    .evaluator(&case.values)
                    .eval_at(&case.point);
                let what = format!("{} d2/d{}d{}", case.expr, scope.fields[i], scope.fields[j]);
                close(got, case.hessian[i][j], h_scale, &what);
            }
        }
    }
}

/// The Taylor coefficients of t -> f(p + t d) to order 8 against sympy's `series` in t.
#[test]
fn directional_jets_match_sympy_series() {
    for case in reference_cases() {
        let c = compiled(&case);
        let mut ev = c.tape.evaluator(&case.values);
        let jet = *ev.eval_jet_along(&case.point, &case.direction, MAX_ORDER);
        for (k, (&got, &want)) in jet.iter().zip(&case.jet).enumerate() {
            let lo = k.saturating_sub(1);
            let hi = (k + 1).min(MAX_ORDER);
            let scale = max_abs(&case.jet[lo..=hi]);
            close(got, want, scale, &format!("{} order {k}", case.expr));
        }
        // Lower orders are the same numbers, higher coefficients left zero.
        let low = *ev.eval_jet_along(&case.point, &case.direction, 3);
        assert_eq!(&low[..4], &jet[..4], "{}", case.expr);
        assert!(low[4..].iter().all(|&x| x == 0.0), "{}", case.expr);
    }
}

/// Along a unit direction e_i the jet's first coefficient is df/dx_i and twice its second
/// d2f/dx_i^2; by polarisation, the jets along e_i + e_j give the mixed partials. Two routes
/// that share no code: the jet recurrences and the symbolic rules.
#[test]
fn jets_along_unit_directions_are_the_symbolic_partials() {
    for case in reference_cases() {
        let scope = &case.scope;
        let mut c = compiled(&case);
        let n = scope.n_fields();
        let unit = |i: usize| (0..n).map(|k| if k == i { 1.0 } else { 0.0 }).collect::<Vec<_>>();
        for i in 0..n {
            let di = c.graph.partial(c.roots[0], i);
            let dii = c.graph.partial(di, i);
            let tape = Tape::compile(&c.graph, &[di, dii]);
            let mut sym = tape.evaluator(&case.values);
            sym.eval_at(&case.point);
            let (d1, d2) = (sym.output(0), sym.output(1));
            let jet = *c.tape.evaluator(&case.values).eval_jet_along(&case.point, &unit(i), 2);
            let what = format!("{} along e_{i}", case.expr);
            close(jet[1], d1, 0.0, &what);
            close(2.0 * jet[2], d2, max_abs(&case.hessian[i]), &what);
            for j in 0..i {
                // D_{e_i+e_j}^2 f = f_ii + 2 f_ij + f_jj
                let d: Vec<f64> = (0..n).map(|k| if k == i || k == j { 1.0 } else { 0.0 }).collect();
                let jj = *c.tape.evaluator(&case.values).eval_jet_along(&case.point, &d, 2);
                let want = case.hessian[i][i] + 2.0 * case.hessian[i][j] + case.hessian[j][j];
                let scale = case.hessian.iter().map(|r| max_abs(r)).fold(0.0, f64::max);
                close(
                    2.0 * jj[2],
                    want,
                    4.0 * scale,
                    &format!("{} along e_{i} + e_{j}", case.expr),
                );
            }
        }
    }
}

/// Points of field space on a deterministic scatter, as structure of arrays.
fn scatter(n_fields: usize, n_points: usize, centre: &[f64]) -> Vec<Vec<f64>> {
    (0..n_fields)
        .map(|i| {
            (0..n_points)
                .map(|j| centre[i] + 0.37 * ((j * (2 * i + 3)) % 11) as f64 / 11.0 - 0.1 * i as f64)
                .collect()
        })
        .collect()
}

/// The structure-of-arrays batch runs each point through exactly the operations of `eval_at`:
/// the same bits, for partial and full batches, every output, and chunked by `eval_each_at`.
#[test]
fn soa_batches_are_bit_identical_to_points() {
    for case in reference_cases() {
        let scope = &case.scope;
        let mut c = compiled(&case);
        let n = scope.n_fields();
        // Two outputs: f and its partial in the last field.
        let d = c.graph.partial(c.roots[0], n - 1);
        let tape = Tape::compile(&c.graph, &[c.roots[0], d]);
        let mut ev = tape.evaluator(&case.values);
        let mut one = tape.evaluator(&case.values);
        let pts = scatter(n, 37, &case.point);
        let at = |j: usize| pts.iter().map(|f| f[j]).collect::<Vec<f64>>();
        for len in [1, 5, BATCH] {
            let slices: Vec<&[f64]> = pts.iter().map(|f| &f[..len]).collect();
            ev.eval_batch_at(&slices);
            for j in 0..len {
                let v = one.eval_at(&at(j));
                let b = (ev.batch_output(0)[j], ev.batch_output(1)[j]);
                assert_eq!(b.0.to_bits(), v.to_bits(), "{} point {j}", case.expr);
                assert_eq!(b.1.to_bits(), one.output(1).to_bits(), "{} point {j}", case.expr);
            }
        }
        let slices: Vec<&[f64]> = pts.iter().map(Vec::as_slice).collect();
        let mut seen = [false; 37];
        ev.eval_each_at(&slices, |j, out| {
            let v = one.eval_at(&at(j));
            assert_eq!(
                (out[0].to_bits(), out[1].to_bits()),
                (v.to_bits(), one.output(1).to_bits())
            );
            seen[j] = true;
        });
        assert!(seen.iter().all(|&s| s), "{}", case.expr);
    }
}

/// Twelve outputs on one tape (the evaluator once stopped at eight): each output equals its
/// expression compiled alone, through `eval_each` (one field) and `eval_each_at` (three).
#[test]
fn more_than_eight_outputs_on_one_tape() {
    let texts: Vec<String> = (1..=12)
        .map(|k| format!("exp(-x/{k})*y^{} + sin({k}*z)", k % 4))
        .collect();
    let exprs: Vec<(&str, &str)> = texts.iter().map(|t| ("expression", t.as_str())).collect();
    let scope = Scope::with_fields(&["x", "y", "z"], &[]).unwrap();
    let c = compile(&exprs, &scope, &Limits::default()).unwrap();
    let alone: Vec<Compiled> = texts.iter().map(|t| compile_one(t, &scope).unwrap()).collect();
    let pts = scatter(3, 21, &[0.5, 1.5, -0.25]);
    let slices: Vec<&[f64]> = pts.iter().map(Vec::as_slice).collect();
    let mut ev = c.tape.evaluator(&[]);
    let mut count = 0;
    ev.eval_each_at(&slices, |j, out| {
        assert_eq!(out.len(), 12);
        let p = [pts[0][j], pts[1][j], pts[2][j]];
        for (k, a) in alone.iter().enumerate() {
            assert_eq!(
                out[k].to_bits(),
                a.tape.evaluator(&[]).eval_at(&p).to_bits(),
                "output {k}"
            );
        }
        count += 1;
    });
    assert_eq!(count, 21);

    let texts: Vec<String> = (1..=10).map(|k| format!("phi^{k} + {k}")).collect();
    let exprs: Vec<(&str, &str)> = texts.iter().map(|t| ("expression", t.as_str())).collect();
    let scope = Scope::new("phi", &[]);
    let c = compile(&exprs, &scope, &Limits::default()).unwrap();
    let alone: Vec<Compiled> = texts.iter().map(|t| compile_one(t, &scope).unwrap()).collect();
    let xs: Vec<f64> = (0..19).map(|i| -1.0 + 0.13 * i as f64).collect();
    let mut ev = c.tape.evaluator(&[]);
    let mut count = 0;
    ev.eval_each(&xs, |j, out| {
        assert_eq!(out.len(), 10);
        for (k, a) in alone.iter().enumerate() {
            assert_eq!(
                out[k].to_bits(),
                a.tape.evaluator(&[]).eval(xs[j]).to_bits(),
                "output {k}"
            );
        }
        count += 1;
    });
    assert_eq!(count, 19);
}

/// One field through the field-space entry points: `eval_at(&[x])`, `eval_jet_along(&[x],
/// &[1])`, `partial(_, 0)` and a scope made by `with_fields(&["phi"])` give exactly what
/// `eval`, `eval_jet`, `derivative` and `Scope::new` give.
#[test]
fn one_field_is_the_field_space_of_dimension_one() {
    let text = "tanh(phi/sqrt(6*alpha))^2 + 1 + phi + phi^2/2 - alpha*phi^4";
    let scope = Scope::new("phi", &["alpha"]);
    assert_eq!(Scope::with_fields(&["phi"], &["alpha"]).unwrap(), scope);
    let mut c = compile_one(text, &scope).unwrap();
    let mut ev = c.tape.evaluator(&[0.7]);
    let mut other = c.tape.evaluator(&[0.7]);
    for x in [-2.0, -0.3, 0.0, 0.4, 1.7] {
        assert_eq!(ev.eval_at(&[x]).to_bits(), other.eval(x).to_bits());
        for order in 0..=MAX_ORDER {
            let a = *ev.eval_jet_along(&[x], &[1.0], order);
            let b = *other.eval_jet(x, order);
            assert_eq!(a.map(f64::to_bits), b.map(f64::to_bits), "order {order} at {x}");
        }
        assert_eq!(ev.derivatives_along(&[x], &[1.0], 4), other.derivatives(x, 4));
    }
    let d0 = c.graph.partial(c.roots[0], 0);
    let d = c.graph.derivative(c.roots[0]);
    assert_eq!(d0, d);
    assert_eq!(c.tape.n_fields(), 1);
}

/// A scope where one name is two things is refused, in words that say how to fix it.
#[test]
fn names_clash_between_fields_and_parameters() {
    let e = Scope::with_fields(&["phi", "m"], &["m"]).unwrap_err();
    assert_eq!(e.to_string(), "`m` is declared as a field and again as a parameter");
    let e = Scope::with_fields(&["phi", "phi"], &[]).unwrap_err();
    assert_eq!(e.to_string(), "`phi` is declared as a field and again as a field");
    assert_eq!(Scope::with_fields(&[], &["m"]).unwrap_err(), ScopeError::NoField);
    assert!(e.diagnostic().render(None).contains("rename one of them"));
}

/// An unknown name in a scope of several fields lists them all, with the caret under the name.
#[test]
fn unknown_name_lists_every_field() {
    let scope = Scope::with_fields(&["phi", "chi"], &["m"]).unwrap();
    let e = compile_one("m^2*phi^2 + chj^2", &scope).unwrap_err();
    insta::assert_snapshot!("unknown_name_two_fields", e.render());
    let e = compile_one("phi(chi + 1)", &scope).unwrap_err();
    insta::assert_snapshot!("field_called_as_function_two_fields", e.render());
}
