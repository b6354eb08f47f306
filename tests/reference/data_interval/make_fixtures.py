"""Reference values for src/bounds/data_interval (quassay), from confseq 0.0.11 and SciPy.

confseq (Waudby-Smith & Ramdas, "Estimating means of bounded random variables by betting",
JRSS-B 2024, arXiv 2010.09686) does not build on Python 3.11 (its C++ extension), but the
modules used here (betting.py, betting_strategies.py, predmix.py, misc.py, types.py) are pure
Python. Get the source (it is not committed here):

    pip download --no-deps --no-binary :all: confseq==0.0.11
    tar xzf confseq-0.0.11.tar.gz

then run from this folder:

    CONFSEQ_SRC=/path/to/confseq-0.0.11/src python3 make_fixtures.py

The script puts CONFSEQ_SRC on sys.path with stubs for the compiled module and for matplotlib /
multiprocess (imported by betting.py / misc.py, unused by the functions called here).
Writes betting.json (per case: the data, alpha, (a) confseq's grid betting_ci, (b) the exact
endpoints found with scipy.optimize.brentq on confseq's own betting_mart capital processes,
(c) confseq's predmix_empbern_ci) and clopper_pearson.json
(scipy.stats.binomtest(k, n).proportion_ci(confidence_level=1-alpha, method="exact"), and
beside it the same ends from mpmath 50-digit bisection on the regularized incomplete beta).
"""

import json
import os
import sys
import types

import mpmath as mp
import numpy as np
import scipy

if not hasattr(np, "float_"):  # confseq's types.py / misc.py annotate with np.float_ (NumPy < 2)
    np.float_ = np.float64
import scipy.stats as st
from scipy.optimize import brentq

SRC = os.environ.get("CONFSEQ_SRC", "/work/confseq/confseq-0.0.11/src")
for name in ("matplotlib", "matplotlib.pyplot", "multiprocess", "confseq.boundaries",
             "confseq.quantiles"):
    sys.modules.setdefault(name, types.ModuleType(name))
pkg = types.ModuleType("confseq")  # skip confseq/__init__.py (it imports the C++ module)
pkg.__path__ = [os.path.join(SRC, "confseq")]
sys.modules["confseq"] = pkg
sys.path.insert(0, SRC)

from confseq.betting import betting_ci, betting_mart  # noqa: E402
from confseq.betting_strategies import lambda_predmix_eb  # noqa: E402
from confseq.predmix import predmix_empbern_ci  # noqa: E402

BREAKS = 1000


def exact_betting(x, alpha):
    """Endpoints of confseq's betting_ci without the grid: brentq on max_t ln K_t(m) - ln(2/alpha)."""
    n = len(x)
    lam = lambda y, m: lambda_predmix_eb(y, alpha=alpha / 2, fixed_n=n)
    c = np.log(2 / alpha)

    def f(m, sign):
        k = betting_mart(x, m, alpha=alpha, lambdas_fn_positive=lam, lambdas_fn_negative=lam,
                         theta=1.0 if sign > 0 else 0.0, trunc_scale=1, m_trunc=False)
        with np.errstate(divide="ignore"):
            v = np.log(np.max(k))  # running max over t, read at t = n
        return float(np.clip(v, -700, 700) - c)

    lo = 0.0 if f(0.0, +1) <= 0 else brentq(lambda m: f(m, +1), 0.0, 1.0, xtol=1e-15,
                                           rtol=8.9e-16, maxiter=500)
    hi = 1.0 if f(1.0, -1) <= 0 else brentq(lambda m: f(m, -1), 0.0, 1.0, xtol=1e-15,
                                           rtol=8.9e-16, maxiter=500)
    return lo, hi


def datasets():
    rng = np.random.default_rng(20261202)
    out = []
    sizes = [1, 2, 3, 5, 10, 20, 50, 100, 300, 1000]
    alphas = [1e-6, 1e-3, 0.01, 0.05, 0.1, 0.3]
    kinds = ["uniform", "beta", "two_point", "constant", "near_edge"]
    i = 0
    for n in sizes:
        for kind in kinds:
            if kind == "uniform":
                x = rng.uniform(0, 1, n)
            elif kind == "beta":
                x = rng.beta(2.0, 8.0, n)
            elif kind == "two_point":
                x = (rng.uniform(0, 1, n) < 0.3).astype(float)
            elif kind == "constant":
                x = np.full(n, 0.37)
            else:
                x = 1 - rng.beta(0.5, 40.0, n)
            alpha = alphas[i % len(alphas)]
            i += 1
            out.append((kind, np.round(x, 6), alpha))
    # A few large cases.
    out.append(("uniform", np.round(rng.uniform(0.2, 0.6, 3000), 6), 0.05))
    out.append(("beta", np.round(rng.beta(5.0, 5.0, 10000), 6), 1e-3))
    out.append(("near_edge", np.round(rng.beta(0.5, 60.0, 10000), 6), 0.1))
    return out


def betting_rows():
    rows = []
    for kind, x, alpha in datasets():
        x = np.clip(x, 0.0, 1.0)
        g = betting_ci(x, alpha=alpha, breaks=BREAKS)
        e = exact_betting(x, alpha)
        eb = predmix_empbern_ci(x, alpha=alpha)
        rows.append({"kind": kind, "n": len(x), "alpha": alpha, "x": [float(v) for v in x],
                     "grid": [float(g[0]), float(g[1])], "breaks": BREAKS,
                     "exact": [float(e[0]), float(e[1])],
                     "empbern": [float(eb[0]), float(eb[1])]})
    return rows


def cp_exact(k, n, alpha, ci):
    """The same ends from mpmath at 50 digits, or None where mpmath's betainc fails to converge
    (n = 10^5 and 10^6 mostly; SciPy's Beta quantiles lose up to ~1e-5 relative
    in the far tail, e.g. k = 1, n = 20, alpha = 1e-6): bisection on the binomial tails inside
    a bracket of +-1e-3 relative around SciPy's value (checked to hold a sign change)."""
    a = mp.mpf(alpha) / 2

    def root(f, guess):
        lo, hi = mp.mpf(guess) * (1 - mp.mpf("1e-3")), mp.mpf(guess) * (1 + mp.mpf("1e-3"))
        assert f(lo) < 0 < f(hi), (k, n, alpha)
        for _ in range(100):  # bracket 2e-3 relative -> below 1e-32 relative
            mid = (lo + hi) / 2
            if f(mid) > 0:
                hi = mid
            else:
                lo = mid
        return (lo + hi) / 2

    try:
        return ends(k, n, a, ci, root)
    except (ValueError, AssertionError, mp.libmp.NoConvergence):  # mpmath's hypergeometric series does not converge (large n): no value
        return None


def ends(k, n, a, ci, root):
    low = 0.0 if k == 0 else float(root(
        lambda p: mp.betainc(k, n - k + 1, 0, p, regularized=True) - a, ci.low))
    # P(X <= k; p) = integral of the Beta(k + 1, n - k) density over [p, 1].
    up = 1.0 if k == n else float(root(
        lambda p: a - mp.betainc(k + 1, n - k, p, 1, regularized=True), ci.high))
    return [low, up]


def cp_rows():
    cases = [(0, 1), (1, 1), (0, 10), (10, 10), (3, 10), (5, 10), (1, 20), (19, 20), (0, 100),
             (100, 100), (37, 100), (1, 1000), (500, 1000), (999, 1000), (0, 1000), (12, 5000),
             (4321, 10000), (0, 100000), (100000, 100000), (7, 100000), (50000, 100000),
             (1, 1000000), (0, 1000000), (1000000, 1000000), (123456, 1000000),
             (999999, 1000000), (2, 3), (17, 40), (60, 61), (250, 251)]
    alphas = [1e-6, 1e-3, 0.01, 0.05, 0.1, 0.3]
    rows = []
    for i, (k, n) in enumerate(cases):
        for alpha in (alphas[i % len(alphas)], 0.05):
            ci = st.binomtest(k, n).proportion_ci(confidence_level=1 - alpha, method="exact")
            rows.append({"k": k, "n": n, "alpha": alpha, "ci": [float(ci.low), float(ci.high)],
                         "ci_mpmath": cp_exact(k, n, alpha, ci)})
    return rows


def main():
    mp.mp.dps = 50
    src = f"confseq 0.0.11 (pure-Python modules), scipy {scipy.__version__}, numpy {np.__version__}"
    with open("betting.json", "w") as f:
        json.dump({"source": src, "cases": betting_rows()}, f, separators=(",", ":"))
    with open("clopper_pearson.json", "w") as f:
        json.dump({"source": f"scipy {scipy.__version__} binomtest(k, n).proportion_ci(method='exact'); "
                   f"ci_mpmath: mpmath {mp.__version__} at 50 digits",
                   "cases": cp_rows()}, f, indent=1)


if __name__ == "__main__":
    main()
