#!/usr/bin/env python3
"""Exact field-space geometry for the multi-field tests, computed with sympy.

Needs: Python 3 with sympy (and mpmath, which sympy brings). In a virtual environment:

    python3 -m venv /work/venv-ref && /work/venv-ref/bin/pip install numpy scipy sympy mpmath
    /work/venv-ref/bin/python tests/reference/gen_geometry.py > tests/reference/geometry.json

Runs in a few seconds.

Conventions (Misner, Thorne & Wheeler, Gravitation, 1973, ch. 8 and 11; from memory):

    Gamma^a_bc = 1/2 G^ad (d_b G_dc + d_c G_db - d_d G_bc)
    R^a_bcd    = d_c Gamma^a_db - d_d Gamma^a_cb + Gamma^a_ce Gamma^e_db - Gamma^a_de Gamma^e_cb
    R_bd       = R^a_bad          (Ricci),   R = G^bd R_bd   (Ricci scalar)

With this convention a sphere of radius rho has R_abcd = (G_ac G_bd - G_ad G_bc)/rho^2 > 0 and
R = 2/rho^2 (checked below on the unit sphere). In two dimensions the Gaussian curvature is R/2.

Metrics:
  * the Poincare disk G = 6 alpha (dx^2 + dy^2)/(1 - x^2 - y^2)^2 (the field space of the
    hyperbolic-disk models; Kallosh & Linde 2013 and later work, from memory). Expected
    R = -4/(3 alpha), Gaussian curvature -2/(3 alpha): the disk 4|dz|^2/(1-|z|^2)^2 has
    curvature -1 (common practice) and G is that metric times 6 alpha/4.
  * the product of two one-field pole metrics G = diag(g_a(x), g_b(y)), g_a(u) = 1/(1 -
    u^2/(6a))^2: each factor depends on its own coordinate only, so the space is flat (a product
    of two lines); the Riemann tensor vanishes identically.

Output: every symbolic component (as a sympy string, for reading) and its value at
(x, y) = (0.3, -0.2) with alpha = 1 (and a = 1/2, b = 1/3 for the product metric), as floats
evaluated at 50 digits and rounded to double. Index order in the JSON keys: "Gamma^a_bc" is
stored under "a,b,c" with indices 0 = x, 1 = y; "R^a_bcd" under "a,b,c,d". All entries are
listed, zeros included.
"""
import json
import sys

import sympy as sp


def christoffel(G, X):
    n = len(X)
    Gi = sp.simplify(G.inv())
    Gam = [[[sp.simplify(sum(Gi[a, d] * (sp.diff(G[d, c], X[b]) + sp.diff(G[d, b], X[c])
                                          - sp.diff(G[b, c], X[d])) for d in range(n)) / 2)
             for c in range(n)] for b in range(n)] for a in range(n)]
    return Gi, Gam


def riemann(Gam, X):
    """R^a_bcd in the convention of the module docstring."""
    n = len(X)
    R = [[[[sp.simplify(sp.diff(Gam[a][d][b], X[c]) - sp.diff(Gam[a][c][b], X[d])
                        + sum(Gam[a][c][e] * Gam[e][d][b] - Gam[a][d][e] * Gam[e][c][b]
                              for e in range(n)))
            for d in range(n)] for c in range(n)] for b in range(n)] for a in range(n)]
    return R


def ricci(R, Gi, n):
    Ric = sp.Matrix(n, n, lambda b, d: sp.simplify(sum(R[a][b][a][d] for a in range(n))))
    scal = sp.simplify(sum(Gi[b, d] * Ric[b, d] for b in range(n) for d in range(n)))
    return Ric, scal


def analyse(G, X, point, n_digits=50):
    n = len(X)
    Gi, Gam = christoffel(G, X)
    R = riemann(Gam, X)
    Ric, scal = ricci(R, Gi, n)

    def num(e):
        return float(sp.N(e.subs(point), n_digits))

    out = {"metric": {f"{a},{b}": str(G[a, b]) for a in range(n) for b in range(n)},
           "Gamma_symbolic": {}, "Gamma_at_point": {},
           "Riemann_symbolic": {}, "Riemann_at_point": {},
           "metric_at_point": {f"{a},{b}": num(G[a, b]) for a in range(n) for b in range(n)},
           "inverse_metric_at_point": {f"{a},{b}": num(Gi[a, b]) for a in range(n)
                                       for b in range(n)}}
    for a in range(n):
        for b in range(n):
            for c in range(n):
                out["Gamma_symbolic"][f"{a},{b},{c}"] = str(Gam[a][b][c])
                out["Gamma_at_point"][f"{a},{b},{c}"] = num(Gam[a][b][c])
                for d in range(n):
                    out["Riemann_symbolic"][f"{a},{b},{c},{d}"] = str(R[a][b][c][d])
                    out["Riemann_at_point"][f"{a},{b},{c},{d}"] = num(R[a][b][c][d])
    out["Ricci_scalar_symbolic"] = str(scal)
    out["Ricci_scalar_at_point"] = num(scal)
    if n == 2:
        out["Gaussian_curvature_symbolic"] = str(sp.simplify(scal / 2))
        out["Gaussian_curvature_at_point"] = num(scal / 2)
    return out, R, scal


def main():
    x, y, al, a, b = sp.symbols("x y alpha a b", positive=True)
    X = [x, y]

    # Check of the sign convention on the unit sphere (theta, phi): R must be +2.
    th, ph = sp.symbols("theta phi")
    _, Gs = christoffel(sp.diag(1, sp.sin(th) ** 2), [th, ph])
    Rs = riemann(Gs, [th, ph])
    _, scal_sphere = ricci(Rs, sp.diag(1, 1 / sp.sin(th) ** 2), 2)
    assert sp.simplify(scal_sphere - 2) == 0, scal_sphere

    # Poincare disk.
    Gd = sp.diag(6 * al / (1 - x ** 2 - y ** 2) ** 2, 6 * al / (1 - x ** 2 - y ** 2) ** 2)
    pt = {x: sp.Rational(3, 10), y: sp.Rational(-2, 10), al: 1}
    disk, Rd, scal_d = analyse(Gd, X, pt)
    disk["Ricci_scalar_expected"] = "-4/(3*alpha)"
    disk["Ricci_scalar_matches_expected"] = bool(sp.simplify(scal_d + sp.Rational(4, 3) / al) == 0)
    disk["Gaussian_curvature_matches_minus_2_over_3_alpha"] = bool(
        sp.simplify(scal_d / 2 + sp.Rational(2, 3) / al) == 0)
    # Constant curvature: R_abcd = K (G_ac G_bd - G_ad G_bc) with K = -2/(3 alpha).
    K = -sp.Rational(2, 3) / al
    ok = True
    for i in range(2):
        for j in range(2):
            for k in range(2):
                for l in range(2):
                    low = sum(Gd[i, m] * Rd[m][j][k][l] for m in range(2))
                    want = K * (Gd[i, k] * Gd[j, l] - Gd[i, l] * Gd[j, k])
                    ok = ok and sp.simplify(low - want) == 0
    disk["R_abcd_equals_K_(G_ac_G_bd_minus_G_ad_G_bc)"] = bool(ok)
    disk["point"] = {"x": 0.3, "y": -0.2, "alpha": 1.0}

    # Product of two pole metrics: flat.
    ga = 1 / (1 - x ** 2 / (6 * a)) ** 2
    gb = 1 / (1 - y ** 2 / (6 * b)) ** 2
    ptp = {x: sp.Rational(3, 10), y: sp.Rational(-2, 10), a: sp.Rational(1, 2), b: sp.Rational(1, 3)}
    prod, Rp, scal_p = analyse(sp.diag(ga, gb), X, ptp)
    prod["flat"] = bool(all(sp.simplify(Rp[i][j][k][l]) == 0 for i in range(2) for j in range(2)
                            for k in range(2) for l in range(2)))
    prod["point"] = {"x": 0.3, "y": -0.2, "a": 0.5, "b": 1.0 / 3.0}

    doc = {
        "description": "Christoffel symbols, Riemann tensor and curvature of two field-space "
                       "metrics; generated by gen_geometry.py (sympy, exact; numbers at 50 "
                       "digits rounded to double)",
        "conventions": {
            "Gamma": "Gamma^a_bc = 1/2 G^ad (d_b G_dc + d_c G_db - d_d G_bc), key 'a,b,c'",
            "Riemann": "R^a_bcd = d_c Gamma^a_db - d_d Gamma^a_cb + Gamma^a_ce Gamma^e_db "
                       "- Gamma^a_de Gamma^e_cb, key 'a,b,c,d' (Misner, Thorne & Wheeler 1973; "
                       "positive for a sphere, checked: unit sphere R = 2)",
            "Ricci": "R_bd = R^a_bad, R = G^bd R_bd",
            "indices": "0 = x, 1 = y",
        },
        "poincare_disk": disk,
        "product_of_pole_metrics": prod,
    }
    json.dump(doc, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
