#!/usr/bin/python3
"""Burst-timing fixtures for nullseek's receiver, made with GNU Radio.

Each fixture is a SigMF pair (cu8, the RTL-SDR sample format) holding narrowband
FM bursts (a steady audio tone, deviation 2.5 kHz as on 12.5 kHz channels) with
known start and end times, a known carrier offset from the capture centre and
carrier levels in 3 dB steps, on top of complex Gaussian noise. The truth is
written beside it as NAME.truth.json.

Made with (Debian bookworm, GNU Radio 3.10.5.1, numpy 1.24):
    /usr/bin/python3 testdata/bursts/make_bursts.py testdata/bursts

The signal chain is GNU Radio's: analog.sig_source_f (tone) ->
analog.frequency_modulator_fc -> gating by blocks.multiply_cc with a
vector_source_c envelope -> blocks.rotator_cc (carrier offset) -> plus
analog.noise_source_c -> blocks.head -> blocks.vector_sink_c. numpy only
quantises the result to cu8 with zero at 127.5 and full scale 127.5 (the
RTL-SDR convention) and writes the SigMF metadata.
"""
import json
import math
import os
import sys

import numpy as np
from gnuradio import analog, blocks, gr

FIXTURES = [
    # name, rate, duration, offset Hz, tone Hz, noise dBFS (whole band), seed,
    # bursts as (start s, end s, carrier level dBFS)
    ("steps96k", 96000, 3.2, 17321.4, 1000.0, -45.0, 11,
     [(0.3137, 0.7642, -12.0), (0.9871, 1.4869, -15.0),
      (1.6502, 2.0515, -18.0), (2.3333, 2.8871, -21.0)]),
    ("neg240k", 240000, 2.0, -60987.7, 600.0, -38.0, 23,
     [(0.2101, 0.6994, -20.0), (0.8410, 1.2503, -23.0), (1.4012, 1.8766, -26.0)]),
]


def make(outdir, name, rate, dur, offset, tone, noise_db, seed, bursts):
    n = int(round(rate * dur))
    env = np.zeros(n, dtype=np.complex64)
    for (t0, t1, lvl) in bursts:
        a = 10 ** (lvl / 20.0)
        env[int(round(t0 * rate)):int(round(t1 * rate))] = a
    tb = gr.top_block()
    src = analog.sig_source_f(rate, analog.GR_COS_WAVE, tone, 1.0, 0.0)
    fm = analog.frequency_modulator_fc(2 * math.pi * 2500.0 / rate)
    gate = blocks.vector_source_c(env.tolist(), False)
    mul = blocks.multiply_cc()
    rot = blocks.rotator_cc(2 * math.pi * offset / rate)
    # noise_source_c with GR_GAUSSIAN: total complex power = amplitude**2
    noise = analog.noise_source_c(analog.GR_GAUSSIAN, 10 ** (noise_db / 20.0), seed)
    add = blocks.add_cc()
    head = blocks.head(gr.sizeof_gr_complex, n)
    sink = blocks.vector_sink_c()
    tb.connect(src, fm, (mul, 0))
    tb.connect(gate, (mul, 1))
    tb.connect(mul, rot, (add, 0))
    tb.connect(noise, (add, 1))
    tb.connect(add, head, sink)
    tb.run()
    x = np.array(sink.data(), dtype=np.complex64)
    iq = np.empty(2 * n, dtype=np.float64)
    iq[0::2] = x.real
    iq[1::2] = x.imag
    u8 = np.clip(np.round(iq * 127.5 + 127.5), 0, 255).astype(np.uint8)
    base = os.path.join(outdir, name)
    u8.tofile(base + ".sigmf-data")
    meta = {
        "global": {
            "core:datatype": "cu8",
            "core:version": "1.2.0",
            "core:sample_rate": float(rate),
            "core:description": "GNU Radio burst-timing fixture (see make_bursts.py)",
            "core:recorder": "GNU Radio " + gr.version(),
        },
        "captures": [{
            "core:sample_start": 0,
            "core:frequency": 433920000.0,
            "core:datetime": "2026-05-01T10:00:00.000Z",
        }],
        "annotations": [],
    }
    with open(base + ".sigmf-meta", "w") as f:
        json.dump(meta, f, indent=2)
    truth = {
        "rate": rate, "offset_hz": offset, "tone_hz": tone,
        "noise_dbfs_band": noise_db, "center_hz": 433920000.0,
        "bursts": [{"start_s": t0, "end_s": t1, "level_dbfs": lvl} for (t0, t1, lvl) in bursts],
    }
    with open(base + ".truth.json", "w") as f:
        json.dump(truth, f, indent=2)
    # measured noise power where no burst is on, for the record
    quiet = env == 0
    print(name, "noise power (dBFS, before quantisation):",
          round(10 * math.log10(np.mean(np.abs(x[quiet]) ** 2)), 2))


if __name__ == "__main__":
    outdir = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
    for fx in FIXTURES:
        make(outdir, *fx)
