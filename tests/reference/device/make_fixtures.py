#!/usr/bin/env python3
"""Exact open-system evolutions for the device-error tests of tests/device_errors.rs
(docs/method.md section 7). Invented test systems, not lab data.

H = sum_bonds J (X_a X_b + Y_a Y_b + Delta Z_a Z_b) + sum_i h_i Z_i in rad/us, J = 1,
Delta = 0.5, the fields h_i uniform on [-1, 1] from numpy.random.default_rng(seed), from the
product state `initial_state` (per site "0", "1" or "+", with Z|0> = +|0>: a Neel state
with site 0 in |+>). Sites are numbered row-major and bonds are listed as in src/model/lattice.rs (open
boundary).

For each case the script computes, with QuTiP's `mesolve` (PyPI `qutip`, tolerances atol 1e-12,
rtol 1e-10):
  * `closed`: <O>(t) under H from the intended state (no jumps);
  * `open`: <O>(t) with the Lindblad terms of `channels` (jump names as in
    docs/noise-record.md: dephasing L = sqrt(g) Z, decay L = sqrt(g) |0><1|, excitation
    L = sqrt(g) |1><0|, depolarising L_a = sqrt(g/4) sigma_a for a = x, y, z);
  * `prepared`: <O>(t) under H, no jumps, from the product state whose site i is flipped with
    probability eps_i (|0> <-> |1>, |+> <-> |->: trace distance eps_i from the intended site
    state).
Run: python3 make_fixtures.py (writes cases.json beside this script; qutip 5.x).
"""
import json
import os

import numpy as np
import qutip

I2 = qutip.qeye(2)
PAULI = {"X": qutip.sigmax(), "Y": qutip.sigmay(), "Z": qutip.sigmaz()}
LOWER = qutip.Qobj(np.array([[0, 1], [0, 0]], dtype=complex))  # |0><1|
RAISE = qutip.Qobj(np.array([[0, 0], [1, 0]], dtype=complex))  # |1><0|


FLIPPED = {"0": "1", "1": "0", "+": "-", "-": "+"}


def site_ket(x):
    if x in "01":
        return qutip.basis(2, int(x))
    sign = 1 if x == "+" else -1
    return (qutip.basis(2, 0) + sign * qutip.basis(2, 1)).unit()


def site_op(op, site, n):
    return qutip.tensor([op if s == site else I2 for s in range(n)])


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


def pauli_op(letters, sites, n):
    out = None
    for l, s in zip(letters, sites):
        o = site_op(PAULI[l], s, n)
        out = o if out is None else out * o
    return out


def jump_ops(jump, rate, site, n):
    if jump == "dephasing":
        return [np.sqrt(rate) * site_op(PAULI["Z"], site, n)]
    if jump == "decay":
        return [np.sqrt(rate) * site_op(LOWER, site, n)]
    if jump == "excitation":
        return [np.sqrt(rate) * site_op(RAISE, site, n)]
    if jump == "depolarising":
        return [np.sqrt(rate / 4) * site_op(PAULI[a], site, n) for a in "XYZ"]
    raise ValueError(jump)


OPTIONS = {"atol": 1e-12, "rtol": 1e-10, "nsteps": 1_000_000}


def case(name, shape, seed, times, observables, channels, eps):
    n = int(np.prod(shape))
    bonds = bonds_of(shape)
    rng = np.random.default_rng(seed)
    fields = rng.uniform(-1.0, 1.0, n)
    j, delta = 1.0, 0.5
    h = 0
    for a, b in bonds:
        for p, c in (("X", j), ("Y", j), ("Z", j * delta)):
            h = h + c * site_op(PAULI[p], a, n) * site_op(PAULI[p], b, n)
    for i in range(n):
        h = h + fields[i] * site_op(PAULI["Z"], i, n)
    # Neel, except site 0 in |+> (so that off-diagonal observables move).
    states = ["+"] + [str(i % 2) for i in range(1, n)]
    ket = qutip.tensor([site_ket(x) for x in states])
    rho0 = ket * ket.dag()
    ops = [pauli_op(o["pauli"], o["sites"], n) for o in observables]
    closed = qutip.mesolve(h, rho0, times, [], e_ops=ops, options=OPTIONS).expect
    c_ops = []
    for ch in channels:
        for s in range(n):
            c_ops += jump_ops(ch["jump"], ch["rate"], s, n)
    opened = qutip.mesolve(h, rho0, times, c_ops, e_ops=ops, options=OPTIONS).expect
    sites = []
    for i, x in enumerate(states):
        good = site_ket(x)
        bad = site_ket(FLIPPED[x])
        sites.append((1 - eps[i]) * good * good.dag() + eps[i] * bad * bad.dag())
    prepared = qutip.mesolve(
        h, qutip.tensor(sites), times, [], e_ops=ops, options=OPTIONS
    ).expect
    return {
        "name": name,
        "shape": shape,
        "bonds": bonds,
        "fields": fields.tolist(),
        "coupling": j,
        "anisotropy": delta,
        "initial_state": states,
        "times": list(times),
        "channels": channels,
        "preparation_eps": eps,
        "observables": [
            {
                **o,
                "closed": [float(x) for x in closed[k]],
                "open": [float(x) for x in opened[k]],
                "prepared": [float(x) for x in prepared[k]],
            }
            for k, o in enumerate(observables)
        ],
    }


def main():
    times = [round(0.2 * k, 10) for k in range(16)]
    obs_chain = [
        {"pauli": "Z", "sites": [1]},
        {"pauli": "ZZ", "sites": [1, 2]},
        {"pauli": "X", "sites": [2]},
        {"pauli": "XX", "sites": [0, 1]},
    ]
    cases = [
        case("chain4-dephasing", [4], 11, times, obs_chain,
             [{"jump": "dephasing", "rate": 0.05}], [0.01, 0.02, 0.03, 0.04]),
        case("chain4-decay", [4], 12, times, obs_chain,
             [{"jump": "decay", "rate": 0.2}], [0.1, 0.0, 0.05, 0.2]),
        case("chain5-depolarising", [5], 13, times, obs_chain,
             [{"jump": "depolarising", "rate": 0.1}], [0.02] * 5),
        case("chain6-mixed", [6], 14, times, obs_chain,
             [{"jump": "dephasing", "rate": 0.02}, {"jump": "decay", "rate": 0.01},
              {"jump": "excitation", "rate": 0.005}], [0.01] * 6),
        case("square2x3-decay", [2, 3], 15, times,
             [{"pauli": "Z", "sites": [0]}, {"pauli": "Z", "sites": [4]},
              {"pauli": "ZZ", "sites": [1, 4]}],
             [{"jump": "decay", "rate": 0.5}, {"jump": "dephasing", "rate": 0.1}], [0.05] * 6),
    ]
    out = {
        "generator": "tests/reference/device/make_fixtures.py",
        "qutip": qutip.__version__,
        "numpy": np.__version__,
        "cases": cases,
    }
    here = os.path.dirname(os.path.abspath(__file__))
    with open(os.path.join(here, "cases.json"), "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
