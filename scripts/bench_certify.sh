#!/usr/bin/env bash
# Benchmark (not a test): time `quassay certify` on an invented run of R x T x K float64 values
# against `openssl dgst -sha256` on the same file, and report peak memory.
#
#   scripts/bench_certify.sh [REPS] [R T K]...     default: 5 repetitions, 1000 1000 8 and
#                                                  1000 1000 32 (64 MB and 256 MB of values)
#
# Builds the release binary, writes each run with scripts/bench_make_run.py (h5py + NumPy) into
# a temporary folder (removed at the end), warms the page cache, then prints per size: the
# best and median wall-clock time of openssl and of certify (whole command: reading, checks,
# bounds, file and content digests, certificate written), their ratio (best / best, median /
# median), and certify's peak resident memory (GNU time's "Maximum resident set size").
# Also the time of two `openssl dgst -sha256` of the file at once ("2 x openssl"): a floor
# for any program that, like certify, must compute two SHA-256 digests over the data (the
# file's, and the content digest of its datasets), here on all the machine's cores.
# The 4 GB run of the hardening issue: scripts/bench_certify.sh 3 10000 1000 50.
# Needs python3 with numpy and h5py, openssl and GNU time (/usr/bin/time; apt install time).
set -euo pipefail
cd "$(dirname "$0")/.."
reps=${1:-5}
shift || true
sizes=("$@")
if [ ${#sizes[@]} -eq 0 ]; then sizes=(1000 1000 8 1000 1000 32); fi
cargo build --release --quiet
bin=$PWD/target/release/quassay
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

# Wall-clock seconds of "$@", stdout and stderr discarded. Exit code 3 (certify: the random
# benchmark data contradict the record) is an answer, not a failure.
wall() {
  local t0 t1
  t0=$(date +%s.%N)
  "$@" >/dev/null 2>&1 || [ $? -eq 3 ]
  t1=$(date +%s.%N)
  echo "$t1 - $t0" | bc -l
}
# Two SHA-256 digests of one file at once.
two_digests() {
  openssl dgst -sha256 "$1" >/dev/null & openssl dgst -sha256 "$1" >/dev/null; wait
}
# best and median of the numbers on stdin
stats() { sort -g | awk '{a[NR]=$1} END {printf "%.3f %.3f\n", a[1], a[int((NR+1)/2)]}'; }

echo "quassay certify benchmark: $(nproc) cores, $reps repetitions each, $(openssl version)"
printf '%-16s %9s %18s %18s %18s %15s %12s\n' "R x T x K" "file MB" "openssl best/med" \
  "2 x openssl b/m" "certify best/med" "ratio best/med" "peak RSS MB"
i=0
while [ $i -lt ${#sizes[@]} ]; do
  r=${sizes[$i]}; t=${sizes[$((i+1))]}; k=${sizes[$((i+2))]}; i=$((i+3))
  dir=$work/R${r}T${t}K${k}
  mkdir -p "$dir"
  python3 scripts/bench_make_run.py "$dir" "$r" "$t" "$k"
  cat "$dir/run.h5" >/dev/null
  mb=$(( $(stat -c %s "$dir/run.h5") / 1000000 ))
  o=$(for _ in $(seq "$reps"); do wall openssl dgst -sha256 "$dir/run.h5"; done | stats)
  o2=$(for _ in $(seq "$reps"); do wall two_digests "$dir/run.h5"; done | stats)
  c=$(for _ in $(seq "$reps"); do
        rm -f "$dir/c.json"
        wall "$bin" certify "$dir/run.h5" --noise "$dir/noise.json" -o "$dir/c.json"
      done | stats)
  rm -f "$dir/c.json"
  /usr/bin/time -f '%M' -o "$work/rss" "$bin" certify "$dir/run.h5" --noise "$dir/noise.json" \
          -o "$dir/c.json" >/dev/null 2>&1 || [ $? -eq 3 ]
  rss=$(tail -1 "$work/rss")
  read -r ob om <<<"$o"
  read -r o2b o2m <<<"$o2"
  read -r cb cm <<<"$c"
  ratio=$(printf '%.2f/%.2f' "$(echo "$cb / $ob" | bc -l)" "$(echo "$cm / $om" | bc -l)")
  printf '%-16s %9s %18s %18s %18s %15s %12s\n' "$r x $t x $k" "$mb" "$ob/$om s" \
    "$o2b/$o2m s" "$cb/$cm s" "$ratio" "$((rss / 1024))"
  rm -rf "$dir"
done
