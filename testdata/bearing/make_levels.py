#!/usr/bin/python3
"""Make level tracks of a turning antenna under field conditions, for
nullseek's Monte-Carlo calibration of the bearing fit.

Each trial is one sweep: a carrier from a transmitter at a random true
bearing, received through an antenna pattern that turns (steady turn,
partial or back-and-forth sweep), times a path gain (flat Rayleigh/Rician
fading, a static reflection, Morse keying), plus complex Gaussian noise,
optionally quantised to 8 bits (the RTL-SDR's cu8 rails); the channel
power is read in blocks of M samples, like nullseek's receiver does. A
heading log is written at 20 Hz with noise, optionally late or magnetic.

GNU Radio 3.10 makes the random processes and the signal chain:
  - fading: channels.fading_model(N=8, fDTs, LOS, K, seed), the
    sum-of-sinusoids flat fader of gr-channels (flat_fader_impl.cc: Zheng &
    Xiao, IEEE Communications Letters 6(6), 2002, with alpha_n =
    (2*pi*n - pi + theta)/(4N) and a random walk on theta; K is the linear
    ratio of specular to scattered power; E|H|^2 = 1), run at the reading
    rate (its Doppler, <= 1 Hz here, is far below it) and interpolated
    linearly to the sample rate;
  - noise: analog.noise_source_c(GR_GAUSSIAN, 1), unit complex power;
  - the chain: vector_source_c (carrier x pattern x gain) + noise ->
    [complex_to_float -> float_to_uchar (8-bit rails) -> uchar_to_float ->
    float_to_complex] -> complex_to_mag_squared -> integrate_ff(M).

Antenna patterns (field, delta = bearing - heading, degrees clockwise of
the heading reference; the same models as nullseek's bearing package
documents):
  loop  (heading = the loop's axis): E = (sin d + j*a)/sqrt(1+a^2),
        a^2 = 1/(10^(depth/10) - 1); nulls when the axis points at the
        transmitter and away from it.
  yagi  (heading = boresight): P = (lobe + b*((1-cos d)/2)^4 + f)/p0,
        lobe = 10^(-1.2 (d/bw)^2), f = 10^(-(fb+15)/10), b so that
        P(180) = 10^(-fb/10); E = sqrt(P).
  body  (heading = the way the operator faces): E = (1+r)/2 + (1-r)/2 cos d,
        r = 10^(-depth/20); the drop is with the back to the transmitter.
A static reflection adds rho*exp(j*psi)*E(bearing2 - heading).

Levels are in dB relative to the noise power of one sample (the noise
floor is 0 dB); SNR is the carrier at the pattern's maximum over that
noise.

Exact command (run from the repository root; the tests run it into a
temporary directory):

    /usr/bin/python3 testdata/bearing/make_levels.py --condition NAME \\
        --trials N --seed S --out DIR

Outputs in DIR:
    levels.f32     float32 little-endian, 4 per reading: t_s, level_db,
                   clipped_samples, key_down_fraction (1 = carrier keyed
                   on for the whole reading)
    headings.csv   "seconds,heading_deg" at 20 Hz (the heading reference
                   of the condition: true, or magnetic, possibly late)
    truth.json     the condition, and per trial its time span, reading
                   span, true bearing, pattern and what the path did
Trials follow each other on one time line with 2 s between them.

This is invented test data (no real place or station).
"""

import argparse
import json
import math
import os

import numpy as np
from gnuradio import analog, blocks, channels, gr

FS = 4000.0  # complex samples per second
M = 40  # samples per reading (10 ms, 100 readings a second)
LOG_HZ = 20.0
CARRIER_HZ = 137.0
GAP_S = 2.0

# name: dict of settings (see condition_defaults for the keys)
CONDITIONS = {
    "clean": dict(),
    "clean-1turn": dict(turns=1),
    "fade-rayleigh-0.1": dict(fading="rayleigh", fd=0.1),
    "fade-rayleigh-0.3": dict(fading="rayleigh", fd=0.3),
    "fade-rayleigh-1": dict(fading="rayleigh", fd=1.0),
    "fade-rician-0.1": dict(fading="rician", fd=0.1, k=4.0),
    "fade-rician-1": dict(fading="rician", fd=1.0, k=4.0),
    "fade1-rayleigh-0.1": dict(fading="rayleigh", fd=0.1, turns=1),
    "fade1-rayleigh-1": dict(fading="rayleigh", fd=1.0, turns=1),
    "fade1-rician-0.3": dict(fading="rician", fd=0.3, k=4.0, turns=1),
    "keyed": dict(keyed=True, turns=2),
    "reflection": dict(reflection_db=6.0, turns=2),
    "clip-heavy": dict(clip=True, turns=1, patterns=("loop", "yagi")),
    "partial-cover": dict(profile="partial-cover"),
    "partial-miss": dict(profile="partial-miss"),
    "backforth-late": dict(profile="backforth", lag=0.4, turns=3),
    "magnetic": dict(declination=-7.5, turns=1),
    "weak-0": dict(snr=0.0, turns=2),
    "weak-3": dict(snr=3.0, turns=2),
    "weak-6": dict(snr=6.0, turns=2),
}


def condition_defaults(c):
    d = dict(
        patterns=("yagi", "loop", "body"),
        snr=25.0,  # dB, carrier at the pattern maximum over the noise of one sample
        rate=30.0,  # deg/s
        turns=4,
        profile="turn",
        fading="none",
        fd=0.0,
        k=0.0,
        keyed=False,
        wpm=12.0,
        reflection_db=0.0,
        clip=False,
        lag=0.0,
        declination=0.0,
        heading_noise=0.3,
        beamwidth=60.0,
        front_back=18.0,
        loop_depth=25.0,
        body_depth=12.0,
    )
    d.update(c)
    return d


def field(kind, rel_deg, c):
    d = np.radians(rel_deg)
    if kind == "loop":
        a2 = 1.0 / (10.0 ** (c["loop_depth"] / 10.0) - 1.0)
        return (np.sin(d) + 1j * math.sqrt(a2)) / math.sqrt(1.0 + a2)
    if kind == "yagi":
        bw, fb = c["beamwidth"], c["front_back"]
        dd = (rel_deg + 180.0) % 360.0 - 180.0

        def lobe(x):
            return 10.0 ** (-1.2 * (x / bw) ** 2)

        f = 10.0 ** (-(fb + 15.0) / 10.0)
        p0 = lobe(0.0) + f
        b = max(10.0 ** (-fb / 10.0) * p0 - lobe(180.0) - f, 0.0)
        cc = (1.0 - np.cos(np.radians(dd))) / 2.0
        p = (lobe(dd) + b * cc ** 4 + f) / p0
        return np.sqrt(p) + 0j
    if kind == "body":
        r = 10.0 ** (-c["body_depth"] / 20.0)
        return (1.0 + r) / 2.0 + (1.0 - r) / 2.0 * np.cos(d) + 0j
    raise ValueError(kind)


def feature_heading(kind, bearing):
    """A heading at which the antenna's marking feature points at the transmitter."""
    if kind == "body":
        return (bearing + 180.0) % 360.0
    return bearing % 360.0


def profile(c, rng, kind, bearing):
    """Heading (true, degrees, unwrapped) as a function of time, and the duration."""
    rate = c["rate"]
    if c["profile"] == "turn":
        start = rng.uniform(0, 360)
        sign = 1.0 if rng.uniform() < 0.5 else -1.0
        dur = c["turns"] * 360.0 / rate
        return (lambda t: start + sign * rate * t), dur, dict(kind="turn", start_deg=start, rate_deg_s=sign * rate)
    arc = rng.uniform(120.0, 150.0)
    if c["profile"] == "partial-cover":
        centre = feature_heading(kind, bearing) + rng.uniform(-arc / 4, arc / 4)
        passes = 3
    elif c["profile"] == "partial-miss":
        # centred on the side away from every feature: yagi/body the back,
        # loop the lobe between its two nulls
        off = 90.0 if kind == "loop" else 180.0
        centre = feature_heading(kind, bearing) + off + rng.uniform(-10, 10)
        passes = 3
    elif c["profile"] == "backforth":
        arc = 360.0
        centre = rng.uniform(0, 360)
        passes = 2 * c["turns"]
    else:
        raise ValueError(c["profile"])
    period = 2 * arc / rate
    dur = passes * arc / rate
    lo = centre - arc / 2

    def h(t):
        ph = np.mod(t, period) / period
        tri = np.where(ph < 0.5, 2 * ph, 2 - 2 * ph)
        return lo + arc * tri

    return h, dur, dict(kind=c["profile"], centre_deg=centre % 360.0, arc_deg=arc, rate_deg_s=rate)


def morse_envelope(t, wpm, rng):
    """On/off keying of "N0CALL" repeated, ITU-R M.1677-1 Annex 1 §2 timing
    (dash 3 dots, 1 dot inside a character, 3 between letters, 7 between
    words; dot = 1.2/wpm s), starting at a random point of the cycle."""
    code = {"N": "-.", "0": "-----", "C": "-.-.", "A": ".-", "L": ".-.."}
    units = []
    for w in ["N0CALL"]:
        for i, ch in enumerate(w):
            for j, el in enumerate(code[ch]):
                units += [1] * (3 if el == "-" else 1)
                if j < len(code[ch]) - 1:
                    units += [0]
            if i < len(w) - 1:
                units += [0] * 3
        units += [0] * 7
    units = np.array(units, dtype=float)
    dot = 1.2 / wpm
    cyc = len(units) * dot
    ph = np.mod(t + rng.uniform(0, cyc), cyc)
    return units[np.minimum((ph / dot).astype(int), len(units) - 1)]


def gr_fading(n, fdts, los, k, seed):
    tb = gr.top_block()
    one = analog.sig_source_c(1.0, analog.GR_CONST_WAVE, 0, 1.0, 0)
    fade = channels.fading_model(8, fdts, los, k, seed)
    head = blocks.head(gr.sizeof_gr_complex, n)
    snk = blocks.vector_sink_c()
    tb.connect(one, fade, head, snk)
    tb.run()
    return np.array(snk.data(), dtype=np.complex64)


def gr_readings(sig, seed, clip_scale):
    """Signal + GNU Radio noise, optionally through 8-bit rails, read as
    mean power over M samples; also the count of railed samples per reading."""
    n = len(sig)
    tb = gr.top_block()
    src = blocks.vector_source_c(sig, False)
    noise = analog.noise_source_c(analog.GR_GAUSSIAN, 1.0, seed)
    add = blocks.add_cc()
    head = blocks.head(gr.sizeof_gr_complex, n)
    tb.connect(src, (add, 0))
    tb.connect(noise, (add, 1))
    tb.connect(add, head)
    last = head
    rails = None
    if clip_scale:
        # cu8 like an RTL-SDR: u = clamp(round(x*127.5/fs + 127.5), 0, 255)
        # (float_to_uchar rounds to the nearest integer and clamps to 0..255)
        c2f = blocks.complex_to_float()
        gi = blocks.multiply_const_ff(127.5 / clip_scale)
        gq = blocks.multiply_const_ff(127.5 / clip_scale)
        bi = blocks.add_const_ff(127.5)
        bq = blocks.add_const_ff(127.5)
        qi = blocks.float_to_uchar()
        qq = blocks.float_to_uchar()
        ui = blocks.uchar_to_float()
        uq = blocks.uchar_to_float()
        si = blocks.add_const_ff(-127.5)
        sq = blocks.add_const_ff(-127.5)
        f2c = blocks.float_to_complex()
        scale = blocks.multiply_const_cc(clip_scale / 127.5)
        tb.connect(head, c2f)
        tb.connect((c2f, 0), gi, bi, qi, ui, si, (f2c, 0))
        tb.connect((c2f, 1), gq, bq, qq, uq, sq, (f2c, 1))
        tb.connect(f2c, scale)
        last = scale
        ri = blocks.vector_sink_f()
        rq = blocks.vector_sink_f()
        tb.connect(ui, ri)
        tb.connect(uq, rq)
        rails = (ri, rq)
    mag = blocks.complex_to_mag_squared()
    integ = blocks.integrate_ff(M)
    snk = blocks.vector_sink_f()
    tb.connect(last, mag, integ, snk)
    tb.run()
    p = np.array(snk.data(), dtype=np.float64) / M
    clip = np.zeros(len(p))
    if rails:
        ui = np.array(rails[0].data())
        uq = np.array(rails[1].data())
        at = ((ui <= 0) | (ui >= 255) | (uq <= 0) | (uq >= 255)).astype(float)
        clip = at[: len(p) * M].reshape(len(p), M).sum(axis=1)
    return p, clip


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--condition", required=True, choices=sorted(CONDITIONS))
    ap.add_argument("--trials", type=int, default=50)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--out", required=True)
    a = ap.parse_args()
    c = condition_defaults(CONDITIONS[a.condition])
    os.makedirs(a.out, exist_ok=True)
    rng = np.random.default_rng(a.seed)
    amp = math.sqrt(10.0 ** (c["snr"] / 10.0))
    rows = []
    log_t, log_h = [], []
    trials = []
    t0 = 0.0
    for k in range(a.trials):
        kind = c["patterns"][k % len(c["patterns"])]
        bearing = float(rng.uniform(0, 360))
        hfun, dur, prof = profile(c, rng, kind, bearing)
        n = int(round(dur * FS / M)) * M
        t = np.arange(n) / FS
        e = field(kind, bearing - hfun(t), c)
        info = dict(pattern=kind, bearing_deg=bearing, profile=prof)
        if c["reflection_db"] > 0:
            b2 = (bearing + (90.0 if rng.uniform() < 0.5 else -90.0)) % 360.0
            psi = float(rng.uniform(0, 2 * math.pi))
            rho = 10.0 ** (-c["reflection_db"] / 20.0)
            e = e + rho * np.exp(1j * psi) * field(kind, b2 - hfun(t), c)
            info["reflection"] = dict(bearing_deg=b2, down_db=c["reflection_db"], phase_rad=psi)
        # the carrier sits CARRIER_HZ above the channel centre, so that I and Q
        # both swing (and both reach the rails when clipping)
        sig = amp * e * np.exp(2j * math.pi * CARRIER_HZ * t)
        seed = int(a.seed * 100003 + k * 7 + 1)
        if c["fading"] != "none":
            nr = n // M + 2
            los = c["fading"] == "rician"
            h = gr_fading(nr, c["fd"] * M / FS, los, c["k"] if los else 0.0, seed)
            tr = (np.arange(nr) + 0.5) * M / FS
            hi = np.interp(t, tr, h.real) + 1j * np.interp(t, tr, h.imag)
            sig = sig * hi
            info["fading"] = dict(model=c["fading"], doppler_hz=c["fd"], k_linear=c["k"] if los else 0.0)
        key = np.ones(n)
        if c["keyed"]:
            key = morse_envelope(t, c["wpm"], rng)
            sig = sig * key
            info["keyed_wpm"] = c["wpm"]
        clip_scale = 0.0
        if c["clip"]:
            # full scale at the carrier amplitude that half the readings exceed
            clip_scale = float(np.quantile(np.abs(amp * e), 0.5)) + 3.0 / math.sqrt(2.0)
            info["clip_full_scale"] = clip_scale
        p, clip = gr_readings(sig.astype(np.complex64), seed + 3, clip_scale)
        nread = len(p)
        tread = t0 + (np.arange(nread) + 0.5) * M / FS
        kd = key[: nread * M].reshape(nread, M).mean(axis=1)
        lvl = 10.0 * np.log10(np.maximum(p, 1e-12))
        first = len(rows)
        rows.append(np.stack([tread, lvl, clip, kd], axis=1))
        # heading log: 20 Hz over the trial, value of the true heading at
        # (stamp - lag), noise, minus the declination for a magnetic log
        tl = np.arange(0.0, dur + 1e-9, 1.0 / LOG_HZ)
        hl = hfun(tl - c["lag"]) + rng.normal(0, c["heading_noise"], len(tl)) - c["declination"]
        log_t.append(t0 + tl)
        log_h.append(np.mod(hl, 360.0))
        info.update(start_s=t0, end_s=t0 + dur, reading_first=int(sum(len(r) for r in rows[:-1])), readings=int(nread))
        del first
        trials.append(info)
        t0 += dur + GAP_S
    data = np.concatenate(rows).astype("<f4")
    data.tofile(os.path.join(a.out, "levels.f32"))
    with open(os.path.join(a.out, "headings.csv"), "w") as f:
        f.write("seconds,heading_deg\n")
        for tl, hl in zip(log_t, log_h):
            for x, y in zip(tl, hl):
                f.write("%.3f,%.3f\n" % (x, y))
    cond = dict(c)
    cond["patterns"] = list(c["patterns"])
    truth = dict(
        condition=a.condition,
        settings=cond,
        sample_rate=FS,
        samples_per_reading=M,
        heading_log_hz=LOG_HZ,
        seed=a.seed,
        gnuradio=gr.version(),
        trials=trials,
    )
    with open(os.path.join(a.out, "truth.json"), "w") as f:
        json.dump(truth, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
