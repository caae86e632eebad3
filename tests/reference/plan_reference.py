#!/usr/bin/env python3
"""Independent simulation of `kimech plan`: numpy draws the matrices, the
built `kimech mode` binary names each one, this script tallies the calls.

Provenance: written for kimech as an independent check of the Rust planner's
simulation loop (its rate laws, noise, weighting choice and tally); only
numpy and the Python standard library are used.  The data are SIMULATED
(nobody measured them); the seed is fixed below.  Rate laws as in DESIGN
section 4 (Cornish-Bowden 2012; Segel 1975), written out here again:

  none            v = V S / (Km + S)
  competitive     v = V S / (Km (1 + I/Ki) + S)
  uncompetitive   v = V S / (Km + S (1 + I/Ki))          (Ki plays Kiu)
  noncompetitive  v = V S / ((Km + S)(1 + I/Ki))
  mixed           v = V S / (Km (1 + I/Ki) + S (1 + I/(alpha Ki)))

Designs (the same as tests/plan.rs asks `kimech plan` for):

  "issue-example": Km = 20 uM, Ki = 0.5 uM, alpha = 4, V = 10;
      S = 5,10,20,40,80,160 uM; I = 0,0.25,0.5,1,2 uM; duplicates;
      proportional noise 5 %: v (1 + 0.05 z), floored at 1e-6 V,
      analysed with `kimech mode --weighting relative`.
  "narrow": Km = 20 uM, Ki = 0.5 uM, alpha = 4, V = 10;
      S = 10,20,40 uM; I = 0,0.05,0.1,0.2 uM; duplicates;
      constant noise SD 0.25 rate units: v + 0.25 z,
      analysed with `kimech mode --weighting none`.

Each simulated matrix is one `compound` of a CSV, so one `kimech mode`
call analyses all matrices of a design and mechanism.  The call is the
`chosen` field of its JSON; `mechanism-uncertain` is counted from its
warnings.

Run from the repository root after `cargo build --release`:
    python3 tests/reference/plan_reference.py [--kimech target/release/kimech] [--n 200]
Writes fixtures/reference/plan_reference.json.
"""
import argparse
import json
import subprocess
import tempfile
from pathlib import Path

import numpy as np

SEED = 20261202
MECHANISMS = ["none", "competitive", "uncompetitive", "noncompetitive", "mixed"]
DESIGNS = {
    "issue-example": dict(km=20.0, ki=0.5, alpha=4.0, vmax=10.0,
                          substrate=[5, 10, 20, 40, 80, 160], inhibitor=[0, 0.25, 0.5, 1, 2],
                          replicates=2, noise=("proportional", 0.05)),
    "narrow": dict(km=20.0, ki=0.5, alpha=4.0, vmax=10.0,
                   substrate=[10, 20, 40], inhibitor=[0, 0.05, 0.1, 0.2],
                   replicates=2, noise=("constant", 0.25)),
}


def rate(mechanism, s, i, d):
    v, km, ki, alpha = d["vmax"], d["km"], d["ki"], d["alpha"]
    if mechanism == "none":
        return v * s / (km + s)
    if mechanism == "competitive":
        return v * s / (km * (1 + i / ki) + s)
    if mechanism == "uncompetitive":
        return v * s / (km + s * (1 + i / ki))
    if mechanism == "noncompetitive":
        return v * s / ((km + s) * (1 + i / ki))
    return v * s / (km * (1 + i / ki) + s * (1 + i / (alpha * ki)))


def matrices_csv(mechanism, d, n, rng):
    rows = ["compound,substrate (uM),inhibitor (uM),rate"]
    kind, size = d["noise"]
    s_grid, i_grid = np.meshgrid(np.array(d["substrate"], float), np.array(d["inhibitor"], float))
    s = np.repeat(s_grid.ravel(), d["replicates"])
    i = np.repeat(i_grid.ravel(), d["replicates"])
    truth = rate(mechanism, s, i, d)
    for k in range(n):
        z = rng.standard_normal(truth.size)
        if kind == "proportional":
            v = np.maximum(truth * (1 + size * z), 1e-6 * d["vmax"])
        else:
            v = truth + size * z
        rows.extend(f"sim{k},{a:.17g},{b:.17g},{c:.17g}" for a, b, c in zip(s, i, v))
    return "\n".join(rows) + "\n"


def tally(kimech, path, weighting):
    out = subprocess.run([kimech, "mode", str(path), "--weighting", weighting, "--format", "json"],
                         capture_output=True, text=True)
    if out.returncode not in (0, 3):
        raise SystemExit(f"kimech mode failed: {out.stderr}")
    results = json.loads(out.stdout)["results"]
    named, uncertain = {}, 0
    for r in results:
        named[r["chosen"]] = named.get(r["chosen"], 0) + 1
        uncertain += any(w["code"] == "mechanism-uncertain" for w in r["warnings"])
    return named, uncertain, len(results)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--kimech", default="target/release/kimech")
    ap.add_argument("--n", type=int, default=200)
    args = ap.parse_args()
    rng = np.random.default_rng(SEED)
    out = {"source": "tests/reference/plan_reference.py (numpy matrices, named by `kimech mode`)",
           "seed": SEED, "designs": {}}
    with tempfile.TemporaryDirectory() as tmp:
        for name, d in DESIGNS.items():
            weighting = "relative" if d["noise"][0] == "proportional" else "none"
            rows = {}
            for m in MECHANISMS:
                path = Path(tmp) / f"{name}-{m}.csv"
                path.write_text(matrices_csv(m, d, args.n, rng))
                named, uncertain, n = tally(args.kimech, path, weighting)
                rows[m] = {"n": n, "named": {k: v / n for k, v in sorted(named.items())},
                           "uncertain": uncertain / n}
                print(name, m, rows[m])
            out["designs"][name] = {"design": d, "weighting": weighting, "truths": rows}
    target = Path("fixtures/reference/plan_reference.json")
    target.write_text(json.dumps(out, indent=1) + "\n")
    print(f"wrote {target}")


if __name__ == "__main__":
    main()
