#!/usr/bin/env python3
"""Reference values for quassay's family constants and normal quantiles, computed with SciPy.

Run from the repository root:  python3 tests/reference/families/make_fixtures.py
Writes truncated_normal.json and normal_quantiles.json beside this script. The Rust unit tests
in src/bounds/family.rs and src/bounds/quantiles.rs read them with include_str!.

- truncated-normal standard deviation: scipy.stats.truncnorm(-c/s, c/s, scale=s).std(), and
  beside it the same number from mpmath at 40 digits (s * sqrt(int u^2 e^{-u^2/2} / int e^{-u^2/2})
  over [0, c/s]), because SciPy's value loses digits to cancellation for small c/s
- E cosh(y g) - 1 for that law: scipy.integrate.quad of 2 sinh^2(y g / 2) * pdf(g) over [-c, c]
  (the integrand is written as 2 sinh^2 so that SciPy does not lose digits to cancellation at
  small y; cosh(x) - 1 = 2 sinh^2(x/2) is an identity)
- standard normal quantiles: scipy.stats.norm.ppf(p) and norm.isf(q) (upper tail)
"""
import json
import os

import numpy as np
import mpmath as mp
import scipy
from scipy import integrate, stats

HERE = os.path.dirname(os.path.abspath(__file__))


def truncated_normal():
    std_rows = []
    cosh_rows = []
    for s in [0.1, 0.5, 1.0, 2.0]:
        for cprime in [0.01, 0.3, 1.0, 2.5, 6.0]:
            c = cprime * s
            law = stats.truncnorm(-cprime, cprime, scale=s)
            mp.mp.dps = 40
            x = mp.mpf(cprime)
            num = mp.quad(lambda u: u**2 * mp.exp(-u**2 / 2), [0, x])
            den = mp.quad(lambda u: mp.exp(-u**2 / 2), [0, x])
            exact = float(mp.mpf(s) * mp.sqrt(num / den))
            std_rows.append({"sigma": s, "cutoff": c, "std": float(law.std()), "std_mpmath": exact})
            for yc in [1e-4, 0.05, 1.0, 8.0, 60.0]:
                y = yc / c
                val, err = integrate.quad(
                    lambda g: 2.0 * np.sinh(0.5 * y * g) ** 2 * law.pdf(g),
                    -c,
                    c,
                    points=[min(y * s * s, c) * 0.999, -min(y * s * s, c) * 0.999],
                    epsabs=0.0,
                    epsrel=2e-14,
                    limit=500,
                )
                assert err <= 1e-12 * abs(val), (s, c, y, val, err)
                cosh_rows.append({"sigma": s, "cutoff": c, "y": y, "value": val})
    return {
        "source": "scipy " + scipy.__version__ + ", tests/reference/families/make_fixtures.py",
        "std": std_rows,
        "cosh_minus_one": cosh_rows,
    }


def quantiles():
    rows = []
    for p in [1e-12, 1e-9, 1e-6, 1e-4, 0.001, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9,
              0.975, 0.995, 0.9995]:
        rows.append({"p": p, "ppf": float(stats.norm.ppf(p))})
    upper = []
    for q in [1e-300, 1e-100, 1e-20, 1e-12, 1e-8, 1e-5, 0.0005, 0.005, 0.025, 0.3]:
        upper.append({"q": q, "isf": float(stats.norm.isf(q))})
    return {"source": "scipy " + scipy.__version__ + " scipy.stats.norm.ppf / norm.isf",
            "ppf": rows, "isf": upper}


def main():
    with open(os.path.join(HERE, "truncated_normal.json"), "w") as f:
        json.dump(truncated_normal(), f, indent=1)
        f.write("\n")
    with open(os.path.join(HERE, "normal_quantiles.json"), "w") as f:
        json.dump(quantiles(), f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
