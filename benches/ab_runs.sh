#!/usr/bin/env bash
# A/B wall-clock comparison of kimech binaries on one input, for a shared machine whose
# speed drifts: the binaries run alternately, ROUNDS times each, and the minimum and median
# of wall and CPU (user + system) time are printed per binary. Outputs go to a scratch
# directory. Usage: benches/ab_runs.sh ROUNDS THREADS INPUT.csv BINARY...
# e.g. benches/ab_runs.sh 4 2 /tmp/bench/curves.csv /tmp/kimech-old target/release/kimech
set -euo pipefail
rounds=$1 threads=$2 input=$3
shift 3
scratch=$(mktemp -d /tmp/kimech-ab.XXXXXX)
for i in $(seq "$rounds"); do
  for k in $(seq $#); do
    bin=${!k}
    RAYON_NUM_THREADS=$threads /usr/bin/time -f "%e %U %S" -o "$scratch/time" \
      "$bin" ic50 "$input" --format csv -o "$scratch/out.csv"
    awk '{print $1, $2 + $3}' "$scratch/time" >>"$scratch/$k"
  done
done
summary() { sort -n | awk '{a[NR] = $1} END {printf "min %.3f med %.3f", a[1], a[int((NR + 1) / 2)]}'; }
for k in $(seq $#); do
  printf "%-40s wall %s | cpu %s\n" "${!k}" "$(cut -d' ' -f1 "$scratch/$k" | summary)" "$(cut -d' ' -f2 "$scratch/$k" | summary)"
done
rm -rf "$scratch"
