"""Speed of reachgate.check against a per-sample loop over roboticstoolbox's C++ solver.

Not a test (pytest collects test_*.py only; this file is bench_*.py). Run:

    python tests/benchmarks/bench_check.py [--loop-samples N] [--repeats 3]

Two cases, 60 s at 1 kHz (60 001 samples):
1. the demo rail arm (spherical wrist, closed-form IK) with ``--rail follow``;
2. an offset-wrist arm (a4, d5 != 0: no closed form, reachgate's numeric solver), no rail.

reachgate: the whole ``check`` (placement, rail, IK, derivatives, every check, intervals).
Toolbox loop: for each sample, the target in the arm's base frame (from the same rail
positions), ``ik_LM`` (C++ Levenberg–Marquardt, tol 1e-14, warm-started from the previous
sample's solution), ``jacob0`` and Yoshikawa's sqrt(det(J Jᵀ)). It calls the toolbox's ETS
methods (``robot.ets().ik_LM`` / ``.jacob0``), its fastest per-call path: the DHRobot
methods of the same name add ~0.2-0.5 ms of Python per call. The loop runs on every
sample by default; with --loop-samples N it runs on the first N contiguous samples and its
rate is scaled to the whole case (the output says which).
Joint solutions are compared where both succeed.
"""

from __future__ import annotations

import os

# One core, as the figures are stated: BLAS reads these when numpy loads.
os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("MKL_NUM_THREADS", "1")

import argparse
import math
import statistics
import sys
import time
from pathlib import Path

import numpy as np

import reachgate
from reachgate import CheckSettings, RailPolicy
from reachgate.kinematics.chain import arm_manipulability, cell_T_base, forward
from reachgate.model.transforms import invert_transform, matrix_to_quat, quat_to_matrix, transform

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # the tests' shared arms
from conftest import offset_wrist_arm

RATE_HZ = 1000.0
DURATION_S = 60.0
AGREEMENT_TOL_RAD = 1e-6
DEMO_ROBOT = "robots/demo_rail_arm.toml"


def minimum_jerk(s: np.ndarray) -> np.ndarray:
    return 10 * s**3 - 15 * s**4 + 6 * s**5


def times() -> np.ndarray:
    return np.arange(int(DURATION_S * RATE_HZ) + 1) / RATE_HZ


def approach_path(t: np.ndarray) -> reachgate.Trajectory:
    """A landing approach along the rail, with sway and attitude motion (cell frame)."""
    s = minimum_jerk(t / t[-1])
    x = 2.9 + 4.6 * s
    y = 0.05 * np.sin(2 * np.pi * 0.3 * t)
    z = 2.1 - 0.8 * s + 0.02 * np.sin(2 * np.pi * 0.7 * t)
    rpy = np.column_stack(
        [
            np.radians(3.0) * np.sin(2 * np.pi * 0.5 * t),
            np.radians(3.0) * np.sin(2 * np.pi * 0.4 * t + 1.0),
            np.radians(10.0) * np.sin(2 * np.pi * 0.05 * t),
        ]
    )
    return reachgate.Trajectory.from_arrays(
        t, np.column_stack([x, y, z]), rpy_rad=rpy, name="approach 1 kHz"
    )


def offset_wrist_robot() -> reachgate.Robot:
    """The demo geometry with its wrist axes offset (a4 = 0.04 m, d5 = 0.06 m), no rail: the
    tests' arm of that name (tests/conftest.py)."""
    return offset_wrist_arm()


def joint_space_path(robot: reachgate.Robot, t: np.ndarray) -> reachgate.Trajectory:
    """FK of home plus slow sinusoids (reachable by construction)."""
    rng = np.random.default_rng(901)
    q = robot.home + np.radians(12.0) * np.sin(
        2 * np.pi * rng.uniform(0.05, 0.3, robot.n_axes) * t[:, None]
        + rng.uniform(0, 2 * np.pi, robot.n_axes)
    )
    q -= q[0] - robot.home
    T = forward(robot, q)
    return reachgate.Trajectory.from_arrays(
        t, T[:, :3, 3], matrix_to_quat(T[:, :3, :3]), name="joint sines 1 kHz"
    )


def time_check(robot, path, settings, repeats):
    """Median wall time of reachgate.check over `repeats` runs, and the last report."""
    walls = []
    for _ in range(repeats):
        start = time.perf_counter()
        report = reachgate.check(robot, path, settings)
        walls.append(time.perf_counter() - start)
    return statistics.median(walls), report


def toolbox_loop(robot: reachgate.Robot, path: reachgate.Trajectory, rail_m, q_ours, count):
    """Per-sample ik_LM + jacob0 + Yoshikawa on the first `count` samples.

    Returns (wall time s, q (count, n) or NaN where ik_LM failed, manipulability (count,)).
    """
    # imported here so that a process using only the path generators stays free of it
    from roboticstoolbox import DHRobot, RevoluteDH

    chain = robot.chain
    links = [
        RevoluteDH(a=a, alpha=alpha, d=d, offset=theta)
        for a, alpha, d, theta in zip(
            chain.a_m, chain.alpha_rad, chain.d_m, chain.theta_offset_rad, strict=True
        )
    ]
    ets = DHRobot(links).ets()
    cell_T_tool = transform(quat_to_matrix(path.scenario_q_wxyz[:count]), path.scenario_p_m[:count])
    tool_inv = invert_transform(robot.flange_T_tool)
    fixed_base = invert_transform(cell_T_base(robot, None) @ chain.base_T_chain)
    rail_x = robot.cell_T_rail[:3, 0]
    q = np.full((count, chain.n), np.nan)
    w = np.full(count, np.nan)
    previous = robot.home[1:] if robot.has_rail else robot.home
    start = time.perf_counter()
    for k in range(count):
        base_inv = fixed_base.copy()
        if rail_m is not None:  # the carriage shifts the base by rail_m along the rail's +x
            base_inv[:3, 3] -= base_inv[:3, :3] @ (rail_x * rail_m[k])
        target = base_inv @ cell_T_tool[k] @ tool_inv
        solution = ets.ik_LM(target, q0=previous, tol=1e-14, joint_limits=False)
        if solution.success:
            previous = solution.q
            q[k] = solution.q
            J = ets.jacob0(solution.q)
            w[k] = math.sqrt(max(np.linalg.det(J @ J.T), 0.0))
    wall = time.perf_counter() - start
    return wall, q, w


def loop_comparison(robot, path, report, loop_samples):
    """The toolbox loop on the first `loop_samples` samples (0 = all) against a check's report.

    Returns a dict: loop (samples looped), tb_s, tb_rate (samples/s), both (samples where
    both succeed), tb_failed, worst_rad (max joint difference), w_min, w_worst.
    """
    q_all = report.solution.q
    rail_m = q_all[:, 0] if robot.has_rail else None
    q_arm = q_all[:, 1:] if robot.has_rail else q_all
    count = path.n_samples if loop_samples <= 0 else min(loop_samples, path.n_samples)
    wall_tb, q_tb, w_tb = toolbox_loop(robot, path, rail_m, q_arm, count)
    ours_ok = report.solution.reach_excess_m[:count] == 0
    both = ours_ok & ~np.isnan(q_tb[:, 0])
    diff = np.abs(np.angle(np.exp(1j * (q_tb[both] - q_arm[:count][both]))))
    worst = float(diff.max()) if diff.size else float("nan")
    w_ours = arm_manipulability(robot, q_all[:count][both])
    w_worst = float(np.abs(w_ours - w_tb[both]).max()) if diff.size else float("nan")
    return dict(
        loop=count,
        tb_s=wall_tb,
        tb_rate=count / wall_tb,
        both=int(both.sum()),
        tb_failed=int(np.isnan(q_tb[:, 0]).sum()),
        worst_rad=worst,
        w_min=float(np.nanmin(w_tb)),
        w_worst=w_worst,
    )


def run_case(label, robot, path, settings, loop_samples, repeats):
    wall_ours, report = time_check(robot, path, settings, repeats)
    loop = loop_comparison(robot, path, report, loop_samples)
    ours_rate = path.n_samples / wall_ours
    return dict(
        case=label,
        solver=report.solution.solver.value,
        samples=path.n_samples,
        ours_s=wall_ours,
        ours_rate=ours_rate,
        loop=loop["loop"],
        tb_s=loop["tb_s"],
        tb_rate=loop["tb_rate"],
        tb_scaled_s=path.n_samples / loop["tb_rate"],
        ratio=ours_rate / loop["tb_rate"],
        both=loop["both"],
        tb_failed=loop["tb_failed"],
        worst_rad=loop["worst_rad"],
        agree=bool(loop["worst_rad"] <= AGREEMENT_TOL_RAD),
        verdict=report.verdict.value,
        w_min=loop["w_min"],
        w_worst=loop["w_worst"],
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--loop-samples", type=int, default=0, help="toolbox loop on this many samples (0 = all)"
    )
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    t = times()
    demo = reachgate.load_robot(DEMO_ROBOT)
    offset = offset_wrist_robot()
    rows = [
        run_case(
            "demo rail arm, --rail follow",
            demo,
            approach_path(t),
            CheckSettings(rail=RailPolicy.FOLLOW),
            args.loop_samples,
            args.repeats,
        ),
        run_case(
            "offset-wrist arm, no rail",
            offset,
            joint_space_path(offset, t),
            CheckSettings(),
            args.loop_samples,
            args.repeats,
        ),
    ]
    print(
        f"{DURATION_S:g} s at {RATE_HZ:g} Hz; reachgate.check median of {args.repeats} runs; "
        f"toolbox loop (ETS ik_LM tol 1e-14 warm-started + jacob0 + Yoshikawa) on "
        + (
            "all samples"
            if args.loop_samples <= 0
            else f"the first {args.loop_samples} samples, its rate scaled to the whole case"
        )
    )
    header = (
        f"{'case':<30} {'solver':<32} {'samples':>7} {'check s':>8} {'check/s':>10} "
        f"{'loop n':>6} {'loop/s':>9} {'loop s*':>8} {'ratio':>6} {'max|dq| rad':>11} agree"
    )
    print(header)
    print("-" * len(header))
    for r in rows:
        print(
            f"{r['case']:<30} {r['solver']:<32} {r['samples']:>7} {r['ours_s']:>8.3f} "
            f"{r['ours_rate']:>10.0f} {r['loop']:>6} {r['tb_rate']:>9.0f} "
            f"{r['tb_scaled_s']:>8.2f} {r['ratio']:>6.1f} {r['worst_rad']:>11.2e} "
            f"{'yes' if r['agree'] else 'NO'}"
        )
    print("loop s* = the toolbox loop's time scaled to all samples; ratio = check/s ÷ loop/s")
    for r in rows:
        print(
            f"{r['case']}: verdict {r['verdict']}; compared on {r['both']} samples, "
            f"ik_LM failed on {r['tb_failed']}; Yoshikawa min {r['w_min']:.4f}, "
            f"ours vs toolbox max |Δw| {r['w_worst']:.1e}"
        )


if __name__ == "__main__":
    main()
