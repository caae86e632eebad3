#!/usr/bin/env python3
"""Independent Michaelis-Menten reference values, computed with scipy.

Provenance: written for kimech as an independent check; uses only the
general-purpose libraries numpy and scipy. Input data are published datasets
copied unchanged into fixtures/ (see fixtures/README.md):
  fixtures/misra1d.csv   NIST StRD "Misra1d" (x = S, y = v)
  fixtures/puromycin.csv Treloar (1974) via Bates & Watts (1988), treated and
                         untreated cells separately

Model v = Vmax*S/(Km+S), unweighted least squares by scipy.optimize.curve_fit
(xtol = ftol = gtol = 1e-15, analytic Jacobian so that the covariance is not
limited by finite differences), then polished by Gauss-Newton steps (see
fit()); covariance s^2 (J'J)^-1 with s^2 = SSE/df, i.e. scaled by the residual
variance as curve_fit does with absolute_sigma=False.  For each dataset: estimates, SEs, SSE, df, residual
SD, R^2 = 1 - SSE/SST (about the mean), Wald 95% intervals (est +/- t*SE) and
95% profile-likelihood intervals: {p : SSE_prof(p) <= SSE_min*(1 + F/df)},
F = scipy.stats.f.ppf(0.95, 1, df).  Interval ends by brentq (relative xtol
1e-14); in the Km profile Vmax has the closed form sum(v*g)/sum(g*g),
g = S/(Km+S); in the Vmax profile Km is re-optimised by minimize_scalar
(Brent, on log Km).

Checks done when written (see asserts at the bottom): Misra1d reproduces the
NIST certified b1 = 437.36970754 (SE 3.6489174345), Km = 1/b2 = 3308.265...,
SSE 5.6419295283e-2; Puromycin treated reproduces Bates & Watts Vmax 212.7,
Km 0.06412.

Run from the repo root:  python3 tests/reference/mm_reference.py
Writes fixtures/reference/mm_scipy.json
"""
import csv
import json
import platform
from pathlib import Path

import numpy as np
import scipy
from scipy import optimize, stats

ROOT = Path(__file__).resolve().parents[2]
FIX = ROOT / "fixtures"
TOL = dict(xtol=1e-15, ftol=1e-15, gtol=1e-15)


def mm(s, vmax, km):
    return vmax * s / (km + s)


def mm_jac(s, vmax, km):
    g = s / (km + s)
    return np.column_stack([g, -vmax * g / (km + s)])


def sse_of(s, v, vmax, km):
    r = v - mm(s, vmax, km)
    return float(r @ r)


def vmax_given_km(s, v, km):
    g = s / (km + s)
    return float(v @ g / (g @ g))


def km_given_vmax(s, v, vmax, km0):
    f = lambda lk: sse_of(s, v, vmax, np.exp(lk))
    res = optimize.minimize_scalar(f, bracket=(np.log(km0) - 0.1, np.log(km0) + 0.1),
                                   method="brent", tol=1e-14, options={"maxiter": 5000})
    return float(np.exp(res.x))


def profile_interval(est, prof, thr):
    """Ends of {p : prof(p) <= thr} around est, by outward doubling then brentq."""
    f = lambda p: prof(p) - thr
    ends = []
    for direction in (-1, 1):
        inner, step = est, 0.05 * abs(est)
        for _ in range(200):
            outer = inner + direction * step
            if direction < 0 and outer <= 0:       # parameters are positive
                outer = inner / 2
            if f(outer) > 0:
                break
            inner, step = outer, step * 2
        else:
            ends.append(None)                      # profile never crosses: unbounded
            continue
        a, b = sorted((inner, outer))
        ends.append(optimize.brentq(f, a, b, xtol=1e-14 * abs(est), rtol=1e-14, maxiter=1000))
    return ends


def fit(s, v):
    s, v = np.asarray(s, float), np.asarray(v, float)
    # data-driven start: Hanes-Woolf line S/v = Km/Vmax + S/Vmax
    slope, icept = np.polyfit(s, s / v, 1)
    p0 = (1 / slope, icept / slope)
    p, _ = optimize.curve_fit(mm, s, v, p0=p0, jac=mm_jac, maxfev=100000,
                              absolute_sigma=False, **TOL)
    # curve_fit (MINPACK lm) stops ~4e-9 relative short of the NIST certified
    # Misra1d optimum even at 1e-15 tolerances; a few Gauss-Newton steps finish it.
    for _ in range(20):
        step = np.linalg.lstsq(mm_jac(s, *p), v - mm(s, *p), rcond=None)[0]
        p = p + step
        if np.all(np.abs(step) <= 1e-15 * np.abs(p)):
            break
    vmax, km = p
    n = len(s)
    df = n - 2
    sse = sse_of(s, v, vmax, km)
    J = mm_jac(s, vmax, km)
    pcov = np.linalg.inv(J.T @ J) * sse / df      # what absolute_sigma=False gives
    se = np.sqrt(np.diag(pcov))
    sst = float(((v - v.mean()) ** 2).sum())
    fq = float(stats.f.ppf(0.95, 1, df))
    thr = sse * (1 + fq / df)
    tq = float(stats.t.ppf(0.975, df))
    state = {"km": km}                             # warm start for the Vmax profile

    def prof_vmax(vm):
        state["km"] = km_given_vmax(s, v, vm, state["km"])
        return sse_of(s, v, vm, state["km"])

    def prof_km(k):
        return sse_of(s, v, vmax_given_km(s, v, k), k)

    vmax_pl = profile_interval(vmax, prof_vmax, thr)
    state["km"] = km
    km_pl = profile_interval(km, prof_km, thr)
    return {
        "n": n, "df": df,
        "vmax": float(vmax), "km": float(km),
        "se_vmax": float(se[0]), "se_km": float(se[1]),
        "cov_vmax_km": float(pcov[0, 1]),
        "sse": sse, "residual_sd": float(np.sqrt(sse / df)), "r2": 1 - sse / sst,
        "t_0975": tq, "f_095": fq, "profile_sse_threshold": thr,
        "wald95_vmax": [float(vmax - tq * se[0]), float(vmax + tq * se[0])],
        "wald95_km": [float(km - tq * se[1]), float(km + tq * se[1])],
        "profile95_vmax": vmax_pl,
        "profile95_km": km_pl,
    }


def read(name):
    with open(FIX / name, newline="") as fh:
        return list(csv.DictReader(fh))


def main():
    mis = read("misra1d.csv")
    pur = read("puromycin.csv")
    sets = {
        "misra1d": ([float(r["x"]) for r in mis], [float(r["y"]) for r in mis]),
    }
    for st in ("treated", "untreated"):
        rows = [r for r in pur if r["state"] == st]
        sets[f"puromycin_{st}"] = ([float(r["conc"]) for r in rows],
                                   [float(r["rate"]) for r in rows])
    out = {
        "generator": {"script": "tests/reference/mm_reference.py",
                      "scipy": scipy.__version__, "numpy": np.__version__,
                      "python": platform.python_version()},
        "provenance": "Independent reference values computed with scipy for kimech tests; "
                      "data are published datasets, see fixtures/README.md.",
        "model": "v = vmax*S/(km+S), unweighted least squares",
        "datasets": {k: fit(*xy) for k, xy in sets.items()},
    }
    # sanity checks against published / certified values
    m = out["datasets"]["misra1d"]
    assert abs(m["vmax"] / 437.36970754 - 1) < 1e-10, m["vmax"]
    assert abs(m["km"] * 3.0227324449e-04 - 1) < 1e-10, m["km"]
    assert abs(m["se_vmax"] / 3.6489174345 - 1) < 1e-9, m["se_vmax"]
    assert abs(m["se_km"] / (2.9334354479e-06 * m["km"] ** 2) - 1) < 1e-9, m["se_km"]
    assert abs(m["sse"] / 5.6419295283e-02 - 1) < 1e-10, m["sse"]
    t = out["datasets"]["puromycin_treated"]
    assert abs(t["vmax"] - 212.68) < 0.01 and abs(t["km"] - 0.06412) < 1e-5, t
    dest = FIX / "reference" / "mm_scipy.json"
    dest.parent.mkdir(parents=True, exist_ok=True)
    dest.write_text(json.dumps(out, indent=2) + "\n")
    print(f"wrote {dest.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
