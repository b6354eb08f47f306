#!/usr/bin/env python3
"""Exact commutator norms ||[Z_0(tau), Z_j]|| for the Lieb-Robinson unit tests of
src/bounds/light_cone/tests.rs (invented test systems, not lab data).

H = sum_bonds J (X_a X_b + Y_a Y_b + Delta Z_a Z_b) + sum_i h_i Z_i, J = 1, Delta = 0.5, the
fields h_i uniform on [-1, 1] from numpy.random.default_rng(seed). Z_0(tau) = e^{iH tau} Z_0
e^{-iH tau} from the eigendecomposition of the dense H (numpy.linalg.eigh); the norm is the
largest singular value (numpy.linalg.norm(., 2)). Sites are numbered row-major, bonds as in
src/model/lattice.rs (open boundary). Run: python3 make_fixtures.py (writes the JSON files
beside this script).
"""
import json
import os

import numpy as np

X = np.array([[0, 1], [1, 0]], dtype=complex)
Y = np.array([[0, -1j], [1j, 0]], dtype=complex)
Z = np.array([[1, 0], [0, -1]], dtype=complex)


def site_op(op, site, n):
    # Site i is bit i of the basis index (kron order: site n-1 first).
    out = np.array([[1.0 + 0j]])
    for s in reversed(range(n)):
        out = np.kron(out, op if s == site else np.eye(2))
    return out


def bonds_of(shape):
    if len(shape) == 1:
        return [[s, s + 1] for s in range(shape[0] - 1)]
    lx, ly = shape
    out = []
    for s in range(lx * ly):
        x, y = divmod(s, ly)
        if x + 1 < lx:
            out.append([s, s + ly])
        if y + 1 < ly:
            out.append([s, s + 1])
    return out


def case(name, shape, seed, taus):
    n = int(np.prod(shape))
    bonds = bonds_of(shape)
    rng = np.random.default_rng(seed)
    fields = rng.uniform(-1.0, 1.0, n)
    j, delta = 1.0, 0.5
    dim = 2 ** n
    h = np.zeros((dim, dim), dtype=complex)
    for a, b in bonds:
        for p, c in ((X, j), (Y, j), (Z, j * delta)):
            h += c * site_op(p, a, n) @ site_op(p, b, n)
    for i in range(n):
        h += fields[i] * site_op(Z, i, n)
    evals, vecs = np.linalg.eigh(h)
    z0 = vecs.conj().T @ site_op(Z, 0, n) @ vecs
    zj = [vecs.conj().T @ site_op(Z, s, n) @ vecs for s in range(n)]
    norms = []
    for tau in taus:
        phase = np.exp(1j * evals * tau)
        z0t = (phase[:, None] * z0) * phase.conj()[None, :]
        row = []
        for s in range(n):
            c = z0t @ zj[s] - zj[s] @ z0t
            row.append(float(np.linalg.norm(c, 2)))
        norms.append(row)
    return {
        "name": name,
        "generator": "tests/reference/lieb_robinson/make_fixtures.py (numpy %s)" % np.__version__,
        "shape": list(shape),
        "bonds": bonds,
        "j": j,
        "anisotropy": delta,
        "fields": fields.tolist(),
        "seed": seed,
        "observable_site": 0,
        "taus": list(taus),
        "commutator_norms": norms,
    }


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    taus = [round(0.05 * k, 10) for k in range(41)]
    for name, shape, seed in (("chain6", [6], 20240611), ("square3x3", [3, 3], 7)):
        data = case(name, shape, seed, taus)
        with open(os.path.join(here, name + ".json"), "w") as f:
            json.dump(data, f, indent=1)
            f.write("\n")


if __name__ == "__main__":
    main()
