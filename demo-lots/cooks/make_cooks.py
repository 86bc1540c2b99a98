#!/usr/bin/env python3
"""Generates the invented demo cook samples for specs/recipes/pd-2000.toml.

The data are INVENTED for the resinlot demo (fictional plant); they are not measurements.
Each cook follows the self-catalysed third-order law 1/(1-p)^2 = y1 + b*(t - t1) after
p = 0.8, with a faster early region before it (the early points lie above the backward
extrapolation of the line, as Flory, J. Am. Chem. Soc. 61, 3334 (1939) observed), titration
noise on the acid value, and viscosity readings on the later samples.

Run from the repository root:  python3 demo-lots/cooks/make_cooks.py
"""

import math
import random
from datetime import datetime, timedelta
from pathlib import Path

# Charge of specs/recipes/pd-2000.toml.
ACID_KG, ACID_M = 6210.0, 146.14
DIOL_KG, DIOL_M = 5060.0, 106.12
M0 = ACID_KG + DIOL_KG
E_A = ACID_KG * 1000 / ACID_M * 2  # acid groups, mol
MOLECULES0 = ACID_KG * 1000 / ACID_M + DIOL_KG * 1000 / DIOL_M
W = 0.018015  # kg/mol of water


def state(p):
    """Acid value (mg KOH/g) and recipe Mn (g/mol) at extent p, by the water mass balance."""
    x = p * E_A
    mass = M0 - W * x
    av = 56.1 * (E_A - x) / mass
    mn = mass * 1000 / (MOLECULES0 - x)
    return av, mn


def cook(name, temp_c, slope, seed, start):
    rng = random.Random(seed)
    early = [(0, 0.50), (30, 0.64), (60, 0.73), (90, 0.785)]
    t1, y1 = 100.0, 28.0
    times = [120, 150, 180, 240, 300, 360, 420, 480, 540, 600, 660, 720]
    rows = []
    for t, p in early:
        p_noisy = 1 - (1 - p) * (1 + rng.gauss(0, 0.01))
        rows.append((t, p_noisy))
    for t in times:
        y = y1 + slope * (t - t1)
        p = 1 - y ** -0.5
        rows.append((t, p))
    lines = [
        "# INVENTED demo data for resinlot (fictional plant); not measurements.",
        f"# PD-2000 cook {name}, hold at {temp_c} degC; elapsed_min from the start of the hold.",
        "elapsed_min,acid_value,temperature_c,viscosity,sampled_at",
    ]
    for t, p in rows:
        av, mn = state(p)
        # Titration noise: 1 % relative plus 0.02 mg KOH/g absolute (standard deviations).
        av_meas = av * (1 + rng.gauss(0, 0.01)) + rng.gauss(0, 0.02)
        temp = temp_c + rng.gauss(0, 0.6)
        visc = ""
        if av < 12:
            # Melt viscosity at 75 degC, power law in Mn with 3 % reading noise (invented).
            visc = f"{640 * (mn / 2000) ** 2.3 * (1 + rng.gauss(0, 0.03)):.0f}"
        when = (start + timedelta(minutes=t)).strftime("%Y-%m-%dT%H:%M")
        lines.append(f"{t},{av_meas:.2f},{temp:.1f},{visc},{when}")
    Path(__file__).with_name(f"{name}.csv").write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    # Self-catalysed slopes (per min) at 220 and 200 degC: ratio 1.9, i.e. about 62 kJ/mol.
    base = datetime(2026, 3, 9, 6, 0)
    cook("pd2000-220-a", 220.0, 300.0, 11, base)
    cook("pd2000-220-b", 220.0, 285.0, 12, base + timedelta(days=2))
    cook("pd2000-200-a", 200.0, 155.0, 13, base + timedelta(days=4))
    cook("pd2000-200-b", 200.0, 162.0, 14, base + timedelta(days=6))
