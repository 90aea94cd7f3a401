#!/usr/bin/env python3
"""Reference derivatives for the jet tests, computed independently of efold with sympy.

Each case is an expression in efold's syntax (also valid sympy after `^` -> `**`), parameter
values, a point, and the value plus derivatives 1..8 with respect to the field, evaluated with
30-digit arithmetic and rounded to double precision. Rerun to regenerate:

    python3 tests/reference/gen_derivatives.py > tests/reference/derivatives.json
"""
import json
import sympy as sp

phi = sp.Symbol('phi', real=True)
ORDER = 8
DIGITS = 30

CASES = [
    # every built-in function at a point inside its domain
    ("exp(phi)", {}, "0.3"),
    ("log(phi)", {}, "1.7"),
    ("sqrt(phi)", {}, "2.2"),
    ("sin(phi)", {}, "0.9"),
    ("cos(phi)", {}, "0.9"),
    ("tan(phi)", {}, "0.6"),
    ("asin(phi)", {}, "0.35"),
    ("acos(phi)", {}, "-0.45"),
    ("atan(phi)", {}, "1.3"),
    ("sinh(phi)", {}, "-0.8"),
    ("cosh(phi)", {}, "0.8"),
    ("tanh(phi)", {}, "0.7"),
    ("sech(phi)", {}, "0.7"),
    ("asinh(phi)", {}, "1.1"),
    ("acosh(phi)", {}, "1.9"),
    ("atanh(phi)", {}, "0.4"),
    ("abs(phi)", {}, "-1.3"),
    ("pow(phi, 2.5)", {}, "1.4"),
    ("phi^-3", {}, "0.8"),
    ("phi^phi", {}, "1.2"),
    ("2^phi", {}, "0.5"),
    # composite expressions of the trade
    ("tanh(phi/sqrt(6*alpha))^2", {"alpha": "1/3"}, "1.2"),
    ("tanh(phi/sqrt(6*alpha))^2", {"alpha": "10"}, "6.5"),
    ("(1 - exp(-b*phi))^2", {"b": "sqrt(2/3)"}, "5.3"),
    ("phi^2/(1 - phi^2/c)^2", {"c": "6"}, "1.9"),
    ("1 - tanh(phi/sqrt(6*alpha))^2*exp(-phi)", {"alpha": "1"}, "0.7"),
    ("lam*phi^4/(4*(1 + xi*phi^2)^2)", {"lam": "1", "xi": "100"}, "0.3"),
    ("((1 + xi*phi^2) + 6*xi^2*phi^2)/(1 + xi*phi^2)^2", {"xi": "100"}, "0.3"),
    ("1 + cos(phi/f)", {"f": "7"}, "8.45"),
    # polynomials (compiled to one instruction) and a sum that is not one
    ("1 + 2*phi - 3*phi^2/alpha + phi^3 + alpha*phi^7 - phi^18", {"alpha": "3/2"}, "0.85"),
    ("phi^2/2 - c4*phi^4 + phi^6/c6", {"c4": "1/24", "c6": "720"}, "2.5"),
    ("phi + phi^2 + sin(phi)", {}, "0.4"),
]


def sym(text, params):
    locs = {"phi": phi, "ln": sp.log, "sech": sp.sech, "pow": sp.Pow}
    for name in params:
        locs[name] = sp.Symbol(name + "_")
    expr = sp.sympify(text.replace("^", "**"), locals=locs)
    subs = {sp.Symbol(k + "_"): sp.sympify(v) for k, v in params.items()}
    return expr.subs(subs)


def main():
    out = []
    for text, params, at in CASES:
        e = sym(text, params)
        x = sp.nsimplify(at)
        vals = []
        d = e
        for k in range(ORDER + 1):
            vals.append(float(sp.N(d.subs(phi, x), DIGITS)))
            d = sp.diff(d, phi)
        out.append({"expr": text, "params": {k: float(sp.N(sp.sympify(v), DIGITS)) for k, v in params.items()},
                    "at": float(x), "derivatives": vals})
    print(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
