#!/usr/bin/python3
"""Recordings of Morse ID bursts over narrowband FM with quiet gaps, for
nullseek's end-to-end survey test (survey/e2e_morse_test.go).

Every signal step is testdata/morse/make_fm_iq.py (imported, not copied):
ebook2cw 0.8.4 keys the text, sox converts it, GNU Radio 3.10 frequency-
modulates it (+-2.5 kHz, carrier at +3000 Hz, 48000 S/s) and adds complex
Gaussian noise at a known CNR in 12.5 kHz (make_fm_iq.run_case with iq_out;
CNR definition in that script's header). This script only strings bursts
together: before the first burst, between bursts and after the last it puts
GAP_S seconds of GNU Radio noise_source_c noise of the same power (carrier
off), so a receiver sees the noise floor and each burst's two edges. It
writes the samples as make_fm_iq.py does: unsigned 8-bit I,Q interleaved,
value = round(127.5 + 40*x) clipped to 0..255.

Usage (Debian's Python, which has GNU Radio; run from anywhere):
    /usr/bin/python3 testdata/e2e/make_morse_bursts.py --out DIR \
        [--seed N] [--cer-cnrs 12,15] [--id-cnr 6] [--id-bursts 20]

Outputs in DIR, one recording per set:
    cer_cnrC.cu8 / cer_cnrC.tsv   free-text bursts (CER_TEXTS) at CNR C dB
    id_cnrC.cu8  / id_cnrC.tsv    known-ID bursts "N0CALL/k N0CALL/k",
                                  k = 1..5 in turn, 20-28 WPM, 600-1000 Hz
Each .tsv lists per burst: start_s, end_s (carrier on/off, seconds from the
first sample), wpm, tone_hz, text, noise seed. Nothing here is committed
except this script; the test runs it into a temporary directory.
"""
import argparse
import os
import sys
import tempfile

import numpy as np
from gnuradio import analog, blocks, gr

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "morse"))
import make_fm_iq as fmiq  # noqa: E402  (testdata/morse/make_fm_iq.py)

GAP_S = 1.0

# Invented letter groups (no real calls or words); the first two are
# make_fm_iq.py's CER_TEXTS.
CER_TEXTS = [(t[1], t[2], t[3]) for t in fmiq.CER_TEXTS] + [
    (22, 700, "QZ4K MWX9 7TLD B3R?"),
    (20, 900, "G8HN/ 2PYE ,JUV 0SA"),
    (25, 750, "XC6F. ODK5 RNW1 8QB"),
    (22, 850, "HT3Y =ML7 ZEP0 /KG9"),
    (24, 800, "QJ5D 6VFA ?NC2 .UI"),
]


def noise_iq(n, ampl, seed):
    tb = gr.top_block()
    src = analog.noise_source_c(analog.GR_GAUSSIAN, float(ampl), seed)
    head = blocks.head(gr.sizeof_gr_complex, n)
    snk = blocks.vector_sink_c()
    tb.connect(src, head, snk)
    tb.run()
    return np.array(snk.data(), dtype=np.complex64)


def burst_iq(audio, cnr, seed, tmp):
    """The IQ of one burst, through make_fm_iq.run_case (its WAV is discarded)."""
    iq_path = os.path.join(tmp, "b.cu8")
    fmiq.run_case(audio, cnr, seed, os.path.join(tmp, "b.wav"), iq_path)
    return np.fromfile(iq_path, dtype=np.uint8)


def quantise(x):
    iq = np.empty(2 * len(x), dtype=np.float32)
    iq[0::2], iq[1::2] = x.real, x.imag
    return np.clip(np.round(127.5 + 40 * iq), 0, 255).astype(np.uint8)


def write_set(out, name, cases, cnr, seed, tmp, audio_cache):
    ampl = fmiq.noise_ampl(cnr)
    gap = int(GAP_S * fmiq.RATE)
    # All the gaps of the set from one noise_source_c run (one flowgraph).
    seed += 1
    gaps = quantise(noise_iq(gap * (len(cases) + 1), ampl, seed)).reshape(len(cases) + 1, 2 * gap)
    parts, rows, pos = [], [], 0
    for i, (wpm, tone, text) in enumerate(cases):
        parts.append(gaps[i])
        pos += gap
        key = (wpm, tone, text)
        if key not in audio_cache:
            audio_cache[key] = fmiq.morse_audio(text, wpm, tone, tmp)
        seed += 1
        b = burst_iq(audio_cache[key], cnr, seed, tmp)
        parts.append(b)
        n = len(b) // 2
        rows.append((pos / fmiq.RATE, (pos + n) / fmiq.RATE, wpm, tone, text, seed))
        pos += n
    parts.append(gaps[-1])
    np.concatenate(parts).tofile(os.path.join(out, name + ".cu8"))
    with open(os.path.join(out, name + ".tsv"), "w") as f:
        f.write("start_s\tend_s\twpm\ttone_hz\ttext\tseed\n")
        for r in rows:
            f.write("%.6f\t%.6f\t%d\t%d\t%s\t%d\n" % r)
    return seed


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--out", required=True)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--cer-cnrs", default="12,15", help="comma-separated CNRs (dB) of the free-text sets; empty: none")
    ap.add_argument("--id-cnr", type=float, default=6.0)
    ap.add_argument("--id-bursts", type=int, default=20, help="0: no known-ID set")
    a = ap.parse_args()
    os.makedirs(a.out, exist_ok=True)
    fmiq.check_noise_source()
    seed = 50000 + 1000 * a.seed
    cache = {}
    with tempfile.TemporaryDirectory() as tmp:
        for c in [float(v) for v in a.cer_cnrs.split(",") if v.strip()]:
            seed = write_set(a.out, "cer_cnr%g" % c, CER_TEXTS, c, seed, tmp, cache)
        if a.id_bursts > 0:
            cases = []
            for i in range(a.id_bursts):
                k = i % 5 + 1
                cases.append((fmiq.ID_WPMS[(2 * i) % 5], fmiq.ID_TONES[(3 * i + i // 5) % 5],
                              "N0CALL/%d N0CALL/%d" % (k, k)))
            write_set(a.out, "id_cnr%g" % a.id_cnr, cases, a.id_cnr, seed, tmp, cache)


if __name__ == "__main__":
    main()
