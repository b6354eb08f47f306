"""Writes an invented run file and noise record for the certify benchmark (not test data).

Invented scenario (no real experiment): a 16-site open chain, R realizations, T times, K
observables Z_0 ... Z_{K-1} (support one site each, spectrum [-1, 1]), values float64 drawn
from a seeded NumPy generator, shots as one attribute per observable. The values dominate the
file: R x T x K x 8 bytes (R = T = 1000, K = 32: 256 MB). The noise record has three sources
(site detuning uniform, bond coupling truncated normal, site offset two-point).

Usage: python3 scripts/bench_make_run.py DIR R T K   (writes DIR/run.h5 and DIR/noise.json)
Written with h5py and NumPy only, so the file does not pass through quassay's writer.
"""

import json
import pathlib
import sys

import h5py
import numpy as np


def main():
    out = pathlib.Path(sys.argv[1])
    r, t, k = (int(x) for x in sys.argv[2:5])
    n = 16
    rng = np.random.default_rng(20261204)
    times = np.linspace(0.0, 5.0, t)
    with h5py.File(out / "run.h5", "w") as f:
        f.attrs["format"] = "quassay-run"
        f.attrs["format_version"] = 1
        f.attrs["run_id"] = f"invented-bench-R{r}-T{t}-K{k}"
        f.attrs["time_unit"] = "us"
        f.attrs["n_sites"] = n
        f.attrs["description"] = "invented benchmark run (random values, no physics)"
        f.create_dataset("times", data=times)
        lat = f.create_group("lattice")
        lat.attrs["geometry"] = "chain"
        lat.attrs["shape"] = np.array([n], dtype=np.int64)
        lat.attrs["boundary"] = "open"
        ham = f.create_group("hamiltonian")
        ham.attrs["energy_unit"] = "MHz"
        ham.attrs["bond_norm_max"] = 1.0
        obs = f.create_group("observables")
        for j in range(k):
            g = obs.create_group(f"Z_{j:02d}")
            g.create_dataset("values", data=rng.uniform(-1.0, 1.0, size=(r, t)))
            g.create_dataset("ideal", data=np.cos(times + j))
            g.attrs["shots"] = 200
            g.attrs["support"] = np.array([j % n], dtype=np.int64)
            g.attrs["spectrum_min"] = -1.0
            g.attrs["spectrum_max"] = 1.0
    site = {"operator_spectrum": [-1.0, 1.0], "mean_offset": 0.0, "mean_offset_uncertainty": 0.0}
    noise = {
        "format": "quassay-noise",
        "format_version": 1,
        "frequency_unit": "rad/us",
        "redrawn": "every_realization",
        "sources": [
            dict(site, name="site detuning", acts_on="each_site", amplitude=0.02,
                 distribution={"family": "uniform"}),
            dict(site, name="bond coupling", acts_on="each_bond", amplitude=0.01,
                 distribution={"family": "truncated_normal", "sigma": 1.0, "cutoff": 3.0}),
            dict(site, name="site offset", acts_on="each_site", amplitude=0.005,
                 distribution={"family": "two_point"}),
        ],
        "calibration": {"method": "invented for the benchmark", "date": "2026-12-04",
                        "notes": "Invented; not a real device or calibration."},
    }
    (out / "noise.json").write_text(json.dumps(noise, indent=1) + "\n")


if __name__ == "__main__":
    main()
