#!/usr/bin/python3
"""Independent reference decoder for nullseek's sdr tests (numpy).

Usage: /usr/bin/python3 numpy_decode.py DATATYPE COUNT SEED OUTDIR

Writes OUTDIR/data.bin (COUNT complex samples of DATATYPE with random
content) and OUTDIR/expected.cf32 (the same samples decoded by numpy's own
dtype machinery and scaled by the usual conventions, as little-endian
complex64). Scales: cu8 (x-127.5)/127.5 (RTL-SDR convention), ci8 x/128,
ci16 x/32768, ci32 x/2^31, cu16 (x-32767.5)/32767.5, floats as they are.
"""
import sys
import numpy as np

dt, n, seed, out = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), sys.argv[4]
rng = np.random.default_rng(seed)
endian = '>' if dt.endswith('_be') else '<'
body = dt[1:].split('_')[0]
np_dt = np.dtype(endian + {'u8': 'u1', 'i8': 'i1', 'i16': 'i2', 'u16': 'u2',
                           'i32': 'i4', 'u32': 'u4', 'f32': 'f4', 'f64': 'f8'}[body])
if body.startswith('f'):
    comps = rng.normal(0, 0.5, 2 * n).astype(np_dt)
else:
    info = np.iinfo(np_dt)
    comps = rng.integers(info.min, info.max, 2 * n, endpoint=True, dtype=np_dt.newbyteorder('='))
    # Make sure both rails appear.
    comps[0], comps[1] = info.min, info.max
    comps = comps.astype(np_dt)
comps.tofile(out + '/data.bin')

x = np.frombuffer(open(out + '/data.bin', 'rb').read(), dtype=np_dt).astype(np.float64)
scale = {'u8': lambda v: (v - 127.5) / 127.5, 'i8': lambda v: v / 128,
         'i16': lambda v: v / 32768, 'i32': lambda v: v / 2**31,
         'u16': lambda v: (v - 32767.5) / 32767.5, 'u32': lambda v: (v - 2147483647.5) / 2147483647.5,
         'f32': lambda v: v, 'f64': lambda v: v}[body]
y = scale(x)
c = (y[0::2] + 1j * y[1::2]).astype('<c8')
c.tofile(out + '/expected.cf32')
