#!/usr/bin/env python3
"""efold beside a straightforward Python route on a model of two fields, in one run.

The Python route is the independent reference calculation of tests/reference/gen_multifield.py
(sympy for the derivatives, scipy's solve_ivp for the background and the Mukhanov–Sasaki modes
at the same tolerances, each mode integrated on its own). Its model B is the shipped
models/several-fields/two-field-quadratic-mass-ratio.toml: V = (x^2 + 9 y^2)/2, G = 1, from
(12, 12) on the slow-roll attractor. Both predict n_s, r, alpha_s and n_t at N_* = 50, 55, 60.

Timed: the Python route in process (one prediction, exact route only), and the whole `efold
predict` process (release build; it computes the slow-roll delta-N beside the exact route as
well, so the comparison is conservative), best of five. Needs numpy, scipy and sympy.

    python3 benches/side_by_side_fields.py
"""
import json, os, subprocess, sys, time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
sys.path.insert(0, os.path.join(ROOT, "tests", "reference"))
import gen_multifield as ref  # noqa: E402

MODEL = os.path.join(ROOT, "models", "several-fields", "two-field-quadratic-mass-ratio.toml")


def main():
    subprocess.run(["cargo", "build", "--release", "-q"], cwd=ROOT, check=True)
    exe = os.path.join(ROOT, "target", "release", "efold")
    walls, out = [], None
    for _ in range(5):
        t0 = time.perf_counter()
        out = subprocess.run([exe, "predict", MODEL, "--format", "json"], capture_output=True,
                             text=True, check=True).stdout
        walls.append(time.perf_counter() - t0)
    ours = {f"{p['n_star']:g}": p for p in json.loads(out)["predictions"]}
    model = ref.models()["B"]
    _, preds, (py_wall, py_cpu) = ref.full_prediction(model, ref.TOL)
    print(f"Python route (sympy + solve_ivp), in process: {py_wall:.2f} s wall, {py_cpu:.2f} s cpu")
    print(f"efold predict, whole process, best of 5:      {min(walls) * 1e3:.1f} ms")
    print(f"ratio: {py_wall / min(walls):.0f}x")
    for ns, p in preds.items():
        q = ours[ns]
        print(f"N_* = {ns}: n_s {q['n_s']:.10f} against {p['n_s']:.10f} "
              f"(difference {q['n_s'] - p['n_s']:.1e}), r relative difference "
              f"{(q['r'] - p['r']) / p['r']:.1e}")


if __name__ == "__main__":
    main()
