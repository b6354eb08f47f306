#!/usr/bin/env bash
# Fuzz every target of fuzz/ for SECONDS each, starting from the committed seed corpus
# (docs/fuzzing.md). Exit 0 if no target crashed, hung or ran out of memory; otherwise exit 1
# and print where the input that did it was written (fuzz/artifacts/<target>/).
#
#   scripts/fuzz.sh SECONDS [JOBS]
#
# Needs only a stable Rust toolchain and `cargo install cargo-fuzz` (plus a C++ compiler, for
# libFuzzer itself). The targets are built without a sanitizer (`--sanitizer none`), which
# needs no nightly flags; quassay is safe Rust, so a sanitizer would add little, while debug
# assertions and overflow checks (cargo fuzz's default) stay on. JOBS targets run at once
# (default: the number of processors). New inputs the fuzzer finds go to a scratch folder that
# is deleted afterwards, so the committed corpus never changes.
set -euo pipefail

usage="usage: scripts/fuzz.sh SECONDS [JOBS]"
secs=${1:?$usage}
jobs=${2:-$(nproc 2>/dev/null || echo 2)}
case "$secs$jobs" in
*[!0-9]*) echo "$usage (SECONDS and JOBS are positive integers)" >&2; exit 2 ;;
esac
if [ "$secs" -lt 1 ] || [ "$jobs" -lt 1 ]; then
    echo "$usage (SECONDS and JOBS are positive integers)" >&2
    exit 2
fi

cd "$(dirname "$0")/../fuzz"
if ! cargo fuzz --version >/dev/null 2>&1; then
    echo "fuzz.sh: cargo-fuzz is not installed; run: cargo install cargo-fuzz --locked" >&2
    exit 1
fi

targets=(noise_record scenario certificate canonical_roundtrip arrays)
triple=$(rustc -vV | sed -n 's/^host: //p')

echo "fuzz.sh: building ${targets[*]}"
cargo fuzz build --sanitizer none --target "$triple"
bin="target/$triple/release"

scratch=$(mktemp -d)
trap 'rm -rf "$scratch"' EXIT

# One target, run from the binary just built (`cargo fuzz run` would build again): its new
# inputs in the scratch folder (listed first, so libFuzzer writes there), the committed corpus
# read only. A hang (-timeout, seconds per input) and a single allocation or resident set
# above 2 GiB are failures too.
run_one() {
    local t=$1
    mkdir -p "$scratch/$t" "artifacts/$t" "$scratch/tmp-$t"
    # TMPDIR: a target's own scratch files (the `arrays` target's) go with the scratch folder.
    TMPDIR="$scratch/tmp-$t" "$bin/$t" "$scratch/$t" "corpus/$t" \
        -max_total_time="$secs" -timeout=10 -rss_limit_mb=2048 -malloc_limit_mb=2048 \
        -dict="dict/$t.dict" -artifact_prefix="artifacts/$t/" -print_final_stats=1 \
        >"$scratch/$t.log" 2>&1
}

# Runs one target in the background; its exit status goes to a file (not to `wait`, since
# `wait -n` below may already have collected it).
start() {
    local t=$1
    (
        set +e
        run_one "$t"
        echo $? >"$scratch/$t.rc"
    ) &
}

failed=()
running=0
for t in "${targets[@]}"; do
    if [ "$running" -ge "$jobs" ]; then
        wait -n || true
        running=$((running - 1))
    fi
    echo "fuzz.sh: running $t for ${secs} s"
    start "$t"
    running=$((running + 1))
done

wait
for t in "${targets[@]}"; do
    if [ "$(cat "$scratch/$t.rc" 2>/dev/null)" = 0 ]; then
        runs=$(grep -o 'stat::number_of_executed_units: *[0-9]*' "$scratch/$t.log" | grep -o '[0-9]*$' || true)
        echo "fuzz.sh: $t: no crash (${runs:-?} inputs run)"
    else
        failed+=("$t")
        echo "fuzz.sh: $t: FAILED; the end of its log:" >&2
        tail -n 40 "$scratch/$t.log" >&2
        grep -o 'Test unit written to [^ ]*' "$scratch/$t.log" |
            sed "s|^Test unit written to |fuzz.sh: $t: the input that failed is $PWD/|" >&2 || true
        echo "fuzz.sh: reproduce with: cd fuzz && cargo fuzz run --sanitizer none $t <that file>" >&2
    fi
done

if [ "${#failed[@]}" -gt 0 ]; then
    echo "fuzz.sh: failures in: ${failed[*]}" >&2
    exit 1
fi
echo "fuzz.sh: all ${#targets[@]} targets ran ${secs} s each without a failure"
