#!/usr/bin/python3
"""Field-condition recordings for nullseek's receiver, made with GNU Radio.

Usage (Debian's Python, which has GNU Radio; see README.md for the exact
command lines the tests run):
    /usr/bin/python3 make_receiver.py continuous --out DIR
    /usr/bin/python3 make_receiver.py weak --out DIR [--seed N] [--per-bucket N]
    /usr/bin/python3 make_receiver.py keyed --out DIR

Every recording is cu8 (unsigned 8-bit I,Q interleaved, value =
round(127.5 + 127.5*x) clipped to 0..255, the RTL-SDR convention) at
96000 S/s, with a JSON file of the truth beside it (NAME.json).

Signal chain (GNU Radio 3.10):
  baseband carrier, unit amplitude:
    FM:   analog.sig_source_f (1 kHz tone) -> analog.frequency_modulator_fc
          (+-2.5 kHz deviation, a 12.5 kHz channel)
    CW:   analog.sig_source_c constant (a plain carrier)
    MCW:  the ebook2cw tone audio -> frequency_modulator_fc
  -> blocks.multiply_cc with an amplitude envelope read by
     blocks.file_source (the burst gating or the Morse keying)
  -> channels.channel_model(noise_voltage, frequency_offset =
     CARRIER_HZ/RATE, epsilon 1, taps [1]): the carrier moves to
     CARRIER_HZ and complex Gaussian noise of total power noise_voltage^2
     is added (checked below)
  -> blocks.file_sink (cf32), quantised to cu8 here with numpy.

CNR (carrier power over noise power in 12.5 kHz): the noise is white over
the 96 kHz band with total power N = NOISE_V^2 + 2*q^2/12 (the Gaussian
noise plus the 8-bit rounding, q = 1/127.5, uniform-error model, common
practice), so the carrier amplitude for CNR c dB is
A = sqrt(10^(c/10) * N * 12500/96000).

Keying (keyed): ebook2cw 0.8.4 makes the Morse audio (8 kHz, rise and fall
50 samples); sox turns it into WAV; the keying envelope is the audio's
Hilbert magnitude (scipy.signal.hilbert), normalised to 1 at key-down,
which keeps ebook2cw's 6 ms ramps. A1A: the plain carrier times that
envelope. Carrier-keyed MCW: the FM carrier, modulated by the ebook2cw
tone, times the same envelope (carrier on only while the tone is keyed).
The truth marks are where the envelope is above one half.
"""
import argparse
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy import signal
from scipy.io import wavfile
from gnuradio import analog, blocks, channels, gr

RATE = 96000
TUNE_HZ = 20000.0          # the channel the receiver is tuned to
CARRIER_HZ = 20700.0       # the transmitter, 700 Hz off (crystal error)
NOISE_V = 10 ** (-30 / 20.0)  # -30 dBFS of noise over the band
Q = 1 / 127.5
NOISE_P = NOISE_V ** 2 + 2 * Q * Q / 12
DEV_HZ = 2500.0
TONE_HZ = 1000.0


def amp_for(cnr_db):
    return float(np.sqrt(10 ** (cnr_db / 10.0) * NOISE_P * 12500.0 / RATE))


def check_channel_noise(tmp):
    """channel_model's noise must have total power noise_voltage^2."""
    tb = gr.top_block()
    z = analog.sig_source_c(RATE, analog.GR_CONST_WAVE, 0, 0.0, 0)
    ch = channels.channel_model(0.5, 0.0, 1.0, [1.0], 7, False)
    head = blocks.head(gr.sizeof_gr_complex, 400000)
    snk = blocks.vector_sink_c()
    tb.connect(z, ch, head, snk)
    tb.run()
    p = np.mean(np.abs(np.array(snk.data())[1000:]) ** 2)
    if abs(p / 0.25 - 1) > 0.02:
        sys.exit("channel_model noise power %.4f, expected 0.25: CNR scaling would be wrong" % p)


def render(carrier, env, seed, out, tmp):
    """carrier: 'fm', 'cw' or a float32 audio array (MCW) at RATE; env:
    float32 amplitude envelope at RATE. Writes out (cu8)."""
    n = len(env)
    envf = os.path.join(tmp, "env.cf32")
    env.astype(np.complex64).tofile(envf)
    tb = gr.top_block()
    if isinstance(carrier, str) and carrier == "cw":
        src = analog.sig_source_c(RATE, analog.GR_CONST_WAVE, 0, 1.0, 0)
        head_in = src
    else:
        if isinstance(carrier, str):
            audio = analog.sig_source_f(RATE, analog.GR_COS_WAVE, TONE_HZ, 1.0, 0)
        else:
            af = os.path.join(tmp, "audio.f32")
            carrier.astype(np.float32).tofile(af)
            audio = blocks.file_source(gr.sizeof_float, af, False)
        fm = analog.frequency_modulator_fc(2 * np.pi * DEV_HZ / RATE)
        tb.connect(audio, fm)
        head_in = fm
    gate = blocks.file_source(gr.sizeof_gr_complex, envf, False)
    mul = blocks.multiply_cc()
    ch = channels.channel_model(NOISE_V, CARRIER_HZ / RATE, 1.0, [1.0], seed, False)
    head = blocks.head(gr.sizeof_gr_complex, n)
    outf = os.path.join(tmp, "out.cf32")
    sink = blocks.file_sink(gr.sizeof_gr_complex, outf, False)
    tb.connect(head_in, (mul, 0))
    tb.connect(gate, (mul, 1))
    tb.connect(mul, ch, head, sink)
    tb.run()
    sink.close()
    x = np.fromfile(outf, dtype=np.float32)
    np.clip(np.round(127.5 + 127.5 * x), 0, 255).astype(np.uint8).tofile(out)


def write_truth(path, d):
    d.update({"rate": RATE, "tune_hz": TUNE_HZ, "carrier_hz": CARRIER_HZ,
              "noise_dbfs_band": 10 * np.log10(NOISE_P), "gnuradio": gr.version()})
    with open(path, "w") as f:
        json.dump(d, f, indent=1)


def continuous(a, tmp):
    """A carrier on for the whole recording, FM with a tone and plain."""
    dur = 12.0
    n = int(dur * RATE)
    for kind in ("fm", "cw"):
        for cnr in (3, 10, 20, 30):
            name = "cont_%s_cnr%d" % (kind, cnr)
            env = np.full(n, amp_for(cnr), dtype=np.float32)
            render(kind, env, 100 + cnr, os.path.join(a.out, name + ".cu8"), tmp)
            write_truth(os.path.join(a.out, name + ".json"),
                        {"kind": kind, "cnr_db": cnr, "duration_s": dur})


def weak(a, tmp):
    """Bursts at 0-5 dB CNR, per-bucket of them in each 1 dB bucket."""
    rng = np.random.default_rng(a.seed)
    for b in range(5):
        bursts, t = [], 1.0
        for k in range(a.per_bucket):
            d = rng.uniform(1.0, 2.5)
            cnr = rng.uniform(b, b + 1)
            bursts.append((t, t + d, cnr))
            t += d + rng.uniform(2.0, 3.5)
        dur = t
        n = int(dur * RATE)
        env = np.zeros(n, dtype=np.float32)
        for (t0, t1, cnr) in bursts:
            env[int(round(t0 * RATE)):int(round(t1 * RATE))] = amp_for(cnr)
        name = "weak_b%d" % b
        render("fm", env, a.seed * 10 + b, os.path.join(a.out, name + ".cu8"), tmp)
        write_truth(os.path.join(a.out, name + ".json"), {
            "kind": "fm", "duration_s": dur,
            "bursts": [{"start_s": t0, "end_s": t1, "cnr_db": c} for (t0, t1, c) in bursts]})


def morse(text, wpm, tmp):
    """ebook2cw audio at 8 kHz -> float at RATE (audio peak 1, envelope)."""
    base = os.path.join(tmp, "m")
    subprocess.run(["ebook2cw", "-E", "/dev/null", "-p", "-w", str(wpm), "-f", str(int(TONE_HZ)),
                    "-s", "8000", "-R", "50", "-F", "50", "-T", "0", "-O", "-o", base],
                   input=(text + "\n").encode(), check=True, capture_output=True)
    wav = base + ".wav"
    subprocess.run(["sox", "-D", base + "0000.ogg", "-b", "16", "-e", "signed-integer", "-c", "1",
                    "-r", "8000", wav], check=True)
    rate, x = wavfile.read(wav)
    x = x.astype(np.float64) / 32768.0
    x /= np.max(np.abs(x))
    env = np.abs(signal.hilbert(x))
    env = signal.medfilt(env, 9)  # the Hilbert magnitude ripples at the ends of a tone
    env /= np.percentile(env[env > 0.5 * env.max()], 50)
    env = np.clip(env, 0, 1)
    # to RATE (12x) by linear interpolation: envelope and audio are smooth
    t8 = np.arange(len(x)) / 8000.0
    t = np.arange(int(len(x) * RATE / 8000)) / RATE
    return np.interp(t, t8, x), np.interp(t, t8, env)


def keyed(a, tmp):
    """A1A keyed carrier and carrier-keyed MCW at 8, 15, 20, 30 WPM."""
    text = "N0CALL N0CALL"
    for wpm in (8, 15, 20, 30):
        audio, env = morse(text, wpm, tmp)
        lead = np.zeros(int(1.0 * RATE))
        audio = np.concatenate([lead, audio, lead])
        env = np.concatenate([lead, env, lead])
        on = env > 0.5
        edges = np.flatnonzero(np.diff(on.astype(np.int8)))
        marks = [(float((edges[i] + 1) / RATE), float((edges[i + 1] + 1) / RATE))
                 for i in range(0, len(edges) - 1, 2)]
        for kind in ("a1a", "mcw"):
            for cnr in (10, 20):
                name = "keyed_%s_w%d_cnr%d" % (kind, wpm, cnr)
                carrier = "cw" if kind == "a1a" else audio
                render(carrier, (env * amp_for(cnr)).astype(np.float32), 300 + wpm + cnr,
                       os.path.join(a.out, name + ".cu8"), tmp)
                write_truth(os.path.join(a.out, name + ".json"), {
                    "kind": kind, "wpm": wpm, "cnr_db": cnr, "text": text,
                    "duration_s": len(env) / RATE, "dot_s": 1.2 / wpm,
                    "marks": [{"start_s": s, "end_s": e} for (s, e) in marks]})


def main():
    p = argparse.ArgumentParser()
    p.add_argument("what", choices=["continuous", "weak", "keyed"])
    p.add_argument("--out", required=True)
    p.add_argument("--seed", type=int, default=1)
    p.add_argument("--per-bucket", type=int, default=20)
    a = p.parse_args()
    os.makedirs(a.out, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        check_channel_noise(tmp)
        {"continuous": continuous, "weak": weak, "keyed": keyed}[a.what](a, tmp)


if __name__ == "__main__":
    main()
