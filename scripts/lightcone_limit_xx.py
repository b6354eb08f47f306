#!/usr/bin/env python3
"""How much any commutator-norm light cone could gain on an XX chain (figures, not a test).

Invented setting of the issue on tighter light cones: an open chain of N sites,
H = (J/2) sum_j (X_j X_{j+1} + Y_j Y_{j+1}) (bond norm J, hopping J), the observable Z_c at the
centre (s_O = 2), one noise source delta*g*Z_i per site. quassay's light-cone sensitivity of
source i is s_O * T_i(t), T_i = int_0^t min(1, u_i(tau)) dtau, with u_i the walk sum of
docs/method.md section 5 (reproduced below with J~ = J, i.e. the bond-noise contribution
to J~ left out, which only favours the walk sum).

Any bound that goes through the commutator norm || [O_g(tau), V_i] || must be at least its
value at g = 0. For the XX chain this is exact in closed form (Jordan-Wigner): with
U = exp(-i h tau) the single-particle propagator (h the hopping matrix),
    || [Z_c(tau), Z_i] || = 4 |U_ci| sqrt(1 - |U_ci|^2),
because [Z_c(tau), Z_i] = 4 [a^dag a, n_i] with a = sum_j U_cj c_j, which reduces to
4 |U_ci| sqrt(1 - |U_ci|^2) (d^dag b - h.c.) on the two modes b = c_i and d orthogonal to it.
The script prints, at each t, the ratio of the fluctuation constants
sqrt(sum_i T_i^2) (walk sum) / sqrt(sum_i T_i,exact^2) with T_i,exact the integral of the
exact commutator norm divided by s_O: the largest factor by which ANY commutator-norm method
could lower the light-cone fluctuation term of the site sources.

Run: python3 scripts/lightcone_limit_xx.py [N]   (NumPy and SciPy)
"""
import math
import sys

import numpy as np
from scipy.linalg import expm
from scipy.special import gammaln


def walk_sums(n, c, kmax):
    """W_k(i) for k = 1..kmax, single-site X = {c}, site sources Y_i = {i}."""
    bonds = [(j, j + 1) for j in range(n - 1)]
    nb = len(bonds)
    meets = [[e2 for e2 in range(nb) if set(bonds[e2]) & set(bonds[e])] for e in range(nb)]
    a = np.array([1.0 if c in bonds[e] else 0.0 for e in range(nb)])
    w = np.zeros((kmax + 1, n))
    for k in range(1, kmax + 1):
        for i in range(n):
            w[k, i] = sum(a[e] for e in range(nb) if i in bonds[e])
        a = np.array([sum(a[e] for e in meets[e2]) for e2 in range(nb)])
    return w


def u_of(w, i, tau):
    ks = np.arange(1, w.shape[0])
    with np.errstate(divide="ignore"):
        logs = np.where(w[1:, i] > 0, np.log(np.maximum(w[1:, i], 1e-300)) + ks * math.log(2 * tau)
                        - gammaln(ks + 1), -np.inf)
    m = logs.max()
    return math.exp(m) * np.exp(logs - m).sum() if np.isfinite(m) else 0.0


def check_closed_form():
    """The closed form against brute force on 6 sites (full 64 x 64 matrices)."""
    n, c = 6, 2
    x = np.array([[0, 1], [1, 0]], dtype=complex)
    y = np.array([[0, -1j], [1j, 0]])
    z = np.diag([1.0, -1.0]).astype(complex)

    def op(m, j):
        out = np.eye(1)
        for k in range(n):
            out = np.kron(out, m if k == j else np.eye(2))
        return out

    hh = sum(0.5 * (op(x, j) @ op(x, j + 1) + op(y, j) @ op(y, j + 1)) for j in range(n - 1))
    h1 = np.zeros((n, n))
    for j in range(n - 1):
        h1[j, j + 1] = h1[j + 1, j] = 1.0
    worst = 0.0
    for tau in [0.3, 0.9, 1.7]:
        uu = expm(-1j * hh * tau)
        zc = uu.conj().T @ op(z, c) @ uu
        p = np.abs(expm(-1j * h1 * tau)[c, :])
        for i in range(n):
            brute = np.linalg.norm(zc @ op(z, i) - op(z, i) @ zc, 2)
            closed = 4.0 * p[i] * math.sqrt(max(0.0, 1.0 - p[i] ** 2))
            worst = max(worst, abs(brute - closed))
    print(f"closed form against brute force (6 sites): largest difference {worst:.2e}")
    assert worst < 1e-10


def main():
    check_closed_form()
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 201
    c = n // 2
    h = np.zeros((n, n))
    for j in range(n - 1):
        h[j, j + 1] = h[j + 1, j] = 1.0
    taus = np.linspace(0.0, 4.0, 801)
    dt = taus[1] - taus[0]
    w = walk_sums(n, c, 160)
    exact = np.zeros((len(taus), n))
    walk = np.zeros((len(taus), n))
    for k, tau in enumerate(taus):
        u = expm(-1j * h * tau)
        p = np.abs(u[c, :])
        exact[k] = 4.0 * p * np.sqrt(np.maximum(0.0, 1.0 - p * p)) / 2.0  # / s_O
        if tau > 0:
            walk[k] = [min(1.0, u_of(w, i, tau)) for i in range(n)]
    # T_i(t) by the trapezoid rule on the grid (both integrands bounded by 1).
    t_exact = np.vstack([np.zeros(n), np.cumsum(0.5 * dt * (exact[1:] + exact[:-1]), axis=0)])
    t_walk = np.vstack([np.zeros(n), np.cumsum(0.5 * dt * (walk[1:] + walk[:-1]), axis=0)])
    print(f"open XX chain, N = {n}, observable Z_{c}, site sources Z_i, J = 1")
    print("   t   L_walk   L_exact   ratio   sources with T_walk > 1e-3 / exact")
    for t in [0.5, 1.0, 2.0, 3.0, 4.0]:
        k = int(round(t / dt))
        lw = math.sqrt((t_walk[k] ** 2).sum())
        le = math.sqrt((t_exact[k] ** 2).sum())
        print(f"{t:4.1f} {lw:8.4f} {le:9.4f} {lw / le:7.3f}   {int((t_walk[k] > 1e-3).sum())} / "
              f"{int((t_exact[k] > 1e-3).sum())}")


if __name__ == "__main__":
    main()
