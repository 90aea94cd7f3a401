#!/usr/bin/env python3
"""efold beside a straightforward Python route (sympy derivatives, lambdify, scipy quad and
brentq), on the same models, in one run: in-process time per full prediction, whole-process
wall time, and the agreement of n_s and r.

    python3 benches/side_by_side.py --peer PATH/TO/python_route.py

The Python route must accept --V --K --param --interval --top --efolds --repeat and print JSON
with `cases` (N_star, n_s, r) and `seconds_per_prediction_median`; it needs sympy, scipy and
numpy. efold is built in release mode first.
"""
import argparse, json, os, statistics, subprocess, sys, time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

CASES = [
    # name, model file, python route arguments
    ("pole-order-2-quadratic", "models/pole-order-2-quadratic.toml",
     ["--V", "phi^2/(6*alpha)", "--K", "1/(1-phi^2/(6*alpha))^2", "--param", "alpha=1",
      "--interval", "0", "sqrt(6*alpha)", "--top", "hi"]),
    ("exponential-plateau", "models/exponential-plateau.toml",
     ["--V", "V0*(1-exp(-b*phi))^2", "--param", "V0=1e-10", "--param", "b=sqrt(2/3)",
      "--interval", "0", "60", "--top", "hi"]),
    ("quadratic-monomial", "models/quadratic-monomial.toml",
     ["--V", "m^2*phi^2/2", "--param", "m=6e-6", "--interval", "0", "100", "--top", "hi"]),
    ("nonminimal-quartic", "models/nonminimal-quartic.toml",
     ["--V", "lam*phi^4/(4*(1+xi*phi^2)^2)", "--K", "(1+xi*phi^2+6*xi^2*phi^2)/(1+xi*phi^2)^2",
      "--param", "lam=1e-10", "--param", "xi=100", "--interval", "0", "100", "--top", "hi"]),
]


def wall(cmd, repeat):
    times = []
    out = None
    for _ in range(repeat):
        t = time.perf_counter()
        out = subprocess.run(cmd, capture_output=True, text=True, cwd=ROOT, check=True).stdout
        times.append(time.perf_counter() - t)
    return statistics.median(times), out


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--peer", required=True, help="path of the Python route script")
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    subprocess.run(["cargo", "build", "--release", "--quiet", "--example", "time_predict"], cwd=ROOT, check=True)
    subprocess.run(["cargo", "build", "--release", "--quiet"], cwd=ROOT, check=True)
    efold = os.path.join(ROOT, "target", "release", "efold")
    timer = os.path.join(ROOT, "target", "release", "examples", "time_predict")
    rows = []
    for name, model, peer_args in CASES:
        inproc = json.loads(subprocess.run([timer, model, "2000"], capture_output=True, text=True,
                                           cwd=ROOT, check=True).stdout)
        e_wall, _ = wall([efold, "predict", model, "--format", "json"], 20)
        peer = json.loads(subprocess.run([sys.executable, args.peer, *peer_args, "--efolds", "50,55,60",
                                          "--repeat", str(args.repeat)], capture_output=True, text=True,
                                         check=True).stdout)
        p_wall, _ = wall([sys.executable, args.peer, *peer_args, "--efolds", "50,55,60", "--repeat", "1"], 3)
        dn = max(abs(a["n_s"] - b["n_s"]) / abs(b["n_s"]) for a, b in zip(inproc["predictions"], peer["cases"]))
        dr = max(abs(a["r"] - b["r"]) / abs(b["r"]) for a, b in zip(inproc["predictions"], peer["cases"]))
        rows.append((name, inproc["seconds_median"], peer["seconds_per_prediction_median"], e_wall, p_wall, dn, dr))
    print(f"{'model':24} {'efold in-proc':>14} {'python in-proc':>15} {'ratio':>8} "
          f"{'efold wall':>11} {'python wall':>12} {'ratio':>7} {'|dn_s|/n_s':>11} {'|dr|/r':>9}")
    for name, ei, pi, ew, pw, dn, dr in rows:
        print(f"{name:24} {ei*1e6:11.1f} us {pi*1e3:12.2f} ms {pi/ei:8.0f} "
              f"{ew*1e3:8.2f} ms {pw*1e3:9.1f} ms {pw/ew:7.0f} {dn:11.1e} {dr:9.1e}")


if __name__ == "__main__":
    main()
