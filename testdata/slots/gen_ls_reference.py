#!/usr/bin/python3
"""Reference least-squares period fits for nullseek's ident slot schedule.

Synthetic burst start times t_k = t0 + k*P + jitter (some cycles missed) are
fitted with scipy.stats.linregress (slope = period, stderr = its standard
error) and numpy.polyfit(deg=1, cov=True). The inputs are synthetic; the
reference is what scipy/numpy compute from them.

Command (Debian python3-scipy 1.10.1, python3-numpy 1.24.2):
    /usr/bin/python3 testdata/slots/gen_ls_reference.py > testdata/slots/ls_reference.json
"""
import json
import sys

import numpy as np
import scipy
from scipy.stats import linregress

CASES = [
    # name, t0 s, period s, jitter s, cycles, missed cycles, seed
    ("five_cycles_one_missed", 12.5, 300.012, 0.010, 5, [2], 1),
    ("twenty_cycles_30ms", 131.0, 299.9925, 0.030, 20, [3, 11, 12], 2),
    ("telemetry_1p5s", 0.8, 1.5003, 0.002, 60, [7, 8, 30], 3),
    ("long_gap_missed_every_other", 40.0, 300.024, 0.015, 16, [1, 3, 5, 9, 10], 4),
]

out = {"generator": "gen_ls_reference.py", "numpy": np.__version__, "scipy": scipy.__version__, "cases": []}
for name, t0, period, jitter, cycles, missed, seed in CASES:
    rng = np.random.default_rng(seed)
    k = np.array([c for c in range(cycles) if c not in missed], dtype=float)
    t = t0 + k * period + rng.normal(0.0, jitter, size=k.size)
    t = np.round(t, 6)  # microsecond resolution, written exactly below
    r = linregress(k, t)
    p, cov = np.polyfit(k, t, 1, cov=True)
    out["cases"].append({
        "name": name,
        "k": k.astype(int).tolist(),
        "start_s": [float("%.6f" % x) for x in t],
        "slope": r.slope,
        "intercept": r.intercept,
        "slope_stderr": r.stderr,
        "intercept_stderr": r.intercept_stderr,
        "polyfit_slope": p[0],
        "polyfit_slope_sigma": float(np.sqrt(cov[0, 0])),
    })
json.dump(out, sys.stdout, indent=1)
sys.stdout.write("\n")
