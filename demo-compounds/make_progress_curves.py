"""Writes progress-curves.csv: invented product-formation curves for the demo.

Fictional enzyme veridase-7 (VRD7), two fictional enzyme batches, seven
substrate levels in duplicate. Product P(t) follows the integrated
Michaelis-Menten equation Vmax*t = P + Km*ln(S0/(S0 - P)), solved for P by
Newton's method, with Gaussian read noise of 0.03 uM (seed 7).
Run from the repo root: python3 demo-compounds/make_progress_curves.py
"""
import math
import pathlib
import random

random.seed(7)


def product(s0, vmax, km, t):
    p = min(vmax * t, 0.5 * s0)
    for _ in range(100):
        f = p + km * math.log(s0 / (s0 - p)) - vmax * t
        df = 1 + km / (s0 - p)
        p_new = min(max(p - f / df, 0.0), s0 * (1 - 1e-12))
        if abs(p_new - p) < 1e-14 * s0:
            break
        p = p_new
    return p


rows = ["# Invented demo data: fictional enzyme veridase-7 (VRD7), not a real measurement.",
        "curve,series,substrate (uM),time (min),product (uM)"]
for label, vmax, km in [("batch-A", 3.1, 42.0), ("batch-B", 2.6, 55.0)]:
    for s0 in [5, 10, 20, 40, 80, 160, 320]:
        for rep in (1, 2):
            name = f"{label}-S{s0}-r{rep}"
            # Each well's enzyme activity varies by about 3% (pipetting).
            well_vmax = vmax * (1 + random.gauss(0, 0.03))
            for k in range(21):
                t = 0.5 * k
                y = product(s0, well_vmax, km, t) + random.gauss(0, 0.03)
                rows.append(f"{name},{label},{s0},{t:g},{y:.4f}")
out = pathlib.Path(__file__).with_name("progress-curves.csv")
out.write_text("\n".join(rows) + "\n")
