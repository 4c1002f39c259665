#!/usr/bin/python3
"""Reference values for benchid's excitation tests, computed with scipy.signal.

Run with Debian's python3-scipy (the committed file came from SciPy 1.10.1 /
NumPy 1.24.2):   /usr/bin/python3 make_excite_reference.py

Writes excite_reference.txt next to this script:
  chirp LAW F0 T1 F1 PHI_DEG T VALUE   scipy.signal.chirp(t, f0, t1, f1, method=LAW, phi=PHI_DEG)
  mls N BITS                           scipy.signal.max_len_seq(N)[0] (whole sequence, N <= 12;
                                       first 2000 bits for N = 16 and 20)
"""
import os

import numpy as np
import scipy
from scipy import signal

here = os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(here, "excite_reference.txt"), "w") as f:
    f.write(f"# scipy {scipy.__version__} numpy {np.__version__}: scipy.signal.chirp and max_len_seq\n")
    t = np.concatenate([np.array([0.0, 1.234, 5.0, 9.999]), np.linspace(0.0, 10.0, 41)[1:-1] + 0.0123])
    for law in ("linear", "logarithmic"):
        for phi in (0.0, -90.0):
            v = signal.chirp(t, 1.0, 10.0, 100.0, method=law, phi=phi)
            for ti, vi in zip(t, v):
                f.write(f"chirp {law} 1 10 100 {phi:g} {ti:.17g} {vi:.17g}\n")
    for law in ("linear", "logarithmic"):
        t2 = np.linspace(0.0, 2.0, 23)
        v = signal.chirp(t2, 2000.0, 2.0, 20.0, method=law, phi=-90.0)  # a downward sweep
        for ti, vi in zip(t2, v):
            f.write(f"chirp {law} 2000 2 20 -90 {ti:.17g} {vi:.17g}\n")
    for n in list(range(2, 13)) + [16, 20]:
        seq = signal.max_len_seq(n)[0] if n <= 16 else signal.max_len_seq(n, length=2000)[0]
        if n > 12:
            seq = seq[:2000]
        bits = "".join(str(int(b)) for b in seq)
        f.write(f"mls {n} {bits}\n")
print("scipy", scipy.__version__)
