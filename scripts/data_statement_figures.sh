#!/usr/bin/env bash
# Figures for the README (not a test): how much the data statement (issue #17) narrows the
# certified interval of the averaged trace. Prints a Markdown table on standard output.
#
#   scripts/data_statement_figures.sh      QUASSAY=path/to/quassay skips the build;
#                                          COUPLED=1 adds the simulated 4 x 4 array (below)
#
# For each run, at its last recorded time and per observable: the half-width of today's
# statement (`certify --data-share 0`, the model statement alone at epsilon = 0.05) against the
# certified one (default options: the intersection of the model statement at epsilon/2 with
# the data statement at epsilon/2), their ratio, and the parts of the certified one (the model
# statement at epsilon/2, the data statement, the model term it adds, the method of its
# interval for the mean). Half-width = (upper - lower)/2 of the interval in the certificate.
# The column "≤ ratio" is today's half-width over the added term (min(s_O, E_wc, E_sys +
# E_bias) with the noise redrawn): no interval for the mean, however narrow, gives more. The
# column "s/√R" is the standard error of the R recorded values at that time (sample standard
# deviation over √R, from run.h5): the scale of the narrowest interval for their mean.
#
# Runs (all invented, none from a real device):
#   * example_runs/chain12 and example_runs/square3x4: the bundled simulated examples
#     (run.h5 + noise.json as committed; R = 40);
#   * an uncoupled 6 x 6 square array with R = 50, written by scripts/make_uncoupled_square.py
#     (h5py, closed forms of one precessing spin per site plus binomial shot noise; J = 0
#     because 36 sites are beyond the exact simulator's 20). Without coupling each site's light
#     cone is itself, so this is the model statement's best case, not a typical 6 x 6 array;
#   * with COUPLED=1 also a coupled 4 x 4 square array, R = 50, simulated exactly (`quassay
#     simulate`, the scenario and record of example_runs/square3x4 on 16 sites; about 3 min on
#     two shared cores): the closest to a coupled 6 x 6 array the simulator does in minutes.
# Only the generators are in git: every file goes to a temporary folder, removed at the end.
# Needs python3 with numpy and h5py. Re-run after the interval for the mean changes.
set -euo pipefail
cd "$(dirname "$0")/.."
if [ -z "${QUASSAY:-}" ]; then
  cargo build --release --locked --quiet
  QUASSAY=$PWD/target/release/quassay
fi
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

runs=(chain12 square3x4 square6x6-uncoupled)
for ex in chain12 square3x4; do
  mkdir -p "$work/$ex"
  cp "example_runs/$ex/run.h5" "example_runs/$ex/noise.json" "$work/$ex/"
done
mkdir -p "$work/square6x6-uncoupled"
python3 scripts/make_uncoupled_square.py "$work/square6x6-uncoupled" 50 6
if [ "${COUPLED:-0}" = 1 ]; then
  python3 - example_runs/square3x4/scenario.json "$work/square4x4.json" <<'PY'
import json
import sys

v = json.load(open(sys.argv[1]))
v["run_id"] = "invented-square4x4-detuning-coupling-R50"
v["description"] = ("Invented example, not a real device: the scenario of example_runs/square3x4 "
                    "on a 4 x 4 square array, R = 50.")
v["lattice"]["shape"] = [4, 4]
v["realizations"] = 50
json.dump(v, open(sys.argv[2], "w"), indent=1)
PY
  "$QUASSAY" simulate "$work/square4x4.json" -o "$work/square4x4-coupled" >/dev/null
  runs+=(square4x4-coupled)
fi

for d in "${runs[@]}"; do
  for mode in today certified; do
    args=()
    if [ "$mode" = today ]; then args=(--data-share 0); fi
    # Exit code 3 (the data contradict the record) still writes the certificate.
    "$QUASSAY" certify "$work/$d/run.h5" --noise "$work/$d/noise.json" \
      -o "$work/$d/$mode.cert.json" "${args[@]}" >/dev/null || [ $? -eq 3 ]
  done
done

python3 - "$work" "$("$QUASSAY" --version)" "${runs[@]}" <<'PY'
import json
import pathlib
import sys

import h5py

work = pathlib.Path(sys.argv[1])
print(f"Half-width of the averaged statement at the last recorded time ({sys.argv[2]}; "
      "confidence 0.95, simultaneous).\n")
print("| run | R | observable | today (`--data-share 0`) | certified (default) | ratio "
      "| model at ε/2 | data statement | added | ≤ ratio | s/√R | method |")
print("|---|---|---|---|---|---|---|---|---|---|---|---|")


def half(lo, hi):
    return None if lo is None or hi is None else (hi - lo) / 2


for d in sys.argv[3:]:
    today = json.loads((work / d / "today.cert.json").read_text())["body"]
    cert = json.loads((work / d / "certified.cert.json").read_text())["body"]
    r = cert["run"]["n_realizations"]
    run = h5py.File(work / d / "run.h5", "r")
    for a, b in zip(today["observables"], cert["observables"]):
        assert a["name"] == b["name"]
        ds = b["data_statement"]
        h_today = half(a["lower"][-1], a["upper"][-1])
        h_cert = half(b["certified_lower"][-1], b["certified_upper"][-1])
        h_model = half(b["lower"][-1], b["upper"][-1])
        h_data = half(ds["lower"][-1], ds["upper"][-1])
        added = ds["added"][-1]
        cert_text = "disjoint" if h_cert is None else f"{h_cert:.4f}"
        ratio = "disjoint" if h_cert is None else f"{h_today / h_cert:.2f}×"
        best = f"{h_today / added:.1f}×" if added > 0 else "∞"
        last = run[f"observables/{a['name']}/values"][:, -1]
        se = last.std(ddof=1) / len(last) ** 0.5 if len(last) > 1 else float("nan")
        print(f"| {d} | {r} | {a['name']} | {h_today:.4f} | {cert_text} | {ratio} "
              f"| {h_model:.4f} | {h_data:.4f} | {added:.4f} | {best} | {se:.4f} "
              f"| {ds['method'][-1]} |")
PY
