"""Writes substrate-series.csv: invented Michaelis-Menten data for the demo.

Fictional enzyme veridase-7 (VRD7), two fictional enzyme batches. Rates follow
v = Vmax*S/(Km + S) with 4% proportional Gaussian noise (seed 7).
Run from the repo root: python3 demo-compounds/make_substrate_series.py
"""
import pathlib
import random

random.seed(7)
rows = ["# Invented demo data: fictional enzyme veridase-7 (VRD7), not a real measurement.",
        "series,substrate (uM),rate (uM/min)"]
for label, vmax, km in [("batch-A", 3.1, 42.0), ("batch-B", 2.6, 55.0)]:
    for s in [5, 10, 20, 40, 80, 160, 320]:
        for _ in range(2):
            v = vmax * s / (km + s) * (1 + random.gauss(0, 0.04))
            rows.append(f"{label},{s},{v:.4f}")
out = pathlib.Path(__file__).with_name("substrate-series.csv")
out.write_text("\n".join(rows) + "\n")
