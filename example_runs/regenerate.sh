#!/usr/bin/env bash
# Regenerates the bundled example runs (invented scenarios) from their scenario files.
# The output is bit-for-bit reproducible for the seeds in the scenarios.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --locked
for d in example_runs/*/; do
    target/release/quassay simulate "$d/scenario.json" -o "$d" --force
done
