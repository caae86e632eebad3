#!/usr/bin/env python3
"""Independent four-parameter-logistic reference values, computed with scipy.

Provenance: written for kimech as an independent check; uses only the
general-purpose libraries numpy and scipy. Input: fixtures/ryegrass.csv,
Inderjit, Streibig & Olofsdotter (2002), Physiologia Plantarum 114, 422-428
(root length `rootl`, cm, vs ferulic acid `conc`, mM), copied unchanged.

Model y = lower + (upper - lower) / (1 + (x/ic50)^hill), all 24 rows used,
including the six at conc = 0 where the model equals `upper` ((0/ic50)^h is
taken as exactly 0 for h > 0; no log(0) is formed).  Unweighted least squares
by scipy.optimize.curve_fit (xtol = ftol = gtol = 1e-15, analytic Jacobian),
parameterised as (log ic50, hill, lower, upper), then polished by Gauss-Newton
steps.  Covariance s^2 (J'J)^-1, s^2 = SSE/df (absolute_sigma=False).
se_ic50 = ic50 * se_log_ic50 (delta method; exact for this covariance).

Cross-check (asserted below): reproduces the values quoted in the shared
reference README, h = 2.982229, lower = 0.481410, upper = 7.792962,
IC50 = 3.057955 mM, SEs 0.45843, 0.20951, 0.18973, 0.18583 -- it does, to all
quoted digits.

Run from the repo root:  python3 tests/reference/logistic_reference.py
Writes fixtures/reference/ryegrass_4pl.json
"""
import json
import platform
from pathlib import Path

import numpy as np
import scipy
from scipy import optimize

ROOT = Path(__file__).resolve().parents[2]
TOL = dict(xtol=1e-15, ftol=1e-15, gtol=1e-15)


def _u(x, lic, h):
    """(x/ic50)^h, exactly 0 at x = 0 (h > 0)."""
    pos = x > 0
    lx = np.log(np.where(pos, x, 1.0))
    return np.where(pos, np.exp(h * (lx - lic)), 0.0), np.where(pos, lx - lic, 0.0)


def model(x, lic, h, lower, upper):
    u, _ = _u(x, lic, h)
    return lower + (upper - lower) / (1 + u)


def jac(x, lic, h, lower, upper):
    u, d = _u(x, lic, h)
    dydu = -(upper - lower) / (1 + u) ** 2
    return np.column_stack([dydu * (-h * u), dydu * u * d, u / (1 + u), 1 / (1 + u)])


def main():
    x, y = np.loadtxt(ROOT / "fixtures" / "ryegrass.csv", delimiter=",", skiprows=1).T
    p0 = (np.log(np.median(x[x > 0])), 1.0, y.min(), y.max())
    p, _ = optimize.curve_fit(model, x, y, p0=p0, jac=jac, maxfev=100000, **TOL)
    for _ in range(20):                            # Gauss-Newton polish
        step = np.linalg.lstsq(jac(x, *p), y - model(x, *p), rcond=None)[0]
        p = p + step
        if np.all(np.abs(step) <= 1e-15 * np.abs(p)):
            break
    lic, h, lower, upper = p
    assert h > 0
    n, k = len(x), 4
    df = n - k
    r = y - model(x, *p)
    sse = float(r @ r)
    J = jac(x, *p)
    cov = np.linalg.inv(J.T @ J) * sse / df
    se = np.sqrt(np.diag(cov))
    ic50 = float(np.exp(lic))
    fit = {
        "n": n, "n_zero_conc": int((x == 0).sum()), "df": df,
        "ic50": ic50, "hill": float(h), "lower": float(lower), "upper": float(upper),
        "log_ic50": float(lic),
        "se_ic50": ic50 * float(se[0]), "se_log_ic50": float(se[0]),
        "se_hill": float(se[1]), "se_lower": float(se[2]), "se_upper": float(se[3]),
        "sse": sse, "residual_sd": float(np.sqrt(sse / df)),
    }
    # cross-check against the shared reference README
    quoted = {"hill": 2.982229, "lower": 0.481410, "upper": 7.792962, "ic50": 3.057955,
              "se_hill": 0.45843, "se_lower": 0.20951, "se_upper": 0.18973, "se_ic50": 0.18583}
    for key, val in quoted.items():
        digits = len(str(val).split(".")[1])
        assert round(fit[key], digits) == val, (key, fit[key], val)
    out = {
        "generator": {"script": "tests/reference/logistic_reference.py",
                      "scipy": scipy.__version__, "numpy": np.__version__,
                      "python": platform.python_version()},
        "provenance": "Independent reference values computed with scipy for kimech tests; "
                      "data: Inderjit, Streibig & Olofsdotter (2002), see fixtures/README.md.",
        "model": "y = lower + (upper-lower)/(1+(x/ic50)^hill), unweighted, conc=0 rows used",
        "units": {"ic50": "mM", "lower": "cm", "upper": "cm"},
        "fit": fit,
    }
    dest = ROOT / "fixtures" / "reference" / "ryegrass_4pl.json"
    dest.parent.mkdir(parents=True, exist_ok=True)
    dest.write_text(json.dumps(out, indent=2) + "\n")
    print(f"wrote {dest.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
