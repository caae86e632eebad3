#!/usr/bin/env python3
"""Writes demo-compounds/onset-curves.csv: INVENTED progress curves of two
time-dependent inhibitors of the fictional enzyme veridase-7 (VRD7).

Nothing here was measured. Each curve follows the integrated equation of
slow-onset inhibition (Morrison & Walsh, Adv. Enzymol. 61, 201-301, 1988)

    P(t) = vs*t + (vi - vs)*(1 - exp(-kobs*t))/kobs + P0

with kobs = koff + kinact*I/(KI + I), vi = v0/(1 + I/KI), vs = vi*koff/kobs:

  KX-301  covalent (irreversible) two-step   kinact 0.05 /min, KI,app 0.8 uM, koff 0
  KX-302  slow-binding (reversible) two-step kinact 0.20 /min, KI,app 0.5 uM, koff 0.01 /min

Design per compound: 7 inhibitor levels (0, 0.1, 0.2, 0.5, 1, 2, 5 uM),
readings every 2 min for an hour, v0 = 600 RFU/min, P0 = 1200 RFU, Gaussian
read noise of 150 RFU from Python's own random.Random(seed 16); the assay ran
at S = 20 uM with Km = 40 uM (competitive), columns the command reads.

Only the Python standard library is used. Run from the repo root:
    python3 demo-compounds/make_onset_curves.py
"""
import math
import random
from pathlib import Path

SEED = 16
V0, P0, NOISE = 600.0, 1200.0, 150.0
LEVELS = [0.0, 0.1, 0.2, 0.5, 1.0, 2.0, 5.0]  # uM
TIMES = [2.0 * k for k in range(31)]  # min
COMPOUNDS = [  # name, kinact (1/min), KI,app (uM), koff (1/min)
    ("KX-301", 0.05, 0.8, 0.0),
    ("KX-302", 0.20, 0.5, 0.01),
]


def signal(t, i, kinact, ki, koff):
    vi = V0 / (1 + i / ki)
    kobs = koff + kinact * i / (ki + i)
    if i == 0 or kobs == 0:
        return V0 * t + P0
    vs = vi * koff / kobs
    return vs * t + (vi - vs) * (1 - math.exp(-kobs * t)) / kobs + P0


def main():
    rng = random.Random(SEED)
    lines = [
        "# INVENTED demo data (demo-compounds/make_onset_curves.py); not a measurement",
        "compound,inhibitor (uM),time (min),signal (RFU),substrate (uM),km (uM)",
    ]
    for name, kinact, ki, koff in COMPOUNDS:
        for i in LEVELS:
            for t in TIMES:
                y = signal(t, i, kinact, ki, koff) + rng.gauss(0.0, NOISE)
                lines.append(f"{name},{i:g},{t:g},{y:.1f},20,40")
    out = Path(__file__).resolve().parent / "onset-curves.csv"
    out.write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
