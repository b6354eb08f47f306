#!/usr/bin/env python3
"""Reference values for quassay's state-vector propagator, computed independently of the Rust
code with NumPy Kronecker products and scipy.sparse.linalg.expm_multiply.

Convention (docs/simulator.md): one qubit per site, site i is bit i of the basis index,
|0> is the Z = +1 state, hbar = 1, and

    H = sum_bonds J_e (X_a X_b + Y_a Y_b + anisotropy Z_a Z_b) + sum_i (hx_i X_i + hz_i Z_i)
        + sum_extra coefficient * V,

where V is one of X, Y, Z, n = |1><1| (single site) or XX, YY, ZZ, XX+YY (two sites). With
np.kron the first factor is the most significant bit, so an operator on all sites is
kron(op_{n-1}, ..., op_0).

Run:  python3 make_fixtures.py   (writes cases.json beside this script)
Made with NumPy 2.4 and SciPy 1.17. All scenarios are invented.
"""
import json
import os

import numpy as np
import scipy
from scipy.sparse import csr_matrix, identity, kron
from scipy.sparse.linalg import expm_multiply

I2 = csr_matrix(np.eye(2, dtype=complex))
P = {
    "X": csr_matrix(np.array([[0, 1], [1, 0]], dtype=complex)),
    "Y": csr_matrix(np.array([[0, -1j], [1j, 0]], dtype=complex)),
    "Z": csr_matrix(np.array([[1, 0], [0, -1]], dtype=complex)),
    "n": csr_matrix(np.array([[0, 0], [0, 1]], dtype=complex)),
}
STATES = {
    "0": np.array([1, 0], dtype=complex),
    "1": np.array([0, 1], dtype=complex),
    "+": np.array([1, 1], dtype=complex) / np.sqrt(2),
    "-": np.array([1, -1], dtype=complex) / np.sqrt(2),
    "+i": np.array([1, 1j], dtype=complex) / np.sqrt(2),
    "-i": np.array([1, -1j], dtype=complex) / np.sqrt(2),
}


def on_sites(n, letters, sites):
    """The product of single-site operators letters[k] on sites[k]."""
    factors = [I2] * n
    for letter, s in zip(letters, sites):
        factors[s] = P[letter]
    out = csr_matrix(np.eye(1, dtype=complex))
    for s in reversed(range(n)):  # site n-1 is the most significant bit
        out = kron(out, factors[s], format="csr")
    return out


def noise_operator(n, op, sites):
    if op in ("X", "Y", "Z", "n"):
        return on_sites(n, op, sites)
    if op == "XX+YY":
        return on_sites(n, "XX", sites) + on_sites(n, "YY", sites)
    return on_sites(n, op, sites)  # XX, YY, ZZ


def hamiltonian(case):
    n = case["n_sites"]
    h = csr_matrix((2**n, 2**n), dtype=complex)
    for (a, b), j in zip(case["bonds"], case["J"]):
        h = h + j * (on_sites(n, "XX", [a, b]) + on_sites(n, "YY", [a, b])
                     + case["anisotropy"] * on_sites(n, "ZZ", [a, b]))
    for i in range(n):
        h = h + case["hx"][i] * on_sites(n, "X", [i]) + case["hz"][i] * on_sites(n, "Z", [i])
    for t in case["extra_terms"]:
        h = h + t["coefficient"] * noise_operator(n, t["operator"], t["sites"])
    return h


def initial(case):
    psi = np.array([1], dtype=complex)
    for label in reversed(case["initial_state"]):
        psi = np.kron(psi, STATES[label])
    return psi


def solve(case):
    n = case["n_sites"]
    h = hamiltonian(case)
    psi = initial(case)
    obs = [on_sites(n, o["pauli"], o["sites"]) for o in case["observables"]]
    expectations = []
    now = 0.0
    for t in case["times"]:
        if t > now:
            psi = expm_multiply(-1j * (t - now) * h, psi)
        now = t
        expectations.append([float(np.real(np.vdot(psi, o @ psi))) for o in obs])
    case["expectations"] = expectations
    case["final_state_re"] = [float(x) for x in psi.real]
    case["final_state_im"] = [float(x) for x in psi.imag]
    return case


rng = np.random.default_rng(20261130)
cases = [
    {
        "name": "chain of 6, open, X and Z fields",
        "n_sites": 6,
        "bonds": [[0, 1], [1, 2], [2, 3], [3, 4], [4, 5]],
        "J": [1.0] * 5,
        "anisotropy": 0.5,
        "hx": [round(float(x), 6) for x in rng.uniform(-0.6, 0.6, 6)],
        "hz": [round(float(x), 6) for x in rng.uniform(-0.6, 0.6, 6)],
        "extra_terms": [],
        "initial_state": ["0", "1", "0", "1", "0", "1"],
        "times": [0.0, 0.25, 0.5, 1.0, 1.7, 3.0],
        "observables": [
            {"pauli": "Z", "sites": [0]},
            {"pauli": "Z", "sites": [3]},
            {"pauli": "XX", "sites": [1, 2]},
            {"pauli": "Y", "sites": [2]},
            {"pauli": "ZYX", "sites": [5, 0, 3]},
        ],
    },
    {
        "name": "square 2x3, open, per-bond J, fields, mixed initial state",
        "n_sites": 6,
        # Bond order of the lattice module: site-major, then axis x, then y.
        "bonds": [[0, 3], [0, 1], [1, 4], [1, 2], [2, 5], [3, 4], [4, 5]],
        "J": [0.9, 1.1, 0.7, 1.0, 1.2, 0.8, 1.05],
        "anisotropy": -0.7,
        "hx": [0.3, -0.2, 0.1, 0.0, 0.25, -0.15],
        "hz": [0.05, 0.4, -0.3, 0.2, 0.0, -0.1],
        "extra_terms": [],
        "initial_state": ["+", "0", "1", "-", "+i", "-i"],
        "times": [0.0, 0.4, 0.8, 1.2, 2.5],
        "observables": [
            {"pauli": "Z", "sites": [4]},
            {"pauli": "X", "sites": [0]},
            {"pauli": "ZZ", "sites": [1, 4]},
            {"pauli": "YX", "sites": [4, 5]},
        ],
    },
    {
        "name": "periodic chain of 5 with one fixed noise realisation",
        "n_sites": 5,
        "bonds": [[0, 1], [1, 2], [2, 3], [3, 4], [4, 0]],
        "J": [0.8] * 5,
        "anisotropy": 1.0,
        "hx": [0.0] * 5,
        "hz": [0.3] * 5,
        # delta * (mu + g) for fixed g values, one term per noise instance.
        "extra_terms": (
            [{"operator": "Z", "sites": [i], "coefficient": round(0.15 * float(g), 6)}
             for i, g in enumerate(rng.uniform(-1, 1, 5))]
            + [
                {"operator": "XX+YY", "sites": [1, 2], "coefficient": 0.05},
                {"operator": "n", "sites": [4], "coefficient": 0.2},
                {"operator": "Y", "sites": [0], "coefficient": 0.1},
                {"operator": "ZZ", "sites": [2, 4], "coefficient": -0.07},
            ]
        ),
        "initial_state": ["1", "0", "0", "+", "0"],
        "times": [0.0, 0.5, 1.0, 2.0, 4.0],
        "observables": [
            {"pauli": "Z", "sites": [0]},
            {"pauli": "Z", "sites": [3]},
            {"pauli": "X", "sites": [3]},
            {"pauli": "XY", "sites": [0, 1]},
        ],
    },
]

out = {
    "made_by": "tests/reference/propagation/make_fixtures.py",
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "cases": [solve(c) for c in cases],
}
path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "cases.json")
with open(path, "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
print("wrote", path)
