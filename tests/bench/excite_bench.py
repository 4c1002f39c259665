#!/usr/bin/python3
"""benchid excite against NumPy/SciPy making the same signals, side by side.

Run on demand with Debian's python3-scipy:
    /usr/bin/python3 tests/bench/excite_bench.py [--minutes 10] [--repeat 3] [--exe build/cli/benchid]

Signals at 48 kHz, `--minutes` long:
  multisine  log-spaced lines 10 Hz-20 kHz, 1 Hz resolution, Schroeder phases.
             benchid: whole process writing 24-bit FLAC and WAV.
             NumPy: irfft of one period + np.tile, in-process, no file written
             (SciPy has no FLAC writer; the WAV is written with scipy.io.wavfile).
  logchirp   10 Hz-20 kHz exponential sweep, one sweep over the whole length.
             benchid: whole process writing WAV; SciPy: scipy.signal.chirp +
             scipy.io.wavfile.write (int32), in-process.
Prints medians and the time per million samples. Files go to a temporary
directory and are deleted.
"""
import argparse
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

RATE = 48000


def timed(cmd):
    t0 = time.perf_counter()
    p = subprocess.run(cmd, capture_output=True, text=True)
    if p.returncode != 0:
        sys.exit(f"failed: {' '.join(cmd)}\n{p.stderr}")
    return time.perf_counter() - t0


def numpy_multisine(n, path):
    t0 = time.perf_counter()
    period = RATE  # 1 Hz lines
    k = np.unique(np.round(10 * (20000 / 10) ** (np.arange(0, 200) / 199)).astype(int))
    spec = np.zeros(period // 2 + 1, complex)
    f = len(k)
    i = np.arange(1, f + 1)
    spec[k] = 0.5 * np.exp(-1j * np.pi * i * (i - 1) / f) * period
    x = np.fft.irfft(spec, period)
    x *= 0.5 / np.max(np.abs(x))
    y = np.tile(x, n // period + 1)[:n]
    wavfile.write(path, RATE, (y * 2**31).astype(np.int32))
    return time.perf_counter() - t0


def scipy_chirp(n, path):
    t0 = time.perf_counter()
    t = np.arange(n) / RATE
    y = 0.5 * signal.chirp(t, 10, n / RATE, 20000, method="logarithmic", phi=-90)
    wavfile.write(path, RATE, (y * 2**31).astype(np.int32))
    return time.perf_counter() - t0


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--minutes", type=float, default=10)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--exe", default=os.path.join(os.path.dirname(__file__), "..", "..", "build", "cli", "benchid"))
    a = ap.parse_args()
    exe = os.path.abspath(a.exe)
    n = int(a.minutes * 60 * RATE)
    secs = a.minutes * 60
    med = statistics.median
    print(f"benchid excite vs NumPy {np.__version__} / SciPy {scipy.__version__}; {a.minutes:g} min at 48 kHz "
          f"= {n / 1e6:.1f} M samples; medians of {a.repeat}")
    with tempfile.TemporaryDirectory() as d:
        rows = []
        for name, args, ext, ref in [
            ("multisine FLAC", ["multisine", "--f0", "10", "--f1", "20000", "--resolution", "1", "--lines-per-decade",
                                "60", "--repeat", str(int(secs))], "flac", None),
            ("multisine WAV", ["multisine", "--f0", "10", "--f1", "20000", "--resolution", "1", "--lines-per-decade",
                               "60", "--repeat", str(int(secs))], "wav", numpy_multisine),
            ("logchirp WAV", ["logchirp", "--f0", "10", "--f1", "20000", "--duration", str(secs)], "wav", scipy_chirp),
        ]:
            bi, py = [], []
            for _ in range(a.repeat):
                bi.append(timed([exe, "excite"] + args + ["--rate", str(RATE), "-q", "-o", os.path.join(d, "x." + ext)]))
                if ref:
                    py.append(ref(n, os.path.join(d, "ref.wav")))
            b = med(bi)
            line = f"{name:<15} benchid {b:6.2f} s ({b / n * 1e6 * 1000:6.1f} ms per M samples)"
            if py:
                p = med(py)
                line += f" | python {p:6.2f} s | ratio {b / p:4.2f}"
            rows.append(line)
            print(line, flush=True)


if __name__ == "__main__":
    main()
