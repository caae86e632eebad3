#!/usr/bin/env bash
# A short fuzz session: SECONDS per target (default 30), every target in turn, on a scratch
# copy of the committed corpus. Prints each target's execution count and the total.
# Needs `cargo install cargo-fuzz` and the nightly toolchain. Usage: fuzz/run-short.sh [SECONDS]
set -euo pipefail
cd "$(dirname "$0")"
seconds=${1:-30}
scratch=$(mktemp -d /tmp/kimech-fuzz-corpus.XXXXXX)
total=0
for t in read_table read_stream rates km ic50 mode ki rank; do
  mkdir -p "$scratch/$t" && cp corpus/$t/* "$scratch/$t/"
  log="$scratch/$t.log"
  nice -n 19 cargo +nightly fuzz run -s none "$t" "$scratch/$t" -- \
    -max_total_time="$seconds" -max_len=4096 -timeout=10 -close_fd_mask=2 >"$log" 2>&1 \
    || { echo "$t: FAILED, see $log and fuzz/artifacts/$t/"; exit 1; }
  runs=$(grep -o 'Done [0-9]* runs' "$log" | grep -o '[0-9]*' | tail -1)
  echo "$t: ${runs:-0} executions, no panic, hang or crash"
  total=$((total + ${runs:-0}))
done
echo "total: $total executions"
