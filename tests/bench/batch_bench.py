#!/usr/bin/python3
"""benchid batch with the order chosen automatically against the same batch with it given.

Run on demand (needs the build; Debian's python3-scipy):
    /usr/bin/python3 tests/bench/batch_bench.py [--build build] [--units 40] [--repeat 3]

Makes UNITS small invented units (a belt-axis-like plant: DC gain 30-40,
a first-order pole near 8 Hz, a light pair near 30 Hz with zeta 0.03-0.06,
a 1 ms delay; 20 s of white-noise drive at 2 kHz, output noise at about
30 dB SNR; seeds 1..UNITS), simulated with scipy.signal (ZOH), and runs
`benchid batch` on one job twice: the order column empty (auto, delay
estimated) and the order given as 3 (delay estimated). Prints the median
wall time of each and the ratio (target: at most 1.5).
"""
import argparse
import os
import statistics
import subprocess
import tempfile
import time

import numpy as np
import scipy
import scipy.signal as sg


def make_unit(path, seed, fs=2000.0, seconds=20.0):
    rng = np.random.default_rng(seed)
    k = rng.uniform(30, 40)
    wp = 2 * np.pi * rng.uniform(7, 9)
    wn = 2 * np.pi * rng.uniform(28, 33)
    z = rng.uniform(0.03, 0.06)
    num = [k * wp * wn * wn]
    den = np.polymul([1, wp], [1, 2 * z * wn, wn * wn])
    b, a, _ = sg.cont2discrete((num, den), 1 / fs, "zoh")
    n = int(fs * seconds)
    u = rng.standard_normal(n)
    delay = int(round(1e-3 * fs))
    y = sg.lfilter(b.ravel(), a, np.concatenate([np.zeros(delay), u[:-delay]]))
    y += rng.normal(0, np.std(y) * 10 ** (-30 / 20), n)
    t = np.arange(n) / fs
    np.savetxt(path, np.c_[t, u, y], delimiter=",", header="time_s,drive_v,speed_rads", comments="",
               fmt="%.9g")


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--build", default=os.path.join(os.path.dirname(__file__), "..", "..", "build"))
    ap.add_argument("--units", type=int, default=40)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    exe = os.path.abspath(os.path.join(a.build, "cli", "benchid"))
    with tempfile.TemporaryDirectory() as d:
        os.makedirs(os.path.join(d, "logs"))
        for i in range(1, a.units + 1):
            make_unit(os.path.join(d, "logs", f"U-{i:04d}.csv"), i)
        times = {}
        for label, order in (("auto", ""), ("given", "3")):
            man = os.path.join(d, f"{label}.csv")
            with open(man, "w") as f:
                f.write("unit,record,input,output,order\n")
                for i in range(1, a.units + 1):
                    f.write(f"U-{i:04d},logs/U-{i:04d}.csv,drive_v,speed_rads,{order}\n")
            ts = []
            for _ in range(a.repeat):
                out = os.path.join(d, f"{label}.jsonl")
                if os.path.exists(out):
                    os.remove(out)
                t0 = time.perf_counter()
                r = subprocess.run([exe, "batch", man, "-o", out, "-q"], capture_output=True, text=True)
                if r.returncode not in (0, 3):
                    raise SystemExit(f"benchid batch failed ({r.returncode}): {r.stderr.strip()}")
                ts.append(time.perf_counter() - t0)
            times[label] = statistics.median(ts)
            orders = []
            with open(os.path.join(d, f"{label}.jsonl")) as f:
                for line in f:
                    if '"order":' in line:
                        orders.append(int(line.split('"order":')[1].split(",")[0]))
            print(f"{label:>5}: median {times[label]:.2f} s over {a.repeat} runs, {a.units} units "
                  f"(orders: {sorted(set(orders))})")
    print(f"auto / given: {times['auto'] / times['given']:.2f} (target 1.5); SciPy {scipy.__version__} "
          f"made the data")


if __name__ == "__main__":
    main()
