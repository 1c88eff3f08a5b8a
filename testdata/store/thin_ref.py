#!/usr/bin/python3
"""Reference for store.ThinLevels, written from its documented rule with numpy.

Reads JSON {"rate": Hz, "per_s": readings/s, "readings": [[sample, t_s, level_dbfs, clipped], ...]}
on stdin and prints JSON [[sample, t_s, level_dbfs, clipped], ...]: readings grouped into windows
of W = round(rate/per_s) samples aligned on sample 0; per window the mean linear power in dB,
the mean time, the mean sample rounded half up, and the sum of the clipped counts.

Run by store/thin_test.go as: /usr/bin/python3 testdata/store/thin_ref.py < input.json
"""
import json
import sys

import numpy as np

d = json.load(sys.stdin)
r = np.array(d["readings"], dtype=np.float64).reshape(-1, 4)
w = int(np.round(d["rate"] / d["per_s"]))
samples = r[:, 0].astype(np.int64)
win = samples // w
keys, start = np.unique(win, return_index=True)
bounds = list(start) + [len(win)]
out = []
for a, b in zip(bounds[:-1], bounds[1:]):
    n = b - a
    p = np.mean(np.power(10.0, r[a:b, 2] / 10.0))
    out.append([
        int(np.floor(samples[a:b].sum() / n + 0.5)),
        float(np.mean(r[a:b, 1])),
        float(10.0 * np.log10(p)),
        int(r[a:b, 3].sum()),
    ])
json.dump(out, sys.stdout)
