#!/usr/bin/env python3
"""Fixtures for the bias of noise drawn again every tau (docs/method.md §3, "Windows").

One site, H = 0, initial state |+>, noise delta * g(s) * Z with g(s) constant on the windows
[k tau, (k+1) tau) and independent between windows, observable X (spread s_O = 2). Then
f(g) = cos(2 delta sum_w g_w l_w), with l_w the window lengths inside [0, t], and

  exact bias        E f - f(0) = prod_w E cos(2 delta g l_w) - 1    (independence, symmetry),
  second-order term of the Dyson series (the first that survives the average):
                    -(1/2) (2 delta)^2 E (int_0^t g(s) ds)^2
                  = -2 delta^2 sigma^2 int_0^t int_0^t C(s1, s2) ds1 ds2,
  C(s1, s2) = 1 when s1 and s2 lie in the same window, else 0 (the covariance of g / sigma^2).

Both are computed by SciPy quadrature (scipy.integrate.quad, nested for the double integral,
with the window edges as break points), independently of quassay's closed forms. Run from
this folder: python3 make_fixtures.py  (writes bias.json).
"""
import json
import math

import scipy
from scipy import integrate

FAMILIES = {
    # name: (E cos(a g) by quadrature over the law, sigma^2)
    "uniform": (lambda a: integrate.quad(lambda g: 0.5 * math.cos(a * g), -1.0, 1.0,
                                         epsabs=1e-15, epsrel=1e-12)[0], 1.0 / 3.0),
    "two_point": (lambda a: math.cos(a), 1.0),
}


def windows(tau, t):
    edges = []
    k = 0
    while k * tau < t:
        edges.append((k * tau, min((k + 1) * tau, t)))
        k += 1
    return edges


def double_integral(tau, t):
    w = windows(tau, t)
    cuts = [a for a, _ in w][1:]

    def inner(s1):
        k = int(s1 // tau)
        a, b = k * tau, min((k + 1) * tau, t)
        return integrate.quad(lambda s2: 1.0 if a <= s2 < b else 0.0, 0.0, t,
                              points=cuts or None, limit=500, epsabs=1e-14)[0]

    return integrate.quad(inner, 0.0, t, points=cuts or None, limit=500, epsabs=1e-14)[0]


def main():
    cases = []
    for family, (ecos, var) in FAMILIES.items():
        for delta in [1e-3, 0.05, 0.3, 1.0]:
            for tau, t in [(0.1, 1.0), (0.3, 1.0), (0.25, 1.0), (1.0, 1.0), (2.0, 1.0),
                           (0.07, 2.5), (0.5, 3.2)]:
                w = windows(tau, t) if tau < t else [(0.0, t)]
                prod = 1.0
                for a, b in w:
                    prod *= ecos(2.0 * delta * (b - a))
                dd = double_integral(tau, t) if tau < t else t * t
                cases.append({
                    "family": family,
                    "delta": delta,
                    "tau": tau,
                    "t": t,
                    "exact_bias": 1.0 - prod,
                    "second_order": 2.0 * delta**2 * var * dd,
                    "sum_of_squared_lengths": dd,
                })
    out = {
        "source": "tests/reference/windows/make_fixtures.py",
        "scipy": scipy.__version__,
        "cases": cases,
    }
    with open("bias.json", "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
