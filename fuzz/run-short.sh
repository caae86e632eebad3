#!/usr/bin/env bash
# A fuzz session: SECONDS per target (default 30), every target in turn, on a scratch copy of
# the committed corpus. Prints each target's execution count and the total.
# Needs `cargo install cargo-fuzz` and the nightly toolchain. Usage: fuzz/run-short.sh [SECONDS [TARGET…]]
#
# Per-target settings (why: DEVELOPERS.md, "Fuzzing"):
# - the readers may grow inputs to 4096 bytes; the commands to 2048 (mode: 1024, its seeds are
#   846-byte matrices and its cost grows with the rows fitted);
# - mode is built without comparison tracing (--no-trace-compares, its own target directory):
#   three quarters of its time went to tracing the integer compares in the least-squares
#   library's inner loops. Every other target keeps it.
set -euo pipefail
cd "$(dirname "$0")"
seconds=${1:-30}
shift || true
targets=("$@")
[ ${#targets[@]} -gt 0 ] || targets=(read_table read_stream rates km ic50 mode ki rank)
scratch=$(mktemp -d /tmp/kimech-fuzz-corpus.XXXXXX)
total=0
for t in "${targets[@]}"; do
  case $t in
    read_table|read_stream) max_len=4096; build=() ;;
    mode) max_len=1024; build=(--no-trace-compares --target-dir target/no-trace-compares) ;;
    *) max_len=2048; build=() ;;
  esac
  mkdir -p "$scratch/$t" && cp corpus/$t/* "$scratch/$t/"
  log="$scratch/$t.log"
  nice -n 19 cargo +nightly fuzz run -s none "${build[@]}" "$t" "$scratch/$t" -- \
    -max_total_time="$seconds" -max_len="$max_len" -timeout=10 -close_fd_mask=2 >"$log" 2>&1 \
    || { echo "$t: FAILED, see $log and fuzz/artifacts/$t/"; exit 1; }
  runs=$(grep -o 'Done [0-9]* runs' "$log" | grep -o '[0-9]*' | tail -1)
  echo "$t: ${runs:-0} executions in ${seconds} s (-max_len=$max_len), no panic, hang or crash"
  total=$((total + ${runs:-0}))
done
echo "total: $total executions"
