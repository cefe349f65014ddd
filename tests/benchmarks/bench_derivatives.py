"""Benchmark: time_derivatives on 3.6 million samples × 7 columns (±20 % jittered 1 kHz),
beside the straightforward way timed in the same run.

Not run by CI (not named test_*). Run:  python tests/benchmarks/bench_derivatives.py

Reference: a per-sample loop that fits numpy's polynomial.polyfit (degree FIT_DEGREE) to the
same WINDOW_SAMPLES-sample window in time centred on the sample and reads the derivatives
from its coefficients, all columns in one call; run on the first --reference samples and
its rate scaled to the whole case. The largest difference of the two, relative to each
derivative's largest magnitude, shows they compute the same fit.
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np
from numpy.polynomial import polynomial

from reachgate.checking.derivatives import FIT_DEGREE, WINDOW_SAMPLES, time_derivatives


def reference(t_s: np.ndarray, x: np.ndarray, count: int) -> np.ndarray:
    """(3, count, k) velocity, acceleration, jerk from one polyfit per sample."""
    n = t_s.size
    out = np.empty((3, count, x.shape[1]))
    for i in range(count):
        start = min(max(i - WINDOW_SAMPLES // 2, 0), n - WINDOW_SAMPLES)
        window = slice(start, start + WINDOW_SAMPLES)
        coef = polynomial.polyfit(t_s[window] - t_s[i], x[window], FIT_DEGREE)  # (d+1, k)
        for r in (1, 2, 3):
            out[r - 1, i] = math.factorial(r) * coef[r]
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=int, default=3_600_000)
    parser.add_argument("--columns", type=int, default=7)
    parser.add_argument("--reference", type=int, default=20_000, help="samples for the loop")
    args = parser.parse_args()
    rng = np.random.default_rng(2025)
    t_s = np.cumsum(1e-3 * (1.0 + rng.uniform(-0.2, 0.2, args.samples)))
    x = np.cumsum(rng.normal(scale=1e-4, size=(args.samples, args.columns)), axis=0)
    walls = {}
    for threads in (1, 2):
        start = time.perf_counter()
        ours = time_derivatives(t_s, x, threads=threads)
        walls[threads] = time.perf_counter() - start
    count = min(args.reference, args.samples)
    start = time.perf_counter()
    slow = reference(t_s, x, count)
    loop_rate = count / (time.perf_counter() - start)
    ours_rate = args.samples / walls[1]
    print(f"{args.samples} samples x {args.columns} columns, ±20 % jittered 1 kHz")
    for threads, wall in walls.items():
        print(
            f"  reachgate, {threads} thread(s): {wall:.2f} s ({args.samples / wall:,.0f} samples/s)"
        )
    print(
        f"  per-sample polyfit loop on the first {count} samples: {loop_rate:,.0f} samples/s, "
        f"scaled {args.samples / loop_rate:.0f} s; ratio (1 thread) {ours_rate / loop_rate:.0f}x"
    )
    for r, name in enumerate(("velocity", "acceleration", "jerk")):
        ours_r = getattr(ours, name)[:count]
        relative = np.abs(ours_r - slow[r]).max() / np.abs(slow[r]).max()
        print(f"  {name}: max |ours - loop| / max |loop| = {relative:.1e}")


if __name__ == "__main__":
    main()
