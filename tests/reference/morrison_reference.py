#!/usr/bin/env python3
"""Morrison tight-binding fits by scipy on background-subtracted raw signal,
as an independent reference for `kimech ic50 --enzyme`.

Provenance: written for kimech; uses only numpy and scipy. The data are
simulated here with a fixed seed (numpy default_rng(20269)): ten compounds,
total enzyme Et = 2 nM, apparent Ki from 0.2 to 60 nM, uninhibited signal v0
of 3000-8000 counts (background already subtracted, so zero is full
inhibition), twelve concentrations (0 and 0.05 * 2^k nM), normal noise with
SD 2 % of v0.

Model (Morrison, Biochim. Biophys. Acta 185, 269-286, 1969):
  y = v0 * (1 - ((Et + I + K) - sqrt((Et + I + K)^2 - 4 Et I)) / (2 Et))
fitted in (log K, v0) by scipy.optimize.curve_fit (xtol = ftol = gtol =
1e-15) from a grid of starts, best SSE kept.

Run from the repo root:  python3 tests/reference/morrison_reference.py
Writes fixtures/morrison_raw.csv and fixtures/reference/morrison_scipy.json
"""
import json
import platform
from pathlib import Path

import numpy as np
import scipy
from scipy import optimize

ROOT = Path(__file__).resolve().parents[2]
ET = 2.0
TOL = dict(xtol=1e-15, ftol=1e-15, gtol=1e-15)


def model(i, logk, v0):
    k = np.exp(logk)
    b = ET + i + k
    bound = 2 * i / (b + np.sqrt(np.maximum(b * b - 4 * ET * i, 0.0)))
    return v0 * (1 - bound)


def main():
    rng = np.random.default_rng(20269)
    conc = np.concatenate([[0.0], 0.05 * 2.0 ** np.arange(1, 12)])
    rows = ["compound,inhibitor (nM),response"]
    out = {}
    for n, k in enumerate(np.geomspace(0.2, 60.0, 10)):
        v0 = rng.uniform(3000, 8000)
        y = model(conc, np.log(k), v0) + rng.normal(0, 0.02 * v0, conc.size)
        name = f"TB-{n + 1:02d}"
        rows += [f"{name},{float(c)!r},{float(v)!r}" for c, v in zip(conc, y)]
        best = None
        for lk in np.log(ET * np.array([0.01, 0.1, 1, 10, 100])):
            p, _ = optimize.curve_fit(model, conc, y, p0=(lk, y.max()), maxfev=100000, **TOL)
            sse = float(np.sum((y - model(conc, *p)) ** 2))
            if best is None or sse < best[1]:
                best = (p, sse)
        p, sse = best
        out[name] = dict(ki_app=float(np.exp(p[0])), upper=float(p[1]), ic50=float(np.exp(p[0]) + ET / 2), sse=sse,
                         true_ki_app=float(k), true_upper=float(v0))
    (ROOT / "fixtures" / "morrison_raw.csv").write_text("\n".join(rows) + "\n")
    doc = dict(generator="tests/reference/morrison_reference.py", et_nM=ET,
               versions=dict(python=platform.python_version(), numpy=np.__version__, scipy=scipy.__version__),
               curves=out)
    (ROOT / "fixtures" / "reference" / "morrison_scipy.json").write_text(json.dumps(doc, indent=1) + "\n")
    for k, v in out.items():
        print(k, v)


if __name__ == "__main__":
    main()
