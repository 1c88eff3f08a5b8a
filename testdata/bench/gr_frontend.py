#!/usr/bin/python3
"""The GNU Radio flowgraph the front end is compared with (whole process, one core).

cu8 in (RTL-SDR bytes) -> complex (zero 127.5, scale 1/127.5) ->
freq_xlating_fir_filter_ccf decimating by 50 (Kaiser low-pass, 60 dB, edges 12 and
36 kHz: nothing aliases into the 48 kS/s channel's passband) -> quadrature_demod_cf ->
complex_to_mag_squared of the channel -> null sinks.

Usage (GNU Radio 3.10, Debian bookworm):
    /usr/bin/python3 testdata/bench/make_cu8.py /tmp/bench60.cu8 60
    time taskset -c 0 /usr/bin/python3 testdata/bench/gr_frontend.py /tmp/bench60.cu8
    time taskset -c 0 nullseek scan --no-ident --format cu8 --rate 2.4M --offset 100k /tmp/bench60.cu8
"""
import sys

from gnuradio import analog, blocks, fft, filter, gr
from gnuradio.filter import firdes

RATE = 2.4e6


def main(path):
    tb = gr.top_block()
    src = blocks.file_source(gr.sizeof_char, path, False)
    u2f = blocks.uchar_to_float()
    deint = blocks.deinterleave(gr.sizeof_float)
    f2c = blocks.float_to_complex()
    add = blocks.add_const_cc(complex(-127.5, -127.5))
    scale = blocks.multiply_const_cc(1 / 127.5)
    taps = firdes.low_pass_2(1.0, RATE, 12000, 24000, 60, fft.window.WIN_KAISER)
    xlat = filter.freq_xlating_fir_filter_ccf(50, taps, 100e3, RATE)
    demod = analog.quadrature_demod_cf(1.0)
    mag = blocks.complex_to_mag_squared()
    tb.connect(src, u2f, deint)
    tb.connect((deint, 0), (f2c, 0))
    tb.connect((deint, 1), (f2c, 1))
    tb.connect(f2c, add, scale, xlat, demod, blocks.null_sink(gr.sizeof_float))
    tb.connect(xlat, mag, blocks.null_sink(gr.sizeof_float))
    print("taps:", len(taps), file=sys.stderr)
    tb.run()


if __name__ == "__main__":
    main(sys.argv[1])
