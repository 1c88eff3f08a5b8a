#!/usr/bin/python3
"""scipy.signal.welch reference for nullseek's SpectrumAverager.

    cd testdata/dsp && /usr/bin/python3 make_spectrum_ref.py

Writes spectrum_in.cf32 (3000 complex float32 samples, interleaved I,Q) and
spectrum_ref.json: scipy 1.10 welch(x, fs=rate, window='hann', nperseg=256,
noverlap=128, detrend=False, return_onesided=False, scaling='spectrum'),
i.e. Hann-windowed 50 %-overlap frames, |X|²/(Σw)² averaged in linear power,
given fftshifted (centred) with the frequencies in Hz.
"""
import json

import numpy as np
import scipy
from scipy import signal

rate = 48000.0
n = 3000
nfft = 256
rng = np.random.default_rng(7)
t = np.arange(n) / rate
x = (0.8 * np.exp(2j * np.pi * 5437.0 * t) + 0.01 * np.exp(-2j * np.pi * 12000.0 * t)
     + 0.003 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))).astype(np.complex64)
f, p = signal.welch(x, fs=rate, window="hann", nperseg=nfft, noverlap=nfft // 2,
                    detrend=False, return_onesided=False, scaling="spectrum")
f = np.fft.fftshift(f)
p = np.fft.fftshift(p)
x.tofile("spectrum_in.cf32")
with open("spectrum_ref.json", "w") as fh:
    json.dump({"scipy_version": scipy.__version__, "rate": rate, "nfft": nfft,
               "freq_hz": [float(v) for v in f], "power": [float(v) for v in p]}, fh, indent=1)
    fh.write("\n")
