"""Reference for `kimech onset`: a global fit of progress curves by scipy.

1. Simulates covalent (irreversible, two-step) progress curves from the
   integrated equation P(t) = vi*(1 - exp(-kobs*t))/kobs + P0 with
   kobs = kinact*I/(KI + I) (Morrison & Walsh, Adv. Enzymol. 61, 201-301,
   1988; Copeland, Evaluation of Enzyme Inhibitors in Drug Discovery, 2nd ed.,
   2013, ch. 9), vi = v0/(1 + I/KI), plus Gaussian noise (numpy, seed 16).
   Writes fixtures/onset/two_step.csv (time in min, inhibitor in uM,
   signal in counts) with an uninhibited curve.
2. Fits all curves at once with scipy.optimize.least_squares (method 'lm',
   tolerances 1e-15): shared kinact and KI (fitted as logarithms), per-curve
   vi and P0; the uninhibited curve is the straight line vi*t + P0. Also the
   one-step scheme kobs = (kinact/KI)*I. Writes the estimates and the SSE of
   both to fixtures/reference/onset_scipy.json.
3. The same two schemes with the initial rates tied to one v0 by the scheme
   (Morrison & Walsh 1988): vi = v0*KI/(KI + I) for two-step, vi = v0 for
   one-step; shared kinact, KI (logarithms) and v0, per-curve P0. Written as
   "two_step_tied" and "one_step_tied".
Run from the repository root: python3 tests/reference/onset_reference.py
"""
import json
import pathlib

import numpy as np
import scipy
from scipy import optimize

ROOT = pathlib.Path(__file__).resolve().parents[2]
KINACT, KI, V0, P0 = 0.08, 1.5, 900.0, 1500.0  # 1/min, uM, counts/min, counts
INHIBITOR = [0.0, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0]  # uM
TIMES = np.arange(0.0, 61.0, 3.0)  # min
NOISE_SD = 250.0  # counts


def onset(k, t):
    k = np.asarray(k, dtype=float)
    x = k * t
    small = np.abs(x) < 1e-8
    return np.where(small, t * (1 - x / 2), -np.expm1(-x) / np.where(small, 1.0, k))


def simulate():
    rng = np.random.default_rng(16)
    rows = []
    for i in INHIBITOR:
        kobs = KINACT * i / (KI + i)
        vi = V0 / (1 + i / KI)
        y = vi * onset(kobs, TIMES) + P0 + rng.normal(0.0, NOISE_SD, TIMES.size)
        rows += [(i, t, v) for t, v in zip(TIMES, y)]
    return rows


def residuals(theta, rows, scheme, tied=False):
    n_shared = 2 if scheme == "two-step" else 1
    out = []
    for c, i in enumerate(INHIBITOR):
        if tied:
            v0, p0 = theta[n_shared], theta[n_shared + 1 + c]
            vi = v0 * np.exp(theta[1]) / (np.exp(theta[1]) + i) if scheme == "two-step" else v0
        else:
            vi, p0 = theta[n_shared + 2 * c], theta[n_shared + 2 * c + 1]
        t = np.array([r[1] for r in rows if r[0] == i])
        y = np.array([r[2] for r in rows if r[0] == i])
        if i == 0:
            pred = vi * t + p0
        else:
            if scheme == "two-step":
                kinact, ki = np.exp(theta[0]), np.exp(theta[1])
                kobs = kinact * i / (ki + i)
            else:
                kobs = np.exp(theta[0]) * i
            pred = vi * onset(kobs, t) + p0
        out.append(y - pred)
    return np.concatenate(out)


def fit(rows, scheme, tied=False):
    if scheme == "two-step":
        shared = [np.log(0.1), np.log(1.0)]
    else:
        shared = [np.log(0.03)]
    if tied:
        start = shared + [V0 / 2] + [P0 for _ in INHIBITOR]
    else:
        start = shared + sum(([V0 / 2, P0] for _ in INHIBITOR), [])
    res = optimize.least_squares(
        residuals, start, args=(rows, scheme, tied), method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=100000
    )
    sse = float(res.fun @ res.fun)
    n_shared = len(shared)
    if tied:
        v0 = float(res.x[n_shared])
        ki = float(np.exp(res.x[1])) if scheme == "two-step" else None
        out = {
            "sse": sse,
            "v0": v0,
            "vi": [v0 * ki / (ki + i) if ki else v0 for i in INHIBITOR],
            "p0": [float(v) for v in res.x[n_shared + 1 :]],
        }
    else:
        out = {
            "sse": sse,
            "vi": [float(v) for v in res.x[n_shared::2]],
            "p0": [float(v) for v in res.x[n_shared + 1 :: 2]],
        }
    if scheme == "two-step":
        out["kinact"] = float(np.exp(res.x[0]))
        out["ki"] = float(np.exp(res.x[1]))
    else:
        out["kinact_ki"] = float(np.exp(res.x[0]))
    return out


def main():
    rows = simulate()
    csv = ROOT / "fixtures" / "onset" / "two_step.csv"
    csv.parent.mkdir(parents=True, exist_ok=True)
    with open(csv, "w") as f:
        f.write("# simulated by tests/reference/onset_reference.py (numpy seed 16)\n")
        f.write("compound,inhibitor (uM),time (min),signal\n")
        for i, t, y in rows:
            f.write(f"KX-sim,{i:g},{t:g},{y:.6f}\n")
    rows = [(i, t, round(y, 6)) for i, t, y in rows]
    result = {
        "source": "tests/reference/onset_reference.py",
        "scipy": scipy.__version__,
        "numpy": np.__version__,
        "inhibitor": INHIBITOR,
        "two_step": fit(rows, "two-step"),
        "one_step": fit(rows, "one-step"),
        "two_step_tied": fit(rows, "two-step", tied=True),
        "one_step_tied": fit(rows, "one-step", tied=True),
    }
    out = ROOT / "fixtures" / "reference" / "onset_scipy.json"
    out.write_text(json.dumps(result, indent=2) + "\n")
    print(json.dumps(result, indent=2))


if __name__ == "__main__":
    main()
