#!/usr/bin/env python3
"""Throughput benchmark: `kimech ic50` against a scipy.optimize.curve_fit loop.

Generates N synthetic 10-point dose-response curves (SIMULATED, fixed seed:
3-fold dilutions from 10 uM, IC50 log-uniform in 3-3000 nM, Hill uniform in
0.7-1.5, upper 100, lower uniform in -5..10, gaussian noise SD 3), fits them
all with kimech (all cores, then one pool thread on a subset for the
per-core figure, in curves per CPU second) and a subset with scipy's curve_fit (same model, parameterised on
log IC50, data-driven p0, default settings: the usual way people fit 4PL in
Python), checks that the IC50s agree on the subset, and prints curves per
second for both and the ratio per core. kimech is timed with /usr/bin/time -v
(wall clock and peak resident memory).

The headline is end to end: the whole kimech process on every core (reading,
fitting with the default robust rules — outlier test, calls from the data,
intervals — and writing the CSV) against the scipy loop on one core, checked
against the goals (>= 100x; 10^6 curves in <= 5 s with peak RSS <= 300 MB when
--n is 10^6 or more). The per-core ratio is printed as well.

With --callgrind, the parse / fit / write breakdown is measured by instruction
counts (valgrind's callgrind, one thread, on the first --callgrind-n curves,
default 2000), which do not depend on the machine's load: reading and parsing
is `CurveReader::next_batch` (including the SHA-256 of the input for the
provenance record) plus `BatchWells::fill` (a curve copied from its batch
into the chunk's reused curve), fitting is `analysis::ic50::analyse` (fit,
outlier rule, calls, intervals, flags), writing is formatting each row
(`Rendered::render`) plus copying the rows out (`StreamWriter::batch`).

Usage (from the repo root, after `cargo build --release`):
    python3 benches/ic50_throughput.py --n 1000000 --callgrind
The end-to-end figures are the median of --repeat (default 3) back-to-back pairs of a kimech
run and a scipy run, since a shared machine's speed drifts between minutes.
With --deck mixed three curves in four are inactive, weak or potent (out of
range), as most of a real screening deck is; the goals are stated for the
default deck of actives.
Options: --deck, --n, --scipy-n (default 2000), --single-n (default 100000), --repeat,
--kimech PATH (default $CARGO_TARGET_DIR or target, release/kimech),
--keep DIR (keep the generated files there), --callgrind, --callgrind-n.
"""
import argparse
import csv
import os
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy.optimize import curve_fit

SEED = 20261202
CONC = 10000.0 / 3.0 ** np.arange(10)  # nM, 10 uM down to 0.5 nM


def generate(path, n, rng, deck="actives"):
    """Writes n curves; returns the responses. The "mixed" deck makes three
    curves in four what most of a screening deck is: inactive (no
    inhibition in range), weak (IC50 30 uM-1 mM, above the range) and
    potent (IC50 1 pM-0.3 nM, below it), the fourth as in "actives"."""
    ic50 = np.exp(rng.uniform(np.log(3.0), np.log(3000.0), n))
    hill = rng.uniform(0.7, 1.5, n)
    lower = rng.uniform(-5.0, 10.0, n)
    if deck == "mixed":
        kind = np.arange(n) % 4
        ic50 = np.where(kind == 0, 1e12, ic50)
        ic50 = np.where(kind == 1, np.exp(rng.uniform(np.log(3e4), np.log(1e6), n)), ic50)
        ic50 = np.where(kind == 2, np.exp(rng.uniform(np.log(1e-3), np.log(0.3), n)), ic50)
    upper = np.full(n, 100.0)
    y = lower[:, None] + (upper - lower)[:, None] / (1 + (CONC[None, :] / ic50[:, None]) ** hill[:, None])
    y += rng.normal(0.0, 3.0, y.shape)
    conc_text = [f"{c:.6g}" for c in CONC]
    with open(path, "w") as f:
        f.write("compound,concentration (nM),response\n")
        chunk = []
        for i in range(n):
            name = f"C{i:07d}"
            chunk.append("".join(f"{name},{c},{v:.4f}\n" for c, v in zip(conc_text, y[i])))
            if len(chunk) >= 10000:
                f.write("".join(chunk))
                chunk.clear()
        f.write("".join(chunk))
    return y


def logistic(x, log_ic50, hill, lower, upper):
    return lower + (upper - lower) / (1 + np.exp(hill * (np.log(x) - log_ic50)))


def scipy_fits(y, count):
    out = np.full((count, 4), np.nan)
    start = time.perf_counter()
    for i in range(count):
        yi = y[i]
        p0 = (np.log(np.sqrt(CONC.min() * CONC.max())), 1.0, yi.min(), yi.max())
        try:
            p, _ = curve_fit(logistic, CONC, yi, p0=p0, maxfev=10000)
            out[i] = p
        except RuntimeError:
            pass
    return out, time.perf_counter() - start


def run_kimech(kimech, data, out, threads=None):
    env = dict(os.environ)
    if threads:
        env["RAYON_NUM_THREADS"] = str(threads)
    cmd = ["/usr/bin/time", "-v", str(kimech), "ic50", str(data), "--format", "csv", "-o", str(out)]
    p = subprocess.run(cmd, env=env, capture_output=True, text=True)
    if p.returncode not in (0, 3):
        sys.exit(f"kimech failed ({p.returncode}):\n{p.stderr[-2000:]}")
    wall = re.search(r"Elapsed \(wall clock\) time.*: (?:(\d+):)?(\d+):([\d.]+)", p.stderr)
    h, m, s = (float(g) if g else 0.0 for g in wall.groups())
    rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", p.stderr).group(1))
    cpu = sum(float(re.search(rf"{k} time \(seconds\): ([\d.]+)", p.stderr).group(1)) for k in ("User", "System"))
    return 3600 * h + 60 * m + s, rss / 1024.0, cpu


PHASES = {
    "read + parse": ["kimech::io::ic50::CurveReader::next_batch", "kimech::io::ic50::BatchWells::fill"],
    "fit (robust rules, calls, intervals)": ["kimech::analysis::ic50::analyse"],
    "format + write": ["kimech::view::ic50::Rendered::render", "kimech::view::ic50::StreamWriter::batch"],
}


def first_curves(data, out, count):
    """Copies the header and the first `count` ten-point curves of `data` to `out`."""
    with open(data) as src, open(out, "w") as dst:
        for i, line in enumerate(src):
            if i > count * 10:
                break
            dst.write(line)


def callgrind_breakdown(kimech, data, work, count):
    """Instructions per curve, by phase, from one single-threaded callgrind run."""
    subset = work / "callgrind.csv"
    first_curves(data, subset, count)
    out_file = work / "callgrind.out"
    env = dict(os.environ, RAYON_NUM_THREADS="1")
    cmd = ["valgrind", "--tool=callgrind", f"--callgrind-out-file={out_file}", str(kimech), "ic50", str(subset),
           "--format", "csv", "-o", str(work / "callgrind-ic50.csv")]
    p = subprocess.run(cmd, env=env, capture_output=True, text=True)
    if p.returncode not in (0, 3):
        sys.exit(f"callgrind run failed ({p.returncode}):\n{p.stderr[-2000:]}")
    total = int(re.search(r"Collected : (\d+)", p.stderr).group(1))
    report = subprocess.run(["callgrind_annotate", "--inclusive=yes", "--threshold=100", str(out_file)], capture_output=True,
                            text=True).stdout
    inclusive = {}
    for line in report.splitlines():
        m = re.match(r"\s*([\d,]+) \([\s\d.]+%\)\s+\S*?:(.*?) \[", line)
        if m:
            inclusive.setdefault(m.group(2), int(m.group(1).replace(",", "")))
    sha = sum(v for k, v in inclusive.items() if k.startswith("sha2::sha256::compress256"))
    print(f"instructions per curve (callgrind, 1 thread, {count} curves): {total / count:,.0f} in all")
    for phase, names in PHASES.items():
        missing = [name for name in names if name not in inclusive]
        if missing:
            # A renamed function would otherwise count as zero without a word.
            print(f"  warning: not in the profile (renamed or inlined?): {', '.join(missing)}")
        n = sum(inclusive.get(name, 0) for name in names)
        print(f"  {phase}: {n / count:,.0f} ({100 * n / total:.0f} %)")
    print(f"  of reading, SHA-256 of the input: {sha / count:,.0f} (valgrind runs the portable code; "
          f"natively the CPU's SHA instructions are used where it has them)")
    rest = total - sum(inclusive.get(n, 0) for names in PHASES.values() for n in names)
    print(f"  the rest (start-up, thread pool, allocation outside the phases): {rest / count:,.0f}")


def read_ic50(path, count):
    got = {}
    with open(path) as f:
        reader = csv.reader(f)
        header = next(reader)
        ci, qi = header.index("compound"), header.index("qualifier")
        cols = [header.index(c) for c in ("ic50 (nM)", "hill", "lower", "upper")]
        oi = header.index("outliers") if "outliers" in header else None
        for row in reader:
            k = int(row[ci][1:])
            if k < count and row[qi] in ("", "="):  # exact: an empty qualifier cell (older builds wrote "=")
                got[k] = [float(row[c]) for c in cols] + [int(row[oi]) if oi is not None and row[oi] else 0]
    return got


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=100000)
    ap.add_argument("--scipy-n", type=int, default=2000)
    ap.add_argument("--single-n", type=int, default=100000)
    target = Path(os.environ.get("CARGO_TARGET_DIR", "target"))
    ap.add_argument("--kimech", default=str(target / "release" / "kimech"))
    ap.add_argument("--keep", default=None)
    ap.add_argument("--callgrind", action="store_true", help="also print the parse/fit/write breakdown (valgrind)")
    ap.add_argument("--callgrind-n", type=int, default=2000)
    ap.add_argument("--repeat", type=int, default=3, help="back-to-back kimech/scipy pairs (median reported)")
    ap.add_argument("--deck", choices=("actives", "mixed"), default="actives",
                    help="actives (the goals' benchmark) or mixed (3 in 4 inactive or out of range)")
    a = ap.parse_args()
    rng = np.random.default_rng(SEED)
    work = Path(a.keep) if a.keep else Path(tempfile.mkdtemp(prefix="kimech-bench-"))
    work.mkdir(parents=True, exist_ok=True)
    data, out = work / "curves.csv", work / "ic50.csv"
    t0 = time.perf_counter()
    y = generate(data, a.n, rng, a.deck)
    print(f"generated {a.n} {a.deck} curves x 10 points ({data.stat().st_size / 1e6:.0f} MB) in {time.perf_counter() - t0:.1f} s")

    # The machine's speed drifts from minute to minute on a shared host, so the
    # end-to-end ratio is measured in --repeat back-to-back pairs (kimech on
    # every core, then the scipy loop) and the median pair is the figure.
    cores = os.cpu_count()
    count = min(a.scipy_n, a.n)
    pairs = []
    for r in range(a.repeat):
        wall, rss, cpu = run_kimech(a.kimech, data, out)
        ref, secs = scipy_fits(y, count)
        pairs.append((a.n / wall / (count / secs), wall, rss, cpu, secs))
        print(f"pair {r + 1}: kimech, {cores} threads: {a.n} curves in {wall:.2f} s = {a.n / wall:,.0f} curves/s, "
              f"peak RSS {rss:.0f} MB (CPU time {cpu:.2f} s); scipy loop, 1 core: {count / secs:,.0f} curves/s; "
              f"ratio {pairs[-1][0]:,.0f}x")
    ratio, wall, rss, cpu, secs = sorted(pairs)[len(pairs) // 2]
    print(f"median pair: kimech {a.n / wall:,.0f} curves/s ({wall:.2f} s), scipy {count / secs:,.0f} curves/s")

    single_n = min(a.single_n, a.n)
    single_data = work / "single.csv"
    first_curves(data, single_data, single_n)
    wall1, _, cpu1 = run_kimech(a.kimech, single_data, work / "single-out.csv", threads=1)
    # The reading stage has a thread of its own beside the pool, so a run with
    # one pool thread can use more than one core: per core is per CPU second.
    per_core = single_n / cpu1
    print(
        f"kimech, 1 pool thread: {single_n} curves in {wall1:.2f} s (CPU time {cpu1:.2f} s)"
        f" = {per_core:,.0f} curves per CPU second"
    )

    scipy_rate = count / secs
    print(f"scipy curve_fit loop, 1 core (median pair): {count} curves in {secs:.2f} s = {scipy_rate:,.0f} curves/s")

    got = read_ic50(out, count)
    # The robust default leaves out wells the outlier rule marks; scipy fits every well, so
    # those curves are a different estimate by design and are counted, not compared.
    robust = [k for k in range(count) if k in got and got[k][4] > 0]
    print(f"curves where kimech's outlier rule left a well out (not compared): {len(robust)} of {count}")
    keys = [k for k in range(count) if k in got and got[k][4] == 0 and np.all(np.isfinite(ref[k]))]
    rel = np.array([abs(got[k][0] - np.exp(ref[k][0])) / np.exp(ref[k][0]) for k in keys])
    agree = float(np.mean(rel < 1e-4)) if len(rel) else 0.0
    print(f"IC50 agreement on {len(keys)} curves fitted by both: median rel. diff {np.median(rel):.1e}, "
          f"{100 * agree:.1f}% within 1e-4")
    # Where they differ, which found the lower sum of squares?
    ours_better = theirs_better = 0
    for k, r in zip(keys, rel):
        if r >= 1e-4:
            ic50, hill, lower, upper, _ = got[k]
            sse_k = float(np.sum((y[k] - logistic(CONC, np.log(ic50), hill, lower, upper)) ** 2))
            sse_s = float(np.sum((y[k] - logistic(CONC, *ref[k])) ** 2))
            ours_better += sse_k < sse_s * (1 - 1e-9)
            theirs_better += sse_s < sse_k * (1 - 1e-9)
    print(f"  where they differ: kimech lower SSE on {ours_better}, scipy lower SSE on {theirs_better}")
    print(f"ratio per core (kimech curves per CPU second, 1 pool thread / scipy): {per_core / scipy_rate:,.0f}x")
    print(f"ratio end to end (kimech, {cores} threads, whole process / scipy loop, 1 core; median of "
          f"{a.repeat} pairs, range {min(p[0] for p in pairs):,.0f}-{max(p[0] for p in pairs):,.0f}x): {ratio:,.0f}x "
          f"(goal >= 100x: {'met' if ratio >= 100 else 'NOT met'})")
    if a.n >= 1_000_000 and a.deck == "actives":
        per_million = wall * 1e6 / a.n
        print(f"10^6 curves: {per_million:.1f} s (goal <= 5 s: {'met' if per_million <= 5 else 'NOT met'}), "
              f"peak RSS {rss:.0f} MB (goal <= 300 MB: {'met' if rss <= 300 else 'NOT met'})")
    print(f"load average at the end: {', '.join(f'{v:.1f}' for v in os.getloadavg())}")
    if a.callgrind:
        callgrind_breakdown(a.kimech, data, work, min(a.callgrind_n, a.n))
    if agree < 0.99 and a.deck == "actives":
        sys.exit("IC50s disagree with scipy on more than 1% of curves")


if __name__ == "__main__":
    main()
