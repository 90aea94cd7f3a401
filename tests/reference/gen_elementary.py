#!/usr/bin/env python3
"""Reference values of exp and tanh for the tests of efold's own kernels
(src/numerics/elementary.rs), computed independently with mpmath at 80 digits and rounded to
double precision. The points are doubles drawn with a fixed seed (so the file is reproducible),
spread logarithmically over the ranges that matter, both signs. Rerun to regenerate:

    python3 tests/reference/gen_elementary.py > tests/reference/elementary.json
"""
import json
import random
import mpmath

mpmath.mp.dps = 80
rng = random.Random(20261202)


def points(lo_exp, hi_exp, n):
    """n doubles with |x| log-uniform in [10^lo_exp, 10^hi_exp], random sign."""
    out = []
    for _ in range(n):
        x = 10 ** rng.uniform(lo_exp, hi_exp)
        out.append(x if rng.random() < 0.5 else -x)
    return out


exp_x = points(-12, 2.85, 400)  # |x| up to about 708: results stay in the normal range
tanh_x = points(-12, 1.6, 400)  # up to |x| = 40, where tanh is 1 in double precision

print(json.dumps({
    "source": "mpmath %s, 80 digits, rounded to double" % mpmath.__version__,
    "exp": [[x, float(mpmath.exp(mpmath.mpf(x)))] for x in exp_x],
    "tanh": [[x, float(mpmath.tanh(mpmath.mpf(x)))] for x in tanh_x],
}, indent=None))
