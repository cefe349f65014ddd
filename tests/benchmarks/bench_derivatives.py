"""Benchmark: time_derivatives on 3.6 million samples × 7 columns (±20 % jittered 1 kHz).

Not run by CI (not named test_*). Run:  python tests/benchmarks/bench_derivatives.py
"""

from __future__ import annotations

import time

import numpy as np

from reachgate.derivatives import time_derivatives


def main(samples: int = 3_600_000, columns: int = 7) -> None:
    rng = np.random.default_rng(2025)
    t_s = np.cumsum(1e-3 * (1.0 + rng.uniform(-0.2, 0.2, samples)))
    x = np.cumsum(rng.normal(scale=1e-4, size=(samples, columns)), axis=0)
    for threads in (1, 2):
        start = time.perf_counter()
        time_derivatives(t_s, x, threads=threads)
        elapsed = time.perf_counter() - start
        print(f"{samples} samples x {columns} columns, {threads} thread(s): {elapsed:.2f} s")


if __name__ == "__main__":
    main()
