#!/usr/bin/python3
"""A long cu8 test recording for whole-process speed runs (not committed: 288 MB
for 60 s). Noise plus an FM carrier at +100 kHz keyed on for 10 s in every 30 s.
Usage: /usr/bin/python3 testdata/bench/make_cu8.py OUT.cu8 SECONDS
"""
import sys

import numpy as np

RATE = 2400000
out, secs = sys.argv[1], float(sys.argv[2])
rng = np.random.default_rng(1)
n_block = RATE  # one second at a time: flat memory
t = np.arange(n_block) / RATE
with open(out, "wb") as f:
    for s in range(int(secs)):
        x = (rng.normal(size=n_block) + 1j * rng.normal(size=n_block)) * 0.05
        if s % 30 < 10:
            ph = 2 * np.pi * 100e3 * t + 2.5e3 / 800 * np.sin(2 * np.pi * 800 * (t + s))
            x += 0.3 * np.exp(1j * ph)
        iq = np.empty(2 * n_block)
        iq[0::2], iq[1::2] = x.real, x.imag
        np.clip(np.round(iq * 127.5 + 127.5), 0, 255).astype(np.uint8).tofile(f)
