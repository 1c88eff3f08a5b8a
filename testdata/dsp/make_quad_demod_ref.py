#!/usr/bin/python3
"""GNU Radio reference for nullseek's FM discriminator.

Runs an FM-modulated test signal through GNU Radio's
analog.quadrature_demod_cf(gain) and stores input and output.

    cd testdata/dsp && /usr/bin/python3 make_quad_demod_ref.py

Writes quad_demod_in.cf32 (4000 complex float32 samples, little-endian,
interleaved I,Q) and quad_demod_out.f32 (4000 float32) plus
quad_demod_ref.json (gain, GNU Radio version, sample counts).

The input (numpy, fixed seed): 48 kS/s, carrier at +1.3 kHz, FM by a
1 kHz tone with 2.5 kHz deviation keyed on and off, a slow amplitude
ripple and a little noise so that arguments of all signs and sizes occur.
"""
import json

import numpy as np
from gnuradio import analog, blocks, gr

rate = 48000.0
n = 4000
dev = 2500.0
gain = rate / (2 * np.pi * dev)

rng = np.random.default_rng(20240601)
t = np.arange(n) / rate
key = (np.floor(t / 0.01) % 2).astype(float)  # 10 ms on/off keying
inst = 1300.0 + dev * key * np.sin(2 * np.pi * 1000.0 * t)
phase = 2 * np.pi * np.cumsum(inst) / rate
amp = 0.5 * (1 + 0.3 * np.sin(2 * np.pi * 37.0 * t))
x = amp * np.exp(1j * phase) + 0.02 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
x = x.astype(np.complex64)

tb = gr.top_block()
src = blocks.vector_source_c(x.tolist(), False)
demod = analog.quadrature_demod_cf(gain)
sink = blocks.vector_sink_f()
tb.connect(src, demod, sink)
tb.run()
y = np.array(sink.data(), dtype=np.float32)
assert len(y) == n, len(y)

x.tofile("quad_demod_in.cf32")
y.tofile("quad_demod_out.f32")
with open("quad_demod_ref.json", "w") as f:
    json.dump({"gnuradio_version": gr.version(), "gain": gain, "rate": rate, "samples": n}, f, indent=1)
    f.write("\n")
