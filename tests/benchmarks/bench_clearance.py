"""Clearance of a two-robot rig: our array check beside a per-sample loop of coal queries.

Prints, in one run:
1. the clearance part of a rig check (posing both arms, broad phase, distances, rows and the
   between-sample bound) in samples per second, one thread, on a 1 kHz two-arm case of about
   100 checked pairs;
2. a per-sample Python loop of coal distance queries over the same pairs on the same poses
   (poses prepared beforehand, so only the queries are timed), in samples per second;
3. the peak memory of a 3,600,001-sample two-body case (an hour at 1 kHz) checked in a fresh
   process, inputs included.
Targets (issue 11): >= 300,000 samples/s, >= 30x the coal loop, < 2 GB peak.

Run: python tests/benchmarks/bench_clearance.py
"""

from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import resource
import subprocess
import sys
import time

import numpy as np

from reachgate.checking.clearance import (
    ClearanceSettings,
    PlacedRobot,
    _Scene,
    check_clearance,
    plan_pairs,
)
from reachgate.kinematics.bodies import HalfSpace, OrientedBox, Segment
from reachgate.model.geometry import Box, Obstacle, Plane
from reachgate.model.robot import robot_from_dict
from reachgate.model.transforms import transform_from_xyz_rpy

RATE_HZ = 1000.0
SAMPLES = 200_000
COAL_SAMPLES = 300
LONG_SAMPLES = 3_600_001
SETTINGS = ClearanceSettings(
    min_m=0.05,
    near_m=0.15,
    contact=frozenset({frozenset({"carrier.mock-up", "table.pad"})}),
)


def arm(payloads: list[dict]):
    """An invented six-axis arm on a rail with geometry on every part that has length."""
    rows = [
        (0.30, -90.0, 0.68, 0.0, 0.15, 0.0),
        (1.05, 0.0, 0.0, -90.0, 0.12, -40.0),
        (0.20, -90.0, 0.0, 0.0, 0.10, 40.0),
        (0.0, 90.0, 1.10, 0.0, 0.09, 0.0),
        (0.0, -90.0, 0.0, 0.0, None, 60.0),
        (0.0, 0.0, 0.22, 0.0, 0.06, 0.0),
    ]
    joints = []
    for i, (a, alpha, d, theta, radius, home) in enumerate(rows):
        joint = {"name": f"j{i + 1}", "a_m": a, "alpha_deg": alpha, "d_m": d,
                 "offset_deg": theta, "range_deg": [-350.0, 350.0], "vmax_deg_s": 100.0,
                 "amax_deg_s2": 300.0, "home_deg": home}  # fmt: skip
        if radius is not None:
            joint["link_radius_m"] = radius
        joints.append(joint)
    data = {
        "name": "bench arm",
        "rail": {"range_m": [0.0, 8.0], "vmax_m_s": 1.0, "amax_m_s2": 2.0, "home_m": 2.0},
        "mount": {"xyz_m": [0.0, 0.0, 0.45], "radius_m": 0.25},
        "joints": joints,
        "payload": payloads,
    }
    return robot_from_dict(data, "bench arm")


def rig():
    carrier = arm(
        [
            {"name": "mock-up", "box": {"center_m": [0, 0, 0.25], "size_m": [0.5, 0.4, 0.15]}},
            {"name": "guard", "sphere": {"center_m": [0.3, 0.0, 0.25], "radius_m": 0.06}},
        ]
    )
    table = arm([{"name": "pad", "box": {"center_m": [0, 0, 0.1], "size_m": [0.6, 0.6, 0.05]}}])
    facing = transform_from_xyz_rpy([0.0, 4.2, 0.0], np.radians([0.0, 0.0, 0.0]))
    robots = (PlacedRobot("carrier", carrier), PlacedRobot("table", table, facing))
    obstacles = (
        Obstacle("floor", Plane((0.0, 0.0, 0.0), (0.0, 0.0, 1.0))),
        Obstacle("mast", Box((6.0, 2.1, 1.0), (0.4, 0.4, 2.0), (0.0, 0.0, 0.0))),
    )
    return robots, obstacles


def motion(robots, samples: int, seed: int = 20261202) -> tuple[np.ndarray, dict]:
    """Smooth invented motion around home: a slow rail travel, joints swinging gently."""
    rng = np.random.default_rng(seed)
    t_s = np.arange(samples) / RATE_HZ
    q = {}
    for placed in robots:
        home = placed.robot.home
        values = np.empty((samples, home.size))
        for i in range(home.size):
            amplitude = 1.5 if i == 0 else rng.uniform(0.1, 0.35)
            period_s = rng.uniform(20.0, 60.0)
            phase = rng.uniform(0, 2 * np.pi)
            values[:, i] = home[i] + amplitude * np.sin(2 * np.pi * t_s / period_s + phase)
        q[placed.name] = values
    return t_s, q


class Clock:
    """Wall time and this process's CPU time (one thread: the time on one core, which is
    what the targets mean; wall time also counts waiting for a core on a busy host)."""

    def __enter__(self):
        self.wall, self.cpu = time.perf_counter(), time.process_time()
        return self

    def __exit__(self, *exc):
        self.wall = time.perf_counter() - self.wall
        self.cpu = time.process_time() - self.cpu


def ours_rate(robots, obstacles, plan, t_s, q) -> tuple[float, float, int]:
    """Best of three: samples per wall second and per CPU second, and the rows found."""
    wall = cpu = np.inf
    for _ in range(3):
        with Clock() as clock:
            result = check_clearance(t_s, robots, q, obstacles, plan, SETTINGS)
        wall, cpu = min(wall, clock.wall), min(cpu, clock.cpu)
    return t_s.size / wall, t_s.size / cpu, len(result.rows)


def coal_rate(robots, obstacles, plan, q) -> tuple[float, float]:
    """Per sample, per pair, per primitive pair: one coal.distance query on prepared poses."""
    import coal

    scene = _Scene(robots, obstacles)
    poses = [scene.pose(r, q[p.name][:COAL_SAMPLES]) for r, p in enumerate(robots)]

    def coal_shape(primitive):
        if isinstance(primitive, Segment):
            axis = primitive.p1_m - primitive.p0_m
            length = np.linalg.norm(axis, axis=0)
            shape = (
                coal.Capsule(primitive.radius_m, float(length[0]))
                if length[0] > 0
                else coal.Sphere(primitive.radius_m)
            )
            z = axis / np.where(length > 0, length, 1.0)
            z[:, length == 0] = [[0.0], [0.0], [1.0]]
            helper = np.where(np.abs(z[0]) < 0.9, [[1.0], [0.0], [0.0]], [[0.0], [1.0], [0.0]])
            x = np.cross(helper.T, z.T).T
            x /= np.linalg.norm(x, axis=0)
            y = np.cross(z.T, x.T).T
            middle = 0.5 * (primitive.p0_m + primitive.p1_m)
            frames = [
                coal.Transform3s(np.column_stack([x[:, k], y[:, k], z[:, k]]), middle[:, k])
                for k in range(middle.shape[1])
            ]
            return shape, frames
        if isinstance(primitive, OrientedBox):
            frames = [
                coal.Transform3s(primitive.axes[:, :, k].T, primitive.center_m[:, k])
                for k in range(primitive.center_m.shape[1])
            ]
            return coal.Box(*(2 * primitive.half_m)), frames
        assert isinstance(primitive, HalfSpace)
        normal = primitive.normal[:, 0]
        return coal.Halfspace(normal, float(normal @ primitive.point_m[:, 0])), None

    queries = []
    for a_name, b_name in plan.checked:
        a, b = scene.by_name[a_name], scene.by_name[b_name]
        for pa in scene.primitives(a, poses):
            for pb in scene.primitives(b, poses):
                queries.append((coal_shape(pa), coal_shape(pb)))
    # fixed obstacles: one frame for every sample
    queries = [
        tuple((shape, frames * COAL_SAMPLES if frames and len(frames) == 1 else frames)
              for shape, frames in query)
        for query in queries
    ]  # fmt: skip
    identity = coal.Transform3s()
    request, result = coal.DistanceRequest(), coal.DistanceResult()
    with Clock() as clock:
        _coal_loop(coal, queries, identity, request, result)
    return COAL_SAMPLES / clock.wall, COAL_SAMPLES / clock.cpu


def _coal_loop(coal, queries, identity, request, result) -> None:
    for k in range(COAL_SAMPLES):
        for (shape_a, frames_a), (shape_b, frames_b) in queries:
            coal.distance(
                shape_a,
                identity if frames_a is None else frames_a[k],
                shape_b,
                identity if frames_b is None else frames_b[k],
                request,
                result,
            )


def long_case_peak() -> None:
    """Child process: the 3,600,001-sample two-body case; prints its peak RSS in MB."""
    robots, obstacles = rig()
    plan = plan_pairs(robots, obstacles, SETTINGS)
    t_s, q = motion(robots, LONG_SAMPLES)
    with Clock() as clock:
        result = check_clearance(t_s, robots, q, obstacles, plan, SETTINGS)
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    print(f"{peak_mb:.0f} {clock.cpu:.2f} {clock.wall:.2f} {len(result.rows)}")


def main() -> None:
    if sys.argv[1:] == ["--long-case"]:
        long_case_peak()
        return
    robots, obstacles = rig()
    plan = plan_pairs(robots, obstacles, SETTINGS)
    t_s, q = motion(robots, SAMPLES)
    ours_wall, ours_cpu, rows = ours_rate(robots, obstacles, plan, t_s, q)
    coal_wall, coal_cpu = coal_rate(robots, obstacles, plan, q)
    print(f"two-arm rig at 1 kHz: {len(plan.checked)} pairs checked, {len(plan.left_out)} left out")
    print(f"{'clearance, one thread':32s} {'samples/CPU-s':>14s} {'samples/wall-s':>15s}")
    label = f"reachgate ({SAMPLES:,} samples)"
    print(f"{label:32s} {ours_cpu:14,.0f} {ours_wall:15,.0f}   ({rows} rows)")
    label = f"coal query loop ({COAL_SAMPLES} samples)"
    print(f"{label:32s} {coal_cpu:14,.0f} {coal_wall:15,.0f}")
    print(
        f"{'ratio':32s} {ours_cpu / coal_cpu:13.1f}x {ours_wall / coal_wall:14.1f}x"
        "   (targets: >= 300,000 samples/s on one core, >= 30x)"
    )
    child = subprocess.run(
        [sys.executable, __file__, "--long-case"], capture_output=True, text=True, check=True
    )
    peak_mb, cpu_s, wall_s, long_rows = child.stdout.split()
    print(
        f"{LONG_SAMPLES:,}-sample two-body case: peak memory {peak_mb} MB (target < 2048 MB), "
        f"{float(cpu_s):.1f} CPU-s, {float(wall_s):.1f} wall-s, {long_rows} rows"
    )


if __name__ == "__main__":
    main()
