#!/usr/bin/python3
"""benchid frf against SciPy on the same data, side by side in one run.

Run on demand (not part of the test suite), with Debian's python3-scipy:
    /usr/bin/python3 tests/bench/frf_bench.py [--rows 5000000] [--repeat 5] [--exe build/cli/benchid]

For each record length it generates a two-channel record (white noise through
a 2nd-order low-pass plus output noise, fs = 10 kHz) as a CSV with a time
column, and the same two channels as .npy. It then times, alternating runs:
  benchid   whole process: `benchid frf big.csv --segment 8192` (Hann, 50 %
            overlap, mean detrend) reading the CSV, writing the FRF CSV; on
            every core (default) and with --threads 1;
  scipy     np.load of the .npy plus welch(u), welch(y), csd(u, y) and the
            coherence from them, with the same window, segment, overlap and
            detrend (in-process time, and whole-process time including the
            interpreter start);
  cat       reading the CSV bytes to /dev/null (the floor for any CSV reader).
It prints medians, the ratio benchid/scipy, the CSV throughput and benchid's
peak resident memory (from wait4), and checks that benchid's coherence agrees
with SciPy's. Data files go to a temporary directory and are deleted.
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

FS = 10000.0
SEG = 8192

SCIPY_JOB = r"""
import sys, time, numpy as np
from scipy import signal
t0 = time.perf_counter()
d = np.load(sys.argv[1])
u = np.ascontiguousarray(d[:, 0]); y = np.ascontiguousarray(d[:, 1])
kw = dict(fs=%r, window='hann', nperseg=%d, noverlap=%d, detrend='constant')
f, pxx = signal.welch(u, **kw)
_, pyy = signal.welch(y, **kw)
_, pxy = signal.csd(u, y, **kw)
coh = np.abs(pxy) ** 2 / (pxx * pyy)
t1 = time.perf_counter()
np.save(sys.argv[2], np.column_stack([f, coh, (pxy / pxx).real, (pxy / pxx).imag]))
print(t1 - t0)
""" % (FS, SEG, SEG // 2)


def make_data(d, rows):
    rng = np.random.default_rng(20261202)
    u = rng.standard_normal(rows)
    b, a = signal.butter(2, 500, fs=FS)
    y = signal.lfilter(b, a, u) + 0.05 * rng.standard_normal(rows)
    t = np.arange(rows) / FS
    csv = os.path.join(d, "big.csv")
    with open(csv, "w") as f:
        f.write("time_s,u,y\n")
        chunk = 500000
        for s in range(0, rows, chunk):
            e = min(rows, s + chunk)
            np.savetxt(f, np.column_stack([t[s:e], u[s:e], y[s:e]]), fmt=["%.4f", "%.9g", "%.9g"], delimiter=",")
    npy = os.path.join(d, "big.npy")
    np.save(npy, np.column_stack([u, y]))
    return csv, npy


def run_timed(cmd):
    """Wall time (s) and peak RSS (MiB) of one child process.

    The RSS comes from GNU time (Debian package `time`): a child forked from
    this Python process would count this process's pages from before exec."""
    t0 = time.perf_counter()
    p = subprocess.run(["/usr/bin/time", "-f", "rss_kb=%M"] + cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    if p.returncode != 0:
        sys.exit(f"failed: {' '.join(cmd)}\n{p.stderr}")
    rss_line = [ln for ln in p.stderr.splitlines() if ln.startswith("rss_kb=")][-1]
    return wall, int(rss_line[7:]) / 1024.0, p.stdout


def bench(exe, rows, repeat, d):
    csv, npy = make_data(d, rows)
    size_mb = os.path.getsize(csv) / 1e6
    out_csv = os.path.join(d, "frf.csv")
    out_npy = os.path.join(d, "scipy.npy")
    job = os.path.join(d, "job.py")
    with open(job, "w") as f:
        f.write(SCIPY_JOB)
    bi, bi1, bi_rss, sp_in, sp_whole, sp_rss, cat = [], [], [], [], [], [], []
    for _ in range(repeat):
        w, rss, _ = run_timed([exe, "frf", csv, "--input", "u", "--output", "y", "--segment", str(SEG),
                               "-q", "-o", out_csv])
        bi.append(w)
        bi_rss.append(rss)
        w, _, _ = run_timed([exe, "frf", csv, "--input", "u", "--output", "y", "--segment", str(SEG),
                             "-q", "-o", out_csv, "--threads", "1"])
        bi1.append(w)
        w, rss, out = run_timed([sys.executable, job, npy, out_npy])
        sp_whole.append(w)
        sp_in.append(float(out))
        sp_rss.append(rss)
        w, _, _ = run_timed(["sh", "-c", f"cat '{csv}' > /dev/null"])
        cat.append(w)
    # agreement: benchid coherence vs scipy's (benchid prints 8 decimals)
    ref = np.load(out_npy)
    with open(out_csv) as f:
        rows_txt = [ln for ln in f if not ln.startswith("#")][1:]
    got = np.array([[float(v) for v in ln.split(",")[:6]] for ln in rows_txt])[:, [0, 5]]
    dc = np.max(np.abs(got[:, 1] - ref[1:, 1]))
    med = statistics.median
    return dict(rows=rows, mb=size_mb, bi=med(bi), bi1=med(bi1), bi_rss=max(bi_rss), sp_in=med(sp_in), sp_whole=med(sp_whole),
                sp_rss=max(sp_rss), cat=med(cat), coh_diff=dc)


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--rows", type=int, nargs="+", default=[1000000, 5000000])
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--exe", default=os.path.join(os.path.dirname(__file__), "..", "..", "build", "cli", "benchid"))
    a = ap.parse_args()
    exe = os.path.abspath(a.exe)
    print(f"benchid frf vs SciPy {scipy.__version__} / NumPy {np.__version__}; {os.cpu_count()} cores; "
          f"segment {SEG}, Hann, 50 % overlap; medians of {a.repeat} alternating runs")
    print(f"{'rows':>9} {'CSV MB':>7} {'benchid s':>9} {'1 thr s':>7} {'MB/s':>6} {'peak MiB':>8} | {'scipy s':>8} "
          f"{'(+start)':>8} {'peak MiB':>8} | {'ratio':>5} {'cat s':>6} | coh diff")
    with tempfile.TemporaryDirectory() as d:
        for rows in a.rows:
            r = bench(exe, rows, a.repeat, d)
            print(f"{r['rows']:>9} {r['mb']:>7.1f} {r['bi']:>9.3f} {r['bi1']:>7.3f} {r['mb'] / r['bi']:>6.0f} {r['bi_rss']:>8.1f} | "
                  f"{r['sp_in']:>8.3f} {r['sp_whole']:>8.3f} {r['sp_rss']:>8.1f} | {r['bi'] / r['sp_in']:>5.2f} "
                  f"{r['cat']:>6.3f} | {r['coh_diff']:.1e}")
    print("ratio = benchid whole-process time (every core) / SciPy in-process time (load .npy + spectra + coherence)")


if __name__ == "__main__":
    main()
