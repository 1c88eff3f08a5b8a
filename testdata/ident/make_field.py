#!/usr/bin/python3
"""Field-condition Morse recordings for nullseek's identification tests.

Every signal step is an outside tool: ebook2cw 0.8.4 keys the text, sox
14.4.2 converts its Ogg output, GNU Radio 3.10 builds the carrier (keyed
carrier, or frequency modulation by the keyed tone), fades it
(channels.fading_model), adds complex Gaussian noise (noise_source_c) and
measures or demodulates it. The helpers of testdata/morse/make_fm_iq.py
are imported, not copied (its header documents the FM chain and the CNR
definition: carrier power over noise power in 12.5 kHz, noise amplitude
ampl = sqrt(48/12.5 / 10^(CNR/10)) over 48 kS/s).

Usage (Debian's Python, which has GNU Radio):
    /usr/bin/python3 testdata/ident/make_field.py SET --out DIR [options]

Sets (each writes DIR/SET.tsv, a manifest with one row per file or burst):

  keyed     A1A (carrier keyed by the Morse) and carrier-keyed MCW (the FM
            carrier on only while the tone is keyed) at --wpms and --cnrs.
            The keying envelope is the ebook2cw tone's envelope (GNU Radio
            hilbert_fc + complex_to_mag, peak 1), so the key-down edges are
            ebook2cw's 50-sample (6 ms) ramps. Per case:
              NAME.pow   the channel power track, 200 readings a second,
                         float32 little-endian: the IQ mixed onto the
                         carrier, GNU Radio fir_filter_ccf low-pass 6.25 kHz
                         (the 12.5 kHz channel), complex_to_mag_squared,
                         moving_average_ff over 240 samples (5 ms) and
                         keep_one_in_n 240;
              NAME.wav   audio for a listener (and multimon-ng): for A1A the
                         carrier beaten to 700 Hz (a receiver's BFO),
                         fir low-pass 1 kHz, real part; for MCW the FM
                         discriminator output (quadrature_demod_cf) behind
                         a carrier squelch (pwr_squelch_cc at -CNR/2 dB).
                         3 kHz, 8-bit unsigned.
              NAME.fm.wav the FM discriminator output without squelch, as
                         a receiver's FM audio (3 kHz, 8-bit).
            Manifest columns: file, mode, cnr_db, wpm, text, seed.

  turns     one-minute turns of a hunt beacon on NBFM: the ID, a long steady
            tone (--tone-s seconds, GNU Radio sig_source_f at the ID's
            pitch), the ID, … (--copies copies), the copies at --wpm or, with
            --speed-change, alternately at --wpm and 0.65·--wpm. Per case
            NAME.wav is make_fm_iq.run_case's demodulated audio (3 kHz,
            8-bit); with --iq also NAME.cu8 (make_fm_iq's IQ format) with
            --pad-s seconds of GNU Radio noise (carrier off, same noise
            power) before and after the turn; the manifest's times are those
            of the WAV (add pad_s for the IQ).
            Manifest: file, cnr_db, id, tone_hz, wpms, copies, copy_s (start
            and end of each copy's key-down, s from the file start, as
            "a-b;a-b;…"), duration_s, fading, seed.

  mc        a Monte-Carlo set of short NBFM bursts for the matcher's
            calibration: --per-cnr bursts at each of --cnrs, drawn from a
            library of --library keyed texts (rendered once), each drawn
            (numpy default_rng(--seed)) from the listed IDs N0CALL/1..5
            (once or twice, sometimes with leading or trailing extra text:
            "DE ID", "ID K", "T" run into the ID, "ID ID AR"), unlisted IDs
            (N0CALL/7, N0CALL/9, N1CALL/3, N0CAL/4, N2CALL/5) and no keying at all
            (carrier without tone), at 16-28 WPM and 600-1000 Hz; a share of
            the bursts (--fading-share) through Rayleigh fading with a
            maximum Doppler of 1 Hz. One demodulated WAV per CNR
            (mc_cnrC.wav, 3 kHz 8-bit), the bursts back to back, each with
            0.25 s of carrier without tone at either end (the faded and the
            steady bursts each run through one flowgraph, their carrier
            continuous); the manifest gives each
            burst's file, start_s, end_s (its stretch of the file), cnr_db,
            truth (the listed ID sent, "unlisted" or "noise"), text, wpm,
            tone_hz, fading (max Doppler Hz, 0 = none), seed.

  beacons   several beacons sharing a channel, each sending turns (ID, tone,
            ID) every --period seconds on its own clock (period
            ·(1 + ppm·1e-6)), with its own carrier offset, tone and level;
            the recording starts and ends inside turns, and clocks that
            differ by thousands of ppm drift two slots into each other.
            Written as DIR/NAME.cu8 (make_fm_iq's format, 48 kS/s, channel
            centre at +3000 Hz from the capture centre), the manifest lists
            every turn: beacon, id, start_s, end_s (clipped to the
            recording), cut_start, cut_end, offset_hz (from the channel
            centre), tone_hz, cnr_db; DIR/NAME.json the scenario.
"""
import argparse
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.io import wavfile
from gnuradio import analog, blocks, filter, gr
from gnuradio.filter import firdes

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "morse"))
import make_fm_iq as fmiq  # noqa: E402  (testdata/morse/make_fm_iq.py)

RATE = fmiq.RATE            # 48000 S/s complex baseband
AUDIO_RATE = fmiq.AUDIO_RATE  # 8000 Hz keyed-tone audio
OUT_RATE = fmiq.OUT_RATE    # 3000 Hz output audio
OFFSET_HZ = fmiq.OFFSET_HZ  # carrier at +3000 Hz from the capture centre
POWER_RATE = 200            # power readings a second
BFO_HZ = 700.0              # A1A beat note for a listener


def ebook_audio(text, wpm, tone_hz, tmp, pad_s=0.25):
    """ebook2cw keyed tone at 8 kHz, peak 1, pad_s of silence each side."""
    a = fmiq.morse_audio(text, wpm, tone_hz, tmp)
    p0 = int(0.25 * AUDIO_RATE)
    a = a[p0:len(a) - p0]
    pad = np.zeros(int(pad_s * AUDIO_RATE), dtype=np.float32)
    return np.concatenate([pad, a, pad])


def run_graph(tb):
    tb.run()


def envelope(audio):
    """The keyed tone's envelope (GNU Radio hilbert_fc, complex_to_mag),
    normalised to peak 1 and clipped at 1."""
    tb = gr.top_block()
    src = blocks.vector_source_f(audio.tolist(), False)
    hil = filter.hilbert_fc(65)
    mag = blocks.complex_to_mag()
    snk = blocks.vector_sink_f()
    tb.connect(src, hil, mag, snk)
    run_graph(tb)
    e = np.array(snk.data(), dtype=np.float32)
    e = np.concatenate([e[32:], np.zeros(32, dtype=np.float32)])  # hilbert_fc delay (65 taps)
    e /= max(1e-9, float(np.max(e)))
    return np.minimum(e, 1.0)


def tone_audio(seconds, tone_hz):
    """A steady tone of amplitude 1 (GNU Radio sig_source_f)."""
    tb = gr.top_block()
    src = analog.sig_source_f(AUDIO_RATE, analog.GR_COS_WAVE, float(tone_hz), 1.0, 0)
    head = blocks.head(gr.sizeof_float, int(seconds * AUDIO_RATE))
    snk = blocks.vector_sink_f()
    tb.connect(src, head, snk)
    run_graph(tb)
    return np.array(snk.data(), dtype=np.float32)


def keyed_case(mode, audio, env, cnr, seed, pow_out, wav_out, fm_out, iq_out=None):
    """A1A or carrier-keyed MCW from ebook2cw audio and its envelope (see
    envelope); see the header."""
    tb = gr.top_block()
    n_out = len(audio) * (RATE // AUDIO_RATE)
    esrc = blocks.vector_source_f(env.tolist(), False)
    eup = filter.rational_resampler_fff(interpolation=RATE // AUDIO_RATE, decimation=1)
    e2c = blocks.float_to_complex()
    tb.connect(esrc, eup, e2c)
    keyed = blocks.multiply_cc()
    if mode == "a1a":
        tb.connect(e2c, (keyed, 0))
        carrier = analog.sig_source_c(RATE, analog.GR_COS_WAVE, 0.0, 1.0, 0)
        tb.connect(carrier, (keyed, 1))
    else:
        asrc = blocks.vector_source_f(audio.tolist(), False)
        aup = filter.rational_resampler_fff(interpolation=RATE // AUDIO_RATE, decimation=1)
        fm = analog.frequency_modulator_fc(2 * np.pi * fmiq.DEV_HZ / RATE)
        tb.connect(asrc, aup, fm, (keyed, 0))
        tb.connect(e2c, (keyed, 1))
    lo_up = analog.sig_source_c(RATE, analog.GR_COS_WAVE, OFFSET_HZ, 1.0, 0)
    mix_up = blocks.multiply_cc()
    tb.connect(keyed, (mix_up, 0))
    tb.connect(lo_up, (mix_up, 1))
    noise = analog.noise_source_c(analog.GR_GAUSSIAN, float(fmiq.noise_ampl(cnr)), seed)
    add = blocks.add_cc()
    tb.connect(mix_up, (add, 0))
    tb.connect(noise, (add, 1))
    head = blocks.head(gr.sizeof_gr_complex, n_out)
    tb.connect(add, head)
    # Power track: onto the carrier, channel filter, |x|^2, 5 ms mean, 200/s.
    lo_dn = analog.sig_source_c(RATE, analog.GR_COS_WAVE, -OFFSET_HZ, 1.0, 0)
    mix_dn = blocks.multiply_cc()
    tb.connect(head, (mix_dn, 0))
    tb.connect(lo_dn, (mix_dn, 1))
    chan = filter.fir_filter_ccf(1, firdes.low_pass(1.0, RATE, fmiq.CHAN_BW_HZ / 2, 1500))
    mag2 = blocks.complex_to_mag_squared()
    n_avg = RATE // POWER_RATE
    avg = blocks.moving_average_ff(n_avg, 1.0 / n_avg, 4000)
    keep = blocks.keep_one_in_n(gr.sizeof_float, n_avg)
    psink = blocks.file_sink(gr.sizeof_float, pow_out)
    tb.connect(mix_dn, chan, mag2, avg, keep, psink)
    # Listener audio.
    if mode == "a1a":
        lo_bfo = analog.sig_source_c(RATE, analog.GR_COS_WAVE, -(OFFSET_HZ - BFO_HZ), 1.0, 0)
        mix_bfo = blocks.multiply_cc()
        tb.connect(head, (mix_bfo, 0))
        tb.connect(lo_bfo, (mix_bfo, 1))
        cw = filter.fir_filter_ccf(RATE // OUT_RATE, firdes.low_pass(1.0, RATE, 1000, 300))
        re = blocks.complex_to_real()
        gain = blocks.multiply_const_ff(0.5)
        tb.connect(mix_bfo, cw, re, gain)
        last = gain
    else:
        # An FM receiver with a carrier squelch (GNU Radio pwr_squelch_cc,
        # threshold halfway in dB between key-up noise and key-down
        # carrier, zeros while closed), so key-up is silence, not noise.
        sq = analog.pwr_squelch_cc(-cnr / 2.0, 0.01, 0, False)
        demod = analog.quadrature_demod_cf(RATE / (2 * np.pi * fmiq.DEV_HZ))
        alpf = filter.fir_filter_fff(RATE // OUT_RATE, firdes.low_pass(1.0, RATE, 1200, 300))
        gain = blocks.multiply_const_ff(0.5)
        tb.connect(chan, sq, demod, alpf, gain)
        last = gain
    wsink = blocks.wavfile_sink(wav_out, 1, OUT_RATE, blocks.FORMAT_WAV, blocks.FORMAT_PCM_U8, False)
    tb.connect(last, wsink)
    # The FM discriminator without squelch (what a receiver's FM audio is).
    demod2 = analog.quadrature_demod_cf(RATE / (2 * np.pi * fmiq.DEV_HZ))
    alpf2 = filter.fir_filter_fff(RATE // OUT_RATE, firdes.low_pass(1.0, RATE, 1200, 300))
    gain2 = blocks.multiply_const_ff(0.5)
    fsink = blocks.wavfile_sink(fm_out, 1, OUT_RATE, blocks.FORMAT_WAV, blocks.FORMAT_PCM_U8, False)
    tb.connect(chan, demod2, alpf2, gain2, fsink)
    iq_sink = None
    if iq_out:
        iq_sink = blocks.vector_sink_c()
        tb.connect(head, iq_sink)
    run_graph(tb)
    wsink.close()
    fsink.close()
    if iq_sink is not None:
        write_cu8(np.array(iq_sink.data(), dtype=np.complex64), iq_out)


def write_cu8(x, path, mode="wb"):
    iq = np.empty(2 * len(x), dtype=np.float32)
    iq[0::2], iq[1::2] = x.real, x.imag
    with open(path, mode) as f:
        np.clip(np.round(127.5 + 40 * iq), 0, 255).astype(np.uint8).tofile(f)


def key_extent(audio, start_sample):
    """First and last key-down sample of ebook2cw audio, in seconds."""
    idx = np.nonzero(np.abs(audio) > 0.1)[0]
    return (start_sample + idx[0]) / AUDIO_RATE, (start_sample + idx[-1] + 1) / AUDIO_RATE


def set_keyed(a, tmp):
    rows = []
    seed = 70000 + 1000 * a.seed
    texts = ["KQ7 XJ2 ZBM4 VU9", "PRUF 5TGH OY8C", "N0CALL/4 WD3 LE6", "QZ4K MWX9 7TLD", "HT3Y =ML7 ZEP0"]
    audio = {}  # ebook2cw is the slow step: one rendering per speed
    for mode in a.modes.split(","):
        for cnr in (float(v) for v in a.cnrs.split(",")):
            for wi, wpm in enumerate(int(v) for v in a.wpms.split(",")):
                text = texts[wi % len(texts)]
                if wpm not in audio:
                    x = ebook_audio(text, wpm, 800, tmp)
                    audio[wpm] = (x, envelope(x))
                seed += 1
                name = "keyed_%s_cnr%g_w%d" % (mode, cnr, wpm)
                iq = os.path.join(a.out, name + ".cu8") if a.iq else None
                keyed_case(mode, audio[wpm][0], audio[wpm][1], cnr, seed, os.path.join(a.out, name + ".pow"),
                           os.path.join(a.out, name + ".wav"), os.path.join(a.out, name + ".fm.wav"), iq)
                rows.append((name, mode, cnr, wpm, text, seed))
    with open(os.path.join(a.out, "keyed.tsv"), "w") as f:
        f.write("file\tmode\tcnr_db\twpm\ttext\tseed\n")
        for r in rows:
            f.write("%s\t%s\t%g\t%d\t%s\t%d\n" % r)


def turn_audio(ident, wpms, tone_hz, tone_s, copies, tmp):
    """ID, tone, ID, … as 8 kHz audio; returns it and the copies' extents."""
    parts, spans, pos = [], [], 0
    for k in range(copies):
        if k > 0:
            t = tone_audio(tone_s, tone_hz)
            gap = np.zeros(int(0.5 * AUDIO_RATE), dtype=np.float32)
            parts += [t, gap]
            pos += len(t) + len(gap)
        idp = ebook_audio(ident, wpms[k % len(wpms)], tone_hz, tmp, pad_s=0.5)
        spans.append(key_extent(idp, pos))
        parts.append(idp)
        pos += len(idp)
    return np.concatenate(parts), spans


def set_turns(a, tmp):
    rows = []
    seed = 80000 + 1000 * a.seed
    ids = a.ids.split(",")
    wpms = [a.wpm, round(0.65 * a.wpm)] if a.speed_change else [a.wpm]
    cache = {}
    for cnr in (float(v) for v in a.cnrs.split(",")):
        for k, ident in enumerate(ids):
            tone = [800, 650, 950, 700][k % 4]
            key = (ident, tone)
            if key not in cache:
                cache[key] = turn_audio(ident, wpms, tone, a.tone_s, a.copies, tmp)
            audio, spans = cache[key]
            seed += 1
            name = "turn_cnr%g_%d" % (cnr, k)
            fading = (a.fading / RATE, seed + 500) if a.fading > 0 else None
            iq = os.path.join(tmp, "turn.cu8") if a.iq else None
            fmiq.run_case(audio, cnr, seed, os.path.join(a.out, name + ".wav"), iq, fading=fading)
            if iq:
                # Carrier-off noise of the same power around the turn, so a
                # receiver sees the noise floor and both edges.
                seed += 1
                pad = noise_iq(2 * int(a.pad_s * RATE), fmiq.noise_ampl(cnr), seed)
                out = os.path.join(a.out, name + ".cu8")
                write_cu8(pad[:len(pad) // 2], out)
                with open(out, "ab") as f:
                    f.write(open(iq, "rb").read())
                write_cu8(pad[len(pad) // 2:], out, "ab")
            rows.append((name + ".wav", cnr, ident, tone, ",".join(str(w) for w in wpms), a.copies,
                         ";".join("%.4f-%.4f" % s for s in spans), len(audio) / AUDIO_RATE, a.fading, seed))
    with open(os.path.join(a.out, "turns.tsv"), "w") as f:
        f.write("file\tcnr_db\tid\ttone_hz\twpms\tcopies\tcopy_s\tduration_s\tfading\tseed\n")
        for r in rows:
            f.write("%s\t%g\t%s\t%d\t%s\t%d\t%s\t%.4f\t%g\t%d\n" % r)


MC_LISTED = ["N0CALL/1", "N0CALL/2", "N0CALL/3", "N0CALL/4", "N0CALL/5"]
# Unlisted IDs one character away from a listed one (changed or left out).
# An ID that merely adds characters to a listed one (N0CALL/12) is, by
# the matcher's rule, that ID inside longer text, so none is drawn here.
MC_UNLISTED = ["N0CALL/7", "N0CALL/9", "N1CALL/3", "N0CAL/4", "N2CALL/5"]


def mc_text(rng):
    u = rng.random()
    if u < 0.12:
        return "noise", ""
    if u < 0.36:
        x = MC_UNLISTED[rng.integers(len(MC_UNLISTED))]
        return "unlisted", x if rng.random() < 0.5 else x + " " + x
    x = MC_LISTED[rng.integers(len(MC_LISTED))]
    form = rng.integers(6)
    return x, [x, x + " " + x, "DE " + x, x + " K", "T" + x, x + " " + x + " <AR>"][form]


def render_all(jobs, tmp):
    """ebook_audio for every (text, wpm, tone) job, several at a time
    (ebook2cw spends most of its time waiting on its encoder)."""
    from concurrent.futures import ThreadPoolExecutor

    def one(k_job):
        k, (text, wpm, tone) = k_job
        d = os.path.join(tmp, "r%d" % k)
        os.makedirs(d, exist_ok=True)
        return ebook_audio(text, wpm, tone, d)

    with ThreadPoolExecutor(max_workers=6) as ex:
        return list(ex.map(one, enumerate(jobs)))


def set_mc(a, tmp):
    rng = np.random.default_rng(a.seed)
    rows = []
    seed = 90000 + 1000 * a.seed
    # A library of --library keyed texts, rendered once (ebook2cw is the
    # slow step); every CNR draws its bursts from it.
    lib = []
    for _ in range(a.library):
        truth, text = mc_text(rng)
        lib.append([truth, text, int(rng.integers(16, 29)), int(rng.choice([600, 700, 800, 900, 1000]))])
    jobs = [(c[1], c[2], c[3]) for c in lib if c[1]]
    rendered = iter(render_all(jobs, tmp))
    for c in lib:
        x = next(rendered) if c[1] else np.zeros(int((2 + 3 * rng.random()) * AUDIO_RATE), dtype=np.float32)
        # A whole number of output samples (8 kHz -> 3 kHz is 3/8).
        c.append(np.concatenate([x, np.zeros((-len(x)) % 8, dtype=np.float32)]))
    for cnr in (float(v) for v in a.cnrs.split(",")):
        name = "mc_cnr%g.wav" % cnr
        cases = []
        for _ in range(a.per_cnr):
            c = lib[rng.integers(len(lib))]
            cases.append([c[0], c[1], c[2], c[3], c[4], bool(rng.random() < a.fading_share)])
        audio = [c[4] for c in cases]
        # One flowgraph per fading group: the bursts back to back, each
        # with 0.25 s of carrier without tone at either end (ebook_audio's
        # padding), so the carrier runs continuously through the group.
        out = [None] * len(cases)
        dop = 1.0  # max Doppler (Hz) of the faded group
        for faded in (False, True):
            idx = [i for i, c in enumerate(cases) if c[5] == faded]
            if not idx:
                continue
            seed += 1
            w = os.path.join(tmp, "g.wav")
            fading = (dop / RATE, seed + 500) if faded else None
            fmiq.run_case(np.concatenate([audio[i] for i in idx]), cnr, seed, w, None, fading=fading)
            rate, x = wavfile.read(w)
            assert rate == OUT_RATE and x.dtype == np.uint8
            pos = 0
            for i in idx:
                n = len(audio[i]) * 3 // 8
                out[i] = x[pos:pos + n]
                pos += n
        pos = 0
        for c, x in zip(cases, out):
            rows.append((name, pos / OUT_RATE, (pos + len(x)) / OUT_RATE, cnr, c[0], c[1], c[2], c[3],
                         dop if c[5] else 0.0, seed))
            pos += len(x)
        wavfile.write(os.path.join(a.out, name), OUT_RATE, np.concatenate(out))
    with open(os.path.join(a.out, "mc.tsv"), "w") as f:
        f.write("file\tstart_s\tend_s\tcnr_db\ttruth\ttext\twpm\ttone_hz\tfading\tseed\n")
        for r in rows:
            f.write("%s\t%.4f\t%.4f\t%g\t%s\t%s\t%d\t%d\t%g\t%d\n" % r)


def set_beacons(a, tmp):
    sc = json.loads(a.scenario)
    rec_s, period = sc["duration_s"], sc["period_s"]
    t0 = sc.get("start_s", 0.0)  # recording start on the beacons' time axis
    n = int(rec_s * RATE)
    total = np.zeros(n, dtype=np.complex64)
    rows = []
    seed = 60000 + 1000 * a.seed
    for bi, b in enumerate(sc["beacons"]):
        p = period * (1 + b["ppm"] * 1e-6)
        ident, tone = b["id"], b["tone_hz"]
        audio, _ = turn_audio(ident, [b["wpm"]], tone, b["tone_s"], b.get("copies", 2), tmp)
        one = fm_turn(audio, b["offset_hz"])  # one turn at this offset, |x| = 1
        turn_n = len(one)
        # Every turn overlapping the recording.
        k = int(np.floor((t0 - b["first_s"] - turn_n / RATE) / p))
        amp = 10 ** ((b["cnr_db"] - sc["noise_cnr_ref_db"]) / 20)
        while True:
            s = b["first_s"] + k * p - t0
            k += 1
            if s >= rec_s:
                break
            e = s + turn_n / RATE
            if e <= 0:
                continue
            i0 = int(round(s * RATE))
            a0, a1 = max(0, i0), min(n, i0 + turn_n)
            # Carrier phase continues from the turn's own start.
            total[a0:a1] += amp * one[a0 - i0:a1 - i0]
            rows.append((bi + 1, ident, max(0.0, s), min(rec_s, e), int(s < 0), int(e > rec_s),
                         b["offset_hz"], tone, b["cnr_db"]))
    seed += 1
    total += noise_iq(n, fmiq.noise_ampl(sc["noise_cnr_ref_db"]), seed)
    name = a.name
    write_cu8(total, os.path.join(a.out, name + ".cu8"))
    rows.sort(key=lambda r: r[2])
    with open(os.path.join(a.out, name + ".tsv"), "w") as f:
        f.write("beacon\tid\tstart_s\tend_s\tcut_start\tcut_end\toffset_hz\ttone_hz\tcnr_db\n")
        for r in rows:
            f.write("%d\t%s\t%.4f\t%.4f\t%d\t%d\t%g\t%d\t%g\n" % r)
    with open(os.path.join(a.out, name + ".json"), "w") as f:
        json.dump(sc, f, indent=1)


def fm_turn(audio, offset_hz):
    """One turn FM-modulated (make_fm_iq's modulator) onto the carrier at
    OFFSET_HZ + offset_hz, no noise, |x| = 1 (GNU Radio)."""
    tb = gr.top_block()
    src = blocks.vector_source_f(audio.tolist(), False)
    up = filter.rational_resampler_fff(interpolation=RATE // AUDIO_RATE, decimation=1)
    fm = analog.frequency_modulator_fc(2 * np.pi * fmiq.DEV_HZ / RATE)
    lo = analog.sig_source_c(RATE, analog.GR_COS_WAVE, OFFSET_HZ + offset_hz, 1.0, 0)
    mix = blocks.multiply_cc()
    head = blocks.head(gr.sizeof_gr_complex, len(audio) * (RATE // AUDIO_RATE))
    snk = blocks.vector_sink_c()
    tb.connect(src, up, fm, (mix, 0))
    tb.connect(lo, (mix, 1))
    tb.connect(mix, head, snk)
    run_graph(tb)
    return np.array(snk.data(), dtype=np.complex64)


def noise_iq(n, ampl, seed):
    tb = gr.top_block()
    src = analog.noise_source_c(analog.GR_GAUSSIAN, float(ampl), seed)
    head = blocks.head(gr.sizeof_gr_complex, n)
    snk = blocks.vector_sink_c()
    tb.connect(src, head, snk)
    run_graph(tb)
    return np.array(snk.data(), dtype=np.complex64)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("set", choices=["keyed", "turns", "mc", "beacons"])
    ap.add_argument("--out", required=True)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--cnrs", default="6,10,15,20,30")
    ap.add_argument("--iq", action="store_true", help="also write the IQ (cu8)")
    ap.add_argument("--modes", default="a1a,mcw", help="keyed: a1a, mcw")
    ap.add_argument("--wpms", default="8,12,18,24,30", help="keyed: speeds")
    ap.add_argument("--ids", default="N0CALL/1,N0CALL/3", help="turns: identifiers")
    ap.add_argument("--wpm", type=int, default=22, help="turns: speed of the ID")
    ap.add_argument("--speed-change", action="store_true", help="turns: alternate copies at 0.65 x speed")
    ap.add_argument("--tone-s", type=float, default=22.0, help="turns: long tone length (s)")
    ap.add_argument("--copies", type=int, default=3, help="turns: copies of the ID")
    ap.add_argument("--pad-s", type=float, default=2.0, help="turns: noise before and after the IQ (s)")
    ap.add_argument("--fading", type=float, default=0.0, help="turns: Rayleigh fading, max Doppler (Hz); 0 none")
    ap.add_argument("--per-cnr", type=int, default=30, help="mc: bursts per CNR")
    ap.add_argument("--library", type=int, default=24, help="mc: distinct keyed texts rendered")
    ap.add_argument("--fading-share", type=float, default=0.25, help="mc: share of bursts with fading")
    ap.add_argument("--name", default="beacons", help="beacons: output name")
    ap.add_argument("--scenario", default="", help="beacons: the scenario as JSON (see the tests)")
    a = ap.parse_args()
    os.makedirs(a.out, exist_ok=True)
    fmiq.check_noise_source()
    with tempfile.TemporaryDirectory() as tmp:
        {"keyed": set_keyed, "turns": set_turns, "mc": set_mc, "beacons": set_beacons}[a.set](a, tmp)


if __name__ == "__main__":
    main()
