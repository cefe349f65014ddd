"""Rotation conversions: our hand-written kernels beside scipy's Rotation, one run, 1e6 samples.

Prints the best of five runs for each conversion and the ratio (ours / scipy); a kernel is kept
only where it wins. Run: python tests/benchmarks/bench_transforms.py
"""

from __future__ import annotations

import time

import numpy as np
from scipy.spatial.transform import Rotation

from reachgate.model import transforms

SAMPLES = 1_000_000
REPEATS = 5


def best_of(call) -> float:
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    rng = np.random.default_rng(20261202)
    q = rng.normal(size=(SAMPLES, 4))
    q /= np.linalg.norm(q, axis=1, keepdims=True)
    rpy = rng.uniform(-1.5, 1.5, size=(SAMPLES, 3))
    R = Rotation.from_quat(q, scalar_first=True).as_matrix()
    pairs = {
        "quaternion -> matrix": (
            lambda: transforms.quat_to_matrix(q),
            lambda: Rotation.from_quat(q, scalar_first=True).as_matrix(),
        ),
        "matrix -> quaternion": (
            lambda: transforms.matrix_to_quat(R),
            lambda: Rotation.from_matrix(R).as_quat(canonical=True, scalar_first=True),
        ),
        "roll-pitch-yaw -> matrix": (
            lambda: transforms.rpy_to_matrix(rpy),
            lambda: Rotation.from_euler("ZYX", rpy[:, ::-1]).as_matrix(),
        ),
        "matrix -> roll-pitch-yaw": (
            lambda: transforms.matrix_to_rpy(R),
            lambda: Rotation.from_matrix(R).as_euler("ZYX"),
        ),
    }
    print(f"{SAMPLES:,} samples, best of {REPEATS}")
    print(f"{'conversion':26s} {'reachgate s':>12s} {'scipy s':>9s} {'ours/scipy':>11s}")
    for name, (ours, theirs) in pairs.items():
        a, b = best_of(ours), best_of(theirs)
        print(f"{name:26s} {a:12.3f} {b:9.3f} {a / b:11.2f}")


if __name__ == "__main__":
    main()
