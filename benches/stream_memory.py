#!/usr/bin/env python3
"""Peak memory of `kimech ki` and `kimech rank` on a million rows.

Both commands read one row at a time; `rank` keeps one small accumulator per
compound x target x endpoint. This script checks that memory follows the
number of groups, not rows: it writes an IC50 table of --rows rows (SIMULATED,
fixed seed; --compounds compounds x 2 targets, the rest repeats, IC50
log-uniform 1 nM-10 uM, one row in 200 a bound `> 10 uM`, one in 500 `~`, one
in 1000 a cell that is not a concentration, assay ids), runs

    kimech ki TABLE --format csv -o ki.csv            (and --format json)
    kimech rank ki.csv --format csv -o registry.csv   (and --format json)

under /usr/bin/time -v, and prints wall time and peak resident memory of
each. It also runs rank on one row per group (the same groups from a fifth
of the rows), to show that memory does not grow with rows at fixed groups.

Usage (from the repo root, after `cargo build --release`):
    python3 benches/stream_memory.py                 # 10^6 rows, 10^5 compounds
Options: --rows, --compounds, --kimech PATH, --keep DIR.
"""
import argparse
import os
import random
import re
import subprocess
import sys
import tempfile
from pathlib import Path


def write_table(path, rows, compounds, seed=12):
    rng = random.Random(seed)
    targets = ["VRD7", "VRD3"]
    with open(path, "w") as f:
        f.write("compound,target,ic50,substrate (uM),km (uM),mechanism,assay_id\n")
        for i in range(rows):
            compound = f"KX-{i % compounds:06d}"
            target = targets[(i // compounds) % 2]
            if i % 1000 == 999:
                ic50 = "12 mg/mL"
            elif i % 200 == 199:
                ic50 = "> 10 uM"
            else:
                value = 10 ** rng.uniform(0, 4)
                ic50 = f"{'~' if i % 500 == 499 else ''}{value:.4g} nM"
            f.write(f"{compound},{target},{ic50},100,50,competitive,A-{i // 5000:04d}\n")


def timed(kimech, args):
    cmd = ["/usr/bin/time", "-v", kimech] + args
    run = subprocess.run(cmd, capture_output=True, text=True)
    err = run.stderr
    if run.returncode not in (0, 3):
        sys.exit(f"{' '.join(args)} failed ({run.returncode}):\n{err[-2000:]}")
    rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", err).group(1))
    wall = re.search(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): ([\d:.]+)", err).group(1)
    return wall, rss / 1024


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--rows", type=int, default=1_000_000)
    p.add_argument("--compounds", type=int, default=100_000)
    target_dir = os.environ.get("CARGO_TARGET_DIR", "target")
    p.add_argument("--kimech", default=str(Path(target_dir) / "release" / "kimech"))
    p.add_argument("--keep")
    a = p.parse_args()
    kimech = os.path.abspath(a.kimech)
    work = Path(a.keep) if a.keep else Path(tempfile.mkdtemp(prefix="kimech-memory-"))
    work.mkdir(parents=True, exist_ok=True)
    os.chdir(work)
    write_table("ic50.csv", a.rows, a.compounds)
    groups = 2 * a.compounds
    print(f"{a.rows} rows, {a.compounds} compounds x 2 targets = {groups} groups ({os.path.getsize('ic50.csv') / 1e6:.0f} MB)")
    runs = [
        ("ki → CSV", ["ki", "ic50.csv", "--format", "csv", "-o", "ki.csv"]),
        ("ki → JSON", ["ki", "ic50.csv", "--format", "json", "-o", "ki.json"]),
        ("rank → registry CSV", ["rank", "ki.csv", "--format", "csv", "-o", "registry.csv"]),
        ("rank → JSON", ["rank", "ki.csv", "--format", "json", "-o", "rank.json"]),
    ]
    for name, args in runs:
        wall, mb = timed(kimech, args)
        print(f"{name:22s} wall {wall:>8s}  peak RSS {mb:7.1f} MB")
    # The same groups from a fifth of the rows: the first 2 x compounds rows hold every
    # compound once on each target.
    with open("ki.csv") as src, open("ki-fewer.csv", "w") as dst:
        for i, line in enumerate(src):
            if i <= 2 * a.compounds:
                dst.write(line)
    wall, mb = timed(kimech, ["rank", "ki-fewer.csv", "--format", "csv", "-o", "registry-fewer.csv"])
    print(f"{'rank, ' + str(2 * a.compounds) + ' rows':22s} wall {wall:>8s}  peak RSS {mb:7.1f} MB (the same {groups} groups)")
    if not a.keep:
        for f in work.iterdir():
            f.unlink()
        work.rmdir()


if __name__ == "__main__":
    main()
