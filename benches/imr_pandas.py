#!/usr/bin/env python3
"""Comparison for the trend benchmark (optional to run): the same I-MR figures as
`resinlot trend PD-2000 --property hydroxyl_value --json`, computed with pandas from the
generated 1,000,000-lot trend file (target/bench-record/register/PD-2000.csv).

    pip install pandas
    /usr/bin/time -v python3 benches/imr_pandas.py target/bench-record/register/PD-2000.csv

Formulas as in src/stats/imr.rs: latest row per lot, manufacture order, x̄, MR̄ (span 2),
σ = MR̄/1.128, limits x̄ ± 3σ, MR UCL = 3.267·MR̄ (NIST/SEMATECH e-Handbook §6.3.2.2).
"""
import sys
import time

import pandas as pd

start = time.perf_counter()
path = sys.argv[1] if len(sys.argv) > 1 else "target/bench-record/register/PD-2000.csv"
df = pd.read_csv(path, usecols=["seq", "lot", "manufactured", "hydroxyl_value"], dtype={"lot": str})
df = df.drop_duplicates("lot", keep="last").sort_values(["manufactured", "seq"], kind="stable")
x = df["hydroxyl_value"].dropna().to_numpy()
mean = x.mean()
mr_bar = abs(x[1:] - x[:-1]).mean()
sigma = mr_bar / 1.128
print(
    f"n {len(x)} mean {mean:.6f} mr_bar {mr_bar:.6f} sigma_within {sigma:.6f} "
    f"ucl {mean + 3 * sigma:.6f} lcl {mean - 3 * sigma:.6f} mr_ucl {3.267 * mr_bar:.6f}"
)
print(f"elapsed {time.perf_counter() - start:.3f} s", file=sys.stderr)
