"""Writes run-file fixtures with h5py + NumPy, an HDF5 writer independent of quassay.

Invented scenario (no real experiment): a 4-site open chain, T = 5 times, R = 3 realizations,
two observables. The numbers are drawn from a seeded NumPy generator.

Made with (from the repository root):

    python3 tests/reference/h5py/make_fixtures.py

with h5py 3.16.0 (bundled HDF5 2.0.0) and NumPy 2.4.6. It writes, beside this script:

- run_f32_gzip.h5: values float32, chunked + gzip + shuffle, big-endian float64 `/times`
  (dtype '>f8'), shots of Z_1 as an R x T int32 dataset, strings as h5py's default
  variable-length UTF-8, one fixed-length ASCII string (the run's description);
- run_f32_gzip.json: the same content as decimal text, written by NumPy/json from the arrays
  h5py stored (float32 values widened to float64 exactly), so the Rust test compares against
  numbers that did not pass through quassay.
"""

import json
import pathlib

import h5py
import numpy as np

HERE = pathlib.Path(__file__).resolve().parent


def main():
    rng = np.random.default_rng(20261201)
    n, t, r = 4, 5, 3
    times = np.linspace(0.0, 2.0, t)
    z = rng.uniform(-1.0, 1.0, size=(r, t)).astype(np.float32)
    zz = rng.uniform(-1.0, 1.0, size=(r, t)).astype(np.float32)
    shots_z = rng.integers(50, 200, size=(r, t)).astype(np.int32)
    stderr_zz = rng.uniform(0.0, 0.1, size=(r, t)).astype(np.float32)
    ideal_z = np.cos(times)

    path = HERE / "run_f32_gzip.h5"
    with h5py.File(path, "w", libver="earliest") as f:
        f.attrs["format"] = "quassay-run"
        f.attrs["format_version"] = 1
        f.attrs["run_id"] = "invented-h5py-0001"
        f.attrs["time_unit"] = "us"
        f.attrs["n_sites"] = np.int32(n)
        f.attrs["description"] = np.bytes_(b"invented fixture written by h5py")
        f.create_dataset("times", data=times.astype(">f8"))
        lat = f.create_group("lattice")
        lat.attrs["geometry"] = "chain"
        lat.attrs["shape"] = np.array([n], dtype=np.int64)
        lat.attrs["boundary"] = "open"
        lat.create_dataset("bonds", data=np.array([[0, 1], [1, 2], [2, 3]], dtype=np.int16))
        ham = f.create_group("hamiltonian")
        ham.attrs["energy_unit"] = "MHz"
        ham.attrs["bond_norm_max"] = 0.75
        ham.attrs["interaction_range"] = np.uint8(1)
        ham.create_dataset("bond_norms", data=np.array([0.5, 0.75, 0.5]))
        obs = f.create_group("observables")
        g = obs.create_group("Z_1")
        kw = dict(chunks=(2, 3), compression="gzip", compression_opts=6, shuffle=True)
        g.create_dataset("values", data=z, **kw)
        g.create_dataset("shots", data=shots_z, **kw)
        g.create_dataset("ideal", data=ideal_z)
        g.attrs["support"] = np.array([1], dtype=np.int64)
        g.attrs["spectrum_min"] = -1
        g.attrs["spectrum_max"] = 1.0
        g.attrs["description"] = "Z on site 1"
        h = obs.create_group("ZZ_mean")
        h.create_dataset("values", data=zz, **kw)
        h.create_dataset("stderr", data=stderr_zz, **kw)
        h.attrs["shots"] = 400
        h.attrs["spectrum_min"] = -1.0
        h.attrs["spectrum_max"] = 1.0
        h.create_dataset("terms_support", data=np.array([[0, 1], [1, 2], [2, 3]]))
        h.create_dataset("terms_weight", data=np.array([1 / 3, 1 / 3, 1 / 3]))
        h.create_dataset("terms_spectrum", data=np.array([[-1.0, 1.0]] * 3))

    side = {
        "times": times.tolist(),
        "observables": {
            "Z_1": {
                "values": z.astype(np.float64).tolist(),
                "shots": shots_z.tolist(),
                "ideal": ideal_z.tolist(),
            },
            "ZZ_mean": {
                "values": zz.astype(np.float64).tolist(),
                "stderr": stderr_zz.astype(np.float64).tolist(),
                "terms_weight": [1 / 3, 1 / 3, 1 / 3],
            },
        },
    }
    (HERE / "run_f32_gzip.json").write_text(json.dumps(side, indent=1) + "\n")


if __name__ == "__main__":
    main()
