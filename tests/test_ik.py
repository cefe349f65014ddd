"""Inverse kinematics against FK, against each other and against roboticstoolbox.

Sources named beside each check:
- round trips FK(IK(x)) = x on poses made by FK of random configurations (FK itself is
  checked against roboticstoolbox in test_kinematics.py);
- the Puma 560 standard DH table (Corke & Armstrong-Hélouvry, ICRA 1994, as in
  roboticstoolbox.models.DH.Puma560);
- roboticstoolbox-python's C++ Levenberg–Marquardt solver ``ik_LM`` (tol 1e-14, warm-started);
- analytic reach shell of a spherical-wrist arm: the wrist centre lies within
  a2 + sqrt(a3² + d4²) of the shoulder point (two-link geometry).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from roboticstoolbox import DHRobot, RevoluteDH
from scipy.spatial.transform import Rotation
from spatialmath import SE3

import reachgate
from reachgate.kinematics.chain import cell_T_base, forward
from reachgate.kinematics.closed_form import ALL_BRANCHES, SphericalWristSolver, is_spherical_wrist
from reachgate.kinematics.numeric import solve_path_numeric
from reachgate.kinematics.path_ik import (
    SolverKind,
    chain_targets,
    continuous_angles,
    quaternion_map,
    solve_path,
    target_map,
    target_rows,
    target_rows_from_quaternions,
)
from reachgate.model.robot import robot_from_dict
from reachgate.model.transforms import matrix_to_quat, quat_to_matrix, rpy_to_matrix, transform

from conftest import DEMO_ROBOT, offset_wrist_arm

#: Round-trip tolerances of the closed form (brief: 1e-9 m / 1e-9 rad; rounding is ~1e-15).
ROUND_TRIP_TOL_M = 1e-9
ROUND_TRIP_TOL_RAD = 1e-9
#: Two solvers of the same branch agree on joint values to this (rad).
AGREEMENT_TOL_RAD = 1e-6
#: Branch signs are only defined away from the singular surfaces: every factor above this.
BRANCH_CLEARANCE = 1e-3


def _joint(name, a, alpha, d, offset=0.0, lo=-180.0, hi=180.0, home=None, **extra):
    joint = dict(
        name=name,
        a_m=a,
        alpha_deg=alpha,
        d_m=d,
        offset_deg=offset,
        range_deg=[lo, hi],
        vmax_deg_s=150.0,
        amax_deg_s2=500.0,
    )
    if home is not None:
        joint["home_deg"] = home
    joint.update(extra)
    return joint


def puma_560() -> reachgate.Robot:
    """Puma 560, standard DH (Corke & Armstrong-Hélouvry 1994; toolbox model, d1 with pedestal).

    Ranges opened to ±360° so that every branch's angles are admissible.
    """
    rows = [(0.0, 90.0, 0.67183), (0.4318, 0.0, 0.0), (0.0203, -90.0, 0.15005),
            (0.0, 90.0, 0.4318), (0.0, -90.0, 0.0), (0.0, 0.0, 0.0)]  # fmt: skip
    joints = [
        _joint(f"j{i + 1}", a, alpha, d, lo=-360, hi=360, home=h)
        for i, ((a, alpha, d), h) in enumerate(zip(rows, [0, 45, -180, 0, 45, 0], strict=True))
    ]
    return robot_from_dict(dict(name="Puma 560", convention="standard", joints=joints))


def modified_spherical_arm() -> reachgate.Robot:
    """An invented modified-DH (Craig) arm with a spherical wrist, a shoulder offset, lateral
    offsets, an inverted link 2 (α = 180°), mirrored wrist twists, mount and tool."""
    joints = [
        _joint("j1", 0.10, 0.0, 0.40, lo=-360, hi=360),
        _joint("j2", 0.15, -90.0, 0.05, offset=-90.0, lo=-360, hi=360, home=-30),
        _joint("j3", 0.80, 180.0, -0.10, lo=-360, hi=360, home=50),
        _joint("j4", 0.12, -90.0, 0.75, lo=-360, hi=360),
        _joint("j5", 0.0, -90.0, 0.0, lo=-360, hi=360, home=40),
        _joint("j6", 0.0, 90.0, 0.10, lo=-360, hi=360),
    ]
    return robot_from_dict(
        dict(
            name="modified spherical",
            convention="modified",
            mount=dict(xyz_m=[0.2, -0.1, 0.3], rpy_deg=[0.0, 10.0, 30.0]),
            tool=dict(xyz_m=[0.02, 0.0, 0.15], rpy_deg=[90.0, 0.0, -15.0]),
            joints=joints,
        )
    )


def demo_robot() -> reachgate.Robot:
    return reachgate.load_robot(DEMO_ROBOT)


def pose_errors(achieved: np.ndarray, target: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(N,) position error in m and rotation angle in rad (scipy Rotation) between poses."""
    dp = np.linalg.norm(achieved[:, :3, 3] - target[:, :3, 3], axis=1)
    relative = np.swapaxes(achieved[:, :3, :3], 1, 2) @ target[:, :3, :3]
    return dp, Rotation.from_matrix(relative).magnitude()


def with_rail(robot: reachgate.Robot, rail_m, q_arm: np.ndarray) -> np.ndarray:
    return q_arm if rail_m is None else np.column_stack([rail_m, q_arm])


def smooth_joint_path(robot, n_samples, seed, amplitude_rad=0.35):
    """(N, n) arm values: home plus a few slow sinusoids per joint, as a path would move."""
    rng = np.random.default_rng(seed)
    home = robot.home[1:] if robot.has_rail else robot.home
    s = np.linspace(0.0, 1.0, n_samples)[:, None]
    freq = rng.uniform(0.3, 1.5, (3, home.size))
    phase = rng.uniform(0, 2 * np.pi, (3, home.size))
    wave = sum(np.sin(2 * np.pi * freq[k] * s + phase[k]) - np.sin(phase[k]) for k in range(3))
    return home + amplitude_rad / 3 * wave


# --- closed form: round trips on every branch ---------------------------------------------

ROUND_TRIP_ROBOTS = {
    "demo rail arm": (demo_robot, 401),
    "Puma 560": (puma_560, 402),
    "modified spherical": (modified_spherical_arm, 403),
}


@pytest.mark.parametrize("name", list(ROUND_TRIP_ROBOTS))
def test_closed_form_round_trip_on_all_eight_branches(name):
    """FK(IK(x)) = x to 1e-9 m / 1e-9 rad on 3000 poses made by FK of random configurations,
    on each of the 8 branches wherever that branch reaches the pose (always on the
    configuration's own branch); away from singularities the solution lies on the branch
    asked for, and on the configuration's own branch IK gives back the configuration."""
    make, seed = ROUND_TRIP_ROBOTS[name]
    robot = make()
    assert is_spherical_wrist(robot.chain)
    rng = np.random.default_rng(seed)
    n = 3000
    q_arm = rng.uniform(-np.pi, np.pi, (n, 6))
    rail_m = rng.uniform(robot.rail.lower, robot.rail.upper, n) if robot.has_rail else None
    cell_T_tool = forward(robot, with_rail(robot, rail_m, q_arm))
    targets = chain_targets(robot, cell_T_tool, rail_m)
    solver = SphericalWristSolver(robot.chain)
    offsets = robot.chain.theta_offset_rad
    theta_true = q_arm + offsets
    own_branch = [solver.branch_of(theta) for theta in theta_true]
    checked_branch_samples = 0
    for branch in ALL_BRANCHES:
        sol = solver.solve(targets, branch)
        achieved = forward(robot, with_rail(robot, rail_m, sol.theta - offsets))
        dp, dr = pose_errors(achieved, cell_T_tool)
        # Orientation is always met; where the wrist centre is out of this branch's shell
        # (a shoulder offset a1 moves the shoulder point when the shoulder flips), the arm
        # reaches along the same ray and misses by exactly the reported excess.
        assert dr.max() < ROUND_TRIP_TOL_RAD, f"{branch}: worst rotation error {dr.max():.3g} rad"
        np.testing.assert_allclose(dp, sol.reach_excess_m, atol=ROUND_TRIP_TOL_M)
        reachable = sol.reach_excess_m == 0.0
        assert dp[reachable].max() < ROUND_TRIP_TOL_M
        mine = np.array([b == branch for b in own_branch])
        assert reachable[mine].all()  # a configuration's pose is reachable on its own branch

        clear = np.flatnonzero(
            reachable
            & (sol.shoulder_m > BRANCH_CLEARANCE)
            & (sol.elbow_rad > BRANCH_CLEARANCE)
            & (sol.wrist_rad > BRANCH_CLEARANCE)
        )
        assert clear.size > 0.75 * n
        for k in clear[:300]:
            assert solver.branch_of(sol.theta[k]) == branch
        checked_branch_samples += min(300, clear.size)

        back = np.intersect1d(np.flatnonzero(mine), clear)
        wrapped = np.angle(np.exp(1j * (sol.theta[back] - theta_true[back])))
        assert back.size > 0
        assert np.abs(wrapped).max() < 1e-8
    assert checked_branch_samples == 8 * 300


# --- numeric against closed form, and against roboticstoolbox -----------------------------


def test_numeric_solver_agrees_with_closed_form_on_the_same_branch():
    """Two independent solvers (ours: damped least squares vs closed form) on a smooth
    1500-sample path of the demo arm, rail fixed: joint values agree to 1e-6 rad."""
    robot = demo_robot()
    q_arm = smooth_joint_path(robot, 1500, seed=411)
    rail_m = np.full(q_arm.shape[0], robot.rail.home)
    cell_T_tool = forward(robot, with_rail(robot, rail_m, q_arm))
    closed = solve_path(robot, cell_T_tool, rail_m)
    assert closed.solver is SolverKind.CLOSED_FORM
    assert min(m.min() for m in closed.measures.values()) > 0.05  # well clear of singularities
    targets = chain_targets(robot, cell_T_tool, rail_m)
    numeric = solve_path_numeric(robot.chain, targets, robot.home[1:])
    assert numeric.solved.all()
    np.testing.assert_allclose(numeric.q_arm, closed.q[:, 1:], atol=AGREEMENT_TOL_RAD)
    np.testing.assert_allclose(closed.q[:, 1:], q_arm, atol=AGREEMENT_TOL_RAD)


def test_numeric_solver_on_offset_wrist_arm_matches_roboticstoolbox_ik_lm():
    """Offset-wrist arm (no closed form): our residuals < 1e-9 on a smooth reachable path, and
    roboticstoolbox's C++ ik_LM (tol 1e-14, one search of up to 100 iterations, warm-started
    from its previous sample's solution, joint limits off) finds the same joint values to
    1e-6 rad wherever both succeed."""
    robot = offset_wrist_arm()
    assert not is_spherical_wrist(robot.chain)
    q_arm = smooth_joint_path(robot, 400, seed=421)
    cell_T_tool = forward(robot, q_arm)
    solved = solve_path(robot, cell_T_tool, None)
    assert solved.solver is SolverKind.NUMERIC
    assert solved.position_error_m.max() < 1e-9
    assert solved.orientation_error_rad.max() < 1e-9
    assert np.all(solved.reach_excess_m == 0.0)

    # roboticstoolbox on the same DH numbers; targets at the flange in the arm base frame
    links = [
        RevoluteDH(a=row.a_m, alpha=row.alpha_rad, d=row.d_m, offset=row.theta_offset_rad)
        for row in robot.rows
    ]
    reference = DHRobot(links)
    targets = chain_targets(robot, cell_T_tool, None)
    previous = robot.home
    agree = 0
    for k in range(targets.shape[0]):
        result = reference.ik_LM(
            SE3(targets[k], check=False),
            q0=previous,
            tol=1e-14,
            ilimit=100,
            slimit=1,
            joint_limits=False,
        )
        if not result.success:
            continue
        previous = result.q
        np.testing.assert_allclose(solved.q[k], result.q, atol=AGREEMENT_TOL_RAD)
        agree += 1
    assert agree > 0.95 * targets.shape[0]


# --- continuity: multi-turn joints and prismatic axes -------------------------------------


def minimum_jerk(s):
    return 10 * s**3 - 15 * s**4 + 6 * s**5


def test_multi_turn_j6_is_not_wrapped_to_plus_minus_180_deg():
    """j6 (range ±360°) turns 0° -> 300° continuously: the solved j6 follows to 300° (not
    wrapped to -60°); rail values pass through untouched (never wrapped)."""
    robot = demo_robot()
    n = 1200
    s = minimum_jerk(np.linspace(0.0, 1.0, n))
    q_arm = np.tile(robot.home[1:], (n, 1))
    q_arm[:, 5] = np.radians(300.0) * s
    q_arm[:, 3] = np.radians(200.0) * s  # j4 (±350°) past 180° as well
    rail_m = 0.5 + 8.0 * s  # past π m and 2π m
    cell_T_tool = forward(robot, with_rail(robot, rail_m, q_arm))
    solved = solve_path(robot, cell_T_tool, rail_m)
    np.testing.assert_array_equal(solved.q[:, 0], rail_m)
    np.testing.assert_allclose(solved.q[:, 1:], q_arm, atol=1e-9)
    assert solved.q[-1, 6] == pytest.approx(np.radians(300.0), abs=1e-9)
    assert np.all(np.diff(solved.q[:, 6]) >= -1e-12)


def test_continuous_angles_start_nearest_the_reference():
    """The first sample takes the turn nearest the reference; later samples follow it."""
    theta = np.array([[3.0], [-3.1], [2.9]])  # wraps across ±π between samples
    out = continuous_angles(theta, np.array([2 * np.pi + 3.0]))
    np.testing.assert_allclose(out[:, 0], 2 * np.pi + np.array([3.0, 2 * np.pi - 3.1, 2.9]))


def test_prismatic_joint_is_never_wrapped_by_the_numeric_solver():
    """A lift joint travels 0.5 m -> 7.5 m (past π and 2π m): its solved values equal the
    path's, not shifted by 2π."""
    joints = [
        dict(name="lift", type="prismatic", a_m=0.0, alpha_deg=0.0, offset_m=0.0,
             range_m=[0.0, 8.0], vmax_m_s=1.0, amax_m_s2=1.0, home_m=0.5),
        _joint("j2", 0.40, -90.0, 0.0, home=10),
        _joint("j3", 0.80, 0.0, 0.0, offset=-90.0, home=-30),
        _joint("j4", 0.05, -90.0, 0.70, home=40),
        _joint("j5", 0.0, 90.0, 0.05, home=50),
        _joint("j6", 0.0, -90.0, 0.15, home=0),
    ]  # fmt: skip
    robot = robot_from_dict(dict(name="lift arm", convention="standard", joints=joints))
    assert robot.chain.revolute.tolist() == [False, True, True, True, True, True]
    n = 600
    s = minimum_jerk(np.linspace(0.0, 1.0, n))
    q = smooth_joint_path(robot, n, seed=431, amplitude_rad=0.2)
    q[:, 0] = 0.5 + 7.0 * s
    solved = solve_path(robot, forward(robot, q), None)
    assert solved.solver is SolverKind.NUMERIC
    np.testing.assert_allclose(solved.q, q, atol=1e-8)


# --- unreachable targets --------------------------------------------------------------------


def test_reach_excess_is_the_analytic_distance_out_of_the_shell():
    """Demo arm, rail at home: wrist centres placed at a known distance from the shoulder
    point in the arm plane. Analytic (two-link geometry): outer radius a2 + sqrt(a3² + d4²) =
    1.05 + sqrt(0.2² + 1.1²) m, inner radius |a2 - sqrt(a3² + d4²)|; the excess is the
    distance beyond the outer or inside the inner shell."""
    robot = demo_robot()
    a1, d1, a2, a3, d4, d6 = 0.30, 0.68, 1.05, 0.20, 1.10, 0.22  # the demo file's DH numbers
    forearm = math.hypot(a3, d4)
    outer, inner = a2 + forearm, abs(a2 - forearm)
    solver = SphericalWristSolver(robot.chain)
    assert solver.branch_of(robot.home[1:] + robot.chain.theta_offset_rad).shoulder == 1

    elevation = np.radians([-40.0, 0.0, 25.0, 60.0, 10.0, -10.0])
    distance = np.array([outer + 0.01, outer + 0.3, outer + 1.0, outer + 0.05, 0.02, 0.05])
    expected = np.where(distance > outer, distance - outer, inner - distance)
    # in the chain frame, θ1 = 0: shoulder point (a1, 0, d1); wrist centre in the x-z plane
    centre = np.column_stack(
        [a1 + distance * np.cos(elevation), np.zeros(6), d1 + distance * np.sin(elevation)]
    )
    chain_T_flange = np.tile(np.eye(4), (6, 1, 1))
    chain_T_flange[:, :3, 3] = centre + np.array([0.0, 0.0, d6])  # flange frame = chain frame
    rail_m = np.full(6, robot.rail.home)
    cell_T_tool = (
        cell_T_base(robot, rail_m) @ robot.chain.base_T_chain @ chain_T_flange @ robot.flange_T_tool
    )
    solved = solve_path(robot, cell_T_tool, rail_m)
    np.testing.assert_allclose(solved.reach_excess_m, expected, atol=1e-12)

    # the same through reachgate.check: one reach row, its worst the largest excess
    t = np.arange(6) * 0.004
    path = reachgate.Trajectory.from_arrays(
        t, cell_T_tool[:, :3, 3], matrix_to_quat(cell_T_tool[:, :3, :3])
    )
    report = reachgate.check(robot, path)
    reach = [row for row in report.violations if row.check is reachgate.Check.REACH]
    assert len(reach) == 1
    assert reach[0].worst == pytest.approx(expected.max(), abs=1e-12)
    assert reach[0].worst_s == pytest.approx(t[np.argmax(expected)])


def test_target_rows_from_quaternions_equal_those_from_placed_matrices():
    """The solver's targets built from scenario quaternions through a placement equal the
    targets of the same poses given as cell matrices (4x4 products), rail moving."""
    robot = demo_robot()
    rng = np.random.default_rng(431)
    n = 200
    q_wxyz = rng.normal(size=(n, 4))
    q_wxyz /= np.linalg.norm(q_wxyz, axis=1, keepdims=True)
    scenario_p_m = rng.uniform(-1.0, 1.0, (n, 3))
    rail_m = rng.uniform(robot.rail.lower, robot.rail.upper, n)
    cell_T_scenario = transform(
        rpy_to_matrix(np.array([0.1, -0.2, 0.7])), np.array([3.0, 0.2, 1.5])
    )
    cell_T_tool = cell_T_scenario @ transform(quat_to_matrix(q_wxyz), scenario_p_m)
    from_quaternions = target_rows_from_quaternions(
        quaternion_map(target_map(robot, cell_T_scenario)), q_wxyz, scenario_p_m, rail_m
    )
    np.testing.assert_allclose(
        from_quaternions, target_rows(robot, cell_T_tool, rail_m), atol=1e-13
    )

    # and the flange targets are B⁻¹ · Tx(-rail) · C⁻¹ · cell_T_tool · tool⁻¹ as 4x4 products
    along_rail = np.tile(np.eye(4), (n, 1, 1))
    along_rail[:, 0, 3] = -rail_m
    B = robot.carriage_T_base @ robot.chain.base_T_chain
    expected = (
        np.linalg.inv(B)
        @ along_rail
        @ np.linalg.inv(robot.cell_T_rail)
        @ cell_T_tool
        @ np.linalg.inv(robot.flange_T_tool)
    )
    np.testing.assert_allclose(chain_targets(robot, cell_T_tool, rail_m), expected, atol=1e-12)
