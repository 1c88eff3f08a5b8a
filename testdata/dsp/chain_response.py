#!/usr/bin/python3
"""Power response, noise bandwidth and noise autocorrelation of a
multi-stage decimating FIR chain, with scipy.signal.freqz (Debian
python3-scipy). Reads JSON from argv[1]:
  {"stages": [{"taps": [...], "rate": Hz}, ...], "out_rate": Hz,
   "freqs": [Hz, ...], "lags": N}
and writes JSON to stdout:
  {"scipy": version, "gain": [|H(f)|^2 per freq], "enbw_hz": float,
   "acf": [R[0..lags-1]] for unit-density complex white input}
The chain's response at f is the product of each stage's freqz response
at f (stage input rate); ENBW and ACF integrate it over one output-rate
span on a 16384-point midpoint grid.
"""
import json
import sys

import numpy as np
import scipy
from scipy import signal

cfg = json.load(open(sys.argv[1]))


def gain(f):
    g = np.ones_like(f, dtype=float)
    for st in cfg["stages"]:
        w = 2 * np.pi * f / st["rate"]
        _, h = signal.freqz(st["taps"], worN=w)
        g *= np.abs(h) ** 2
    return g


fs = cfg["out_rate"]
n = 16384
df = fs / n
grid = (np.arange(n) + 0.5) * df - fs / 2
gg = gain(grid)
lags = np.arange(cfg["lags"])
acf = [float(np.sum(gg * np.cos(2 * np.pi * grid * m / fs)) * df) for m in lags]
json.dump({
    "scipy": scipy.__version__,
    "gain": [float(v) for v in gain(np.array(cfg["freqs"], dtype=float))],
    "enbw_hz": float(np.sum(gg) * df),
    "acf": acf,
}, sys.stdout)
