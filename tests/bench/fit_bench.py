#!/usr/bin/python3
"""Vector fitting: benchid against a NumPy implementation, side by side.

Run on demand (needs the build; Debian's python3-numpy):
    /usr/bin/python3 tests/bench/fit_bench.py [--build build] [--repeat 5]

For 1k, 5k and 20k lines of the same synthetic order-30 FRF (written by
benchid_bench_fit), and for 5k lines at orders 10, 30 and 60, it times a
whole benchid fit (relaxed vector fitting with default options, until it
converges or 50 iterations; in-process, one core) and 10 iterations of a
plain NumPy version of the same real-valued iteration (numpy.linalg.lstsq
with column scaling; classic, not relaxed: the same matrix size), both on
one thread. It prints medians, benchid's time per line (flat when the cost
is linear in lines) and the ratio of the time per iteration. Last, the
whole `fit --order auto` (5k noisy lines of the order-30 plant) on one thread
and on every core, against the fit with the chosen order given.
"""
import argparse
import os
import statistics
import subprocess
import tempfile
import time

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # one core, like benchid (before NumPy loads)
os.environ.setdefault("OMP_NUM_THREADS", "1")
import numpy as np  # noqa: E402


def numpy_vf_iteration(s, f, w, poles):
    real_p = poles[np.abs(poles.imag) == 0].real
    cplx_p = poles[poles.imag > 0]
    cols = [1 / (s - a) for a in real_p]
    for a in cplx_p:
        cols.append(1 / (s - a) + 1 / (s - np.conj(a)))
        cols.append(1j / (s - a) - 1j / (s - np.conj(a)))
    phi = np.array(cols).T
    a_mat = np.hstack([phi, np.ones((len(s), 1)), -f[:, None] * phi]) * w[:, None]
    ar = np.vstack([a_mat.real, a_mat.imag])
    br = np.concatenate([(w * f).real, (w * f).imag])
    scale = np.linalg.norm(ar, axis=0)
    sol = np.linalg.lstsq(ar / scale, br, rcond=None)[0] / scale
    ct = sol[-phi.shape[1]:]
    n = phi.shape[1]
    am = np.zeros((n, n))
    b = np.zeros(n)
    i = 0
    for a in real_p:
        am[i, i], b[i] = a, 1
        i += 1
    for a in cplx_p:
        am[i:i + 2, i:i + 2] = [[a.real, a.imag], [-a.imag, a.real]]
        b[i:i + 2] = [2, 0]
        i += 2
    z = np.linalg.eigvals(am - np.outer(b, ct))
    z = np.where(z.real > 0, -np.conj(z), z)
    zr = np.sort(z[np.abs(z.imag) < 1e-9 * np.abs(z)].real)
    zc = z[z.imag > 1e-9 * np.abs(z)]
    return np.concatenate([zr.astype(complex), np.sort_complex(zc)])


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--build", default=os.path.join(os.path.dirname(__file__), "..", "..", "build"))
    ap.add_argument("--repeat", type=int, default=5)
    a = ap.parse_args()
    exe = os.path.abspath(os.path.join(a.build, "tests", "bench", "benchid_bench_fit"))
    print(f"vector fitting of an order-30 plant, medians of {a.repeat}; NumPy {np.__version__}; one thread each")
    print(f"{'lines':>6} {'order':>5} | {'benchid fit ms':>14} {'iters':>5} {'ms/iter':>8} {'us/line':>8} | "
          f"{'numpy 10 iters ms':>17} {'ms/iter':>8} | ratio/iter")
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    with tempfile.TemporaryDirectory() as d:
        for lines, order in ((1000, 30), (5000, 30), (20000, 30), (5000, 10), (5000, 60)):
            dump = os.path.join(d, "frf.csv")
            out = subprocess.run([exe, str(lines), str(order), str(a.repeat), dump], capture_output=True, text=True,
                                 check=True, env=env).stdout.split()
            b_iters, b_ms, b_it = int(out[2]), float(out[3]), float(out[4])
            data = np.loadtxt(dump, delimiter=",")
            s = 2j * np.pi * data[:, 0]
            f = data[:, 1] + 1j * data[:, 2]
            w = 1 / np.abs(f)
            times = []
            for _ in range(a.repeat):
                beta = 2 * np.pi * np.logspace(0, 4, order // 2)
                poles = np.concatenate([-beta / 100 + 1j * beta])
                t0 = time.perf_counter()
                for _ in range(10):
                    poles = numpy_vf_iteration(s, f, w, poles)
                times.append((time.perf_counter() - t0) * 1e3)
            p_ms = statistics.median(times)
            print(f"{lines:>6} {order:>5} | {b_ms:>14.2f} {b_iters:>5} {b_it:>8.3f} {b_ms / lines * 1e3:>8.2f} | {p_ms:>17.2f} "
                  f"{p_ms / 10:>8.3f} | {b_it / (p_ms / 10):.2f}", flush=True)
    out = subprocess.run([exe, "5000", "sweep", "20", str(max(3, a.repeat))], capture_output=True, text=True,
                         check=True).stdout.split()
    print(f"fit --order auto on {out[0]} noisy lines (chose {out[2]} poles): one thread {float(out[3]):.0f} ms, "
          f"all {os.cpu_count()} cores {float(out[4]):.0f} ms; the chosen order given {float(out[5]):.0f} ms; "
          f"auto / given {float(out[6]):.1f} (target 3)")


if __name__ == "__main__":
    main()
