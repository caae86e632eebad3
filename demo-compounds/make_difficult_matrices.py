#!/usr/bin/env python3
"""Writes demo-compounds/rate-matrix-difficult.csv: two INVENTED [S]x[I] rate
matrices for the same fictional enzyme as rate-matrix.csv (veridase-7, Vmax =
85 nM/min, Km = 12 uM), chosen to show what `kimech mode` says when the five
rate laws cannot settle the question.  Nothing here was measured.

  KX-206  mixed, Ki = 60 nM, alpha = 0.45 (Kiu = 27 nM), measured on a thin
          design (5 substrate levels 3-40 uM, inhibitor 0, 15, 30, 60 nM,
          duplicates, 6% noise): the mechanism is uncertain.
  KX-207  partial (hyperbolic) inhibition (Segel 1975, ch. 4): Ki = 80 nM,
          alpha = 1, the ESI complex keeps beta = 35% of the activity; the
          full design of rate-matrix.csv (8 substrate x 6 inhibitor levels,
          duplicates, 4% noise).

Rate law (DESIGN section 4 and README, partial inhibition):
  v = Vmax S (1 + beta I/(alpha Ki)) / (Km (1 + I/Ki) + S (1 + I/(alpha Ki)))
with beta = 0 for KX-206.  Noise: proportional plus 0.3 nM/min absolute,
Gaussian, from Python's random.Random(seed 11); rates with 4 significant digits.

Only the Python standard library is used.  Run from the repo root:
    python3 demo-compounds/make_difficult_matrices.py
"""
import random
from pathlib import Path

SEED = 11
VMAX, KM = 85.0, 12.0
COMPOUNDS = [  # name, Ki, alpha, beta, substrate levels (uM), inhibitor levels (nM), noise
    ("KX-206", 60.0, 0.45, 0.0, [3, 6, 12, 24, 40], [0, 15, 30, 60], 0.06),
    ("KX-207", 80.0, 1.0, 0.35, [2, 4, 7, 12, 20, 35, 60, 100], [0, 40, 80, 160, 320, 640], 0.04),
]


def rate(s, i, ki, alpha, beta):
    return VMAX * s * (1 + beta * i / (alpha * ki)) / (KM * (1 + i / ki) + s * (1 + i / (alpha * ki)))


def main():
    rng = random.Random(SEED)
    rows = ["compound,substrate (uM),inhibitor (nM),rate"]
    for name, ki, alpha, beta, s_levels, i_levels, noise in COMPOUNDS:
        for i in i_levels:
            for s in s_levels:
                for _ in range(2):
                    v = rate(s, i, ki, alpha, beta)
                    v = v * (1 + noise * rng.gauss(0, 1)) + 0.3 * rng.gauss(0, 1)
                    rows.append(f"{name},{s:g},{i:g},{v:.4g}")
    out = Path(__file__).resolve().parent / "rate-matrix-difficult.csv"
    out.write_text("\n".join(rows) + "\n")
    print(f"wrote {out} ({len(rows) - 1} rows)")


if __name__ == "__main__":
    main()
