#!/usr/bin/python3
"""Write a small recording of one steady carrier heard through a turning
directional antenna, and its heading log, for the hostile-input corpus
(cmd/nullseek/hostile_test.go). It only has to give `nullseek bearing` and
`nullseek calibrate` something to fit, so that a case can fail *after* the
work (plots, CSV, pattern file) rather than at the first flag; its values
are a test's input, never a reference.

    /usr/bin/python3 make_turning.py --out DIR

writes DIR/turning.sigmf-meta, DIR/turning.sigmf-data (cu8, 96 kS/s, 5 s)
and DIR/turning-headings.csv (time,heading_deg every 20 ms).

Scene (invented): the carrier is at +10 kHz from the centre 433.92 MHz,
keyed on from 0.5 s to 4.5 s, 30 dB over the noise in the channel at the
peak of the beam. The antenna turns clockwise from 0° at 90°/s, so the
burst sees one whole turn. The transmitter is at 200° true. The power
pattern is a Gaussian main lobe, 10^(-1.2 (d/60)^2) for an angle d off
boresight, floored at -18 dB (an invented beam of about 60°, 18 dB
front-to-back).

SigMF v1.2 core fields (core:datatype cu8: interleaved unsigned 8-bit I
and Q, 127.5 at zero; SigMF specification, "Dataset Format").
"""
import argparse
import json
import os

import numpy as np

RATE = 96000
DUR = 5.0
OFFSET = 10000.0
CENTER = 433.92e6
ON, OFF = 0.5, 4.5
TURN_DEG_S = 90.0
TRUTH_DEG = 200.0


def gain(d):
    d = (d + 180.0) % 360.0 - 180.0
    return np.maximum(10 ** (-1.2 * (d / 60.0) ** 2), 10 ** (-1.8))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--out", required=True)
    a = ap.parse_args()
    rng = np.random.default_rng(10)
    n = int(RATE * DUR)
    t = np.arange(n) / RATE
    heading = (TURN_DEG_S * t) % 360.0
    amp = 0.4 * np.sqrt(gain(TRUTH_DEG - heading))
    amp[(t < ON) | (t >= OFF)] = 0.0
    # Noise: 30 dB below the carrier's peak power in a 12.5 kHz channel.
    noise_power_channel = 0.4 ** 2 / 1000.0
    sigma = np.sqrt(noise_power_channel * RATE / 12500.0 / 2.0)
    x = amp * np.exp(2j * np.pi * OFFSET * t)
    x = x + sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    iq = np.empty(2 * n)
    iq[0::2], iq[1::2] = x.real, x.imag
    cu8 = np.clip(np.round(iq * 127.5 + 127.5), 0, 255).astype(np.uint8)
    os.makedirs(a.out, exist_ok=True)
    cu8.tofile(os.path.join(a.out, "turning.sigmf-data"))
    meta = {
        "global": {"core:datatype": "cu8", "core:version": "1.2.0", "core:sample_rate": float(RATE),
                   "core:description": "hostile-corpus turning-antenna input (make_turning.py)"},
        "captures": [{"core:sample_start": 0, "core:frequency": CENTER,
                      "core:datetime": "2026-05-01T10:00:00.000Z"}],
        "annotations": [],
    }
    with open(os.path.join(a.out, "turning.sigmf-meta"), "w") as f:
        json.dump(meta, f, indent=2)
    with open(os.path.join(a.out, "turning-headings.csv"), "w") as f:
        f.write("time,heading_deg\n")
        for k in range(int(DUR / 0.02) + 1):
            ts = k * 0.02
            f.write("%.3f,%.3f\n" % (ts, (TURN_DEG_S * ts) % 360.0))


if __name__ == "__main__":
    main()
