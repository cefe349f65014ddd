"""Numeric path IK on fast rotations: no joint wound by a whole turn between coarse samples."""

from __future__ import annotations

import numpy as np

import reachgate
from reachgate.kinematics import forward
from reachgate.transforms import matrix_to_quat, rpy_to_matrix

from conftest import REPO


def test_fast_roll_on_the_gantry_follows_without_winding():
    """170° roll at 0.1 Hz, 96 samples per period: the last joint swings 340°, not 340° + 360°.

    Analytic: at home the TCP x axis lies on the last wrist joint, so a roll of amplitude A
    turns that joint by ±A and nothing else moves.
    """
    robot = reachgate.load_robot(REPO / "robots" / "demo_gantry.toml")
    home = forward(robot, robot.home[None])[0]
    t = np.linspace(0.0, 30.0, 288)
    roll = np.radians(170.0) * np.sin(2 * np.pi * 0.1 * t)
    R = home[:3, :3] @ rpy_to_matrix(np.column_stack([roll, 0 * t, 0 * t]))
    path = reachgate.Trajectory.from_arrays(t, np.tile(home[:3, 3], (t.size, 1)), matrix_to_quat(R))
    report = reachgate.check(robot, path)
    q = report.solution.q
    np.testing.assert_allclose(np.ptp(q[:, -1]), np.ptp(roll), atol=1e-6)
    np.testing.assert_allclose(np.ptp(q[:, :-1], axis=0), 0.0, atol=1e-6)
    assert report.solution.position_error_m.max() < 1e-9
