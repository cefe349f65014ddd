"""Benchmark: load_trajectory on 1,000,000 rows against plain np.loadtxt on the same file.

Not run by CI (not named test_*). Run:  python tests/benchmarks/bench_load.py [rows]

Two files are timed: one written by write_trajectory (shortest round-trip decimals, mostly
16-17 significant digits) and one with 6 decimals, as real-time simulation logs often are.
np.loadtxt's float parsing dominates both, and long digit strings parse about three times
slower than short ones.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from reachgate.model.trajectory import Trajectory, load_trajectory, write_trajectory


def best_of(repeats: int, call) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return min(times)


def invented_path(rows: int) -> Trajectory:
    """A seeded wandering TCP path with ±20 % jittered 1 kHz sampling."""
    rng = np.random.default_rng(2024)
    t_s = np.cumsum(1e-3 * (1.0 + rng.uniform(-0.2, 0.2, rows)))
    p_m = np.cumsum(rng.normal(scale=1e-4, size=(rows, 3)), axis=0) + np.array([2.0, 0.5, 1.2])
    q = np.cumsum(rng.normal(scale=1e-3, size=(rows, 4)), axis=0) + np.array([1.0, 0.0, 0.0, 0.0])
    return Trajectory.from_arrays(t_s, p_m, q / np.linalg.norm(q, axis=1, keepdims=True))


def main(rows: int = 1_000_000, repeats: int = 3) -> None:
    path_data = invented_path(rows)
    with tempfile.TemporaryDirectory() as folder:
        full = Path(folder) / "full_precision.csv"
        start = time.perf_counter()
        write_trajectory(full, path_data, comments=("benchmark file",))
        print(f"write_trajectory, {rows} rows: {time.perf_counter() - start:.2f} s")

        short = Path(folder) / "six_decimals.csv"
        table = np.column_stack([path_data.t_s, path_data.scenario_p_m, path_data.scenario_q_wxyz])
        np.savetxt(
            short,
            table,
            fmt="%.6f",
            delimiter=",",
            header="t_s,x_m,y_m,z_m,qw,qx,qy,qz",
            comments="",
        )

        # Lines before the data: the comment and the header, or the header alone.
        for label, file, skip in (("full precision", full, 2), ("6 decimals", short, 1)):
            size_mb = file.stat().st_size / 1e6
            ours = best_of(repeats, lambda f=file: load_trajectory(f))
            reference = best_of(
                repeats, lambda f=file, k=skip: np.loadtxt(f, delimiter=",", skiprows=k)
            )
            print(
                f"{label:>15} ({size_mb:.0f} MB): load_trajectory {ours:.2f} s, "
                f"np.loadtxt {reference:.2f} s, ratio {ours / reference:.2f}"
            )


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000)
