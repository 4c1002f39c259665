#!/usr/bin/env python3
"""SciPy side by side with benchid_bench_tune: MIGO PI (Ms <= 2, the only
constraint) on the 30-pole plant the benchmark writes (tune_bench_plant.model.json
in the working directory), by the exact-interval method of
tests/reference/make_tune_reference.py on a 40000-point grid.
Usage: run benchid_bench_tune first, then python3 tune_bench.py [REPEAT]."""
import json
import sys
import time

import numpy as np
import scipy

sys.path.insert(0, __file__.rsplit("/", 2)[0] + "/reference")
import make_tune_reference as ref  # noqa: E402

repeat = int(sys.argv[1]) if len(sys.argv) > 1 else 3
m = json.load(open("tune_bench_plant.model.json"))
f = np.logspace(-1, 4.5, 40000)
s = 2j * np.pi * f
p = np.zeros_like(s) + m["direct"]
for (pr, pi), (rr, ri) in zip(m["poles"], m["residues"]):
    p = p + complex(rr, ri) / (s - complex(pr, pi))
p = p * np.exp(-s * m["delay_s"])
ref.S = s
ref.W = 2 * np.pi * f
times = []
for _ in range(repeat):
    t0 = time.perf_counter()
    kp, ki = ref.migo(p, 2.0)
    times.append(time.perf_counter() - t0)
print(f"scipy {scipy.__version__}: MIGO PI (Ms 2 only), 30-pole plant  median {sorted(times)[len(times)//2]:.3f} s  "
      f"(kp {kp:.6g}, ki {ki:.6g})")
