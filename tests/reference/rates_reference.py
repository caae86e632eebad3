"""Reference for `kimech rates`: progress curves and their initial-rate windows.

1. Simulates product-formation curves from the closed-form integrated
   Michaelis-Menten equation S(t) = Km * W((S0/Km) * exp((S0 - Vmax*t)/Km))
   (Schnell & Mendoza, J. Theor. Biol. 187, 207-212, 1997; W is Lambert's W,
   scipy.special.lambertw), P = S0 - S, plus Gaussian noise (numpy, seed 11).
   Writes fixtures/rates/progress.csv.
2. Caps each curve at 10% substrate conversion (product rise above the
   first-4-point line's value at t0, relative to S0), then applies the window
   rule independently with numpy.polyfit and scipy.stats.f:
   start with the first 4 points, grow one point at a time while the t^2 term's
   extra-sum-of-squares F test has p >= 0.05, stopping at the first of two
   consecutive significant extensions, and report the line over the last
   accepted window (slope, its standard error, window size).
   Writes fixtures/reference/rates_scipy.json.
Run from the repository root: python3 tests/reference/rates_reference.py
"""
import json
import pathlib

import numpy as np
import scipy
from scipy import special, stats

ROOT = pathlib.Path(__file__).resolve().parents[2]
VMAX, KM = 2.0, 40.0  # uM/min, uM
TIMES = np.arange(0.0, 31.0, 1.0)  # min
NOISE_SD = 0.05  # uM


def product(s0, t):
    w = special.lambertw((s0 / KM) * np.exp((s0 - VMAX * t) / KM)).real
    return s0 - KM * w


def sse_of(deg, t, y):
    coef = np.polyfit(t, y, deg)
    r = y - np.polyval(coef, t)
    return float(r @ r), coef


def curvature_p(t, y, m):
    sse1, _ = sse_of(1, t[:m], y[:m])
    sse2, _ = sse_of(2, t[:m], y[:m])
    df1, df2 = m - 2, m - 3
    f = ((sse1 - sse2) / (df1 - df2)) / (sse2 / df2)
    return float(stats.f.sf(f, df1 - df2, df2))


def window(t, y, min_points=4, alpha=0.05):
    """Grow while the t^2 term is not significant; stop at the first of two
    consecutive significant extensions (or a significant last point)."""
    chosen, p_stop, pending = min_points, None, None
    for m in range(min_points, len(t) + 1):
        p = curvature_p(t, y, m)
        if p < alpha:
            if pending is not None or m == len(t):
                p_stop = pending if pending is not None else p
                break
            pending = p
        else:
            if pending is None:
                chosen = m
            pending = None
    else:
        p_stop = pending
    sse, coef = sse_of(1, t[:chosen], y[:chosen])
    tt = t[:chosen]
    se_slope = np.sqrt(sse / (chosen - 2) / np.sum((tt - tt.mean()) ** 2))
    return chosen, float(coef[0]), float(se_slope), p_stop


def conversion_limit(t, y, s0, min_points=4, max_conversion=0.1):
    """Leading points whose rise above the first-window line's value at t[0]
    stays within 10% of S0 (at least min_points)."""
    coef = np.polyfit(t[:min_points], y[:min_points], 1)
    baseline = np.polyval(coef, t[0])
    within = 0
    for v in y:
        if abs((v - baseline) / s0) > max_conversion:
            break
        within += 1
    return max(within, min_points)


def main():
    rng = np.random.default_rng(11)
    rows = ["# Simulated by tests/reference/rates_reference.py: integrated Michaelis-Menten "
            "(Schnell & Mendoza 1997), Vmax 2 uM/min, Km 40 uM, noise SD 0.05 uM.",
            "curve,series,substrate (uM),time (min),product (uM)"]
    reference = {}
    for k, s0 in enumerate([10.0, 30.0, 100.0, 300.0]):
        name = f"P{k + 1}"
        y = np.round(product(s0, TIMES) + rng.normal(0.0, NOISE_SD, TIMES.size), 5)
        rows += [f"{name},sim,{s0:g},{t:g},{v:.5f}" for t, v in zip(TIMES, y)]
        limit = conversion_limit(TIMES, y, s0)
        m, slope, se, p_stop = window(TIMES[:limit], y[:limit])
        reference[name] = {"s0": s0, "true_v0": VMAX * s0 / (KM + s0), "points_used": m,
                           "slope": slope, "se_slope": se, "p_stop": p_stop}
    (ROOT / "fixtures/rates").mkdir(parents=True, exist_ok=True)
    (ROOT / "fixtures/rates/progress.csv").write_text("\n".join(rows) + "\n")
    out = {"generator": {"script": "tests/reference/rates_reference.py", "scipy": scipy.__version__,
                         "numpy": np.__version__},
           "rule": "cap at 10% conversion; first 4 points, grow while F-test p of t^2 term >= 0.05; stop at the first of two consecutive p < 0.05",
           "curves": reference}
    (ROOT / "fixtures/reference/rates_scipy.json").write_text(json.dumps(out, indent=2) + "\n")


if __name__ == "__main__":
    main()
