#!/usr/bin/python3
"""`benchid demo` timed per stage, beside SciPy doing the steps it has on the same data.

Run on demand (not part of the test suite), after a build with tests
(tools/test.sh or cmake -DBENCHID_TESTS=ON), with Debian's python3-scipy:
    /usr/bin/python3 tests/bench/demo_bench.py [--repeat 7] [--build build]

It prints
  1. the median time per stage of benchid's report pipeline on each bundled
     demo scenario (tests/bench/demo_bench.cc, in one process);
  2. the median wall time of the whole `benchid demo` process (target < 3 s);
  3. for the steps SciPy has, the same step done with NumPy/SciPy on the same
     recording, in-process, and the ratio benchid / SciPy:
       read    np.loadtxt of the CSV / scipy.io.wavfile.read of the WAV,
       frf     H1 from scipy.signal.welch + csd (belt axis), the indirect
               estimate csd(r, y) / csd(r, u) (pump), synchronous averaging of
               the sweep periods with numpy.fft (voice coil), with the same
               window, segment and overlap benchid chose,
       replay  the fitted model's response applied to the samples
               (scipy.signal.freqs_zpk on the rfft grid, delay as a phase).
     benchid's frf time includes reading the file; compare it with read + frf.
     SciPy has no vector fitting and no loop-margin routine: those stages are
     benchid's alone.
"""
import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np
import scipy
from scipy import signal
from scipy.io import wavfile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
DATA = os.path.join(ROOT, "datasets_demo")


def timed(fn, repeat):
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def read_csv(path):
    return np.loadtxt(path, delimiter=",", comments="#", skiprows=2)


def model_response(model, f_hz):
    z = np.array([complex(*q) for q in model["zeros"]])
    p = np.array([complex(*q) for q in model["poles"]])
    w = 2 * np.pi * f_hz
    _, h = signal.freqs_zpk(z, p, model["gain"], worN=w)
    return h * np.exp(-1j * w * model["delay_s"])


def replay_as_measured(model, u, rate_hz):
    """The same method as benchid's: zero-padded to a power of two >= 2N (a linear,
    not circular, convolution), the model's response applied line by line."""
    n = len(u)
    m = 1 << (2 * n - 1).bit_length()
    f = np.fft.rfftfreq(m, 1 / rate_hz)
    h = np.ones(len(f), complex) * (model["dc_gain"] if model["dc_gain"] is not None else 0)
    h[1:] = model_response(model, f[1:])
    return np.fft.irfft(np.fft.rfft(u - u.mean(), m) * h, m)[:n]


def frf_meta(path):
    meta = {}
    with open(path) as fh:
        for line in fh:
            if not line.startswith("#"):
                break
            if "=" in line:
                k, v = line[2:].strip().split("=", 1)
                meta[k] = v
    return meta


def scipy_steps(name, out_dir, repeat):
    meta = frf_meta(os.path.join(out_dir, name + ".frf.csv"))
    with open(os.path.join(out_dir, name + ".model.json")) as fh:
        model = json.load(fh)
    seg = int(meta["segment"])
    kw = dict(window="hann", nperseg=seg, noverlap=int(round(seg * float(meta["overlap"]))), detrend="constant")
    if name == "voice_coil":
        path = os.path.join(DATA, "voice_coil", "voice_coil_sweep.wav")
        t_read, (rate, x) = timed(lambda: wavfile.read(path), repeat)
        x = x.astype(float) / 2**31 if x.dtype == np.int32 else x.astype(float)
        u, y = x[:, 0], x[:, 1]

        def frf():
            per = seg
            k = len(u) // per
            uu = np.fft.rfft(u[per:k * per].reshape(k - 1, per), axis=1).mean(axis=0)
            yy = np.fft.rfft(y[per:k * per].reshape(k - 1, per), axis=1).mean(axis=0)
            return yy[1:] / uu[1:]
    else:
        path = os.path.join(DATA, name, name + "_log.csv")
        t_read, d = timed(lambda: read_csv(path), repeat)
        rate = 1 / (d[1, 0] - d[0, 0])
        if name == "pump_speed":
            r, u, y = d[:, 1], d[:, 2], d[:, 3]

            def frf():
                _, gry = signal.csd(r, y, fs=rate, **kw)
                _, gru = signal.csd(r, u, fs=rate, **kw)
                return gry / gru
        else:
            u, y = d[:, 1], d[:, 2]

            def frf():
                _, guu = signal.welch(u, fs=rate, **kw)
                _, gyy = signal.welch(y, fs=rate, **kw)
                _, guy = signal.csd(u, y, fs=rate, **kw)
                return guy / guu
    t_frf, _ = timed(frf, repeat)
    t_rep, _ = timed(lambda: replay_as_measured(model, u, rate), repeat)
    return t_read, t_frf, t_rep


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--build", default=os.path.join(ROOT, "build"))
    a = ap.parse_args()
    exe = os.path.join(a.build, "cli", "benchid")
    bench = os.path.join(a.build, "tests", "bench", "benchid_bench_demo")
    print(f"SciPy {scipy.__version__}, NumPy {np.__version__}; {os.cpu_count()} cores; medians of {a.repeat} runs\n")
    out = subprocess.run([bench, str(a.repeat)], check=True, capture_output=True, text=True).stdout
    print(out)
    stages = {}
    for line in out.splitlines():
        parts = line.split()
        if parts and parts[0] in ("belt_axis", "voice_coil", "pump_speed"):
            stages[parts[0]] = [float(v) for v in parts[1:]]
    with tempfile.TemporaryDirectory() as tmp:
        walls = []
        for _ in range(a.repeat):
            t0 = time.perf_counter()
            subprocess.run([exe, "demo", "-o", tmp], check=True, capture_output=True)
            walls.append(time.perf_counter() - t0)
        print(f"whole `benchid demo` process (3 reports): median {statistics.median(walls):.3f} s, "
              f"min {min(walls):.3f} s, max {max(walls):.3f} s (target < 3 s)\n")
        print(f"{'scenario':<11} {'step':<22} {'benchid s':>10} {'SciPy s':>10} {'ratio':>7}")
        for name in ("belt_axis", "voice_coil", "pump_speed"):
            t_read, t_frf, t_rep = scipy_steps(name, tmp, a.repeat)
            b = stages[name]
            print(f"{name:<11} {'read + frf':<22} {b[0]:>10.4f} {t_read + t_frf:>10.4f} {b[0] / (t_read + t_frf):>7.2f}")
            print(f"{'':<11} {'  (SciPy read alone)':<22} {'':>10} {t_read:>10.4f}")
            print(f"{'':<11} {'replay (simulation)':<22} {b[2]:>10.4f} {t_rep:>10.4f} {b[2] / t_rep:>7.2f}")
    print("\nbenchid's replay also runs the whiteness and cross-correlation tests; its frf also computes"
          " coherence, random error, distortion hints. Ratios below 1: benchid faster.")


if __name__ == "__main__":
    sys.exit(main())
