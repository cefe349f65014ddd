"""Branch rows for general (numeric) arms: the search for another configuration that fits."""

from __future__ import annotations

import math

import numpy as np
from roboticstoolbox import DHRobot, RevoluteDH
from spatialmath import SE3

import reachgate
from reachgate.checking.intervals import Check, Severity
from reachgate.kinematics.chain import forward
from reachgate.kinematics.closed_form import ALL_BRANCHES, SphericalWristSolver, is_spherical_wrist
from reachgate.kinematics.configurations import fits_range, other_configuration_fits
from reachgate.kinematics.path_ik import chain_targets
from reachgate.model.transforms import matrix_to_quat

from conftest import DEMO_ROBOT, offset_wrist_arm


def joint_ramp(robot, joint: int, end_deg: float, duration_s: float = 4.0):
    """Home, then one joint ramped to end_deg (minimum-jerk), as a TCP path; also q (N, n)."""
    t = np.arange(0.0, duration_s, 0.004)
    s = t / t[-1]
    q = np.tile(robot.home, (t.size, 1))
    q[:, joint] += np.radians(end_deg) * (10 * s**3 - 15 * s**4 + 6 * s**5)
    T = forward(robot, q)
    return reachgate.Trajectory.from_arrays(t, T[:, :3, 3], matrix_to_quat(T[:, :3, :3])), q


def test_flipped_wrist_fits_where_joint_4_winds_past_its_range():
    """Joint 4 wound to 200° on a ±190° range: the path fails on j4's position, and the search
    reports that another configuration fits at the samples beyond 190°. Outside check:
    roboticstoolbox's ik_LM, seeded with the wrist flipped (θ4 - π, -θ5, θ6 + π), finds a
    solution of the last pose inside every range."""
    robot = offset_wrist_arm(j4_deg=190.0)
    assert not is_spherical_wrist(robot.chain)
    path, q = joint_ramp(robot, 3, 200.0)
    report = reachgate.check(robot, path)
    beyond = q[:, 3] > robot.upper[3]
    assert report.solution.solver.name == "NUMERIC"
    assert np.array_equal(report.solution.other_branch_fits, beyond)
    rows = [r for r in report.violations if r.severity is Severity.VIOLATION]
    branch = [r for r in rows if r.check is Check.BRANCH]
    position = [r for r in rows if r.check is Check.POSITION and r.axis == "j4"]
    assert len(branch) == 1 and len(position) == 1
    assert branch[0].axis == "j4" and branch[0].fitting_branches is None  # found, not named
    assert branch[0].start_s == position[0].start_s == path.t_s[beyond][0]

    chain = robot.chain
    links = [
        RevoluteDH(a=a, alpha=al, d=d, offset=th)
        for a, al, d, th in zip(
            chain.a_m, chain.alpha_rad, chain.d_m, chain.theta_offset_rad, strict=True
        )
    ]
    target = chain_targets(robot, forward(robot, q[-1:]), None)[0]
    flipped = q[-1] + np.array([0.0, 0.0, 0.0, -math.pi, 0.0, math.pi])
    flipped[4] = -q[-1, 4]
    found = DHRobot(links).ik_LM(SE3(target, check=False), q0=flipped, tol=1e-14)
    assert found.success
    assert fits_range(found.q[None], robot.lower, robot.upper)[0]


def test_no_branch_row_where_every_configuration_leaves_the_range_of_joint_1():
    """Joint 1 turned to 40° on a ±30° range: every other configuration of this arm either
    keeps θ1 or turns it by about 180°, so none fits and there is no branch row (analytic
    for the shoulder flip; the search must not invent one)."""
    robot = offset_wrist_arm(j1_deg=30.0)
    path, q = joint_ramp(robot, 0, 40.0)
    report = reachgate.check(robot, path)
    assert (q[:, 0] > robot.upper[0]).any()
    assert not report.solution.other_branch_fits.any()
    checks = {r.check for r in report.violations if r.severity is Severity.VIOLATION}
    assert Check.POSITION in checks and Check.BRANCH not in checks


def test_search_agrees_with_the_closed_form_branches_on_a_spherical_wrist_arm():
    """On the demo arm (spherical wrist) the search's own starting points include the exact
    closed-form branches, so this proves its bookkeeping rather than its reach: 'another
    configuration inside every range' (other than the kept one, whole turns allowed) comes
    out as the closed form's list of branches says, on random poses with narrowed ranges.
    Its reach on a general arm is checked against roboticstoolbox in the wrist-flip test."""
    robot = reachgate.load_robot(DEMO_ROBOT)  # its rail held at home
    chain = robot.chain
    rng = np.random.default_rng(4411)
    m = 300
    q_arm = rng.uniform(robot.lower[1:], robot.upper[1:], (m, chain.n))
    rail = np.full(m, robot.rail.home)
    T = forward(robot, np.column_stack([rail, q_arm]))
    targets = chain_targets(robot, T, rail)
    lower, upper = robot.lower[1:] * 0.5, robot.upper[1:] * 0.5  # many poses now outside
    solver = SphericalWristSolver(chain)
    closed_fits = np.zeros(m, dtype=bool)
    own = [solver.branch_of(theta) for theta in q_arm + chain.theta_offset_rad]
    for branch in ALL_BRANCHES:
        sol = solver.solve(targets, branch)
        fits = fits_range(sol.theta - chain.theta_offset_rad, lower, upper)
        other = np.array([b != branch for b in own])
        closed_fits |= fits & other & (sol.reach_excess_m == 0)
    searched = other_configuration_fits(chain, targets, q_arm, lower, upper)
    assert closed_fits.sum() > 20  # the case is not empty
    np.testing.assert_array_equal(searched, closed_fits)
