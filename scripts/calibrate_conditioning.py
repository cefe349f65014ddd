"""Calibrate the general-arm singularity floor (`conditioning_min`) against the wrist floor.

    python scripts/calibrate_conditioning.py [--samples 20000]

On an arm with a spherical wrist both tests apply, so the scale-free measure
(kinematics/singularity.py) can be read where the closed-form wrist test fires: at a wrist
bend of wrist_min_deg (5°). Seeded random configurations over the demo arm's joint ranges,
kept where the elbow is at least ELBOW_CLEAR_DEG from stretched or folded and the wrist
centre at least SHOULDER_CLEAR_M from axis 1 (so that only the wrist is near singular), get
their wrist bend set to 5°; the floor is the median of the measure there. The script also
prints, for each configuration, the wrist bend at which the measure crosses that floor
(bisection; the measure grows with the bend), as percentiles: where the floor fires.
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

import numpy as np

import reachgate
from reachgate.kinematics.singularity import conditioning, kind_measures

DEMO_ROBOT = Path(__file__).resolve().parents[1] / "robots" / "demo_rail_arm.toml"
GENERATOR_SEED = 20261202
WRIST_DEG = 5.0
ELBOW_CLEAR_DEG = 20.0
SHOULDER_CLEAR_M = 0.3
BISECTION_STEPS = 40
SEARCH_DEG = (0.01, 60.0)


def clear_configurations(robot: reachgate.Robot, count: int, seed: int) -> np.ndarray:
    """Seeded random configurations (M <= count, n_axes) with elbow and shoulder clear; the
    rail (if any) at home."""
    rng = np.random.default_rng(seed)
    q = rng.uniform(robot.lower, robot.upper, (count, robot.n_axes))
    if robot.has_rail:
        q[:, 0] = robot.rail.home
    measures = kind_measures(robot, q)
    clear = (measures["elbow"] >= math.radians(ELBOW_CLEAR_DEG)) & (
        measures["shoulder"] >= SHOULDER_CLEAR_M
    )
    return q[clear]


def with_wrist_bend(q: np.ndarray, bend_rad: np.ndarray | float) -> np.ndarray:
    """Copies of q with joint 5 (the wrist bend for the arms here) set to bend_rad."""
    out = q.copy()
    out[:, -2] = bend_rad
    return out


def crossing_deg(robot: reachgate.Robot, q: np.ndarray, floor: float) -> np.ndarray:
    """(M,) joint-5 angle in deg at which the measure crosses `floor`, by bisection."""
    low = np.full(q.shape[0], math.radians(SEARCH_DEG[0]))
    high = np.full(q.shape[0], math.radians(SEARCH_DEG[1]))
    for _ in range(BISECTION_STEPS):
        middle = 0.5 * (low + high)
        below = conditioning(robot, with_wrist_bend(q, middle)) < floor
        low, high = np.where(below, middle, low), np.where(below, high, middle)
    return np.degrees(0.5 * (low + high))


def calibrate(robot: reachgate.Robot, count: int, seed: int = GENERATOR_SEED):
    """-> (floor, configurations used, (M,) crossing bends in deg)."""
    q = clear_configurations(robot, count, seed)
    floor = float(np.median(conditioning(robot, with_wrist_bend(q, math.radians(WRIST_DEG)))))
    return floor, q, crossing_deg(robot, q, floor)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=int, default=20000)
    args = parser.parse_args()
    robot = reachgate.load_robot(DEMO_ROBOT)
    floor, q, crossing = calibrate(robot, args.samples)
    p5, p25, p50, p75, p95 = np.percentile(crossing, [5, 25, 50, 75, 95])
    print(f"{robot.name}: {q.shape[0]} of {args.samples} configurations clear of elbow/shoulder")
    print(f"median measure at a {WRIST_DEG:g} deg wrist bend: {floor:.5f}")
    print(
        f"wrist bend where the measure crosses it, percentiles 5/25/50/75/95: "
        f"{p5:.2f} / {p25:.2f} / {p50:.2f} / {p75:.2f} / {p95:.2f} deg"
    )
    default = reachgate.model.robot.Thresholds().conditioning_min
    print(f"program default conditioning_min: {default:g}")


if __name__ == "__main__":
    main()
