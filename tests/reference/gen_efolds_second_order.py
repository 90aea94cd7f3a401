#!/usr/bin/env python3
"""The slow-roll e-fold count to second order, and the exact background's, with mpmath.

Needs: Python 3 with mpmath and scipy (see gen_couplings.py for the venv):

    /work/venv-ref/bin/python tests/reference/gen_efolds_second_order.py > tests/reference/efolds_second_order.json

Written from the equations (own derivation, canonical field, M_p = 1):

    dN/dphi = -1/sqrt(2 eps_H)                                  (dN = H dt, eps_H = phi'^2/2)
    eps_H   = eps_V - 4/3 eps_V^2 + 2/3 eps_V eta_V + O(3)      (Hamilton-Jacobi, common practice)
    N_1(phi) = int_{phi_end}^{phi} V/V' dphi
    N_2(phi) = int_{phi_end}^{phi} V/V' (1 + 2/3 eps_V - 1/3 eta_V) dphi

with phi_end at eps_V = 1 for both. The exact count is the background in e-folds,
pi = dphi/dN, dpi/dN = -(3 - pi^2/2)(pi + V'/V), started 2 units of phi above the point on
the slow-roll velocity (the attractor is reached long before), from where phi passes the
point to eps_H = pi^2/2 = 1, by scipy's DOP853 at rtol 1e-13.

For each model and N_*: phi_* of N_1 and of N_2 (30 digits, mpmath quad and findroot), and the
exact e-folds from each phi_* to the end.
"""
import json

import mpmath as mp
import numpy as np
from scipy.integrate import solve_ivp

mp.mp.dps = 30


def plateau():
    b = mp.sqrt(mp.mpf(2) / 3)
    v = lambda p: (1 - mp.exp(-b * p)) ** 2
    return "plateau", v, mp.mpf(3)


def quadratic():
    return "quadratic", (lambda p: p * p), mp.mpf(3)


def run(name, v, guess):
    dv = lambda p: mp.diff(v, p)
    d2v = lambda p: mp.diff(v, p, 2)
    eps = lambda p: (dv(p) / v(p)) ** 2 / 2
    eta = lambda p: d2v(p) / v(p)
    phi_end = mp.findroot(lambda p: eps(p) - 1, mp.mpf("0.9") if name == "plateau" else mp.mpf("1.4"))
    n1 = lambda p: mp.quad(lambda x: v(x) / dv(x), [phi_end, p])
    n2 = lambda p: mp.quad(lambda x: v(x) / dv(x) * (1 + 2 * eps(x) / 3 - eta(x) / 3), [phi_end, p])

    # the exact background in floats
    vf = lambda p: float(v(p))
    dvf = lambda p: float(dv(p))

    def rhs(_, y):
        p, pi = y
        return [pi, -(3 - pi * pi / 2) * (pi + dvf(p) / vf(p))]

    def exact_efolds(p0):
        start = p0 + 2.0
        end = lambda _, y: y[1] ** 2 / 2 - 1
        end.terminal = True
        end.direction = 1
        cross = lambda _, y: y[0] - p0
        s = solve_ivp(rhs, [0, 1e5], [start, -dvf(start) / vf(start)], method="DOP853",
                      events=[end, cross], rtol=1e-13, atol=1e-15)
        return s.t_events[0][0] - s.t_events[1][0]

    out = {"phi_end": float(phi_end), "cases": []}
    for n_star in [50, 60, 100]:
        p1 = mp.findroot(lambda p: n1(p) - n_star, guess)
        p2 = mp.findroot(lambda p: n2(p) - n_star, p1)
        out["cases"].append({
            "n_star": n_star,
            "phi_star_first": float(p1),
            "phi_star_second": float(p2),
            "exact_efolds_from_first": exact_efolds(float(p1)),
            "exact_efolds_from_second": exact_efolds(float(p2)),
        })
    return name, out


def main():
    res = {}
    for name, v, g in [plateau(), quadratic()]:
        guess = mp.mpf(5.5) if name == "plateau" else mp.mpf(15)
        k, o = run(name, v, guess)
        res[k] = o
    print(json.dumps(res, indent=2))


if __name__ == "__main__":
    main()
