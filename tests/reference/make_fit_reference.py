#!/usr/bin/python3
"""Reference values for benchid's model-conversion tests, from scipy.signal.

Run with Debian's python3-scipy (the committed file came from SciPy 1.10.1 /
NumPy 1.24.2):   /usr/bin/python3 make_fit_reference.py

The test model (poles/residues in rad/s, direct term d):
  poles    -5, -20 +- 300j, -2 +- 1500j, -800
  residues 40, 7 +- 90j, -3 +- 25j, 1200
  d = 0.05
Writes fit_reference.txt next to this script:
  num / den   scipy.signal.invres(r, p, [d]) (descending powers)
  freqs F RE IM   scipy.signal.freqs(num, den, 2 pi F) at F Hz
  zeros RE IM     numpy.roots(num)
  zoh_rate R / zoh_u ... / zoh_y ...   scipy.signal.cont2discrete((num, den), 1/R, 'zoh')
                  then scipy.signal.dlsim on the input zoh_u (400 samples, R = 8000 Hz)
"""
import os

import numpy as np
import scipy
from scipy import signal

here = os.path.dirname(os.path.abspath(__file__))
p = np.array([-5, -20 + 300j, -20 - 300j, -2 + 1500j, -2 - 1500j, -800])
r = np.array([40, 7 + 90j, 7 - 90j, -3 + 25j, -3 - 25j, 1200])
d = 0.05
b, a = signal.invres(r, p, [d])
b, a = np.real(b), np.real(a)
f = np.array([0.1, 1, 10, 47.7, 100, 238.7, 500, 2000])
_, h = signal.freqs(b, a, 2 * np.pi * f)
z = np.roots(b)
with open(os.path.join(here, "fit_reference.txt"), "w") as out:
    out.write(f"# scipy {scipy.__version__} numpy {np.__version__}: signal.invres, signal.freqs, numpy.roots\n")
    out.write("num " + " ".join(f"{v:.17g}" for v in b) + "\n")
    out.write("den " + " ".join(f"{v:.17g}" for v in a) + "\n")
    for fi, hi in zip(f, h):
        out.write(f"freqs {fi:.17g} {hi.real:.17g} {hi.imag:.17g}\n")
    for zi in sorted(z, key=lambda v: (v.real, v.imag)):
        out.write(f"zero {zi.real:.17g} {zi.imag:.17g}\n")
    rate = 8000.0
    k = np.arange(400)
    u = np.sin(0.05 * k) + 0.5 * np.sign(np.sin(0.0031 * k * k / 40 + 0.1))
    bd, ad, _ = signal.cont2discrete((b, a), 1 / rate, method="zoh")
    _, y = signal.dlsim((np.ravel(bd), ad, 1 / rate), u)
    out.write(f"zoh_rate {rate:.17g}\n")
    out.write("zoh_u " + " ".join(f"{v:.17g}" for v in u) + "\n")
    out.write("zoh_y " + " ".join(f"{v:.17g}" for v in np.ravel(y)) + "\n")
print("scipy", scipy.__version__)

# discretisation: a third-order model at T = 1 ms (appended to fit_reference.txt)
p3 = np.array([-30, -10 + 200j, -10 - 200j])
r3 = np.array([30, -5 + 40j, -5 - 40j])
b3, a3 = signal.invres(r3, p3, [])
b3, a3 = np.real(b3), np.real(a3)
T = 1e-3
fz = np.array([0.5, 5, 31.8, 100, 300, 450])
with open(os.path.join(here, "fit_reference.txt"), "a") as out:
    for method, kw in (("zoh", {}), ("bilinear", {}), ("bilinear_prewarp", {"alpha": None})):
        if method == "bilinear_prewarp":
            # prewarped at 31.8 Hz: scipy.signal.bilinear with fs = w_p / (2 tan(w_p T / 2))
            wp = 2 * np.pi * 31.8
            fs_equiv = wp / (2 * np.tan(wp * T / 2))
            bd, ad = signal.bilinear(b3, a3, fs=fs_equiv)
        else:
            bd, ad, _ = signal.cont2discrete((b3, a3), T, method=method)
            bd = np.ravel(bd)
        _, hz = signal.freqz(bd, ad, worN=fz, fs=1 / T)
        for fi, hi in zip(fz, hz):
            out.write(f"disc {method} {fi:.17g} {hi.real:.17g} {hi.imag:.17g}\n")
