#!/usr/bin/env python3
"""Generates the invented demo cook samples for specs/recipes/pd-2000.toml.

The data are INVENTED for the resinlot demo (fictional plant); they are not measurements.
Each cook follows the self-catalysed third-order law with the recipe's hydroxyl excess D,
-dc/dt = k c^2 (c + D) (c = acid groups per kg of charge), i.e. Y = y1 + b*(t - t1) after
p = 0.8 (Y as in resinlot::kinetics::linearised_with_excess), with a faster early region
before it (the early points lie above the backward extrapolation of the line, as Flory,
J. Am. Chem. Soc. 61, 3334 (1939) observed), titration noise on the acid value, and viscosity
readings on the later samples.

Run from the repository root:  python3 demo-lots/cooks/make_cooks.py
"""

import math
import random
import tomllib
from datetime import datetime, timedelta
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
RECIPE = tomllib.loads((ROOT / "specs/recipes/pd-2000.toml").read_text())
M0 = sum(c["mass_kg"] for c in RECIPE["component"])
E_A = sum(c["mass_kg"] * 1000 / c["molar_mass"] * c.get("acid_groups", 0) for c in RECIPE["component"])
E_OH = sum(c["mass_kg"] * 1000 / c["molar_mass"] * c.get("hydroxyl_groups", 0) for c in RECIPE["component"])
MOLECULES0 = sum(c["mass_kg"] * 1000 / c["molar_mass"] for c in RECIPE["component"])
W = 0.018015  # kg/mol of water
C0 = E_A / M0  # acid groups, mol per kg of charge
DELTA = (E_OH - E_A) / M0  # hydroxyl excess, mol per kg of charge


def state(p):
    """Acid value (mg KOH/g) and recipe Mn (g/mol) at extent p, by the water mass balance."""
    x = p * E_A
    mass = M0 - W * x
    av = 56.1 * (E_A - x) / mass
    mn = mass * 1000 / (MOLECULES0 - x)
    return av, mn


def y_of_p(p):
    """Self-catalysed law with hydroxyl excess, -dc/dt = k c^2 (c + D): Y = 1 + 2 C0^2 I(c)."""
    f = lambda u: -1 / (DELTA * u) - math.log(u / (u + DELTA)) / DELTA**2
    return 1 + 2 * C0**2 * (f(C0) - f(C0 * (1 - p)))


def p_of_y(y):
    lo, hi = 0.0, 1 - 1e-12
    for _ in range(200):
        mid = (lo + hi) / 2
        if y_of_p(mid) < y:
            lo = mid
        else:
            hi = mid
    return (lo + hi) / 2


def cook(name, temp_c, slope, seed, start):
    rng = random.Random(seed)
    early = [(0, 0.50), (30, 0.64), (60, 0.73), (90, 0.785)]
    t1, y1 = 100.0, y_of_p(0.81)
    times = [120, 150, 180, 240, 300, 360, 420, 480, 540, 600, 660, 720]
    rows = []
    for t, p in early:
        p_noisy = 1 - (1 - p) * (1 + rng.gauss(0, 0.01))
        rows.append((t, p_noisy))
    for t in times:
        rows.append((t, p_of_y(y1 + slope * (t - t1))))
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
    # Self-catalysed slopes of Y (per min) at 220 and 200 degC: ratio about 1.85, i.e. close to
    # 60 kJ/mol; k = slope / (2 C0^2).
    base = datetime(2026, 3, 9, 6, 0)
    cook("pd2000-220-a", 220.0, 9.6, 11, base)
    cook("pd2000-220-b", 220.0, 9.1, 12, base + timedelta(days=2))
    cook("pd2000-200-a", 200.0, 5.0, 13, base + timedelta(days=4))
    cook("pd2000-200-b", 200.0, 5.2, 14, base + timedelta(days=6))
