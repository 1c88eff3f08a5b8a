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
from gnuradio import analog, blocks, channels, gr

STEM = "rotating_loop"


def loop_amplitude(rel_deg, depth_db):
    a2 = 1.0 / (10.0 ** (depth_db / 10.0) - 1.0)
    s = np.sin(np.radians(rel_deg))
    return np.sqrt((s * s + a2) / (1.0 + a2))


def field(kind, rel_deg, a):
    """Complex field pattern (|field|^2 = the power pattern of the same
    name in nullseek's bearing package; see make_levels.py)."""
    d = np.radians(rel_deg)
    if kind == "loop":
        a2 = 1.0 / (10.0 ** (a.null_depth / 10.0) - 1.0)
        return (np.sin(d) + 1j * math.sqrt(a2)) / math.sqrt(1.0 + a2)
    if kind == "loop-plane":
        return field("loop", rel_deg - 90.0, a)
    if kind == "yagi":
        bw, fb = a.beamwidth, a.front_back
        dd = (rel_deg + 180.0) % 360.0 - 180.0

        def lobe(x):
            return 10.0 ** (-1.2 * (x / bw) ** 2)

        f = 10.0 ** (-(fb + 15.0) / 10.0)
        p0 = lobe(0.0) + f
        b = max(10.0 ** (-fb / 10.0) * p0 - lobe(180.0) - f, 0.0)
        cc = (1.0 - np.cos(np.radians(dd))) / 2.0
        return np.sqrt((lobe(dd) + b * cc ** 4 + f) / p0) + 0j
    if kind == "body":
        r = 10.0 ** (-a.body_depth / 20.0)
        return (1.0 + r) / 2.0 + (1.0 - r) / 2.0 * np.cos(d) + 0j
    raise ValueError(kind)


def heading_at(a, t):
    """True heading (degrees, unwrapped) at times t: a steady turn, or a
    back-and-forth sweep over --arc degrees starting at --start-heading."""
    if a.sweep == "turn":
        return a.start_heading + a.turn_rate * t
    period = 2.0 * a.arc / abs(a.turn_rate)
    ph = np.mod(t, period) / period
    tri = np.where(ph < 0.5, 2 * ph, 2 - 2 * ph)
    return a.start_heading + a.arc * tri


def burst_gate(t, a):
    """--bursts ON:OFF: the transmitter on for ON s from --first-on, then off
    for OFF s, repeating; returns the gate (0/1) and each sample's time since
    its burst began (the Morse restarts with every burst)."""
    on, off = (float(v) for v in a.bursts.split(":"))
    since = np.mod(t - a.first_on, on + off)
    gate = ((t >= a.first_on) & (since < on)).astype(np.float32)
    return gate, since


# ITU-R M.1677-1 Annex 1 §1.1.1–1.1.3 (letters, figures and the fraction bar; docs/REFERENCES.md).
MORSE = {
    "A": ".-", "B": "-...", "C": "-.-.", "D": "-..", "E": ".", "F": "..-.", "G": "--.", "H": "....", "I": "..",
    "J": ".---", "K": "-.-", "L": ".-..", "M": "--", "N": "-.", "O": "---", "P": ".--.", "Q": "--.-", "R": ".-.",
    "S": "...", "T": "-", "U": "..-", "V": "...-", "W": ".--", "X": "-..-", "Y": "-.--", "Z": "--..",
    "0": "-----", "1": ".----", "2": "..---", "3": "...--", "4": "....-", "5": ".....", "6": "-....",
    "7": "--...", "8": "---..", "9": "----.", "/": "-..-.",
}


def morse_key(t, wpm, w="N0CALL"):
    """On/off keying of w (default "N0CALL") repeated with a word gap,
    ITU-R M.1677-1 Annex 1 §2 timing (dot = 1.2/wpm s), from t = 0.5 s."""
    code = MORSE
    units = []
    for i, ch in enumerate(w):
        for j, el in enumerate(code[ch]):
            units += [1] * (3 if el == "-" else 1)
            if j < len(code[ch]) - 1:
                units += [0]
        if i < len(w) - 1:
            units += [0] * 3
    units += [0] * 7
    units = np.array(units, dtype=np.float32)
    dot = 1.2 / wpm
    k = np.floor((t - 0.5) / dot).astype(np.int64)
    out = units[np.mod(k, len(units))]
    out[t < 0.5] = 0
    return out


class Rotating(gr.top_block):
    def __init__(self, a):
        gr.top_block.__init__(self, "rotating")
        fs = a.rate
        n = int(round(a.seconds * fs))
        t = np.arange(n) / fs
        heading = heading_at(a, t)
        if a.pattern == "loop" and a.reflection_db == 0 and a.fading == "none" and not a.keyed and not a.bursts:
            # the original fixture's path (bit-identical heading log and truth)
            amp = (a.peak * loop_amplitude(a.bearing - heading, a.null_depth)).astype(np.complex64)
        else:
            e = field(a.pattern, a.bearing - heading, a)
            if a.reflection_db > 0:
                e = e + 10.0 ** (-a.reflection_db / 20.0) * np.exp(1j * a.reflection_phase) * field(
                    a.pattern, a.bearing + a.reflection_offset - heading, a)
            if a.fading != "none":
                # GNU Radio's flat fader (gr-channels flat_fader_impl: the
                # sum-of-sinusoids model of Zheng & Xiao, IEEE Comm. Letters
                # 6(6), 2002), run at 1 kHz and interpolated: its Doppler
                # (<= a few Hz) is far below that rate.
                m = int(fs // 1000)
                nr = n // m + 2
                tb = gr.top_block()
                one = analog.sig_source_c(1.0, analog.GR_CONST_WAVE, 0, 1.0, 0)
                fade = channels.fading_model(8, a.doppler / 1000.0, a.fading == "rician", a.k, a.seed + 11)
                hd = blocks.head(gr.sizeof_gr_complex, nr)
                snk = blocks.vector_sink_c()
                tb.connect(one, fade, hd, snk)
                tb.run()
                h = np.array(snk.data())
                tr = np.arange(nr) * m / fs
                e = e * (np.interp(t, tr, h.real) + 1j * np.interp(t, tr, h.imag))
            if a.bursts:
                gate, since = burst_gate(t, a)
                e = e * gate
                if a.keyed:
                    e = e * morse_key(since, a.keyed, a.id)
            elif a.keyed:
                e = e * morse_key(t, a.keyed, a.id)
            amp = (a.peak * e).astype(np.complex64)
        amp2 = None
        if a.second:
            # --second: another beacon at its own offset and bearing, keyed
            # with its own identifier in bursts of the same ON:OFF from its
            # own first start, heard through the same turning antenna.
            off2, brg2, id2, first2 = second_args(a)
            e2 = field(a.pattern, brg2 - heading, a)
            if a.bursts:
                b2 = argparse.Namespace(**vars(a))
                b2.first_on = first2
                gate2, since2 = burst_gate(t, b2)
                e2 = e2 * gate2
                if a.keyed:
                    e2 = e2 * morse_key(since2, a.keyed, id2)
            amp2 = (a.peak * e2).astype(np.complex64)

        # Noise: total complex power σ² over fs; in 12.5 kHz it is σ²·12500/fs.
        snr = 10.0 ** (a.snr / 10.0)
        sigma = a.peak / math.sqrt(snr * 12500.0 / fs)

        tone = analog.sig_source_f(fs, analog.GR_COS_WAVE, a.tone, 1.0, 0)
        fm = analog.frequency_modulator_fc(2 * math.pi * a.deviation / fs)
        lo = analog.sig_source_c(fs, analog.GR_COS_WAVE, a.offset, 1.0, 0)
        mix = blocks.multiply_cc()
        gain = blocks.vector_source_c(amp, False)
        shape = blocks.multiply_cc()
        noise = analog.noise_source_c(analog.GR_GAUSSIAN, sigma, a.seed)
        add = blocks.add_cc()
        head = blocks.head(gr.sizeof_gr_complex, n)
        if a.tone > 0:
            self.connect(tone, fm, (mix, 0))
        else:
            one = analog.sig_source_c(fs, analog.GR_CONST_WAVE, 0, 1.0, 0)
            self.connect(one, (mix, 0))
        self.connect(lo, (mix, 1))
        self.connect(mix, (shape, 0))
        self.connect(gain, (shape, 1))
        self.connect(shape, (add, 0))
        self.connect(noise, (add, 1))
        if amp2 is not None:
            lo2 = analog.sig_source_c(fs, analog.GR_COS_WAVE, second_args(a)[0], 1.0, 0)
            mix2 = blocks.multiply_cc()
            shape2 = blocks.multiply_cc()
            self.connect(fm if a.tone > 0 else one, (mix2, 0))
            self.connect(lo2, (mix2, 1))
            self.connect(mix2, (shape2, 0))
            self.connect(blocks.vector_source_c(amp2, False), (shape2, 1))
            self.connect(shape2, (add, 2))
        self.connect(add, head)
        path = os.path.join(a.out, STEM + ".sigmf-data")
        if a.datatype == "cu8":
            # 8-bit like an RTL-SDR: u = clamp(round(127.5·x/full + 127.5), 0, 255)
            # (float_to_uchar rounds and clamps)
            c2f = blocks.complex_to_float()
            self.connect(head, c2f)
            inter = blocks.interleave(gr.sizeof_char)
            for port in (0, 1):
                g = blocks.multiply_const_ff(127.5 / a.full_scale)
                b = blocks.add_const_ff(127.5)
                q = blocks.float_to_uchar()
                self.connect((c2f, port), g, b, q, (inter, port))
            sink = blocks.file_sink(gr.sizeof_char, path, False)
            self.connect(inter, sink)
        else:
            to_s16 = blocks.complex_to_interleaved_short(False, 32767.0)
            sink = blocks.file_sink(gr.sizeof_short, path, False)
            self.connect(head, to_s16, sink)
        sink.set_unbuffered(False)


def second_args(a):
    """--second OFFSET:BEARING:ID:FIRST_ON as (Hz, degrees, text, s)."""
    off, brg, ident, first = a.second.split(":")
    return float(off), float(brg), ident, float(first)


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
    # field conditions (defaults: the committed fixture)
    p.add_argument("--pattern", default="loop", choices=["loop", "loop-plane", "yagi", "body"], help="antenna pattern")
    p.add_argument("--beamwidth", type=float, default=60.0, help="yagi -3 dB beamwidth, degrees")
    p.add_argument("--front-back", dest="front_back", type=float, default=18.0, help="yagi front-to-back, dB")
    p.add_argument("--body-depth", dest="body_depth", type=float, default=12.0, help="body-shield drop, dB")
    p.add_argument("--sweep", default="turn", choices=["turn", "backforth"], help="steady turn, or back and forth over --arc")
    p.add_argument("--arc", type=float, default=360.0, help="back-and-forth sweep width, degrees")
    p.add_argument("--fading", default="none", choices=["none", "rayleigh", "rician"], help="flat fading of the path")
    p.add_argument("--doppler", type=float, default=0.3, help="fading's maximum Doppler, Hz")
    p.add_argument("--k", type=float, default=4.0, help="Rician K (specular/scattered power, linear)")
    p.add_argument("--reflection-db", dest="reflection_db", type=float, default=0.0, help="a static reflection this many dB below the direct path (0: none)")
    p.add_argument("--reflection-offset", dest="reflection_offset", type=float, default=90.0, help="the reflection's bearing minus the direct one, degrees")
    p.add_argument("--reflection-phase", dest="reflection_phase", type=float, default=1.0, help="the reflection's phase, radians")
    p.add_argument("--keyed", type=float, default=0.0, help="key the carrier with Morse N0CALL at this many WPM (0: continuous)")
    p.add_argument("--bursts", default="", help="ON:OFF seconds: the transmitter keyed on and off in bursts (with --keyed, N0CALL restarts in each)")
    p.add_argument("--first-on", dest="first_on", type=float, default=1.0, help="with --bursts: the first burst's start, s")
    p.add_argument("--datatype", default="ci16_le", choices=["ci16_le", "cu8"], help="IQ sample format")
    p.add_argument("--full-scale", dest="full_scale", type=float, default=1.0, help="cu8: the amplitude at the 8-bit rails")
    p.add_argument("--log-hz", dest="log_hz", type=float, default=10.0, help="heading log rate")
    p.add_argument("--log-lag", dest="log_lag", type=float, default=0.0, help="the heading log is this many seconds late")
    p.add_argument("--log-noise", dest="log_noise", type=float, default=0.0, help="heading log noise, degrees RMS")
    p.add_argument("--id", default="N0CALL", help="with --keyed: the identifier keyed (letters, figures, /)")
    p.add_argument("--second", default="", help="OFFSET:BEARING:ID:FIRST_ON: a second beacon (Hz from centre, true degrees, its keyed identifier, its first burst's start s)")
    p.add_argument("--declination", type=float, default=None, help="write the heading log magnetic with this declination (east positive)")
    a = p.parse_args()
    os.makedirs(a.out, exist_ok=True)

    Rotating(a).run()

    # How the description names the antenna (--pattern).
    ANTENNA_WORDS = {"loop": "small loop", "loop-plane": "small loop (plane-wave pattern)", "yagi": "Yagi",
                     "body": "body-shielded receiver"}

    meta = {
        "global": {
            "core:datatype": a.datatype,
            "core:sample_rate": a.rate,
            "core:version": "1.2.0",
            "core:author": "nullseek testdata (GNU Radio %s)" % gr.version(),
            "core:description": "invented fixture: NBFM %g Hz tone at %+g Hz, %s %s %g deg/s, bearing %g deg"
            % (a.tone, a.offset, ANTENNA_WORDS[a.pattern],
               "turning" if a.sweep == "turn" else "sweeping %g deg back and forth at" % a.arc, a.turn_rate, a.bearing),
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
        rng = np.random.default_rng(a.seed + 7)
        k = 0
        while k / a.log_hz <= a.seconds + 1e-9:
            t = k / a.log_hz
            h = float(heading_at(a, np.array([t - a.log_lag]))[0])
            if a.log_noise > 0:
                h += rng.normal(0, a.log_noise)
            if a.declination is not None:
                h -= a.declination  # magnetic = true - declination (east positive)
            if a.log_hz == 10.0:
                f.write("%.1f,%.3f\n" % (t, h % 360.0))
            else:
                f.write("%.3f,%.3f\n" % (t, h % 360.0))
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
        "datatype": a.datatype,
        "model": "level = carrier power at heading h: peak^2 * (sin^2(bearing-h) + a^2)/(1+a^2), a^2 = 1/(10^(depth/10)-1); "
        "heading(t) = start + rate*t; noise complex Gaussian",
    }
    if a.pattern != "loop" or a.sweep != "turn" or a.fading != "none" or a.reflection_db > 0 or a.keyed or a.bursts or a.datatype != "ci16_le" or a.log_lag or a.declination is not None:
        truth["pattern"] = {"kind": a.pattern, "null_depth_db": a.null_depth, "symmetry": 2 if a.pattern.startswith("loop") else 1,
                            "beamwidth_deg": a.beamwidth, "front_back_db": a.front_back, "body_depth_db": a.body_depth}
        truth["conditions"] = {"sweep": a.sweep, "arc_deg": a.arc, "fading": a.fading, "doppler_hz": a.doppler, "k": a.k,
                               "reflection_db": a.reflection_db, "reflection_offset_deg": a.reflection_offset,
                               "reflection_phase_rad": a.reflection_phase, "keyed_wpm": a.keyed, "bursts": a.bursts, "first_on_s": a.first_on, "full_scale": a.full_scale,
                               "log_hz": a.log_hz, "log_lag_s": a.log_lag, "log_noise_deg": a.log_noise, "declination_deg": a.declination}
    if a.second:
        off2, brg2, id2, first2 = second_args(a)
        truth["identifier"] = a.id
        truth["second"] = {"carrier_offset_hz": off2, "bearing_deg": brg2, "identifier": id2, "first_on_s": first2}
    with open(os.path.join(a.out, STEM + "_truth.json"), "w") as f:
        json.dump(truth, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
