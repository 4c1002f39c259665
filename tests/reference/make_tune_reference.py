#!/usr/bin/env python3
"""Reference values for the tune tests: MIGO PI controllers computed with SciPy.

MIGO (Astrom, Panagopoulos & Hagglund, Automatica 34(5), 1998): maximise the
integral gain ki of C = kp + ki/s subject to |1 + C P| >= 1/Ms at every
frequency, in the region connected to kp = ki = 0 (which keeps the loop
stable). For fixed kp the constraint at each frequency is a quadratic in ki,
so ki_max(kp) is exact on the frequency grid; ki_max is then maximised over
kp with scipy.optimize.minimize_scalar. An implementation independent of
benchid's search (which parameterises by crossover and shape).

Plants: members of the test batch of Astrom & Hagglund, Advanced PID Control,
ISA 2006, sec. 7 (from memory): e^{-Ls}/(1+s), 1/(1+s)^n,
1/((1+s)(1+as)(1+a^2 s)(1+a^3 s)), (1-as)/(1+s)^3, e^{-s}/(1+s)^2; repeated
poles split 2 % apart (see lags()), the same plants the test builds. 1/(1+s)^8
is left out: split 2 % apart its pole-residue form loses all precision.

Writes tune_reference.txt: name, Ms, kp, ki. Run with Debian's python3-scipy;
the version used is written in the file's header.
"""
import numpy as np
import scipy
from scipy.optimize import minimize_scalar

W = np.logspace(-3, 2.5, 40000)  # rad/s
S = 1j * W

def lags(n, spread=0.02):
    """n lags with poles at -(1 + spread i): (1+s)^n with its repeated pole
    split 2 % apart, so that benchid's pole-residue form can hold it."""
    p = np.ones_like(S)
    for i in range(n):
        a = 1 + spread * i
        p = p * a / (S + a)
    return p


PLANTS = {
    "fotd_L0.1": np.exp(-0.1 * S) / (1 + S),
    "fotd_L0.3": np.exp(-0.3 * S) / (1 + S),
    "fotd_L1": np.exp(-1.0 * S) / (1 + S),
    "fotd_L3": np.exp(-3.0 * S) / (1 + S),
    "lag3": lags(3),
    "lag4": lags(4),
    "four_lags_a0.5": 1 / ((1 + S) * (1 + 0.5 * S) * (1 + 0.25 * S) * (1 + 0.125 * S)),
    "nmp_a0.5": (1 - 0.5 * S) * lags(3),
    "sotd_L1": np.exp(-1.0 * S) * lags(2),
}


def ki_max(p, kp, r):
    a = 1 + kp * p
    if np.any(np.abs(a) < r):
        return 0.0
    b = p / S
    qa = np.abs(b) ** 2
    qb = 2 * np.real(a * np.conj(b))
    qc = np.abs(a) ** 2 - r * r
    disc = qb * qb - 4 * qa * qc
    ok = disc > 0
    x1 = (-qb[ok] - np.sqrt(disc[ok])) / (2 * qa[ok])
    x2 = (-qb[ok] + np.sqrt(disc[ok])) / (2 * qa[ok])
    lower = x1[x2 > 0]
    return float(lower.min()) if lower.size else np.inf


def migo(p, ms):
    r = 1 / ms
    # the kp interval connected to 0 where ki = 0 meets the constraint
    kps = np.linspace(0, 20, 2001)[1:]
    feasible = [kp for kp in kps if np.all(np.abs(1 + kp * p) >= r)]
    top = kps[0]
    for kp in kps:
        if np.all(np.abs(1 + kp * p) >= r):
            top = kp
        else:
            break
    grid = np.linspace(top / 200, top, 200)
    vals = [ki_max(p, kp, r) for kp in grid]
    i = int(np.argmax(vals))
    lo, hi = grid[max(i - 1, 0)], grid[min(i + 1, len(grid) - 1)]
    res = minimize_scalar(lambda kp: -ki_max(p, kp, r), bounds=(lo, hi), method="bounded",
                          options={"xatol": 1e-7})
    return res.x, -res.fun


def main():
    with open("tune_reference.txt", "w") as f:
        f.write(f"# MIGO PI reference (make_tune_reference.py), scipy {scipy.__version__}, numpy {np.__version__}\n")
        f.write("# name ms kp ki\n")
        for name, p in PLANTS.items():
            for ms in (1.4, 2.0):
                kp, ki = migo(p, ms)
                f.write(f"{name} {ms} {kp:.8g} {ki:.8g}\n")
                print(name, ms, kp, ki)


if __name__ == "__main__":
    main()
