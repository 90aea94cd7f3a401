#!/usr/bin/env python3
"""Covariant derivatives of V up to order 3 in an orthonormal frame, computed with sympy.

Needs: Python 3 with sympy (and mpmath, which sympy brings). In a virtual environment:

    python3 -m venv /work/venv-ref && /work/venv-ref/bin/pip install numpy scipy sympy mpmath
    /work/venv-ref/bin/python tests/reference/gen_couplings.py > tests/reference/couplings.json

Runs in a few seconds. Written from the equations (own derivation of the index bookkeeping;
the covariant derivative is the textbook one, common practice):

    Gamma^a_bc = 1/2 G^ad (d_b G_dc + d_c G_db - d_d G_bc)
    V_;ab      = d_a d_b V - Gamma^d_ab d_d V
    V_;abc     = d_c V_;ab - Gamma^e_ca V_;eb - Gamma^e_cb V_;ae       (D_c of the tensor V_;ab)
    S_abc      = (V_;abc + V_;bca + V_;cab) / 3                        (total symmetrisation)

all symbolic (sympy differentiates the metric and V; no numbers until the end). The frame at
the point: T = pi/|pi| with |pi|^2 = G_ab pi^a pi^b, and for two fields N^a = (-T_1, T_0) /
sqrt(det G) with T_a = G_ab T^b (T turned by +90 degrees; G(N, N) = 1, G(T, N) = 0 are checked
below). The couplings: V_X = V_;a X^a / V, V_XY = V_;ab X^a Y^b / V, V_XYZ = S_abc X^a Y^b Z^c / V.

Cases (each at its point and velocity, evaluated at 30 digits):
  * curved: a non-diagonal metric with non-zero curvature, G = [[1 + y^2, x y / 2],
    [x y / 2, exp(x)]], V = 2 + x^2 + 3/10 x y^3 + cos(y), point (0.4, -0.7), pi = (0.3, -0.5);
  * flat: G = 1, the same V, point and pi;
  * polar: the flat plane in polar coordinates, G = diag(1, r^2), V = 1 + r^2 cos(t)/5 +
    r^3 sin(t)^2/7, point (1.3, 0.6), pi = (-0.2, 0.15): a flat space with Christoffel symbols,
    where S_abc must equal V_;abc (checked below).
The scalar curvature of each metric is written out too (the curved one must not be zero).
"""
import json
import sympy as sp

x, y = sp.symbols("x y", real=True)


def couplings(G, V, coords, point, pi):
    n = 2
    Ginv = G.inv()
    sub = dict(zip(coords, point))
    gam = [[[sp.Rational(1, 2) * sum(Ginv[a, d] * (sp.diff(G[d, c], coords[b]) + sp.diff(G[d, b], coords[c]) - sp.diff(G[b, c], coords[d])) for d in range(n)) for c in range(n)] for b in range(n)] for a in range(n)]
    dV = [sp.diff(V, q) for q in coords]
    W = [[sp.diff(V, coords[a], coords[b]) - sum(gam[d][a][b] * dV[d] for d in range(n)) for b in range(n)] for a in range(n)]
    T3 = [[[sp.diff(W[a][b], coords[c]) - sum(gam[e][c][a] * W[e][b] + gam[e][c][b] * W[a][e] for e in range(n)) for c in range(n)] for b in range(n)] for a in range(n)]
    ev = lambda e: sp.N(e.subs(sub), 30)
    Vn = ev(V)
    d1 = [ev(e) for e in dV]
    d2 = [[ev(W[a][b]) for b in range(n)] for a in range(n)]
    t3 = [[[ev(T3[a][b][c]) for c in range(n)] for b in range(n)] for a in range(n)]
    s3 = [[[(t3[a][b][c] + t3[b][c][a] + t3[c][a][b]) / 3 for c in range(n)] for b in range(n)] for a in range(n)]
    Gn = G.subs(sub).evalf(30)
    pi = [sp.Float(p, 30) for p in pi]
    norm = sp.sqrt(sum(Gn[a, b] * pi[a] * pi[b] for a in range(n) for b in range(n)))
    T = [p / norm for p in pi]
    Tl = [sum(Gn[a, b] * T[b] for b in range(n)) for a in range(n)]
    det = Gn.det()
    N = [-Tl[1] / sp.sqrt(det), Tl[0] / sp.sqrt(det)]
    g = lambda u, w: sum(Gn[a, b] * u[a] * w[b] for a in range(n) for b in range(n))
    assert abs(g(N, N) - 1) < 1e-25 and abs(g(T, N)) < 1e-25 and abs(g(T, T) - 1) < 1e-25
    c1 = lambda X: sum(d1[a] * X[a] for a in range(n)) / Vn
    c2 = lambda X, Y: sum(d2[a][b] * X[a] * Y[b] for a in range(n) for b in range(n)) / Vn
    c3 = lambda X, Y, Z: sum(s3[a][b][c] * X[a] * Y[b] * Z[c] for a in range(n) for b in range(n) for c in range(n)) / Vn
    # scalar curvature, MTW convention (as gen_geometry.py)
    dgam = lambda a, b, c, d: sp.diff(gam[a][b][c], coords[d])
    riem = lambda a, b, c, d: dgam(a, d, b, c) - dgam(a, c, b, d) + sum(gam[a][c][e] * gam[e][d][b] - gam[a][d][e] * gam[e][c][b] for e in range(n))
    ricci_scalar = sum(Ginv[b, d] * riem(a, b, a, d) for a in range(n) for b in range(n) for d in range(n))
    asym = max(abs(t3[a][b][c] - t3[a][c][b]) for a in range(n) for b in range(n) for c in range(n))
    f = lambda v: float(v)
    return {
        "point": [f(p) for p in point],
        "velocity": [f(p) for p in pi],
        "V": f(Vn),
        "tangent": [f(t) for t in T],
        "normal": [f(t) for t in N],
        "ricci_scalar": f(ev(ricci_scalar)),
        "largest_asymmetry_of_V_abc_in_b_c": f(asym),
        "couplings": {
            "V_T": f(c1(T)), "V_TT": f(c2(T, T)), "V_TN": f(c2(T, N)), "V_NN": f(c2(N, N)),
            "V_TTT": f(c3(T, T, T)), "V_TTN": f(c3(T, T, N)), "V_TNN": f(c3(T, N, N)), "V_NNN": f(c3(N, N, N)),
        },
    }


V_xy = 2 + x**2 + sp.Rational(3, 10) * x * y**3 + sp.cos(y)
curved = couplings(sp.Matrix([[1 + y**2, x * y / 2], [x * y / 2, sp.exp(x)]]), V_xy, (x, y), (sp.Rational(2, 5), sp.Rational(-7, 10)), ("0.3", "-0.5"))
flat = couplings(sp.eye(2), V_xy, (x, y), (sp.Rational(2, 5), sp.Rational(-7, 10)), ("0.3", "-0.5"))
r, t = sp.symbols("r t", real=True)
polar = couplings(sp.diag(1, r**2), 1 + r**2 * sp.cos(t) / 5 + r**3 * sp.sin(t)**2 / 7, (r, t), (sp.Rational(13, 10), sp.Rational(3, 5)), ("-0.2", "0.15"))
assert abs(curved["ricci_scalar"]) > 1e-3
assert abs(polar["ricci_scalar"]) < 1e-25 and polar["largest_asymmetry_of_V_abc_in_b_c"] < 1e-25
json.dump({
    "description": "Frame couplings V_X/V, V_XY/V, V_XYZ/V (covariant, symmetrised third derivative) from sympy; generated by gen_couplings.py",
    "curved": {"G": "[[1 + y^2, x*y/2], [x*y/2, exp(x)]]", "V_expression": "2 + x^2 + 3/10*x*y^3 + cos(y)", **curved},
    "flat": {"G": "[[1, 0], [0, 1]]", "V_expression": "2 + x^2 + 3/10*x*y^3 + cos(y)", **flat},
    "polar": {"G": "diag(1, r^2)", "V_expression": "1 + r^2*cos(t)/5 + r^3*sin(t)^2/7", "fields": ["r", "t"], **polar},
}, __import__("sys").stdout, indent=1)
print()
