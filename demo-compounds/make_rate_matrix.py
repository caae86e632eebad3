#!/usr/bin/env python3
"""Writes demo-compounds/rate-matrix.csv: an INVENTED [S]x[I] rate matrix.

Nothing here was measured. The fictional enzyme veridase-7 (VRD7) has
Vmax = 85 nM/min and Km = 12 uM for its substrate; five fictional compounds
were each "made" with a different mechanism (rate laws as in DESIGN section 4):

  KX-201  competitive     Ki = 40 nM
  KX-202  uncompetitive   Kiu = 150 nM
  KX-203  noncompetitive  Ki = 300 nM
  KX-204  mixed           Ki = 25 nM, alpha = 6 (Kiu = 150 nM)
  KX-205  inactive        no inhibition at all

Design per compound: 8 substrate levels (2-100 uM, about 0.17-8 x Km) x 6
inhibitor levels (0 and 0.5, 1, 2, 4, 8 x the compound's constant; KX-205
gets 0-10 uM) in duplicate = 96 wells.  Noise: 4% proportional plus 0.3
nM/min absolute (plate-reader floor), Gaussian, from Python's own
random.Random(seed 7); rates written with 4 significant digits.

Only the Python standard library is used.  Run from the repo root:
    python3 demo-compounds/make_rate_matrix.py
"""
import random
from pathlib import Path

SEED = 7
VMAX, KM = 85.0, 12.0
S_LEVELS = [2, 4, 7, 12, 20, 35, 60, 100]          # uM
COMPOUNDS = [  # name, Ki (nM), Kiu (nM); None = that term absent
    ("KX-201", 40.0, None),
    ("KX-202", None, 150.0),
    ("KX-203", 300.0, 300.0),
    ("KX-204", 25.0, 150.0),
    ("KX-205", None, None),
]


def rate(s, i, ki, kiu):
    a = 1 + (i / ki if ki else 0.0)
    b = 1 + (i / kiu if kiu else 0.0)
    return VMAX * s / (KM * a + s * b)


def main():
    rng = random.Random(SEED)
    rows = ["compound,substrate (uM),inhibitor (nM),rate"]
    for name, ki, kiu in COMPOUNDS:
        scale = min(k for k in (ki, kiu) if k) if (ki or kiu) else None
        levels = [0, 0.5, 1, 2, 4, 8] if scale else [0, 100, 300, 1000, 3000, 10000]
        for f in levels:
            i = f * scale if scale else f
            for s in S_LEVELS:
                for _ in range(2):
                    v = rate(s, i, ki, kiu)
                    v = v * (1 + 0.04 * rng.gauss(0, 1)) + 0.3 * rng.gauss(0, 1)
                    rows.append(f"{name},{s:g},{i:g},{v:.4g}")
    out = Path(__file__).resolve().parent / "rate-matrix.csv"
    out.write_text("\n".join(rows) + "\n")
    print(f"wrote {out} ({len(rows) - 1} rows)")


if __name__ == "__main__":
    main()
