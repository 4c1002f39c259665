#!/usr/bin/python3
"""Reference zeros, gains and discrete models at high order, from SciPy.

Run with Debian's python3-scipy (the committed file came from the SciPy and
NumPy versions named in its first line):   /usr/bin/python3 make_zeros_reference.py

Models of order 6, 10, 16, 24 and 40 (seeded; complex pairs with natural
frequencies log-spaced over 5 Hz .. 2 kHz, damping 0.01 .. 0.3, residues
scaled by the pole magnitude), half of them with a direct term. Each is put
in benchid's modal state-space form (blocks [[a, b], [-b, a]], B = [2, 0],
C = [Re r, Im r]) and:
  zeros   scipy.linalg.eig(M, N) of the pencil M = [[A/w0, B], [C/w0, D]],
          N = [[I, 0], [0, 0]] with w0 the largest pole magnitude (frequency
          scaling), finite eigenvalues (|beta| > 1e-12 |alpha|) times w0;
          not scipy.signal.ss2zpk, which goes through polynomials
  gain    the first Markov parameter: D, or else C B (relative degree 1)
  tustin  scipy.signal.cont2discrete((A, B, C, D), T, method='bilinear'),
          its response C (zI - Ad)^-1 Bd + Dd on the unit circle, and its
          zeros from the same pencil (unscaled, in z)
  zoh     scipy.signal.cont2discrete(..., method='zoh'), response likewise
  sos     scipy.signal.zpk2sos of the Tustin zeros, poles and gain, and the
          cascade's response by scipy.signal.sosfreqz
Writes zeros_reference.txt next to this script.
"""
import os

import numpy as np
import scipy
import scipy.linalg
from scipy import signal

here = os.path.dirname(os.path.abspath(__file__))
rng = np.random.default_rng(20261203)
T = 1.0 / 20000.0
freqs_hz = [1.0, 7.3, 31.0, 120.0, 480.0, 1500.0, 4200.0]


def modal(poles, residues, d):
    n = len(poles)
    a = np.zeros((n, n))
    b = np.zeros((n, 1))
    c = np.zeros((1, n))
    k = 0
    for p, r in zip(poles, residues):
        if p.imag <= 0:
            continue
        a[k, k], a[k, k + 1], a[k + 1, k], a[k + 1, k + 1] = p.real, p.imag, -p.imag, p.real
        b[k, 0] = 2.0
        c[0, k], c[0, k + 1] = r.real, r.imag
        k += 2
    return a, b, c, np.array([[d]])


def pencil_zeros(a, b, c, d, w0):
    n = a.shape[0]
    m = np.block([[a / w0, b], [c / w0, d]])
    e = np.zeros((n + 1, n + 1))
    e[:n, :n] = np.eye(n)
    ab = scipy.linalg.eig(m, e, right=False, homogeneous_eigvals=True)
    alpha, beta = ab[0], ab[1]
    keep = np.abs(beta) > 1e-12 * np.abs(alpha)
    return alpha[keep] / beta[keep] * w0


def dresp(ad, bd, cd, dd, f):
    z = np.exp(1j * 2 * np.pi * f * T)
    x = np.linalg.solve(z * np.eye(ad.shape[0]) - ad, bd)
    return (cd @ x + dd)[0, 0]


with open(os.path.join(here, "zeros_reference.txt"), "w") as out:
    out.write(f"# scipy {scipy.__version__} numpy {np.__version__}: see make_zeros_reference.py\n")
    for order in [6, 10, 16, 24, 40]:
        for with_d in [False, True]:
            m = order // 2
            fn = np.logspace(np.log10(5.0), np.log10(2000.0), m) * np.exp(rng.uniform(-0.1, 0.1, m))
            zeta = np.exp(rng.uniform(np.log(0.01), np.log(0.3), m))
            wn = 2 * np.pi * fn
            pu = -zeta * wn + 1j * wn * np.sqrt(1 - zeta**2)
            ru = (rng.normal(size=m) + 1j * rng.normal(size=m)) * np.abs(pu) * 0.1
            poles = np.concatenate([[p, np.conj(p)] for p in pu])
            residues = np.concatenate([[r, np.conj(r)] for r in ru])
            d = 0.37 if with_d else 0.0
            a, b, c, dm = modal(poles, residues, d)
            w0 = np.max(np.abs(poles))
            z = pencil_zeros(a, b, c, dm, w0)
            gain = d if with_d else (c @ b)[0, 0]
            out.write(f"model {order} {int(with_d)}\n")
            for p, r in zip(poles, residues):
                out.write(f"pole {p.real:.17g} {p.imag:.17g} {r.real:.17g} {r.imag:.17g}\n")
            out.write(f"direct {d:.17g}\n")
            for zi in z:
                out.write(f"zero {zi.real:.17g} {zi.imag:.17g}\n")
            out.write(f"gain {gain:.17g}\n")
            ad, bd, cd, dd, _ = signal.cont2discrete((a, b, c, dm), T, method="bilinear")
            out.write(f"sample_time {T:.17g}\n")
            for f in freqs_hz:
                h = dresp(ad, bd, cd, dd, f)
                out.write(f"tustin {f:.17g} {h.real:.17g} {h.imag:.17g}\n")
            zt = pencil_zeros(ad, bd, cd, dd, 1.0)
            for zi in zt:
                out.write(f"tustin_zero {zi.real:.17g} {zi.imag:.17g}\n")
            az, bz, cz, dz, _ = signal.cont2discrete((a, b, c, dm), T, method="zoh")
            for f in freqs_hz:
                h = dresp(az, bz, cz, dz, f)
                out.write(f"zoh {f:.17g} {h.real:.17g} {h.imag:.17g}\n")
            pt = np.linalg.eigvals(ad)
            kt = dd[0, 0] if with_d else None
            # the Tustin gain: H_d at z = -1 ... is not defined with zeros there; use H_d at z = 1 (DC)
            h1 = dresp(ad, bd, cd, dd, 0.0)
            kt = (h1 * np.prod(1 - pt) / np.prod(1 - zt)).real
            sos = signal.zpk2sos(zt, pt, kt)
            w = 2 * np.pi * np.array(freqs_hz) * T
            _, hs = signal.sosfreqz(sos, worN=w)
            for f, h in zip(freqs_hz, hs):
                out.write(f"sos {f:.17g} {h.real:.17g} {h.imag:.17g}\n")
            out.write("end\n")
print("scipy", scipy.__version__, "numpy", np.__version__)
