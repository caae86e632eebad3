#!/usr/bin/env python3
"""Simulated partial- and substrate-inhibition matrices and independent global
fits of kimech's two extension rate laws, with scipy.

Provenance: written for kimech as an independent check; uses only numpy and
scipy.  The data are SIMULATED here (no published source): nobody measured them.

Rate laws (all parameters positive, fitted on the log scale):
  partial (hyperbolic) inhibition, Segel, Enzyme Kinetics (1975), ch. 4:
    v = Vmax S (1 + beta I/(alpha Ki)) / (Km (1 + I/Ki) + S (1 + I/(alpha Ki)))
  substrate inhibition (Haldane 1930) on top of mixed inhibition:
    v = Vmax S / (Km (1 + I/Ki) + S (1 + I/(alpha Ki)) + S^2/Ksi)

Simulation: numpy.random.default_rng(20261202), drawn dataset by dataset in the
order below, then inhibitor level, substrate level, replicate (2).  Vmax = 10,
Km = 50 uM, S = 0.2,0.5,1,2,4,8 x Km, I = 0,1,2,4,8,16 uM.  Noise: rate =
v_true (1 + 0.04 z).  Rates written with 6 significant digits; the fits use
those rounded values, unweighted.

Fits: scipy.optimize.least_squares (method 'lm', xtol = ftol = gtol = 1e-15)
from a multi-start grid (7 log-spaced Ki starts over 1e-2..1e2 x max I, 7 alpha
starts over 1e-2..1e2, 4 values of the extra parameter, two data-driven
Vmax/Km starts); best SSE kept and polished once more.

Run from the repo root:  python3 tests/reference/mode_extensions_reference.py
Writes fixtures/mode/extensions.csv and fixtures/reference/mode_extensions_scipy.json
"""
import itertools
import json
import platform
from pathlib import Path

import numpy as np
import scipy
from scipy import optimize

ROOT = Path(__file__).resolve().parents[2]
SEED, NOISE = 20261202, 0.04
VMAX, KM = 10.0, 50.0
S_LEVELS = [f * KM for f in (0.2, 0.5, 1, 2, 4, 8)]
I_LEVELS = [0.0, 1.0, 2.0, 4.0, 8.0, 16.0]


def partial(S, I, p):
    vmax, km, ki, alpha, beta = p
    return vmax * S * (1 + beta * I / (alpha * ki)) / (km * (1 + I / ki) + S * (1 + I / (alpha * ki)))


def haldane(S, I, p):
    vmax, km, ki, alpha, ksi = p
    return vmax * S / (km * (1 + I / ki) + S * (1 + I / (alpha * ki)) + S * S / ksi)


MODELS = {
    "partial-inhibition": (["vmax", "km", "ki", "alpha", "beta"], partial, [0.03, 0.1, 0.3, 0.6]),
    "substrate-inhibition": (["vmax", "km", "ki", "alpha", "ksi"], haldane, None),
}
# compound -> (law, true parameters)
TRUTH = {
    "partial-40": ("partial-inhibition", [VMAX, KM, 2.0, 1.0, 0.4]),
    "partial-mild": ("partial-inhibition", [VMAX, KM, 2.0, 3.0, 0.2]),
    "haldane-competitive": ("substrate-inhibition", [VMAX, KM, 2.0, 1e9, 2.0 * KM]),
    "haldane-mixed": ("substrate-inhibition", [VMAX, KM, 3.0, 0.5, 3.0 * KM]),
}
TOL = dict(method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=200000)


def simulate(rng):
    data = {}
    for name, (law, theta) in TRUTH.items():
        f = MODELS[law][1]
        rows = []
        for I in I_LEVELS:
            for S in S_LEVELS:
                for _ in range(2):
                    v = f(S, I, theta) * (1 + NOISE * rng.standard_normal())
                    txt = f"{v:.6g}"
                    assert "e" not in txt
                    rows.append((S, I, txt))
        data[name] = rows
    return data


def fit_model(name, S, I, v):
    names, f, extra = MODELS[name]
    if extra is None:
        extra = list(np.array([0.3, 1, 3, 10]) * S.max())
    resid = lambda lp: f(S, I, np.exp(lp)) - v
    s0, v0 = S[I == 0], v[I == 0]
    vk = [(2 * v0.max(), np.median(s0)), (v0.max(), np.median(s0))]
    ki_grid = np.logspace(-2, 2, 7) * I.max()
    alpha_grid = np.logspace(-2, 2, 7)
    best = None
    for (vm, km), ki, al, ex in itertools.product(vk, ki_grid, alpha_grid, extra):
        p0 = np.log([vm, km, ki, al, ex])
        try:
            r = optimize.least_squares(resid, p0, **TOL)
        except (ValueError, FloatingPointError):
            continue
        if np.isfinite(r.cost) and (best is None or r.cost < best.cost):
            best = r
    best = optimize.least_squares(resid, best.x, **TOL)
    return {"sse": float(2 * best.cost), "params": dict(zip(names, map(float, np.exp(best.x)))), "n": len(v)}


def main():
    data = simulate(np.random.default_rng(SEED))
    header = "compound,substrate (uM),inhibitor (uM),rate\n"
    fmt = lambda x: f"{x:g}"
    lines = [f"{name},{fmt(S)},{fmt(I)},{v}\n" for name, rows in data.items() for S, I, v in rows]
    (ROOT / "fixtures" / "mode" / "extensions.csv").write_text(header + "".join(lines))
    out = {
        "generator": {"script": "tests/reference/mode_extensions_reference.py",
                      "scipy": scipy.__version__, "numpy": np.__version__,
                      "python": platform.python_version()},
        "provenance": "Simulated data and independent scipy fits for kimech tests "
                      "(see the script docstring for the simulation recipe).",
        "datasets": {},
    }
    for name, rows in data.items():
        S = np.array([r[0] for r in rows])
        I = np.array([r[1] for r in rows])
        v = np.array([float(r[2]) for r in rows])
        with np.errstate(all="ignore"):
            models = {m: fit_model(m, S, I, v) for m in MODELS}
        out["datasets"][name] = {"law": TRUTH[name][0], "truth": TRUTH[name][1], "models": models}
        print(name, {m: round(r["sse"], 6) for m, r in models.items()})
    dest = ROOT / "fixtures" / "reference" / "mode_extensions_scipy.json"
    dest.write_text(json.dumps(out, indent=2) + "\n")
    print(f"wrote {dest.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
