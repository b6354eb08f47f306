"""Reference values for src/checks (quassay), from SciPy and statsmodels.

Run from this folder:  python3 make_fixtures.py
Writes chi2.json (scipy.stats.chi2.sf / isf over 1..10^4 degrees of freedom, and beside each
survival value the same quantity from mpmath at 40 significant digits, because SciPy's own
relative error reaches about 6e-13 on this grid) and holm.json
(statsmodels.stats.multitest.multipletests(method="holm") on fixed p-value lists).
Versions used for the committed files are recorded inside them.
"""

import json

import mpmath as mp
import numpy as np
import scipy
import scipy.stats as st
import statsmodels
from statsmodels.stats.multitest import multipletests

DFS = [1, 2, 3, 4, 5, 7, 10, 15, 20, 30, 50, 99, 100, 200, 500, 999, 1000, 2000, 5000, 10000]


def chi2_rows():
    sf_rows, isf_rows = [], []
    for df in DFS:
        # Points around the bulk (relative to the mean df and the sd sqrt(2 df)) and in both tails.
        sd = np.sqrt(2.0 * df)
        xs = {df * f for f in (1e-6, 1e-3, 0.1, 0.5, 0.9, 1.0, 1.1, 2.0, 5.0)}
        xs |= {df + z * sd for z in (-3, -1, -0.1, 0.1, 1, 3, 6, 10, 20)}
        for x in sorted(xs):
            if x <= 0:
                continue
            sf = float(st.chi2.sf(x, df))
            if sf < 1e-300 or sf == 1.0:
                continue
            exact = mp.gammainc(mp.mpf(df) / 2, mp.mpf(float(x)) / 2, mp.inf, regularized=True)
            sf_rows.append({"df": df, "x": float(x), "sf": sf, "sf_mpmath": float(exact)})
        for q in (1e-300, 1e-100, 1e-20, 1e-10, 1e-6, 1e-3, 0.01, 0.05, 0.1, 0.5, 0.9, 0.99,
                  0.999999):
            isf_rows.append({"df": df, "q": q, "isf": float(st.chi2.isf(q, df))})
    return sf_rows, isf_rows


def holm_rows():
    cases = [
        [0.01, 0.04, 0.03, 0.005],
        [0.0001, 0.02, 0.02, 0.3, 0.049, 0.5, 0.011],
        [0.9, 0.8, 0.7],
        [1e-12, 1e-3, 0.02, 0.2, 0.21, 0.04, 0.0125, 0.6, 0.0099, 1.0],
    ]
    rows = []
    for p in cases:
        reject, adj, _, _ = multipletests(p, alpha=0.05, method="holm")
        rows.append({"p": p, "alpha": 0.05, "adjusted": [float(a) for a in adj],
                     "reject": [bool(r) for r in reject]})
    return rows


def main():
    mp.mp.dps = 40
    sf_rows, isf_rows = chi2_rows()
    with open("chi2.json", "w") as f:
        json.dump({"source": f"scipy {scipy.__version__}, numpy {np.__version__}, "
                             f"mpmath {mp.__version__} at 40 digits",
                   "sf": sf_rows, "isf": isf_rows}, f, indent=1)
        f.write("\n")
    with open("holm.json", "w") as f:
        json.dump({"source": f"statsmodels {statsmodels.__version__}", "cases": holm_rows()},
                  f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
