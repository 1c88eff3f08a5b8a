#!/usr/bin/python3
"""Morse MCW over narrowband FM, through noise, demodulated by GNU Radio.

Every step is an outside tool: ebook2cw 0.8.4 makes the Morse audio, sox
converts it to WAV, GNU Radio 3.10 frequency-modulates it, adds noise and
demodulates it. nullseek's decoder tests read the demodulated audio.

Usage (Debian's Python, which has GNU Radio):
    /usr/bin/python3 make_fm_iq.py [--out DIR] [--seed N] [--no-iq]
The committed files were made in testdata/morse with
    /usr/bin/python3 make_fm_iq.py --out fm --seed 1

Signal chain per case (all at 48 kS/s complex baseband):
  ebook2cw -s 8000 (Ogg) -> sox -> 8 kHz WAV, peak-normalised to 1.0,
  0.25 s of silence before and after (carrier without tone)
  -> rational_resampler_fff 6/1 -> 48 kS/s
  -> frequency_modulator_fc, sensitivity 2*pi*2500/48000 rad/sample per
     unit: audio peak 1.0 = +-2.5 kHz deviation (12.5 kHz channel,
     ETSI/FCC narrowband practice, from memory)
  -> multiply by exp(j*2*pi*OFFSET_HZ*t), OFFSET_HZ = +3000 Hz (the carrier
     sits off the tuned centre)
  -> add noise_source_c(GAUSSIAN, ampl, seed)
     [the cu8 IQ files are written at this point]
  -> multiply by exp(-j*2*pi*OFFSET_HZ*t)  (an ideal front end tuned onto
     the carrier)
  -> fir_filter_ccf low-pass 6.25 kHz (the 12.5 kHz channel)
  -> quadrature_demod_cf, gain 48000/(2*pi*2500) (+-2.5 kHz -> +-1.0)
  -> fir_filter_fff decimate 16, low-pass 1200 Hz (transition 300 Hz)
  -> multiply_const 0.5 -> wavfile_sink 3000 Hz, 8-bit unsigned PCM
     (tones are 600-1000 Hz; 8-bit and 3 kS/s keep the files small).
  No pre-emphasis or de-emphasis.

CNR definition: carrier power over noise power in a 12.5 kHz bandwidth.
The FM carrier has constant power C = 1 (|s|^2 = 1). The noise is white
complex Gaussian over the whole 48 kHz sample rate with total power
N_tot = ampl^2 (GNU Radio's noise_source_c gives E|n|^2 = ampl^2, checked
below). Noise in 12.5 kHz is N = N_tot * 12.5/48. So
    ampl = sqrt(48/12.5 / 10^(CNR_dB/10)).

Outputs in --out (manifest.tsv lists file, kind, cnr_db, wpm, tone_hz,
text, seed):
  cer_cnr{0,3,6,9,12,15,20}_{a,b}.wav  free-text decoding, two texts per CNR
  id_cnr6_NN.wav                     25 known-ID bursts at CNR 6 dB
                                     (--id-cnr, --id-bursts): IDs
                                     N0CALL/1..5, each sent twice
  iq_cnr{12,6}_n0call2.cu8           IQ of one ID burst (unsigned 8-bit I,Q
                                     interleaved, value = round(127.5 +
                                     40*x) clipped to 0..255, 48000 S/s,
                                     carrier at +3000 Hz)
"""
import argparse
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.io import wavfile
from gnuradio import gr, analog, blocks, filter
from gnuradio.filter import firdes

RATE = 48000
AUDIO_RATE = 8000
OUT_RATE = 3000
DEV_HZ = 2500.0
OFFSET_HZ = 3000.0
CHAN_BW_HZ = 12500.0

CER_TEXTS = [  # (name, wpm, tone Hz, text): invented letter groups
    ("a", 20, 800, "VKQ7 XJ2/ ZBM? 4"),
    ("b", 25, 650, "PRUFW 5TG. HOY= 8C,"),
]
CER_CNRS = [0, 3, 6, 9, 12, 15, 20]
ID_BURSTS = 25
ID_WPMS = [20, 22, 24, 26, 28]
ID_TONES = [600, 700, 800, 900, 1000]


def morse_audio(text, wpm, tone_hz, tmp):
    """ebook2cw -> Ogg -> sox -> float32 at 8 kHz, peak 1, padded."""
    base = os.path.join(tmp, "m")
    subprocess.run(["ebook2cw", "-E", "/dev/null", "-p", "-w", str(wpm), "-f", str(tone_hz),
                    "-s", str(AUDIO_RATE), "-R", "50", "-F", "50", "-T", "0", "-O", "-o", base],
                   input=(text + "\n").encode(), check=True, capture_output=True)
    wav = base + ".wav"
    subprocess.run(["sox", base + "0000.ogg", "-b", "16", "-e", "signed-integer", "-c", "1",
                    "-r", str(AUDIO_RATE), wav], check=True)
    rate, x = wavfile.read(wav)
    assert rate == AUDIO_RATE
    x = x.astype(np.float32) / 32768.0
    x /= np.max(np.abs(x))
    pad = np.zeros(int(0.25 * AUDIO_RATE), dtype=np.float32)
    return np.concatenate([pad, x, pad])


def noise_ampl(cnr_db):
    return np.sqrt(RATE / CHAN_BW_HZ / 10 ** (cnr_db / 10.0))


def check_noise_source():
    """E|n|^2 of noise_source_c(GAUSSIAN, a) must be a^2 (used for CNR)."""
    tb = gr.top_block()
    src = analog.noise_source_c(analog.GR_GAUSSIAN, 0.5, 7)
    head = blocks.head(gr.sizeof_gr_complex, 200000)
    snk = blocks.vector_sink_c()
    tb.connect(src, head, snk)
    tb.run()
    p = np.mean(np.abs(np.array(snk.data())) ** 2)
    if abs(p / 0.25 - 1) > 0.03:
        sys.exit("noise_source_c power %.4f, expected 0.25: CNR scaling would be wrong" % p)


def run_case(audio, cnr_db, seed, wav_out, iq_out=None, fading=None):
    """FM-modulate audio (8 kHz), add noise at cnr_db, demodulate to wav_out.

    fading, when given, is (fDTs, seed): GNU Radio's channels.fading_model
    (8 sinusoids, Rayleigh, no line of sight) on the modulated carrier
    before the noise; CNR is then the mean carrier power over the noise.
    Without it the chain is exactly the one documented above.
    """
    tb = gr.top_block()
    src = blocks.vector_source_f(audio.tolist(), False)
    up = filter.rational_resampler_fff(interpolation=RATE // AUDIO_RATE, decimation=1)
    fm = analog.frequency_modulator_fc(2 * np.pi * DEV_HZ / RATE)
    lo_up = analog.sig_source_c(RATE, analog.GR_COS_WAVE, OFFSET_HZ, 1.0, 0)
    mix_up = blocks.multiply_cc()
    noise = analog.noise_source_c(analog.GR_GAUSSIAN, float(noise_ampl(cnr_db)), seed)
    add = blocks.add_cc()
    lo_dn = analog.sig_source_c(RATE, analog.GR_COS_WAVE, -OFFSET_HZ, 1.0, 0)
    mix_dn = blocks.multiply_cc()
    chan = filter.fir_filter_ccf(1, firdes.low_pass(1.0, RATE, CHAN_BW_HZ / 2, 1500))
    demod = analog.quadrature_demod_cf(RATE / (2 * np.pi * DEV_HZ))
    alpf = filter.fir_filter_fff(RATE // OUT_RATE, firdes.low_pass(1.0, RATE, 1200, 300))
    gain = blocks.multiply_const_ff(0.5)
    sink = blocks.wavfile_sink(wav_out, 1, OUT_RATE, blocks.FORMAT_WAV, blocks.FORMAT_PCM_U8, False)
    tb.connect(src, up, fm, (mix_up, 0))
    tb.connect(lo_up, (mix_up, 1))
    if fading is None:
        tb.connect(mix_up, (add, 0))
    else:
        from gnuradio import channels
        fade = channels.fading_model(8, float(fading[0]), False, 4.0, int(fading[1]))
        tb.connect(mix_up, fade, (add, 0))
    tb.connect(noise, (add, 1))
    # The sig/noise sources are endless: stop with the modulated stream.
    n_out = len(audio) * (RATE // AUDIO_RATE)
    head = blocks.head(gr.sizeof_gr_complex, n_out)
    tb.connect(add, head, (mix_dn, 0))
    tb.connect(lo_dn, (mix_dn, 1))
    tb.connect(mix_dn, chan, demod, alpf, gain, sink)
    iq_sink = None
    if iq_out:
        iq_sink = blocks.vector_sink_c()
        tb.connect(head, iq_sink)
    tb.run()
    sink.close()
    if iq_sink is not None:
        x = np.array(iq_sink.data(), dtype=np.complex64)
        iq = np.empty(2 * len(x), dtype=np.float32)
        iq[0::2], iq[1::2] = x.real, x.imag
        np.clip(np.round(127.5 + 40 * iq), 0, 255).astype(np.uint8).tofile(iq_out)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--out", default="fm")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--no-iq", action="store_true")
    ap.add_argument("--only", choices=["cer", "id", "all"], default="all")
    ap.add_argument("--id-cnr", type=float, default=6.0, help="CNR (dB) of the ID bursts")
    ap.add_argument("--id-bursts", type=int, default=ID_BURSTS, help="number of ID bursts")
    a = ap.parse_args()
    os.makedirs(a.out, exist_ok=True)
    check_noise_source()
    rows = []
    seed = a.seed * 1000
    with tempfile.TemporaryDirectory() as tmp:
        if a.only in ("cer", "all"):
            for name, wpm, tone, text in CER_TEXTS:
                audio = morse_audio(text, wpm, tone, tmp)
                for cnr in CER_CNRS:
                    seed += 1
                    f = "cer_cnr%d_%s.wav" % (cnr, name)
                    run_case(audio, cnr, seed, os.path.join(a.out, f))
                    rows.append((f, "cer", cnr, wpm, tone, text, seed))
        if a.only in ("id", "all"):
            for i in range(a.id_bursts):
                k = i % 5 + 1
                wpm = ID_WPMS[(2 * i) % 5]
                tone = ID_TONES[(3 * i + i // 5) % 5]
                text = "N0CALL/%d N0CALL/%d" % (k, k)
                audio = morse_audio(text, wpm, tone, tmp)
                seed += 1
                f = "id_cnr%g_%02d.wav" % (a.id_cnr, i)
                run_case(audio, a.id_cnr, seed, os.path.join(a.out, f))
                rows.append((f, "id", a.id_cnr, wpm, tone, text, seed))
        if not a.no_iq:
            audio = morse_audio("N0CALL/2", 40, 800, tmp)
            for cnr in (12, 6):
                seed += 1
                f = "iq_cnr%d_n0call2.cu8" % cnr
                wav = "iq_cnr%d_n0call2_demod.wav" % cnr
                run_case(audio, cnr, seed, os.path.join(a.out, wav), os.path.join(a.out, f))
                rows.append((f, "iq", cnr, 40, 800, "N0CALL/2", seed))
                rows.append((wav, "iqdemod", cnr, 40, 800, "N0CALL/2", seed))
    with open(os.path.join(a.out, "manifest.tsv"), "w") as m:
        m.write("file\tkind\tcnr_db\twpm\ttone_hz\ttext\tseed\n")
        for r in rows:
            m.write("\t".join(str(v) for v in r) + "\n")


if __name__ == "__main__":
    main()
