#!/usr/bin/python3
"""Reference FIR designs for nullseek's dsp package tests.

Made with Debian's scipy (python3-scipy 1.10) and numpy:

    cd testdata/dsp && /usr/bin/python3 make_filter_refs.py > filter_refs.json

For each design: kaiserord(ripple_db, width) -> (numtaps, beta),
kaiser_beta(ripple_db), firwin(numtaps, cutoff, window=('kaiser', beta))
taps, and |H| from freqz(taps, worN=w) at the listed w (rad/sample).
"""
import json
import sys

import numpy as np
import scipy
from scipy import signal

designs = [
    # ripple_db, width (fraction of Nyquist), cutoff (fraction of Nyquist)
    (60.0, 0.10, 0.30),
    (65.0, 0.05, 0.20),
    (40.0, 0.20, 0.50),
    (30.0, 0.15, 0.10),
    (80.0, 0.08, 0.60),
]
out = {"scipy_version": scipy.__version__, "numpy_version": np.__version__, "designs": []}
w = np.linspace(0, np.pi, 41)
for ripple, width, cutoff in designs:
    numtaps, beta = signal.kaiserord(ripple, width)
    taps = signal.firwin(numtaps, cutoff, window=("kaiser", beta))
    _, h = signal.freqz(taps, worN=w)
    out["designs"].append({
        "ripple_db": ripple,
        "width": width,
        "cutoff": cutoff,
        "numtaps": int(numtaps),
        "beta": float(beta),
        "kaiser_beta": float(signal.kaiser_beta(ripple)),
        "taps": [float(t) for t in taps],
        "w": [float(x) for x in w],
        "mag": [float(x) for x in np.abs(h)],
    })
# kaiser_beta across its three branches
out["kaiser_beta"] = [[a, float(signal.kaiser_beta(a))] for a in (10.0, 21.0, 30.0, 50.0, 50.5, 70.0, 100.0)]
json.dump(out, sys.stdout, indent=1)
sys.stdout.write("\n")
