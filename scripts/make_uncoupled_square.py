"""Writes an invented run file and noise record of an uncoupled L x L square array (not test data).

Invented scenario (no real device): L x L sites (default 6 x 6 = 36, beyond the exact
simulator's 20 sites), no coupling (J = 0, so /hamiltonian/bond_norm_max = 0), every site
prepared in |+> and evolving alone under a field h Z (h = 0.5 MHz) plus a random detuning
a g_i Z (a = 4 kHz, g_i truncated normal with sigma 1 cut at 3, drawn afresh for every site
and realization; the noise record states exactly this). Without coupling each site is a spin
precessing about Z, so with w_i = 2 pi (h + a g_i) in rad/us:

    <X_i>(t) = cos(2 w_i t),   <Y_i>(t) = sin(2 w_i t)     (closed forms, one spin)

and the ideal values are those with g_i = 0. Each recorded value is the mean of S = 1000 shot
outcomes +-1 (binomial with P(+1) = (1 + <P>)/2); the mean of X over all sites is measured in
the same shots (one product basis), its sites independent given g. Observables: X_14 and Y_14
(site (2, 2), in the bulk) and x_mean (mean of X_i over all sites, with its term structure).
Times 0 to 0.8 us in 17 steps, as in example_runs/square3x4.

Usage: python3 scripts/make_uncoupled_square.py DIR [R] [L]   (default R = 50, L = 6; writes
DIR/run.h5 and DIR/noise.json). Written with h5py and NumPy following docs/run-format.md and
docs/noise-record.md, so the file does not pass through quassay's writer.
"""

import json
import pathlib
import sys

import h5py
import numpy as np

H_MHZ = 0.5
A_KHZ = 4.0
SHOTS = 1000


def truncated_normal(rng, size, cutoff=3.0):
    """Standard normal conditioned on |g| <= cutoff, by rejection (exact)."""
    out = rng.standard_normal(size)
    bad = np.abs(out) > cutoff
    while bad.any():
        out[bad] = rng.standard_normal(bad.sum())
        bad = np.abs(out) > cutoff
    return out


def main():
    out = pathlib.Path(sys.argv[1])
    r = int(sys.argv[2]) if len(sys.argv) > 2 else 50
    side = int(sys.argv[3]) if len(sys.argv) > 3 else 6
    n = side * side
    bulk = 2 * side + 2
    rng = np.random.default_rng(20261202)
    times = np.linspace(0.0, 0.8, 17)
    # Angular frequencies in rad/us: ideal, and per realization and site.
    w0 = 2 * np.pi * H_MHZ
    g = truncated_normal(rng, (r, n))
    w = w0 + 2 * np.pi * A_KHZ * 1e-3 * g
    phase = 2 * w[:, :, None] * times[None, None, :]  # R x n x T
    exact = {"X": np.cos(phase), "Y": np.sin(phase)}

    def shot_means(p):
        """Mean of SHOTS outcomes +-1 with expectation p (elementwise)."""
        ups = rng.binomial(SHOTS, np.clip((1 + p) / 2, 0.0, 1.0))
        return 2.0 * ups / SHOTS - 1.0

    x_all = shot_means(exact["X"])  # every site measured in X in the same shots
    y_bulk = shot_means(exact["Y"][:, bulk, :])
    with h5py.File(out / "run.h5", "w") as f:
        f.attrs["format"] = "quassay-run"
        f.attrs["format_version"] = 1
        f.attrs["run_id"] = f"invented-uncoupled-square{side}x{side}-R{r}"
        f.attrs["time_unit"] = "us"
        f.attrs["n_sites"] = n
        f.attrs["description"] = (
            f"Invented example, not a real device: an uncoupled {side} x {side} array (J = 0), "
            "each site from |+> in a field with a random detuning, values from closed forms "
            "plus binomial shot noise (scripts/make_uncoupled_square.py)."
        )
        f.create_dataset("times", data=times)
        lat = f.create_group("lattice")
        lat.attrs["geometry"] = "square"
        lat.attrs["shape"] = np.array([side, side], dtype=np.int64)
        lat.attrs["boundary"] = "open"
        ham = f.create_group("hamiltonian")
        ham.attrs["energy_unit"] = "MHz"
        ham.attrs["bond_norm_max"] = 0.0
        obs = f.create_group("observables")

        def observable(name, values, ideal, support, description):
            o = obs.create_group(name)
            o.create_dataset("values", data=values)
            o.create_dataset("ideal", data=ideal)
            o.attrs["shots"] = SHOTS
            o.attrs["support"] = np.array(support, dtype=np.int64)
            o.attrs["spectrum_min"] = -1.0
            o.attrs["spectrum_max"] = 1.0
            o.attrs["description"] = description
            return o

        observable(f"X_{bulk}", x_all[:, bulk, :], np.cos(2 * w0 * times), [bulk], "X")
        observable(f"Y_{bulk}", y_bulk, np.sin(2 * w0 * times), [bulk], "Y")
        m = observable("x_mean", x_all.mean(axis=1), np.cos(2 * w0 * times), [],
                       "mean of X over all sites")
        m.create_dataset("terms_support", data=np.arange(n, dtype=np.int64).reshape(n, 1))
        m.create_dataset("terms_weight", data=np.full(n, 1.0 / n))
        m.create_dataset("terms_spectrum", data=np.tile([-1.0, 1.0], (n, 1)))
    noise = {
        "format": "quassay-noise",
        "format_version": 1,
        "frequency_unit": "kHz",
        "redrawn": "every_realization",
        "sources": [{
            "name": "site detuning",
            "acts_on": "each_site",
            "operator_spectrum": [-1.0, 1.0],
            "amplitude": A_KHZ,
            "distribution": {"family": "truncated_normal", "sigma": 1.0, "cutoff": 3.0},
            "mean_offset": 0.0,
            "mean_offset_uncertainty": 0.0,
        }],
        "calibration": {"method": "invented", "date": "2026-12-02",
                        "notes": "Invented; not a real device or calibration."},
    }
    (out / "noise.json").write_text(json.dumps(noise, indent=1) + "\n")


if __name__ == "__main__":
    main()
