#!/usr/bin/python3
"""Reference spectra for benchid's Welch tests, computed with scipy.signal.

Run with Debian's python3-scipy (the vectors committed here came from
SciPy 1.10.1 / NumPy 1.24.2):   /usr/bin/python3 make_welch_reference.py

Writes, next to this script:
  welch_signal.csv     the deterministic test signal x (input), y (output), fs = 1000 Hz
  welch_reference.csv  per case and bin: scipy.signal.welch(x), welch(y), csd(x, y),
                       coherence(x, y), all with scaling='density', one-sided
"""
import os

import numpy as np
import scipy
from scipy import signal

here = os.path.dirname(os.path.abspath(__file__))
fs = 1000.0
n = 8192
rng = np.random.default_rng(20261202)
t = np.arange(n) / fs
x = rng.standard_normal(n) + 0.7 * np.sin(2 * np.pi * 37.3 * t) + 0.05 * t + 0.3
b, a = signal.butter(2, [40, 120], btype="bandpass", fs=fs)
y = signal.lfilter(b, a, x) + 0.2 * rng.standard_normal(n) - 0.4 * t

# (window name in scipy, nperseg, noverlap, detrend) -- detrend False means none
cases = [
    ("hann", 256, 128, "constant"),
    ("hamming", 512, 256, "linear"),
    ("blackmanharris", 1024, 768, False),
    ("flattop", 300, 100, "constant"),
    ("boxcar", 255, 0, "linear"),
]

with open(os.path.join(here, "welch_signal.csv"), "w") as f:
    f.write("# test signal for welch_test.cc, made by make_welch_reference.py; fs = 1000 Hz\n")
    f.write("x,y\n")
    for xi, yi in zip(x, y):
        f.write(f"{xi:.17g},{yi:.17g}\n")

with open(os.path.join(here, "welch_reference.csv"), "w") as f:
    f.write(f"# scipy {scipy.__version__} numpy {np.__version__}: scipy.signal.welch/csd/coherence, "
            "scaling='density', one-sided, average='mean'\n")
    for i, (w, nper, nov, det) in enumerate(cases):
        f.write(f"# case {i}: window={w} nperseg={nper} noverlap={nov} detrend={det}\n")
    f.write("case,bin,freq_hz,pxx,pyy,pxy_re,pxy_im,cxy\n")
    for i, (w, nper, nov, det) in enumerate(cases):
        kw = dict(fs=fs, window=w, nperseg=nper, noverlap=nov, detrend=det, scaling="density")
        fr, pxx = signal.welch(x, **kw)
        _, pyy = signal.welch(y, **kw)
        _, pxy = signal.csd(x, y, **kw)
        _, cxy = signal.coherence(x, y, fs=fs, window=w, nperseg=nper, noverlap=nov, detrend=det)
        for k in range(len(fr)):
            f.write(f"{i},{k},{fr[k]:.17g},{pxx[k]:.17g},{pyy[k]:.17g},"
                    f"{pxy[k].real:.17g},{pxy[k].imag:.17g},{cxy[k]:.17g}\n")
print("scipy", scipy.__version__, "numpy", np.__version__)
