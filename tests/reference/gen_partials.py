#!/usr/bin/env python3
"""Reference values for expressions of several fields, computed independently of efold with
sympy, straight from the definitions.

Each case is an expression in efold's syntax (also valid sympy after `^` -> `**`), its fields
in order, parameter values, a point p and a direction d of field space. The script gives

- `value`: f(p);
- `gradient`: the first partial derivatives df/dx_i at p (sympy's `diff`);
- `hessian`: the second partial derivatives d2f/dx_i dx_j at p (`diff` twice);
- `jet`: the Taylor coefficients of t -> f(p + t d) at t = 0 to order 8 (sympy's `series`
  in t, then the coefficient of each power of t).

Points and directions are dyadic fractions, exact in binary, so efold evaluates at the very
point sympy does; parameters are exact numbers. Everything is evaluated with 30-digit
arithmetic and rounded to double precision. Rerun to regenerate:

    python3 tests/reference/gen_partials.py > tests/reference/partials.json
"""
import json
import sympy as sp

ORDER = 8
DIGITS = 30

# (expression, fields, parameters, point, direction)
CASES = [
    # two fields
    ("m^2*phi^2/2 + g*phi^2*chi^2", ["phi", "chi"], {"m": "1/2", "g": "3"}, ["1.25", "-0.75"], ["1", "0.5"]),
    ("exp(-a*phi)*(1 + chi^2)", ["phi", "chi"], {"a": "sqrt(2/3)"}, ["2.5", "0.375"], ["-0.5", "1.5"]),
    ("lam*(phi^2 + chi^2 - v^2)^2/4", ["phi", "chi"], {"lam": "1/10", "v": "2"}, ["1.5", "0.5"], ["0.25", "-1"]),
    ("tanh(phi/sqrt(6*alpha))^2 + sin(chi)*log(1 + phi^2)", ["phi", "chi"], {"alpha": "1/3"}, ["0.75", "1.125"],
     ["1", "1"]),
    ("phi^chi", ["phi", "chi"], {}, ["1.5", "0.625"], ["0.5", "-0.25"]),
    ("sqrt(phi^2 + chi^2)", ["phi", "chi"], {}, ["0.75", "-1.25"], ["1", "2"]),
    ("atan(chi/phi) + phi/chi", ["phi", "chi"], {}, ["1.25", "0.5"], ["-1", "0.75"]),
    # a polynomial in the second field (one polynomial instruction) times a function of the first
    ("exp(phi)*(1 + chi + chi^2/2 + chi^3/6 - c*chi^5)", ["phi", "chi"], {"c": "1/7"}, ["0.25", "-1.5"],
     ["0.5", "1"]),
    # monomials of two different fields: not one polynomial
    ("1 + x + x^2 + y^3 + y", ["x", "y"], {}, ["0.5", "-2"], ["1", "-0.5"]),
    # three fields
    ("phi*chi*sigma + cosh(sigma - phi)", ["phi", "chi", "sigma"], {}, ["0.5", "-1.25", "1.75"], ["1", "0.5", "-0.25"]),
    ("(phi^2 + chi^2 + sigma^2)^1.5/(1 + sigma^2)", ["phi", "chi", "sigma"], {}, ["0.75", "0.5", "-1"],
     ["0.25", "1", "0.5"]),
    ("exp(-phi^2 - chi^2)*cos(k*sigma)", ["phi", "chi", "sigma"], {"k": "3"}, ["0.25", "-0.5", "0.125"],
     ["1", "1", "1"]),
    ("acosh(2 + y^2)*asinh(x) + atanh(z/3)*abs(x - 5) + sech(y*z)", ["x", "y", "z"], {}, ["1.5", "0.75", "-1.25"],
     ["0.5", "-1", "0.25"]),
    ("pow(x, 2.5)*y^-2 - log(z)/x + sqrt(y*z)", ["x", "y", "z"], {}, ["1.25", "0.875", "2.5"], ["1", "0.5", "-0.5"]),
]


def parse(text, fields, params):
    locs = {"ln": sp.log, "sech": sp.sech, "pow": sp.Pow}
    syms = [sp.Symbol(f, real=True) for f in fields]
    locs.update(dict(zip(fields, syms)))
    for name in params:
        locs[name] = sp.Symbol(name + "_")
    expr = sp.sympify(text.replace("^", "**"), locals=locs, rational=True)
    subs = {sp.Symbol(k + "_"): sp.sympify(v) for k, v in params.items()}
    return expr.subs(subs), syms


def num(e):
    return float(sp.N(e, DIGITS))


def main():
    out = []
    t = sp.Symbol("t", real=True)
    for text, fields, params, point, direction in CASES:
        f, syms = parse(text, fields, params)
        p = [sp.Rational(v) for v in point]
        d = [sp.Rational(v) for v in direction]
        at = dict(zip(syms, p))
        grad = [sp.diff(f, x) for x in syms]
        hess = [[sp.diff(g, y) for y in syms] for g in grad]
        line = f.subs({x: pi + t * di for x, pi, di in zip(syms, p, d)}, simultaneous=True)
        series = sp.series(line, t, 0, ORDER + 1).removeO()
        jet = [num(series.coeff(t, k)) for k in range(ORDER + 1)]
        out.append({
            "expr": text,
            "fields": fields,
            "params": {k: num(sp.sympify(v)) for k, v in params.items()},
            "point": [float(v) for v in p],
            "direction": [float(v) for v in d],
            "value": num(f.subs(at)),
            "gradient": [num(g.subs(at)) for g in grad],
            "hessian": [[num(h.subs(at)) for h in row] for row in hess],
            "jet": jet,
        })
    print(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
