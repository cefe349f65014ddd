"""Singularities of general arms (no closed-form solver): the scale-free measure, its floor,
the kinds it names, and what `reachgate robot` says about the wrist and the solver.

Sources: roboticstoolbox-python (Corke) DHRobot ``jacob0`` and ``manipulability`` (methods
``yoshikawa`` and ``invcondition``, the latter σ_min/σ_max); numpy's SVD of the toolbox's
Jacobian for the measure's formula; the closed-form wrist, elbow and shoulder factors of
the spherical-wrist solver (kinematics/closed_form.py, themselves checked against the
toolbox in test_ik.py) as the analytic case for the geometric kinds.
"""

from __future__ import annotations

import math
import sys
from dataclasses import replace

import numpy as np
import pytest
from roboticstoolbox import DHRobot, RevoluteDH
from spatialmath import SE3

import reachgate
from reachgate.kinematics.chain import arm_manipulability, forward, jacobian
from reachgate.kinematics.singularity import (
    characteristic_length_m,
    conditioning,
    kind_measures,
    singularity_kinds,
    wrist_point,
)
from reachgate.model.robot import Thresholds
from reachgate.model.transforms import matrix_to_quat

from conftest import DEMO_ROBOT, REPO, offset_wrist_arm

sys.path.insert(0, str(REPO / "scripts"))
import calibrate_conditioning as calibration

#: The measure from our Jacobian against the same formula on the toolbox's: rounding of a
#: 6x6 inverse whose condition number reaches about 1e6 on these configurations, and the
#: measure's regularisation (singularity.REGULARISATION).
FORMULA_TOL = 1e-8


def _toolbox(robot: reachgate.Robot) -> DHRobot:
    """The same arm in roboticstoolbox: canonical DH links, the mount as base, the tool."""
    chain = robot.chain
    links = [
        RevoluteDH(a=a, alpha=alpha, d=d, offset=theta)
        for a, alpha, d, theta in zip(
            chain.a_m, chain.alpha_rad, chain.d_m, chain.theta_offset_rad, strict=True
        )
    ]
    base = robot.cell_T_rail @ robot.carriage_T_base @ chain.base_T_chain
    return DHRobot(links, base=SE3(base, check=False), tool=SE3(robot.flange_T_tool, check=False))


def _reference_measure(J: np.ndarray, length_m: float) -> tuple[float, np.ndarray]:
    """(k / sqrt(Σσ² · Σσ⁻²), the scaled Jacobian) of a Jacobian (6, 6), by numpy's SVD."""
    scaled = J.copy()
    scaled[:3] /= length_m
    sigma = np.linalg.svd(scaled, compute_uv=False)
    return 6.0 / math.sqrt(np.sum(sigma**2) * np.sum(sigma**-2.0)), scaled


def test_measure_and_jacobian_match_roboticstoolbox_on_random_configurations():
    """Source: roboticstoolbox DHRobot.jacob0 and .manipulability on 40 seeded random
    configurations of the offset-wrist arm. Our Jacobian equals the toolbox's; Yoshikawa's
    measure equals the toolbox's; our scale-free measure equals k/sqrt(Σσ²·Σσ⁻²) of the
    toolbox's Jacobian with translations over L, and lies between the toolbox's
    σ_min/σ_max ('invcondition') of that Jacobian and 6 times it."""
    robot = offset_wrist_arm()
    reference = _toolbox(robot)
    rng = np.random.default_rng(9101)
    q = rng.uniform(robot.lower, robot.upper, (40, robot.n_axes))
    ours = conditioning(robot, q)
    ours_J = jacobian(robot, q)
    ours_w = arm_manipulability(robot, q)
    length = characteristic_length_m(robot)
    for k in range(q.shape[0]):
        J = reference.jacob0(q[k])
        np.testing.assert_allclose(ours_J[k], J, atol=1e-12)
        assert ours_w[k] == pytest.approx(reference.manipulability(q[k]), rel=1e-9, abs=1e-12)
        expected, scaled = _reference_measure(J, length)
        assert ours[k] == pytest.approx(expected, rel=FORMULA_TOL)
        ratio = reference.manipulability(J=scaled, method="invcondition")
        assert ratio * (1 - 1e-9) <= ours[k] <= 6.0 * ratio * (1 + 1e-9)


def test_default_floor_is_the_measure_where_the_wrist_floor_fires():
    """Calibration (README): on the demo arm, whose spherical wrist has the closed-form wrist
    test, the median of the measure at a 5° wrist bend over seeded random configurations
    clear of elbow and shoulder singularities is the default floor (to 5 %, from a smaller
    sample than the 20,000 of scripts/calibrate_conditioning.py)."""
    robot = reachgate.load_robot(DEMO_ROBOT)
    q = calibration.clear_configurations(robot, 3000, seed=9102)
    at_wrist_floor = conditioning(robot, calibration.with_wrist_bend(q, math.radians(5.0)))
    assert np.median(at_wrist_floor) == pytest.approx(Thresholds().conditioning_min, rel=0.05)


def test_measure_crosses_its_floor_where_axes_4_and_6_cross_the_wrist_threshold():
    """Source: the angle between axes 4 and 6 (kind_measures 'wrist'; on this arm |θ5|).
    On 150 seeded random configurations of the offset-wrist arm clear of elbow and shoulder
    singularities, the wrist bends through straight (θ5 from -30° to 30°, 0.1° steps). The
    measure is below the default floor where axes 4 and 6 are parallel in every one; the
    stretch below the floor is half as wide as the 5° wrist threshold would make it (10°)
    in the median, to 1°, and within the spherical wrist's calibration band (2.7°-9.8° half
    width, README) for at least 80 % of them. (The offset shifts the measure's minimum off
    the parallel axes by a few degrees, so the two crossings are not symmetric.)"""
    robot = offset_wrist_arm()
    q = calibration.clear_configurations(robot, 280, seed=9103)[:150]
    bend = np.radians(np.linspace(-30.0, 30.0, 601))
    below = (
        np.array([conditioning(robot, calibration.with_wrist_bend(q, b)) for b in bend])
        < Thresholds().conditioning_min
    )  # (bends, configurations)
    parallel = calibration.with_wrist_bend(q, 0.0)
    np.testing.assert_allclose(kind_measures(robot, parallel)["wrist"], 0.0, atol=1e-7)
    assert below[300].all()
    first, last = below.argmax(axis=0), below.shape[0] - 1 - below[::-1].argmax(axis=0)
    half_width_deg = 0.5 * np.degrees(bend[last] - bend[first])
    assert abs(np.median(half_width_deg) - 5.0) <= 1.0
    assert np.mean((half_width_deg >= 2.7) & (half_width_deg <= 9.8)) >= 0.8


def test_kind_measures_are_the_closed_form_factors_on_a_spherical_wrist():
    """Analytic: on the demo arm (spherical wrist, no lateral offsets) the general-arm
    geometry (angle between axes 4 and 6, wrist point from axis 1, elbow from stretched or
    folded) equals the closed-form solver's wrist, shoulder and elbow factors, each sample
    solved on its own branch."""
    from reachgate.kinematics.closed_form import SphericalWristSolver
    from reachgate.kinematics.path_ik import chain_targets

    robot = reachgate.load_robot(DEMO_ROBOT)
    solver = SphericalWristSolver(robot.chain)
    rng = np.random.default_rng(9104)
    q = rng.uniform(robot.lower, robot.upper, (60, robot.n_axes))
    targets = chain_targets(robot, forward(robot, q), q[:, 0])
    measures = kind_measures(robot, q)
    for k in range(q.shape[0]):
        theta = q[k, 1:] + robot.chain.theta_offset_rad
        closed = solver.solve(targets[k : k + 1], solver.branch_of(theta))
        assert closed.wrist_rad[0] == pytest.approx(measures["wrist"][k], abs=1e-9)
        assert closed.shoulder_m[0] == pytest.approx(measures["shoulder"][k], abs=1e-9)
        assert closed.elbow_rad[0] == pytest.approx(measures["elbow"][k], abs=1e-9)


def _sweep(robot, joint: int, values_rad: np.ndarray, base: np.ndarray | None = None):
    """A 4 s path at 250 Hz moving one joint through values (others at base or home)."""
    t = np.linspace(0.0, 4.0, values_rad.size)
    q = np.tile(robot.home if base is None else base, (t.size, 1))
    q[:, joint] = values_rad
    T = forward(robot, q)
    return reachgate.Trajectory.from_arrays(t, T[:, :3, 3], matrix_to_quat(T[:, :3, :3])), q


def test_offset_wrist_path_through_aligned_axes_4_and_6_fails_as_a_wrist_singularity():
    """Source: roboticstoolbox's manipulability (Yoshikawa) at the worst sample is below
    1e-3 of its value at home. The offset-wrist arm (numeric IK) bends joint 5 from 30° to
    -30° with the default thresholds: the check fails with a singularity row named `wrist`,
    where the angle between axes 4 and 6 is below 5°. Without the new floor (as before,
    when only the Yoshikawa floor, off by default, applied) the same case passes."""
    robot = offset_wrist_arm()
    bend = np.radians(30.0) * np.cos(np.pi * np.linspace(0.0, 1.0, 1001))
    path, _ = _sweep(robot, 4, bend)
    report = reachgate.check(robot, path)
    assert not report.passed
    rows = [v for v in report.violations if v.check is reachgate.Check.SINGULARITY]
    assert rows and {v.axis for v in rows} == {"wrist"}
    worst = rows[0]
    k = int(np.argmin(np.abs(report.t_s - worst.worst_s)))
    q_worst = report.solution.q[k]
    toolbox = _toolbox(robot)
    assert toolbox.manipulability(q_worst) < 1e-3 * toolbox.manipulability(robot.home)
    assert kind_measures(robot, q_worst[None])["wrist"][0] < math.radians(5.0)
    floor_off = replace(robot.thresholds, conditioning_min=0.0)
    assert reachgate.check(replace(robot, thresholds=floor_off), path).passed


def test_elbow_and_shoulder_singularities_of_a_general_arm_are_named():
    """Analytic: the elbow is stretched where the forearm (axis 3 to the wrist point) lines
    up with the upper arm, and the shoulder singular where the wrist point lies on axis 1;
    at both the measure is below its floor and the kind is named. roboticstoolbox's
    Yoshikawa measure there is below 1e-3 of its value at home (elbow), below 0.1 of it
    (shoulder: with its wrist axes offset this arm has no exact wrist centre, so the wrist
    point on axis 1 is near-singular, not singular). The configurations are found on the
    geometry by scipy (minimize_scalar on the elbow angle over joint 3, brentq on the wrist
    point's distance along the arm plane over joint 2)."""
    from scipy.optimize import brentq, minimize_scalar

    robot = offset_wrist_arm()
    toolbox = _toolbox(robot)

    def with_joint(joint, values):
        q = np.tile(robot.home, (np.size(values), 1))
        q[:, joint] = values
        return q

    def elbow(theta3):
        return kind_measures(robot, with_joint(2, theta3))["elbow"][0]

    grid = np.linspace(robot.lower[2], robot.upper[2], 361)
    guess = grid[np.argmin(kind_measures(robot, with_joint(2, grid))["elbow"])]
    found = minimize_scalar(
        elbow, bounds=(guess - 0.05, guess + 0.05), method="bounded", options={"xatol": 1e-12}
    )
    q_elbow = with_joint(2, found.x)[0]

    def along_arm_plane(theta2):  # θ1 = 0: the arm plane is the chain's x-z plane
        return wrist_point(robot, with_joint(1, theta2))[:, 0]

    grid = np.linspace(robot.lower[1], robot.upper[1], 361)
    values = along_arm_plane(grid)
    change = np.flatnonzero(np.diff(np.sign(values)) != 0)
    assert change.size
    root = brentq(lambda x: along_arm_plane(x)[0], grid[change[0]], grid[change[0] + 1], xtol=1e-15)
    q_shoulder = with_joint(1, root)[0]
    for q, kind, fraction in ((q_elbow, "elbow", 1e-3), (q_shoulder, "shoulder", 0.1)):
        assert kind_measures(robot, q[None])[kind][0] < 1e-5
        assert conditioning(robot, q[None])[0] < Thresholds().conditioning_min
        assert toolbox.manipulability(q) < fraction * toolbox.manipulability(robot.home)
        assert singularity_kinds(robot, q[None]) == [kind]


def test_robot_description_says_whether_the_wrist_axes_meet_and_which_solver_applies():
    """Analytic (DH table): the gantry's three wrist axes meet (a4 = a5 = d5 = 0) but its
    prismatic joints need the numeric solver; the offset-wrist arm's do not meet; the demo
    arm's meet and it is solved in closed form."""
    from reachgate.render.describe import describe_robot

    gantry = describe_robot(reachgate.load_robot(REPO / "robots" / "demo_gantry.toml"))
    assert "wrist axes: 4, 5 and 6 meet in one point" in gantry
    assert "IK solver: numeric" in gantry
    assert "no closed form: joint(s) 1, 2, 3 are prismatic" in gantry
    offset = describe_robot(offset_wrist_arm())
    assert "wrist axes: 4, 5 and 6 do not meet in one point" in offset
    assert "IK solver: numeric" in offset
    assert "no closed form: the wrist axes 4, 5 and 6 do not meet in one point" in offset
    demo = describe_robot(reachgate.load_robot(DEMO_ROBOT))
    assert "wrist axes: 4, 5 and 6 meet in one point" in demo
    assert "IK solver: closed-form" in demo and "no closed form" not in demo
