"""What a stretch out of reach costs the numeric solver, beside the same path all in reach.

Not a test: pytest collects test_*.py only, and this file is bench_*.py. Run from anywhere:

    python tests/benchmarks/bench_unreachable.py [--repeats 5]

The offset-wrist arm of the tests (no closed form: numeric IK) follows a 20 s, 1 kHz path
of joint-space sines (reachable by construction). The second case is the same path with the
TCP pushed 3 m along the cell's x from 7 s to 13 s: 6 s out of reach. Both are checked with
``reachgate.check`` in this one run, single-threaded, the median of --repeats runs after a
warm-up. The stretch's cost is the unreachable case's time less the reachable 14 s share of
the reachable case's; beside it, the same 6 s share of the reachable case. Target: the
stretch out of reach costs at most 5x the same stretch in reach.
"""

from __future__ import annotations

import os

# One core: BLAS/OpenMP pools read these when numpy loads.
os.environ["OMP_NUM_THREADS"] = "1"
os.environ["OPENBLAS_NUM_THREADS"] = "1"
os.environ["MKL_NUM_THREADS"] = "1"

import argparse
import statistics
import sys
import time
from pathlib import Path

import bench_check
import numpy as np

import reachgate

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # the tests' shared arms
from conftest import offset_wrist_arm

DURATION_S = 20.0
RATE_HZ = 1000.0
OUT_OF_REACH_S = (7.0, 13.0)
PUSH_M = 3.0
STRETCH_RATIO_TARGET = 5.0


def cases() -> tuple[reachgate.Robot, reachgate.Trajectory, reachgate.Trajectory]:
    """The arm, the reachable path and the same path with the stretch pushed out of reach."""
    robot = offset_wrist_arm()
    t = np.arange(int(DURATION_S * RATE_HZ) + 1) / RATE_HZ
    reachable = bench_check.joint_space_path(robot, t)
    p = reachable.scenario_p_m.copy()
    p[(t >= OUT_OF_REACH_S[0]) & (t < OUT_OF_REACH_S[1]), 0] += PUSH_M
    pushed = reachgate.Trajectory.from_arrays(
        t, p, reachable.scenario_q_wxyz, name="joint sines, 6 s out of reach"
    )
    return robot, reachable, pushed


def median_time(robot, path, repeats: int) -> tuple[float, reachgate.Report]:
    report = reachgate.check(robot, path)  # warm-up
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        report = reachgate.check(robot, path)
        times.append(time.perf_counter() - start)
    return statistics.median(times), report


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    robot, reachable, pushed = cases()
    t_reachable, report_reachable = median_time(robot, reachable, args.repeats)
    t_pushed, report_pushed = median_time(robot, pushed, args.repeats)
    out = report_pushed.solution.reach_excess_m > 0
    stretch_s = OUT_OF_REACH_S[1] - OUT_OF_REACH_S[0]
    share = stretch_s / DURATION_S
    stretch_in_reach = t_reachable * share
    stretch_out_of_reach = t_pushed - t_reachable * (1.0 - share)
    ratio = stretch_out_of_reach / stretch_in_reach
    met = "met" if ratio <= STRETCH_RATIO_TARGET else "MISSED"
    print(f"offset-wrist arm, {DURATION_S:g} s at {RATE_HZ:g} Hz, median of {args.repeats}")
    print(
        f"  all in reach:          {t_reachable:7.3f} s  verdict {report_reachable.verdict.value}, "
        f"{int((report_reachable.solution.reach_excess_m > 0).sum())} samples out of reach"
    )
    print(
        f"  {stretch_s:g} s out of reach:     {t_pushed:7.3f} s  verdict "
        f"{report_pushed.verdict.value}, {int(out.sum())} samples out of reach"
    )
    print(
        f"  the {stretch_s:g} s stretch: {stretch_out_of_reach:.3f} s out of reach, "
        f"{stretch_in_reach:.3f} s in reach: {ratio:.2f}x "
        f"(target <= {STRETCH_RATIO_TARGET:g}x: {met})"
    )
    print(f"  whole case: {t_pushed / t_reachable:.2f}x the reachable one")


if __name__ == "__main__":
    main()
