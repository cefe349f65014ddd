"""Forward kinematics, Jacobian and manipulability against the outside.

Sources named beside each check:
- roboticstoolbox-python (Corke): DHRobot with RevoluteDH / PrismaticDH (standard DH) and
  RevoluteMDH / PrismaticMDH (modified DH), its ``base`` and ``tool``, ``fkine`` and
  ``jacob0`` (rows v then ω, world frame);
- the Puma 560 standard DH table of Corke & Armstrong-Hélouvry (ICRA 1994), as shipped in
  ``roboticstoolbox.models.DH.Puma560`` (pedestal included in d1);
- Yoshikawa (1985): manipulability w = sqrt(det(J Jᵀ)); for a planar two-link arm
  w = l1·l2·|sin q2|;
- central finite differences of our own FK (the test used in spatialmath's own tests for
  analytic Jacobians).
"""

from __future__ import annotations

import numpy as np
import pytest
import roboticstoolbox as rtb
from roboticstoolbox import DHRobot, PrismaticDH, PrismaticMDH, RevoluteDH, RevoluteMDH
from scipy.spatial.transform import Rotation
from spatialmath import SE3

import reachgate
from reachgate.kinematics.chain import (
    arm_manipulability,
    chain_pose_jacobian,
    forward,
    jacobian,
    manipulability,
)
from reachgate.model.robot import robot_from_dict
from reachgate.model.transforms import transform_from_xyz_rpy

from conftest import DEMO_ROBOT

#: FK and Jacobian agree with the toolbox to rounding: a handful of 4x4 products of O(1) m.
REFERENCE_TOL = 1e-12
#: Central differences with step h: truncation O(h²) plus rounding O(ε/h) ≈ 1e-10.
FD_STEP = 1e-6
FD_TOL = 1e-8

# --- arms under test -------------------------------------------------------------------
# Each joint: (type, a_m, alpha_deg, d_or_offset_m, theta_offset_deg). For a revolute joint
# the 4th value is d, the 5th the θ offset; for a prismatic joint the 4th is the d offset and
# the 5th the fixed θ. Invented numbers; every arm mixes offsets and non-trivial frames.

ARMS = {
    "standard, rail, prismatic joint 3": dict(
        convention="standard",
        rail=dict(xyz_m=[0.5, -1.0, 0.2], rpy_deg=[0.0, 0.0, 30.0]),
        mount=dict(xyz_m=[0.1, 0.2, 0.45], rpy_deg=[180.0, 0.0, 15.0]),
        joints=[
            ("revolute", 0.25, -90.0, 0.60, 10.0),
            ("revolute", 0.90, 0.0, 0.05, -90.0),
            ("prismatic", 0.10, -90.0, 0.30, 20.0),
            ("revolute", 0.0, 90.0, 0.80, 0.0),
            ("revolute", 0.02, -90.0, 0.0, 5.0),
            ("revolute", 0.0, 0.0, 0.15, 0.0),
        ],
        tool=dict(xyz_m=[0.03, -0.02, 0.2], rpy_deg=[-170.0, -30.0, 20.0]),
    ),
    "modified, prismatic joint 2, tilted mount": dict(
        convention="modified",
        rail=None,
        mount=dict(xyz_m=[-0.3, 0.4, 1.2], rpy_deg=[10.0, -20.0, 45.0]),
        joints=[
            ("revolute", 0.05, 15.0, 0.50, 0.0),
            ("prismatic", 0.20, -90.0, 0.10, 30.0),
            ("revolute", 0.70, 0.0, 0.08, -90.0),
            ("revolute", 0.12, -90.0, 0.65, 0.0),
            ("revolute", 0.0, 90.0, 0.0, 12.0),
            ("revolute", 0.0, -90.0, 0.10, 0.0),
        ],
        tool=dict(xyz_m=[0.0, 0.05, 0.18], rpy_deg=[0.0, 90.0, 0.0]),
    ),
    "modified, rail across the cell": dict(
        convention="modified",
        rail=dict(xyz_m=[2.0, 1.0, 0.0], rpy_deg=[0.0, 0.0, -90.0]),
        mount=dict(xyz_m=[0.0, 0.0, 0.4], rpy_deg=[0.0, 0.0, 0.0]),
        joints=[
            ("revolute", 0.0, 0.0, 0.55, 0.0),
            ("revolute", 0.30, -90.0, 0.0, -90.0),
            ("revolute", 1.00, 0.0, 0.0, 0.0),
            ("revolute", 0.15, -90.0, 0.95, 0.0),
            ("revolute", 0.0, 90.0, 0.0, 0.0),
            ("revolute", 0.0, -90.0, 0.12, 180.0),
        ],
        tool=dict(xyz_m=[0.0, 0.0, 0.3], rpy_deg=[0.0, 0.0, 0.0]),
    ),
    "standard, prismatic first, four joints": dict(
        convention="standard",
        rail=None,
        mount=dict(xyz_m=[1.0, 0.0, 0.0], rpy_deg=[0.0, 90.0, 0.0]),
        joints=[
            ("prismatic", 0.0, 0.0, 0.4, 0.0),
            ("revolute", 0.5, 0.0, 0.0, 0.0),
            ("revolute", 0.4, 180.0, 0.0, 0.0),
            ("prismatic", 0.0, 0.0, 0.1, 45.0),
        ],
        tool=dict(xyz_m=[0.0, 0.0, 0.1], rpy_deg=[5.0, 0.0, 0.0]),
    ),
}

PRISMATIC_RANGE_M = (-0.5, 1.0)
RAIL_RANGE_M = (0.0, 6.0)


def robot_dict(spec: dict) -> dict:
    """Our robot-file structure (DESIGN §3) from a spec."""
    joints = []
    for i, (kind, a, alpha, d_or_offset, theta) in enumerate(spec["joints"]):
        joint = dict(name=f"j{i + 1}", type=kind, a_m=a, alpha_deg=alpha)
        limits = dict(vmax_deg_s=100.0, amax_deg_s2=300.0, range_deg=[-180.0, 180.0])
        if kind == "revolute":
            joint.update(d_m=d_or_offset, offset_deg=theta, **limits)
        else:
            joint.update(
                offset_m=d_or_offset,
                theta_deg=theta,
                range_m=list(PRISMATIC_RANGE_M),
                vmax_m_s=1.0,
                amax_m_s2=2.0,
            )
        joints.append(joint)
    data = dict(
        name="test arm",
        convention=spec["convention"],
        mount=spec["mount"],
        tool=spec["tool"],
        joints=joints,
    )
    if spec["rail"] is not None:
        data["rail"] = dict(
            frame=spec["rail"],
            range_m=list(RAIL_RANGE_M),
            vmax_m_s=1.0,
            amax_m_s2=1.0,
            home_m=1.0,
        )
    return data


def toolbox_links(spec: dict) -> list:
    """roboticstoolbox links for the same spec, built from the spec's numbers directly."""
    modified = spec["convention"] == "modified"
    Rev, Pri = (RevoluteMDH, PrismaticMDH) if modified else (RevoluteDH, PrismaticDH)
    links = []
    for kind, a, alpha, d_or_offset, theta in spec["joints"]:
        if kind == "revolute":
            links.append(Rev(a=a, alpha=np.radians(alpha), d=d_or_offset, offset=np.radians(theta)))
        else:
            links.append(
                Pri(a=a, alpha=np.radians(alpha), theta=np.radians(theta), offset=d_or_offset)
            )
    return links


def pose(frame: dict) -> np.ndarray:
    return transform_from_xyz_rpy(frame["xyz_m"], np.radians(frame["rpy_deg"]))


def toolbox_base(spec: dict, rail_m: float | None) -> np.ndarray:
    """World pose of the arm base: cell_T_rail · Tx(rail) · carriage_T_base (DESIGN §2)."""
    mount = pose(spec["mount"])
    if spec["rail"] is None:
        return mount
    carriage = np.eye(4)
    carriage[0, 3] = rail_m
    return pose(spec["rail"]) @ carriage @ mount


def random_configurations(spec: dict, rng: np.random.Generator, count: int) -> np.ndarray:
    """(count, n_axes) axis values: rail first (if any), revolute in ±π, prismatic in range."""
    columns = []
    if spec["rail"] is not None:
        columns.append(rng.uniform(*RAIL_RANGE_M, count))
    for kind, *_ in spec["joints"]:
        if kind == "revolute":
            columns.append(rng.uniform(-np.pi, np.pi, count))
        else:
            columns.append(rng.uniform(*PRISMATIC_RANGE_M, count))
    return np.column_stack(columns)


def se3(T: np.ndarray) -> SE3:
    return SE3(T, check=False)


# --- against roboticstoolbox's DHRobot ---------------------------------------------------


@pytest.mark.parametrize(
    ("name", "seed"), [(name, 140 + i) for i, name in enumerate(ARMS)], ids=list(ARMS)
)
def test_chain_pose_and_jacobian_match_roboticstoolbox_dhrobot(name, seed):
    """Source: roboticstoolbox DHRobot.fkine and .jacob0 on the canonical chain's own DH
    numbers (no base, no tool): what the numeric IK iterates on."""
    spec = ARMS[name]
    robot = robot_from_dict(robot_dict(spec))
    chain = robot.chain
    rng = np.random.default_rng(seed)
    q = random_configurations(spec, rng, 40)
    q_arm = q[:, 1:] if robot.has_rail else q
    links = [
        RevoluteDH(a=a, alpha=alpha, d=d, offset=theta)
        if revolute
        else PrismaticDH(theta=theta, a=a, alpha=alpha, offset=d, qlim=[-10.0, 10.0])
        for a, alpha, d, theta, revolute in zip(
            chain.a_m,
            chain.alpha_rad,
            chain.d_m,
            chain.theta_offset_rad,
            chain.revolute,
            strict=True,
        )
    ]
    reference = DHRobot(links)
    T, J = chain_pose_jacobian(chain, q_arm)
    for k in range(q_arm.shape[0]):
        np.testing.assert_allclose(T[k], reference.fkine(q_arm[k]).A, atol=REFERENCE_TOL)
        np.testing.assert_allclose(J[k], reference.jacob0(q_arm[k]), atol=REFERENCE_TOL)


@pytest.mark.parametrize(
    ("name", "seed"), [(name, 100 + i) for i, name in enumerate(ARMS)], ids=list(ARMS)
)
def test_fk_and_jacobian_match_roboticstoolbox_dhrobot(name, seed):
    """Source: roboticstoolbox DHRobot.fkine and .jacob0 (base = mount, with the rail's
    carriage composed into the base per sample; tool = tool frame)."""
    spec = ARMS[name]
    robot = robot_from_dict(robot_dict(spec))
    rng = np.random.default_rng(seed)
    q = random_configurations(spec, rng, 40)
    ours_T = forward(robot, q)
    ours_J = jacobian(robot, q)
    has_rail = spec["rail"] is not None
    arm = slice(1, None) if has_rail else slice(None)
    links = toolbox_links(spec)
    for k in range(q.shape[0]):
        base = toolbox_base(spec, q[k, 0] if has_rail else None)
        reference = DHRobot(links, base=se3(base), tool=se3(pose(spec["tool"])))
        np.testing.assert_allclose(ours_T[k], reference.fkine(q[k, arm]).A, atol=REFERENCE_TOL)
        np.testing.assert_allclose(
            ours_J[k][:, arm], reference.jacob0(q[k, arm]), atol=REFERENCE_TOL
        )
    if has_rail:
        # the rail column: the carriage moves the TCP along the rail's +x, no rotation (DESIGN §2)
        rail_x = pose(spec["rail"])[:3, 0]
        np.testing.assert_allclose(ours_J[:, :3, 0], np.broadcast_to(rail_x, (q.shape[0], 3)))
        np.testing.assert_array_equal(ours_J[:, 3:, 0], 0.0)


def test_demo_arm_fk_matches_roboticstoolbox_dhrobot():
    """Source: roboticstoolbox DHRobot.fkine / jacob0 on the demo arm's own file numbers."""
    robot = reachgate.load_robot(DEMO_ROBOT)
    rng = np.random.default_rng(107)
    q = np.column_stack([rng.uniform(0.0, 9.0, 30), rng.uniform(-np.pi, np.pi, (30, 6))])
    links = [
        RevoluteDH(a=0.30, alpha=np.radians(-90), d=0.68),
        RevoluteDH(a=1.05, alpha=0.0, d=0.0, offset=np.radians(-90)),
        RevoluteDH(a=0.20, alpha=np.radians(-90), d=0.0),
        RevoluteDH(a=0.0, alpha=np.radians(90), d=1.10),
        RevoluteDH(a=0.0, alpha=np.radians(-90), d=0.0),
        RevoluteDH(a=0.0, alpha=0.0, d=0.22),
    ]
    tool = transform_from_xyz_rpy([0, 0, 0.25], np.radians([-180.0, -30.0, 0.0]))
    ours_T, ours_J = forward(robot, q), jacobian(robot, q)
    for k in range(q.shape[0]):
        base = transform_from_xyz_rpy([q[k, 0], 0.0, 0.45], [0.0, 0.0, 0.0])
        reference = DHRobot(links, base=se3(base), tool=se3(tool))
        np.testing.assert_allclose(ours_T[k], reference.fkine(q[k, 1:]).A, atol=REFERENCE_TOL)
        np.testing.assert_allclose(ours_J[k, :, 1:], reference.jacob0(q[k, 1:]), atol=REFERENCE_TOL)


@pytest.mark.parametrize(
    ("name", "seed"), [(name, 200 + i) for i, name in enumerate(ARMS)], ids=list(ARMS)
)
def test_jacobian_equals_central_differences_of_fk(name, seed):
    """Source: central finite differences of our own FK (as spatialmath tests its Jacobians);
    ω from the rotation vector of R(q+h)·R(q-h)ᵀ (scipy Rotation) over 2h."""
    spec = ARMS[name]
    robot = robot_from_dict(robot_dict(spec))
    q = random_configurations(spec, np.random.default_rng(seed), 25)
    J = jacobian(robot, q)
    for k in range(robot.n_axes):
        step = np.zeros(robot.n_axes)
        step[k] = FD_STEP
        plus, minus = forward(robot, q + step), forward(robot, q - step)
        v = (plus[:, :3, 3] - minus[:, :3, 3]) / (2 * FD_STEP)
        delta = plus[:, :3, :3] @ np.swapaxes(minus[:, :3, :3], 1, 2)
        omega = Rotation.from_matrix(delta).as_rotvec() / (2 * FD_STEP)
        np.testing.assert_allclose(J[:, :3, k], v, atol=FD_TOL)
        np.testing.assert_allclose(J[:, 3:, k], omega, atol=FD_TOL)


# --- Puma 560 -----------------------------------------------------------------------------

# Standard DH table of the Puma 560 (Corke & Armstrong-Hélouvry, "A search for consensus
# among model parameters reported for the PUMA 560 robot", ICRA 1994), as roboticstoolbox
# ships it: d1 = 26.45 in = 0.67183 m includes the pedestal, d3 = 0.15005 m.
# (a_m, alpha_deg, d_m); all θ offsets zero. Joint ranges as in the toolbox model.
PUMA_560_DH = [
    (0.0, 90.0, 26.45 * 0.0254),
    (0.4318, 0.0, 0.0),
    (0.0203, -90.0, 0.15005),
    (0.0, 90.0, 0.4318),
    (0.0, -90.0, 0.0),
    (0.0, 0.0, 0.0),
]
PUMA_560_RANGE_DEG = [(-160, 160), (-45, 225), (-225, 45), (-110, 170), (-100, 100), (-266, 266)]
#: Named configurations of the toolbox model (deg): zero, ready, stretched, nominal.
PUMA_560_NAMED_DEG = {
    "qz": [0, 0, 0, 0, 0, 0],
    "qr": [0, 90, -90, 0, 0, 0],
    "qs": [0, 0, -90, 0, 0, 0],
    "qn": [0, 45, -180, 0, 45, 0],
}


def puma_560() -> reachgate.Robot:
    joints = [
        dict(
            name=f"j{i + 1}",
            a_m=a,
            alpha_deg=alpha,
            d_m=d,
            range_deg=list(PUMA_560_RANGE_DEG[i]),
            vmax_deg_s=100.0,
            amax_deg_s2=300.0,
        )
        for i, (a, alpha, d) in enumerate(PUMA_560_DH)
    ]
    return robot_from_dict(dict(name="Puma 560", convention="standard", joints=joints))


@pytest.mark.parametrize("config", list(PUMA_560_NAMED_DEG))
def test_puma_560_tcp_pose_at_named_configurations_matches_toolbox(config):
    """Source: roboticstoolbox models.DH.Puma560 fkine at its named configurations."""
    reference = rtb.models.DH.Puma560()
    q_deg = np.array(PUMA_560_NAMED_DEG[config], dtype=float)
    np.testing.assert_allclose(np.radians(q_deg), getattr(reference, config), atol=1e-15)
    ours = forward(puma_560(), np.radians(q_deg)[None])[0]
    np.testing.assert_allclose(ours, reference.fkine(np.radians(q_deg)).A, atol=REFERENCE_TOL)


def test_puma_560_manipulability_at_qn():
    """Yoshikawa's measure at qn. Sources: roboticstoolbox's Puma560.manipulability(qn),
    computed here (0.078617...), and the value 0.0786 that, from memory, the toolbox's own
    test suite asserts (its test files are not installed, so only the computed value is
    verified exactly; the 4-digit literal is checked to its 4 digits)."""
    reference = rtb.models.DH.Puma560()
    w = arm_manipulability(puma_560(), reference.qn[None])[0]
    assert w == pytest.approx(reference.manipulability(reference.qn), rel=1e-10)
    assert w == pytest.approx(0.0786, abs=5e-5)


# --- planar two-link arm ---------------------------------------------------------------------


def planar_two_link(l1_m: float, l2_m: float) -> reachgate.Robot:
    joints = [
        dict(
            name=f"j{i + 1}",
            a_m=length,
            alpha_deg=0.0,
            d_m=0.0,
            range_deg=[-180, 180],
            vmax_deg_s=90.0,
            amax_deg_s2=90.0,
        )
        for i, length in enumerate((l1_m, l2_m))
    ]
    return robot_from_dict(dict(name="planar 2R", convention="standard", joints=joints))


def test_planar_two_link_manipulability_is_l1_l2_abs_sin_q2():
    """Source: Yoshikawa (1985), planar two-link arm: w = l1·l2·|sin q2|, from the 2x2
    position Jacobian (rows v_x, v_y of our jacobian())."""
    l1, l2 = 0.7, 0.45
    robot = planar_two_link(l1, l2)
    q = np.random.default_rng(301).uniform(-np.pi, np.pi, (500, 2))
    J_planar = jacobian(robot, q)[:, :2, :]
    expected = l1 * l2 * np.abs(np.sin(q[:, 1]))
    np.testing.assert_allclose(manipulability(J_planar), expected, atol=1e-12)
    np.testing.assert_allclose(np.abs(np.linalg.det(J_planar)), expected, atol=1e-12)


def test_planar_two_link_reach_boundary_is_l1_plus_l2():
    """Analytic: |p| = sqrt(l1² + l2² + 2 l1 l2 cos q2) <= l1 + l2, equal when stretched."""
    l1, l2 = 0.7, 0.45
    robot = planar_two_link(l1, l2)
    q = np.random.default_rng(302).uniform(-np.pi, np.pi, (2000, 2))
    distance = np.linalg.norm(forward(robot, q)[:, :3, 3], axis=1)
    assert distance.max() <= l1 + l2 + 1e-15
    np.testing.assert_allclose(distance, np.sqrt(l1**2 + l2**2 + 2 * l1 * l2 * np.cos(q[:, 1])))
    stretched = np.column_stack([q[:, 0], np.zeros(q.shape[0])])
    np.testing.assert_allclose(
        np.linalg.norm(forward(robot, stretched)[:, :3, 3], axis=1), l1 + l2, rtol=1e-15
    )
