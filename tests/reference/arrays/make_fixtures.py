"""Writes the fixtures of `quassay assemble`: NumPy arrays, their description, and the same
content written as a run file by h5py (an HDF5 writer independent of quassay).

Invented scenario (no real experiment): a 3 x 2 open square array, T = 6 times, R = 4
realizations, three observables: Z_2 (one site, shots as an attribute), XX_1_3 (two sites,
shots per point as an int32 array) and M (global, a sum of six one-site terms, values float32).
The numbers come from a seeded NumPy generator.

Made with (from the repository root):

    python3 tests/reference/arrays/make_fixtures.py

with NumPy 2.4.6 and h5py 3.16.0 (bundled HDF5 2.0.0). It writes, beside this script:

- times.npy (float64), traces.npz (numpy.savez_compressed: Z_2, XX_1_3, M, shots_XX_1_3,
  stderr_Z_2), bond_norms.npy (float64), description.json (format quassay-arrays v1);
- run_h5py.h5: the same content written with h5py following docs/run-format.md, supports as
  attributes (h5py's usual way), so `quassay assemble` (supports as datasets, gzip) and h5py
  write different bytes with the same content;
- noise.json: an invented noise record for certifying both.
"""

import json
import pathlib

import h5py
import numpy as np

HERE = pathlib.Path(__file__).resolve().parent


def main():
    rng = np.random.default_rng(20261203)
    t, r = 6, 4
    times = np.linspace(0.0, 1.5, t)
    shots = 200

    def binomial_means(p, n):
        """Means of n outcomes +-1 with P(+1) = p, one per realization and time."""
        k = rng.binomial(n, p)
        return 2.0 * k / n - 1.0

    p_z = 0.5 * (1.0 + np.cos(times) * np.exp(-0.2 * times))
    z2 = binomial_means(np.broadcast_to(p_z, (r, t)), shots)
    shots_xx = rng.integers(150, 250, size=(r, t)).astype(np.int32)
    xx = binomial_means(np.broadcast_to(0.5 * (1.0 + 0.8 * np.sin(times)), (r, t)), shots_xx)
    m = (np.cos(times)[None, :] * 0.5 + rng.uniform(-0.05, 0.05, size=(r, t))).astype(np.float32)
    stderr_z2 = np.sqrt(np.maximum(1.0 - z2**2, 0.0) / shots)
    bond_norms = np.linspace(0.8, 1.0, 7)

    np.save(HERE / "times.npy", times)
    np.save(HERE / "bond_norms.npy", bond_norms)
    np.savez_compressed(
        HERE / "traces.npz",
        Z_2=z2,
        XX_1_3=xx,
        M=m,
        shots_XX_1_3=shots_xx,
        stderr_Z_2=stderr_z2,
    )
    description = {
        "format": "quassay-arrays",
        "format_version": 1,
        "run_id": "invented-assemble-0001",
        "description": "invented scenario for the assemble fixtures",
        "time_unit": "us",
        "times": "times.npy",
        "lattice": {"geometry": "square", "shape": [3, 2], "boundary": "open"},
        "hamiltonian": {
            "energy_unit": "MHz",
            "bond_norm_max": 1.0,
            "bond_norms": "bond_norms.npy",
        },
        "observables": {
            "Z_2": {
                "values": {"file": "traces.npz", "array": "Z_2"},
                "shots": shots,
                "stderr": {"file": "traces.npz", "array": "stderr_Z_2"},
                "ideal": (np.cos(times) * np.exp(-0.2 * times)).tolist(),
                "support": [2],
                "spectrum": [-1, 1],
                "two_outcomes": True,
                "description": "Pauli Z on site 2",
            },
            "XX_1_3": {
                "values": {"file": "traces.npz", "array": "XX_1_3"},
                "shots": {"file": "traces.npz", "array": "shots_XX_1_3"},
                "support": [1, 3],
                "spectrum": [-1, 1],
            },
            "M": {
                "values": {"file": "traces.npz", "array": "M"},
                "shots": 1000,
                "spectrum": [-1, 1],
                "terms": {
                    "support": [[s] for s in range(6)],
                    "weight": [1.0 / 6.0] * 6,
                    "spectrum": [[-1, 1]] * 6,
                },
            },
        },
    }
    (HERE / "description.json").write_text(json.dumps(description, indent=2) + "\n")

    with h5py.File(HERE / "run_h5py.h5", "w") as f:
        f.attrs["format"] = "quassay-run"
        f.attrs["format_version"] = 1
        f.attrs["run_id"] = description["run_id"]
        f.attrs["description"] = description["description"]
        f.attrs["time_unit"] = "us"
        f.attrs["n_sites"] = 6
        f["times"] = times
        lat = f.create_group("lattice")
        lat.attrs["geometry"] = "square"
        lat.attrs["shape"] = np.array([3, 2])
        lat.attrs["boundary"] = "open"
        ham = f.create_group("hamiltonian")
        ham.attrs["energy_unit"] = "MHz"
        ham.attrs["bond_norm_max"] = 1.0
        ham["bond_norms"] = bond_norms
        obs = f.create_group("observables")
        g = obs.create_group("Z_2")
        g["values"] = z2
        g.attrs["shots"] = shots
        g["stderr"] = stderr_z2
        g["ideal"] = np.cos(times) * np.exp(-0.2 * times)
        g.attrs["support"] = np.array([2])
        g.attrs["spectrum_min"] = -1.0
        g.attrs["spectrum_max"] = 1.0
        g.attrs["two_outcomes"] = 1
        g.attrs["description"] = "Pauli Z on site 2"
        g = obs.create_group("XX_1_3")
        g["values"] = xx
        g["shots"] = shots_xx
        g.attrs["support"] = np.array([1, 3])
        g.attrs["spectrum_min"] = -1.0
        g.attrs["spectrum_max"] = 1.0
        g = obs.create_group("M")
        g["values"] = m
        g.attrs["shots"] = 1000
        g.attrs["spectrum_min"] = -1.0
        g.attrs["spectrum_max"] = 1.0
        g["terms_support"] = np.arange(6).reshape(6, 1)
        g["terms_weight"] = np.full(6, 1.0 / 6.0)
        g["terms_spectrum"] = np.tile([-1.0, 1.0], (6, 1))

    noise = {
        "format": "quassay-noise",
        "format_version": 1,
        "frequency_unit": "kHz",
        "redrawn": "every_realization",
        "sources": [
            {
                "name": "site detuning",
                "acts_on": "each_site",
                "operator_spectrum": [-1.0, 1.0],
                "amplitude": 5.0,
                "distribution": {"family": "uniform"},
                "mean_offset": 0.0,
                "mean_offset_uncertainty": 0.0,
            }
        ],
        "calibration": {
            "method": "invented",
            "date": "2026-12-03",
            "notes": "Invented example for quassay's assemble fixtures; no real device.",
        },
    }
    (HERE / "noise.json").write_text(json.dumps(noise, indent=2) + "\n")


if __name__ == "__main__":
    main()
