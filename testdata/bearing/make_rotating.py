#!/usr/bin/python3
"""Make a rotating-antenna fixture for nullseek's end-to-end bearing check.

A narrowband FM beacon (continuous MCW tone) at a known carrier offset, its
amplitude shaped by a small loop antenna turning at a constant rate, plus
complex Gaussian noise, written as a SigMF recording (ci16_le), with the
matching heading log and a truth file. Built with GNU Radio 3.10 blocks; the
antenna pattern is the same model as bearing.SmallLoop in nullseek:

    power(δ) = (sin²δ + a²)/(1 + a²),  a² = 1/(10^(depth/10) − 1),
    δ = bearing − heading (the loop's axis is its heading reference;
    nulls broadside to the loop plane, i.e. when the axis points at the
    transmitter, and 180° away).

SNR is the carrier power at the pattern's maximum over the noise power in a
12.5 kHz channel.

Exact command (run from the repository root; needs Debian's python3 with GNU
Radio 3.10):

    /usr/bin/python3 testdata/bearing/make_rotating.py --out testdata/bearing

Outputs in --out (file stem "rotating_loop"):
    rotating_loop.sigmf-meta    SigMF metadata (committed)
    rotating_loop.sigmf-data    ci16_le IQ, 240 kS/s x 14 s = 13.4 MB
                                (NOT committed: too big for a fixture; the
                                end-to-end test runs this script into a
                                temporary directory; repeated runs agree
                                to within 1 LSB, not bit for bit)
    rotating_loop_heading.csv   "seconds,heading_deg" at 10 Hz (committed)
    rotating_loop_truth.json    the parameters and the true bearing (committed)

This is invented test data (no real place or station).
"""

import argparse
import json
import math
import os

import numpy as np
from gnuradio import analog, blocks, gr

STEM = "rotating_loop"


def loop_amplitude(rel_deg, depth_db):
    a2 = 1.0 / (10.0 ** (depth_db / 10.0) - 1.0)
    s = np.sin(np.radians(rel_deg))
    return np.sqrt((s * s + a2) / (1.0 + a2))


class Rotating(gr.top_block):
    def __init__(self, a):
        gr.top_block.__init__(self, "rotating")
        fs = a.rate
        n = int(round(a.seconds * fs))
        t = np.arange(n) / fs
        heading = a.start_heading + a.turn_rate * t
        amp = (a.peak * loop_amplitude(a.bearing - heading, a.null_depth)).astype(np.float32)

        # Noise: total complex power σ² over fs; in 12.5 kHz it is σ²·12500/fs.
        snr = 10.0 ** (a.snr / 10.0)
        sigma = a.peak / math.sqrt(snr * 12500.0 / fs)

        tone = analog.sig_source_f(fs, analog.GR_COS_WAVE, a.tone, 1.0, 0)
        fm = analog.frequency_modulator_fc(2 * math.pi * a.deviation / fs)
        lo = analog.sig_source_c(fs, analog.GR_COS_WAVE, a.offset, 1.0, 0)
        mix = blocks.multiply_cc()
        gain = blocks.vector_source_f(amp.tolist(), False)
        gain_c = blocks.float_to_complex()
        zero = analog.sig_source_f(fs, analog.GR_CONST_WAVE, 0, 0, 0)
        shape = blocks.multiply_cc()
        noise = analog.noise_source_c(analog.GR_GAUSSIAN, sigma, a.seed)
        add = blocks.add_cc()
        head = blocks.head(gr.sizeof_gr_complex, n)
        to_s16 = blocks.complex_to_interleaved_short(False, 32767.0)
        sink = blocks.file_sink(gr.sizeof_short, os.path.join(a.out, STEM + ".sigmf-data"), False)
        sink.set_unbuffered(False)

        self.connect(tone, fm, (mix, 0))
        self.connect(lo, (mix, 1))
        self.connect(gain, (gain_c, 0))
        self.connect(zero, (gain_c, 1))
        self.connect(mix, (shape, 0))
        self.connect(gain_c, (shape, 1))
        self.connect(shape, (add, 0))
        self.connect(noise, (add, 1))
        self.connect(add, head, to_s16, sink)


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--out", required=True, help="output directory")
    p.add_argument("--rate", type=float, default=240000.0, help="sample rate, S/s")
    p.add_argument("--seconds", type=float, default=14.0, help="duration, s")
    p.add_argument("--offset", type=float, default=25000.0, help="carrier offset from centre, Hz")
    p.add_argument("--tone", type=float, default=800.0, help="MCW tone, Hz")
    p.add_argument("--deviation", type=float, default=2500.0, help="FM peak deviation, Hz")
    p.add_argument("--bearing", type=float, default=237.0, help="true bearing, degrees")
    p.add_argument("--start-heading", dest="start_heading", type=float, default=10.0, help="heading at t=0, degrees")
    p.add_argument("--turn-rate", dest="turn_rate", type=float, default=30.0, help="deg/s, positive = clockwise")
    p.add_argument("--null-depth", dest="null_depth", type=float, default=25.0, help="loop null depth, dB")
    p.add_argument("--snr", type=float, default=30.0, help="peak carrier / noise in 12.5 kHz, dB")
    p.add_argument("--peak", type=float, default=0.5, help="carrier amplitude at the pattern maximum (full scale 1)")
    p.add_argument("--seed", type=int, default=4242, help="noise seed")
    a = p.parse_args()
    os.makedirs(a.out, exist_ok=True)

    Rotating(a).run()

    meta = {
        "global": {
            "core:datatype": "ci16_le",
            "core:sample_rate": a.rate,
            "core:version": "1.2.0",
            "core:author": "nullseek testdata (GNU Radio %s)" % gr.version(),
            "core:description": "invented fixture: NBFM %g Hz tone at %+g Hz, small loop turning %g deg/s, bearing %g deg"
            % (a.tone, a.offset, a.turn_rate, a.bearing),
            "core:recorder": "testdata/bearing/make_rotating.py",
        },
        "captures": [{"core:sample_start": 0, "core:frequency": 144800000.0, "core:datetime": "2025-01-01T00:00:00.000Z"}],
        "annotations": [],
    }
    with open(os.path.join(a.out, STEM + ".sigmf-meta"), "w") as f:
        json.dump(meta, f, indent=1)
        f.write("\n")

    with open(os.path.join(a.out, STEM + "_heading.csv"), "w") as f:
        f.write("seconds,heading_deg\n")
        k = 0
        while k / 10.0 <= a.seconds + 1e-9:
            t = k / 10.0
            f.write("%.1f,%.3f\n" % (t, (a.start_heading + a.turn_rate * t) % 360.0))
            k += 1

    truth = {
        "bearing_deg": a.bearing,
        "pattern": {"kind": "small_loop", "null_depth_db": a.null_depth, "symmetry": 2},
        "turn_rate_deg_s": a.turn_rate,
        "start_heading_deg": a.start_heading,
        "carrier_offset_hz": a.offset,
        "tone_hz": a.tone,
        "deviation_hz": a.deviation,
        "sample_rate": a.rate,
        "seconds": a.seconds,
        "snr_db_in_12k5": a.snr,
        "peak_amplitude": a.peak,
        "seed": a.seed,
        "datatype": "ci16_le",
        "model": "level = carrier power at heading h: peak^2 * (sin^2(bearing-h) + a^2)/(1+a^2), a^2 = 1/(10^(depth/10)-1); "
        "heading(t) = start + rate*t; noise complex Gaussian",
    }
    with open(os.path.join(a.out, STEM + "_truth.json"), "w") as f:
        json.dump(truth, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
