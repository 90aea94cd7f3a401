"""The Python module against the efold command: every number of the module's results is
compared with the JSON the built binary prints for the same model and options (the binary is
`target/release/efold`, or $EFOLD_BIN; built with cargo when missing)."""

import json
import math
import os
import pathlib
import subprocess
import threading

import numpy as np
import pytest

import efold

ROOT = pathlib.Path(__file__).resolve().parents[2]
MODELS = sorted((ROOT / "models").glob("*.toml"))
SEVERAL = sorted((ROOT / "models" / "several-fields").glob("*.toml"))


@pytest.fixture(scope="session")
def binary():
    path = pathlib.Path(os.environ.get("EFOLD_BIN", ROOT / "target" / "release" / "efold")).resolve()
    if not path.exists():
        subprocess.run(["cargo", "build", "--release", "--locked", "--bin", "efold"], cwd=ROOT, check=True)
    return str(path)


def cli_json(binary, *args):
    out = subprocess.run([binary, *args, "--format", "json"], capture_output=True, text=True, cwd=ROOT)
    assert out.returncode == 0, out.stderr
    return json.loads(out.stdout)


def cli_error(binary, *args):
    out = subprocess.run([binary, *args], capture_output=True, text=True, cwd=ROOT)
    assert out.returncode == 2, (out.returncode, out.stdout)
    assert out.stderr.startswith("efold: ")
    return out.stderr[len("efold: "):].rstrip("\n")


def rel(path):
    return str(path.relative_to(ROOT))


# -- predictions against the command -------------------------------------------------------


@pytest.mark.parametrize("path", MODELS + SEVERAL, ids=lambda p: p.stem)
def test_predict_equals_the_command_on_every_shipped_model(binary, path):
    model = efold.Model.from_file(path)
    expected = cli_json(binary, "predict", str(path))
    assert model.predict_report() == expected
    assert model.predict() == expected["predictions"]
    assert len(model.predict()) == len(expected["predictions"])


@pytest.mark.parametrize("name", ["pole-order-2-quadratic", "exponential-plateau"])
def test_exact_second_order_and_reheating_equal_the_command(binary, name):
    path = ROOT / "models" / f"{name}.toml"
    model = efold.Model.from_file(path)
    assert model.predict_report(method="exact", efolds=[50, 60]) == cli_json(
        binary, "predict", str(path), "--method", "exact", "--efolds", "50,60"
    )
    assert model.predict_report(second_order=True) == cli_json(binary, "predict", str(path), "--second-order")
    assert model.predict_report(reheat="instant") == cli_json(binary, "predict", str(path), "--reheat", "instant")
    assert model.predict_report(reheat={"w": 0, "temp": 1e9, "g_star": 100}) == cli_json(
        binary, "predict", str(path), "--reheat-w", "0", "--reheat-temp", "1e9", "--g-star", "100"
    )


def test_delta_n_route_of_several_fields_equals_the_command(binary):
    path = SEVERAL[SEVERAL.index(ROOT / "models/several-fields/two-field-quadratic-mass-ratio.toml")]
    model = efold.Model.from_file(path)
    assert model.predict_report(method="delta-n", efolds=[55]) == cli_json(
        binary, "predict", str(path), "--method", "delta-n", "--efolds", "55"
    )


@pytest.mark.parametrize("path", MODELS + SEVERAL[1:], ids=lambda p: p.stem)
def test_inspect_equals_the_command(binary, path):
    assert efold.Model.from_file(path).inspect() == cli_json(binary, "inspect", str(path))


def test_eval_equals_the_command(binary):
    got = efold.eval("tanh(phi/sqrt(6*alpha))^2", at={"phi": 0.7}, order=4, params={"alpha": 1.5})
    assert got == cli_json(
        binary, "eval", "tanh(phi/sqrt(6*alpha))^2", "--at", "phi=0.7", "--order", "4", "--param", "alpha=1.5"
    )
    # d/dx sin x = cos x (common practice)
    assert efold.eval("sin(x)", at=0.5, field="x", order=1)["derivatives"][0] == pytest.approx(math.cos(0.5), rel=1e-15)


# -- models from strings, and rebinding ----------------------------------------------------


def test_a_model_from_strings_equals_its_file(binary):
    path = ROOT / "models" / "pole-order-2-quadratic.toml"
    inline = efold.Model(
        potential="phi^2/(6*alpha)", kinetic="1/(1 - phi^2/(6*alpha))^2", params={"alpha": 1}, range=("0", "sqrt(6*alpha)")
    )
    from_cli = cli_json(
        binary,
        "predict",
        "--potential",
        "phi^2/(6*alpha)",
        "--kinetic",
        "1/(1 - phi^2/(6*alpha))^2",
        "--param",
        "alpha=1",
        "--range",
        "0",
        "sqrt(6*alpha)",
    )
    assert inline.predict() == from_cli["predictions"]
    assert inline.predict() == efold.Model.from_file(path).predict()


def test_a_model_of_several_fields_from_strings_equals_its_file():
    path = ROOT / "models" / "several-fields" / "two-field-quadratic-mass-ratio.toml"
    inline = efold.Model(
        name="two-field-quadratic-mass-ratio",
        potential="(x^2 + ratio*y^2)/2",
        fields=["x", "y"],
        metric={"x": 1, "y": 1},
        start={"x": 12, "y": 12},
        params={"ratio": 9},
    )
    assert inline.fields == ["x", "y"]
    assert inline.predict(efolds=[55]) == efold.Model.from_file(path).predict(efolds=[55])


@pytest.mark.parametrize("alpha", [0.05, 1 / 3, 7.5])
def test_with_params_equals_a_fresh_model(alpha):
    path = ROOT / "models" / "pole-order-2-quadratic.toml"
    base = efold.Model.from_file(path)
    rebound = base.with_params(alpha=alpha)
    fresh = efold.Model.from_file(path, params={"alpha": alpha})
    assert rebound.params == {"alpha": alpha}
    assert base.params == {"alpha": 1.0}, "with_params leaves the model it was called on"
    assert rebound.predict(efolds=[50, 60]) == fresh.predict(efolds=[50, 60])
    assert rebound.predict(method="exact", efolds=[55]) == fresh.predict(method="exact", efolds=[55])


def test_with_params_follows_the_order_2_pole_closed_form():
    # n_s = 1 - 2/N and r = 12 alpha / N^2 at leading order in 1/N for the order-2 pole
    # (README's "pole alone" line; the derivation in DEVELOPERS.md)
    base = efold.Model.from_file(ROOT / "models" / "pole-order-2-quadratic.toml")
    for alpha in [0.01, 0.1]:
        p = base.with_params(alpha=alpha).predict(efolds=[60])[0]
        assert p["n_s"] == pytest.approx(1 - 2 / 60, abs=2e-3)
        assert p["r"] == pytest.approx(12 * alpha / 60**2, rel=0.1)


def test_with_params_refuses_an_unknown_parameter():
    base = efold.Model.from_file(ROOT / "models" / "pole-order-2-quadratic.toml")
    with pytest.raises(efold.ModelError, match="the model has no parameter `beta`"):
        base.with_params(beta=1)
    with pytest.raises(efold.ModelError, match="not a finite number"):
        base.with_params(alpha=float("nan"))


# -- spectra and scans ---------------------------------------------------------------------


def test_spectrum_arrays_equal_the_command(binary):
    path = ROOT / "models" / "pole-order-2-quadratic.toml"
    cli = cli_json(binary, "spectrum", str(path), "--k-min", "1e-4", "--k-max", "1", "--points", "6")
    rows = cli["spectrum"]["rows"]
    # the command's own grid, so that every number must agree
    k = np.array([r["k_mpc"] for r in rows])
    sp = efold.Model.from_file(path).spectrum(k=k, efolds=55)
    for key in ["k_mpc", "p_zeta", "p_t", "p_zeta_slow_roll", "n_before_end", "drift"]:
        assert isinstance(sp[key], np.ndarray)
        assert sp[key].dtype == np.float64 and sp[key].shape == (6,)
        np.testing.assert_array_equal(sp[key], [r[key] for r in rows])
    assert sp["peak"] == cli["spectrum"]["peak"]
    assert sp["model"] == cli["model"]
    assert sp["n_star"] == cli["spectrum"]["n_star"]
    assert sp["potential_scale"] == cli["spectrum"]["potential_scale"]


def test_spectrum_refuses_a_bad_grid():
    model = efold.Model.from_file(ROOT / "models" / "pole-order-2-quadratic.toml")
    with pytest.raises(efold.InputError, match="not ascending"):
        model.spectrum(k=[1e-2, 1e-3])
    with pytest.raises(efold.InputError) as e:
        model.spectrum(k=[1e-2, -1.0])
    assert "k = -1 is not a finite number above 0" in str(e.value)
    assert "^^" in str(e.value)


def scan_columns_equal(got, rows):
    keys = list(max(rows, key=len).keys())
    assert list(got.keys()) == keys
    for key in keys:
        cells = [r.get(key) for r in rows]
        if key == "point":
            assert got[key].dtype == np.int64
            assert got[key].tolist() == cells
        elif all(c is None or isinstance(c, (int, float)) for c in cells) and any(c is not None for c in cells):
            assert got[key].dtype == np.float64
            expected = np.array([math.nan if c is None else c for c in cells], dtype=np.float64)
            np.testing.assert_array_equal(got[key], expected)
        else:
            assert got[key].dtype == object
            assert got[key].tolist() == cells, key
        assert got[key].shape == (len(rows),)


def test_scan_equals_the_command(binary):
    path = ROOT / "models" / "pole-order-2-quadratic.toml"
    model = efold.Model.from_file(path)
    got = efold.scan(model, vary={"alpha": (0.1, 10, 7, "log")}, efolds=[50, 60])
    rows = cli_json(binary, "scan", str(path), "--vary", "alpha=0.1:10:7:log", "--efolds", "50,60")
    assert len(rows) == 14
    scan_columns_equal(got, rows)
    text_form = efold.scan(model, vary={"alpha": "0.1:10:7:log"}, efolds=[50, 60])
    for key in got:
        np.testing.assert_array_equal(got[key], text_form[key])


def test_a_two_parameter_scan_with_failures_equals_the_command(binary):
    # alpha = -1 makes K negative: those points fail and keep their rows with the error
    path = ROOT / "models" / "pole-order-2-cubic-tilt.toml"
    model = efold.Model.from_file(path)
    params = list(model.params)
    assert params == ["alpha", "gamma"]
    vary = {"alpha": (-1, 2, 4), "gamma": (0.0, 0.1, 2)}
    got = efold.scan(model, vary=vary, efolds=[55])
    rows = cli_json(binary, "scan", str(path), "--vary=alpha=-1:2:4", "--vary=gamma=0:0.1:2", "--efolds", "55")
    assert any(r["error"] for r in rows) and not all(r["error"] for r in rows)
    scan_columns_equal(got, rows)


def test_scan_of_several_fields_equals_the_command(binary):
    path = ROOT / "models" / "several-fields" / "two-field-quadratic-mass-ratio.toml"
    model = efold.Model.from_file(path)
    got = efold.scan(model, vary={"start.y": (10, 12, 2)}, efolds=[55])
    rows = cli_json(binary, "scan", str(path), "--vary", "start.y=10:12:2", "--efolds", "55")
    scan_columns_equal(got, rows)


def test_scan_releases_the_gil():
    model = efold.Model.from_file(ROOT / "models" / "pole-order-2-quadratic.toml")
    count = [0]
    stop = threading.Event()

    def spin():
        while not stop.is_set():
            count[0] += 1

    t = threading.Thread(target=spin)
    t.start()
    before = count[0]
    efold.scan(model, vary={"alpha": (0.1, 10, 2000, "log")})
    during = count[0] - before
    stop.set()
    t.join()
    # a scan of 2000 points takes tens of milliseconds; with the GIL held the thread would not
    # run at all in that time
    assert during > 10000, during


def test_frames_when_pandas_is_installed(binary):
    pd = pytest.importorskip("pandas")
    path = ROOT / "models" / "quadratic-monomial.toml"
    model = efold.Model.from_file(path)
    frame = model.predict_frame()
    assert isinstance(frame, pd.DataFrame)
    assert frame["n_s"].tolist() == [p["n_s"] for p in cli_json(binary, "predict", str(path))["predictions"]]
    scan = efold.scan(model, vary={"m": (1e-6, 1e-5, 3)}, frame=True)
    assert isinstance(scan, pd.DataFrame) and len(scan) == 9


# -- errors --------------------------------------------------------------------------------


def test_error_classes_are_value_errors():
    for cls in [efold.ExpressionError, efold.ModelError, efold.AnalysisError, efold.InputError]:
        assert issubclass(cls, efold.Error) and issubclass(cls, ValueError)


def test_an_expression_error_in_a_file_is_the_command_s_diagnostic(binary, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('potential = "phi^2 + tanhh(phi)"\n')
    with pytest.raises(efold.ExpressionError) as e:
        efold.Model.from_file(bad)
    assert str(e.value) == cli_error(binary, "predict", str(bad))
    assert "^^^^^" in str(e.value)


def test_a_model_error_in_a_file_is_the_command_s_diagnostic(binary, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('potential = "phi^2"\npotental = "phi^4"\n')
    with pytest.raises(efold.ModelError) as e:
        efold.Model.from_file(bad)
    assert str(e.value) == cli_error(binary, "predict", str(bad))


def test_an_inline_expression_error_points_into_the_expression():
    with pytest.raises(efold.ExpressionError) as e:
        efold.Model(potential="phi^2 + tanhh(phi)")
    lines = str(e.value).splitlines()
    assert lines[0] == "error: unknown function `tanhh`"
    assert "--> potential:1:9" in lines[1]
    source, carets = lines[2], lines[3]
    assert source.endswith("phi^2 + tanhh(phi)")
    assert carets.index("^") == source.index("tanhh") and carets.count("^") == len("tanhh")
    with pytest.raises(efold.ExpressionError, match="params.alpha"):
        efold.Model(potential="alpha*phi^2", params={"alpha": "1/(2"})


def test_a_bad_field_name_is_refused_with_a_caret():
    with pytest.raises(efold.InputError) as e:
        efold.Model(potential="1", field="pi")
    assert "`pi` is a built-in name" in str(e.value) and "^^" in str(e.value)
    with pytest.raises(efold.InputError, match="not a valid name"):
        efold.Model(potential="x^2", fields=["x", "2y"], metric={"x": 1}, start={"x": 1})


def test_an_analysis_error_is_the_command_s_diagnostic(binary):
    # power-law inflation, V = exp(-lambda phi) with lambda^2 < 2, never ends (common practice)
    with pytest.raises(efold.AnalysisError) as e:
        efold.Model(potential="exp(-0.1*phi)").predict()
    assert str(e.value) == cli_error(binary, "predict", "--potential", "exp(-0.1*phi)")


def test_bad_options_are_input_errors():
    model = efold.Model.from_file(ROOT / "models" / "pole-order-2-quadratic.toml")
    with pytest.raises(efold.InputError) as e:
        model.predict(method="fast")
    assert "unknown method `fast`" in str(e.value)
    assert str(e.value).splitlines()[2].endswith("method = fast")
    with pytest.raises(efold.InputError, match="N_\\* = 0.5"):
        model.predict(efolds=[0.5])
    with pytest.raises(efold.InputError, match="too few for the exact method"):
        model.predict(method="exact", efolds=[10])
    with pytest.raises(efold.InputError, match="reheating"):
        model.predict(efolds=[50], reheat="instant")
    with pytest.raises(efold.InputError, match="equation of state"):
        model.predict(reheat={"w": 2, "temp": 1e9})
    with pytest.raises(efold.InputError, match="one-field models"):
        efold.Model.from_file(SEVERAL[-1]).predict(second_order=True)
    with pytest.raises(efold.InputError, match="above the highest supported"):
        efold.eval("phi", at=1, order=99)


def test_a_non_finite_eval_is_an_error_naming_the_subexpression(binary):
    with pytest.raises(efold.AnalysisError) as e:
        efold.eval("log(phi - 1)", at=0.5)
    assert str(e.value) == cli_error(binary, "eval", "log(phi - 1)", "--at", "phi=0.5")
