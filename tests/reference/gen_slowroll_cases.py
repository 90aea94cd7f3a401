#!/usr/bin/env python3
"""Reference slow-roll predictions, computed from the equations independently of efold.

Rerun to regenerate (about two minutes):

    python3 tests/reference/gen_slowroll_cases.py > tests/reference/slowroll_cases.json

Definitions (Liddle & Lyth, Cosmological Inflation and Large-Scale Structure, CUP 2000,
ch. 3). For L = 1/2 K(phi) (dphi)^2 - V(phi) in reduced Planck units, the canonical field chi
has dchi/dphi = sqrt(K), so d/dchi = K^(-1/2) d/dphi (chain rule) and

    eps_V = (V_chi/V)^2/2,  eta_V = V_chichi/V,  xi2_V = V_chi V_chichichi/V^2,
    n_s = 1 - 6 eps_V + 2 eta_V,  r = 16 eps_V,  alpha_s = 16 eps_V eta_V - 24 eps_V^2 - 2 xi2_V.

Inflation ends at phi_end, the crossing eps_V = 1 nearest the bottom of the branch (the minimum
of V, or for the hilltop the far side). The e-folds are N(phi) = |int_{phi_end}^{phi} V K / V_phi
dphi|, and phi_* solves N(phi_*) = N_*.

Method. Each case is written in u, the distance from the top of its branch (phi = top + s u,
s = +1 or -1 toward the bottom). For a pole at the top this is the distance to the pole, so a
pivot 1e-11 from the pole (case 6) is held to full relative precision. sympy gives exact
u-derivatives and the chi-derivatives by the chain rule, simplified as rational expressions
before evaluation. mpmath at 40 digits does the rest:

  * phi_end: eps_V - 1 is sampled on a grid geometric toward both ends of the branch, the
    crossing nearest the bottom is bracketed and refined by findroot (Anderson's bracketing
    method).
  * N(u) = int_u^{u_end} V K / |dV/du| du by tanh-sinh quadrature (mpmath.quad), the interval
    split at the points u 2^k, so that every piece spans a factor of at most 2 in the distance
    to the top, where the integrand grows like a power of 1/u.
  * phi_*: N(e^t) = N_* is bracketed by halving u from u_end, then solved for t = ln u by
    findroot (Anderson).

Checks recorded under "accuracy" in the output:

  * the whole calculation is repeated at 80 digits; the largest relative change of any output
    is reported (it bounds the error of the 40-digit values far below the 17 digits printed);
  * the largest error estimate that mpmath.quad returned, relative to N;
  * N(u_*) recomputed from the exact antiderivative (sympy.integrate of the rational
    integrand), against N_*;
  * case 5: phi_end against 8 sqrt(2) (eps_V = 1 solved by hand: phi/(72 sqrt 2) = 1 - phi^2/144);
  * case 6 against the closed forms in the canonical field (Kallosh & Linde, JCAP 07 (2013) 002):
    with x = chi/sqrt(6 alpha), V = tanh^2 x, sinh 2x_end = 2/sqrt(3 alpha),
    N = (3 alpha/4)(cosh 2x_* - cosh 2x_end), eps_V = 4/(3 alpha sinh^2 2x); here those closed
    forms are re-derived symbolically from V = tanh^2 x before use, and eta_V, xi2_V are
    computed from V = tanh^2 x by sympy.

Leading order near a pole (the project's own derivation, verified symbolically below in
`verify_leading_order`). Near a pole K ~ a/rho^p with V ~ V_p (1 - c rho^m), p + m > 2:

    V K/|V_rho| ~ a rho^(1-p-m)/(m c)           =>  N = a rho^(2-p-m)/(m c (p+m-2)),
    V_chi ~ -V_p m c rho^(m-1+p/2)/sqrt(a)      =>  eps_V = m^2 c^2 rho^(2m-2+p)/(2a),
    V_chichi ~ -V_p m c (m-1+p/2) rho^(m+p-2)/a =>  eta_V = -(2m+p-2)/(2(p+m-2) N),

and since eps_V/eta_V ~ rho^m -> 0,

    n_s - 1 = -(2m+p-2)/((p+m-2) N),  r = 8 m^2 c^2 rho_*^(2m-2+p)/a,
    rho_*^(p+m-2) = a/(m c (p+m-2) N).

For cases 1, 2 and 4 the output holds these beside the full numbers; for cases 1 and 2 it adds
N_* = 1e3 and 1e4 and the relative differences of 1 - n_s and r from the leading order, with
the exponent k of their decay ~ N^-k measured between N_* = 1e3 and 1e4. The next term of N
(also the project's own) sets k: case 1 has N = 3/(16 rho^2) + (3/8) ln rho + const, so the
differences fall like ln N/N (k a little below 1); case 2 has N = 1/(16 rho^4) - 1/(8 rho^2)
+ const, so they fall like rho_*^2 ~ N^-1/2 (k near 1/2).

Numbers are printed with 17 significant digits.
"""
import sys

import mpmath as mp
import sympy as sp

u = sp.Symbol('u', positive=True)
phi = sp.Symbol('phi', real=True)
DIGITS = 40
CHECK_DIGITS = 80
N_STARS = [50, 55, 60]
LARGE_N = [1000, 10000]

# name, K and V in efold's syntax, parameters (exact), the branch (top, bottom; bottom None
# for +inf, with scan_end the end of the search for phi_end), the leading-order constants
# (a, p, c, m) or None, and N_* values beyond 50, 55, 60
CASES = [
    dict(name="pole-p2-quadratic-flat", K="3/(2*phi^2)", V="(1 - phi^2)^2", params={},
         top="0", bottom="1", lo=(sp.Rational(3, 2), 2, 2, 2), extra=LARGE_N),
    dict(name="pole-p4-quadratic-flat", K="1/phi^4", V="(1 - phi^2)^2", params={},
         top="0", bottom="1", lo=(1, 4, 2, 2), extra=LARGE_N),
    dict(name="pole-p4-linear", K="1/phi^4", V="(1 - phi)^2", params={},
         top="0", bottom="1", lo=None, extra=[]),
    dict(name="pole-p2-cubic-flat", K="3/(2*phi^2)", V="(1 - phi^3)^2", params={},
         top="0", bottom="1", lo=(sp.Rational(3, 2), 2, 2, 3), extra=[]),
    dict(name="hilltop-quadratic", K="1", V="1 - phi^2/144", params={},
         top="0", bottom=None, scan_end="12", lo=None, extra=[]),
    dict(name="pole-p2-alpha-1e-6", K="1/(1 - phi^2/(6*alpha))^2", V="phi^2/(6*alpha)",
         params={"alpha": "1/1000000"}, top="sqrt(6*alpha)", bottom="0", lo=None, extra=[]),
]


def sym(text, params):
    locs = {"phi": phi}
    for name in params:
        locs[name] = sp.Symbol(name, positive=True)
    expr = sp.sympify(text.replace("^", "**"), locals=locs)
    return expr, {sp.Symbol(k, positive=True): sp.sympify(v) for k, v in params.items()}


class Model:
    """One case in the variable u = distance from the top of the branch."""

    def __init__(self, case):
        self.case = case
        K, subs = sym(case["K"], case["params"])
        V, _ = sym(case["V"], case["params"])
        K, V = K.subs(subs), V.subs(subs)
        self.top = sym(case["top"], case["params"])[0].subs(subs)
        if case["bottom"] is None:
            self.s = 1
            self.u_max = sp.sympify(case["scan_end"])
        else:
            bottom = sym(case["bottom"], case["params"])[0].subs(subs)
            self.s = 1 if bottom > self.top else -1
            self.u_max = sp.Abs(bottom - self.top)
        # rational functions of u, factored over the field of the top's value (Q(sqrt 6) for
        # case 6), so that the zeros at the pole and at the minimum stay explicit factors and no
        # expanded polynomial is evaluated near them
        ext = [] if self.top.is_rational else [self.top]
        F = lambda e: sp.factor(sp.cancel(e), extension=ext) if ext else sp.factor(sp.cancel(e))
        at = {phi: self.top + self.s * u}
        Ku = F(K.subs(at))
        Vu = F(V.subs(at))
        mid = self.u_max / 2
        sqrtK = sp.sqrt(Ku).replace(sp.Abs, lambda a: a if a.subs(u, mid) > 0 else -a)
        d = lambda f: F(sp.diff(f, u) / sqrtK)
        Vc = d(Vu)
        Vcc = d(Vc)
        Vccc = d(Vcc)
        dV = F(sp.diff(Vu, u))
        self.exprs = {
            "V": Vu,
            "K": Ku,
            "eps": F(Vc**2 / (2 * Vu**2)),
            "eta": F(Vcc / Vu),
            "xi2": F(Vc * Vccc / Vu**2),
            "g": F(-Vu * Ku / dV),
        }
        self.antiderivative = sp.integrate(sp.apart(self.exprs["g"], u, extension=ext)
                                           if ext else sp.apart(self.exprs["g"], u), u)
        self.f = {k: sp.lambdify(u, e, "mpmath") for k, e in self.exprs.items()}
        self.G = sp.lambdify(u, self.antiderivative, "mpmath")

    def phi_of(self, uu):
        return mp.mpf(sp.N(self.top, mp.mp.dps + 10)) + self.s * uu


def grid(u_max):
    """Sample points in (0, u_max), geometric toward both ends."""
    pts = [u_max * mp.mpf(2) ** (-k) for k in range(60, 0, -1)]
    pts += [u_max * (1 - mp.mpf(2) ** (-k)) for k in range(2, 50)]
    lin = [u_max * mp.mpf(j) / 200 for j in range(1, 200)]
    return sorted(set(pts + lin))


def find_end(m):
    u_max = mp.mpf(sp.N(m.u_max, mp.mp.dps + 10))
    h = lambda x: m.f["eps"](x) - 1
    pts = grid(u_max)
    vals = [h(x) for x in pts]
    crossings = [(pts[i], pts[i + 1]) for i in range(len(pts) - 1)
                 if mp.sign(vals[i]) != mp.sign(vals[i + 1])]
    if not crossings:
        raise RuntimeError("no end of inflation on " + m.case["name"])
    a, b = crossings[-1]  # nearest the bottom
    root = mp.findroot(h, (a, b), solver="anderson")
    assert a <= root <= b, (a, root, b)
    return root


QUAD_ERR = [mp.mpf(0)]


def efolds(m, uu, u_end):
    pts = [uu]
    while pts[-1] * 2 < u_end:
        pts.append(pts[-1] * 2)
    pts.append(u_end)
    val, err = mp.quad(m.f["g"], pts, error=True)
    QUAD_ERR[0] = max(QUAD_ERR[0], abs(err / val))
    return val


def find_star(m, u_end, n_star):
    F = lambda t: efolds(m, mp.exp(t), u_end) - n_star
    hi = mp.log(u_end)
    lo = hi - mp.log(2)
    while F(lo) < 0:
        hi, lo = lo, lo - mp.log(2)
    t = mp.findroot(F, (lo, hi), solver="anderson")
    assert lo <= t <= hi, (lo, t, hi)
    return mp.exp(t)


def observables(m, uu):
    eps, eta, xi2 = m.f["eps"](uu), m.f["eta"](uu), m.f["xi2"](uu)
    return {
        "n_s": 1 - 6 * eps + 2 * eta,
        "r": 16 * eps,
        "alpha_s": 16 * eps * eta - 24 * eps**2 - 2 * xi2,
        "eps_v": eps,
        "eta_v": eta,
        "xi2_v": xi2,
    }


def leading_order(lo, n_star):
    a, p, c, m = [mp.mpf(sp.N(x, mp.mp.dps + 10)) for x in lo]
    rho = (a / (m * c * (p + m - 2) * n_star)) ** (1 / (p + m - 2))
    return {
        "n_s": 1 - (2 * m + p - 2) / ((p + m - 2) * n_star),
        "r": 8 * m**2 * c**2 * rho ** (2 * m - 2 + p) / a,
        "rho_star": rho,
    }


def run_case(m, checks):
    case = m.case
    u_end = find_end(m)
    out = {"name": case["name"], "kinetic": case["K"], "potential": case["V"],
           "params": {k: mp.mpf(sp.N(sp.sympify(v), mp.mp.dps + 10))
                      for k, v in case["params"].items()},
           "branch": {"top": m.phi_of(0),
                      "bottom": "inf" if case["bottom"] is None else m.phi_of(
                          mp.mpf(sp.N(m.u_max, mp.mp.dps + 10)))},
           "phi_end": m.phi_of(u_end)}
    if m.s < 0 and case["bottom"] is not None and "alpha" in case["params"]:
        out["phi_end_minus_pole"] = -u_end
    results = []
    for n_star in N_STARS + case["extra"]:
        us = find_star(m, u_end, n_star)
        row = {"n_star": n_star, "phi_star": m.phi_of(us)}
        if "phi_end_minus_pole" in out:
            row["phi_star_minus_pole"] = -us
        row.update(observables(m, us))
        results.append(row)
        n_exact = m.G(u_end) - m.G(us)
        checks["antiderivative"] = max(checks["antiderivative"], abs(n_exact / n_star - 1))
    out["results"] = results
    if case["lo"] is not None:
        out["leading_order"] = {
            "source": "the project's own derivation, in the docstring of gen_slowroll_cases.py",
            "a": mp.mpf(sp.N(case["lo"][0], mp.mp.dps)), "p": case["lo"][1],
            "c": case["lo"][2], "m": case["lo"][3],
            "results": [dict(n_star=row["n_star"], **{k: v for k, v in leading_order(
                case["lo"], row["n_star"]).items() if k != "rho_star"})
                for row in results]}
        if case["extra"]:
            diffs = []
            for row, lo in zip(results, out["leading_order"]["results"]):
                diffs.append({"n_star": row["n_star"],
                              "one_minus_n_s": abs((1 - row["n_s"]) / (1 - lo["n_s"]) - 1),
                              "r": abs(row["r"] / lo["r"] - 1)})
            out["leading_order_relative_difference"] = diffs
            d3 = [x for x in diffs if x["n_star"] == LARGE_N[0]][0]
            d4 = [x for x in diffs if x["n_star"] == LARGE_N[1]][0]
            span = mp.log(mp.mpf(LARGE_N[1]) / LARGE_N[0])
            out["leading_order_decay_exponent"] = {
                k: mp.log(d3[k] / d4[k]) / span for k in ("one_minus_n_s", "r")}
    return out, u_end


def check_hilltop(out, checks):
    checks["hilltop_phi_end_vs_8sqrt2"] = abs(out["phi_end"] / (8 * mp.sqrt(2)) - 1)


def closed_form_case6(out, checks):
    """Case 6 again, in the canonical field x = chi/sqrt(6 alpha) where V = tanh^2 x."""
    x, al = sp.symbols('x alpha', positive=True)
    V = sp.tanh(x)**2
    D = lambda f: sp.diff(f, x) / sp.sqrt(6 * al)
    Vc, Vcc = D(V), D(D(V))
    Vccc = D(Vcc)
    eps = Vc**2 / (2 * V**2)
    # the closed forms quoted in the docstring, re-derived here
    assert sp.simplify((eps - 4 / (3 * al * sp.sinh(2 * x)**2)).rewrite(sp.exp)) == 0
    assert sp.simplify((sp.diff(3 * al / 4 * sp.cosh(2 * x), x)
                        - sp.sqrt(6 * al) * V / Vc).rewrite(sp.exp)) == 0
    alpha = mp.mpf(1) / 10**6
    fe = sp.lambdify(x, eps.subs(al, alpha), "mpmath")
    fh = sp.lambdify(x, (Vcc / V).subs(al, alpha), "mpmath")
    fx = sp.lambdify(x, (Vc * Vccc / V**2).subs(al, alpha), "mpmath")
    x_end = mp.asinh(2 / mp.sqrt(3 * alpha)) / 2
    top = mp.sqrt(6 * alpha)
    rho_end = 2 * top / (mp.exp(2 * x_end) + 1)  # top (1 - tanh x)
    checks["case6_phi_end_vs_closed_form"] = abs(-out["phi_end_minus_pole"] / rho_end - 1)
    worst = mp.mpf(0)
    for row in out["results"]:
        x_star = mp.acosh(mp.cosh(2 * x_end) + 4 * row["n_star"] / (3 * alpha)) / 2
        rho = 2 * top / (mp.exp(2 * x_star) + 1)
        e, h, xi = fe(x_star), fh(x_star), fx(x_star)
        ref = {"phi_star_minus_pole": -rho, "n_s": 1 - 6 * e + 2 * h, "r": 16 * e,
               "alpha_s": 16 * e * h - 24 * e**2 - 2 * xi, "eps_v": e, "eta_v": h, "xi2_v": xi}
        for k, v in ref.items():
            worst = max(worst, abs(row[k] / v - 1))
    checks["case6_vs_closed_form"] = worst


def verify_leading_order(models):
    """Symbolic check of the leading-order formulas (the project's own derivation)."""
    rho, a, c, m, Vp, p, n = sp.symbols('rho a c m V_p p N', positive=True)
    K = a / rho**p
    V = Vp * (1 - c * rho**m)
    D = lambda f: sp.diff(f, rho) / sp.sqrt(K)
    Vc, Vcc = D(V), D(D(V))
    lead = lambda e, power: sp.simplify(sp.powsimp(sp.expand_power_base(
        sp.simplify(e / rho**power), force=True), force=True)).subs(rho, 0)
    eps_lead = lead(Vc**2 / (2 * V**2), 2 * m - 2 + p)
    eta_lead = lead(Vcc / V, m + p - 2)
    assert sp.simplify(eps_lead - m**2 * c**2 / (2 * a)) == 0, eps_lead
    assert sp.simplify(eta_lead + m * c * (m - 1 + p / 2) / a) == 0, eta_lead
    # N: derivative of the claimed N(rho) is minus the leading integrand V K/|V_rho|
    g_lead = lead(V * K / (-sp.diff(V, rho)), 1 - p - m)
    N_claim = a * rho**(2 - p - m) / (m * c * (p + m - 2))
    assert sp.simplify(sp.diff(N_claim, rho) + g_lead * rho**(1 - p - m)) == 0
    # eta at rho_*, with rho_*^(p+m-2) = a/(m c (p+m-2) N), and n_s - 1 = 2 eta
    eta_star = eta_lead * a / (m * c * (p + m - 2) * n)
    assert sp.simplify(2 * eta_star + (2 * m + p - 2) / ((p + m - 2) * n)) == 0
    assert sp.simplify(16 * eps_lead - 8 * m**2 * c**2 / a) == 0
    # each case's K and V have the constants used for it
    for mod in models:
        if mod.case["lo"] is None:
            continue
        a0, p0, c0, m0 = mod.case["lo"]
        Kx, Vx = mod.exprs["K"], mod.exprs["V"]
        V0 = sp.limit(Vx, u, 0)
        assert sp.limit(Kx * u**p0, u, 0) == a0
        assert sp.limit((1 - Vx / V0) / u**m0, u, 0) == c0
        # the full eta_V, expanded at u = 0, starts with the leading-order term
        ser = sp.series(mod.exprs["eta"], u, 0, m0 + p0 - 1).removeO()
        assert sp.simplify(ser - (-m0 * c0 * (m0 - 1 + sp.Rational(p0, 2)) / a0)
                           * u**(m0 + p0 - 2)) == 0, ser


def compute(models, digits):
    mp.mp.dps = digits
    QUAD_ERR[0] = mp.mpf(0)
    checks = {"antiderivative": mp.mpf(0)}
    outs = []
    for mod in models:
        out, _ = run_case(mod, checks)
        if mod.case["name"].startswith("hilltop"):
            check_hilltop(out, checks)
        if "phi_end_minus_pole" in out:
            closed_form_case6(out, checks)
        outs.append(out)
    checks["quad_error_estimate"] = QUAD_ERR[0]
    return outs, checks


def numbers(obj, path=()):
    """Flatten the mpf leaves of an output tree, keyed by path."""
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from numbers(v, path + (k,))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield from numbers(v, path + (i,))
    elif isinstance(obj, mp.mpf):
        yield path, obj


def emit(obj, indent=0):
    pad = " " * indent
    if isinstance(obj, dict) and not obj:
        return pad + "{}"
    if isinstance(obj, dict):
        items = [f'{pad} "{k}": {emit(v, indent + 1).lstrip()}' for k, v in obj.items()]
        return pad + "{\n" + ",\n".join(items) + "\n" + pad + "}"
    if isinstance(obj, list):
        return pad + "[\n" + ",\n".join(emit(v, indent + 1) for v in obj) + "\n" + pad + "]"
    if isinstance(obj, mp.mpf):
        return pad + mp.nstr(obj, 17, strip_zeros=False)
    if isinstance(obj, str):
        return pad + '"' + obj + '"'
    return pad + str(obj)


def main():
    models = [Model(c) for c in CASES]
    verify_leading_order(models)
    outs, checks = compute(models, DIGITS)
    ref, ref_checks = compute(models, CHECK_DIGITS)
    mp.mp.dps = CHECK_DIGITS
    a = dict(numbers(outs))
    b = dict(numbers(ref))
    change = max(abs(a[k] / b[k] - 1) if b[k] != 0 else abs(a[k]) for k in b)
    mp.mp.dps = DIGITS
    accuracy = {
        "digits": DIGITS,
        "max_relative_change_at_80_digits": mp.mpf(change),
        "max_quad_error_estimate_relative": checks["quad_error_estimate"],
        "max_relative_error_of_n_star_from_antiderivative": checks["antiderivative"],
        "hilltop_phi_end_relative_error_vs_8_sqrt_2": checks["hilltop_phi_end_vs_8sqrt2"],
        "case6_phi_end_relative_error_vs_closed_form": checks["case6_phi_end_vs_closed_form"],
        "case6_max_relative_error_vs_closed_form": checks["case6_vs_closed_form"],
    }
    doc = {
        "description": "Slow-roll predictions from eps_V, eta_V, xi2_V of the canonical field "
                       "(Liddle & Lyth 2000, ch. 3); generated by gen_slowroll_cases.py",
        "sources": {
            "definitions": "Liddle & Lyth, Cosmological Inflation and Large-Scale Structure, "
                           "CUP 2000, ch. 3",
            "case 6 closed forms (a check)": "Kallosh & Linde, JCAP 07 (2013) 002",
            "leading order near a pole": "the project's own derivation",
        },
        "accuracy": accuracy,
        "cases": outs,
    }
    sys.stdout.write(emit(doc) + "\n")


if __name__ == "__main__":
    main()
