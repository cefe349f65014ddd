"""Robot shapes posed over arrays: link capsule ends and payload frames against the outside."""

from __future__ import annotations

import numpy as np
import pytest
from roboticstoolbox import DHRobot, PrismaticDH, PrismaticMDH, RevoluteDH, RevoluteMDH
from spatialmath import SE3

from reachgate.kinematics.bodies import link_points, motion_bounds, pose_parts
from reachgate.kinematics.chain import forward
from reachgate.model.robot import robot_from_dict
from reachgate.model.transforms import transform_from_xyz_rpy

#: Agreement with roboticstoolbox: both evaluate the same products in float64.
REFERENCE_TOL = 1e-12

# (type, a_m, alpha_deg, d_m or offset_m, theta offset_deg): an invented arm with a prismatic row
ROWS = [
    ("revolute", 0.25, -90.0, 0.55, 0.0),
    ("revolute", 0.90, 0.0, 0.0, -90.0),
    ("prismatic", 0.10, -90.0, 0.30, 0.0),
    ("revolute", 0.0, 90.0, 0.85, 0.0),
    ("revolute", 0.05, -90.0, 0.0, 10.0),
    ("revolute", 0.0, 0.0, 0.18, 0.0),
]


def arm(convention: str) -> dict:
    joints = []
    for i, (kind, a, alpha, d, theta) in enumerate(ROWS):
        joint = {"name": f"j{i + 1}", "type": kind, "a_m": a, "alpha_deg": alpha}
        joint |= {"link_radius_m": 0.05 + 0.01 * i}
        if kind == "revolute":
            joint |= {"d_m": d, "offset_deg": theta, "range_deg": [-180.0, 180.0]}
            joint |= {"vmax_deg_s": 100.0, "amax_deg_s2": 300.0}
        else:
            joint |= {"offset_m": d, "theta_deg": theta, "range_m": [0.0, 0.5]}
            joint |= {"vmax_m_s": 1.0, "amax_m_s2": 3.0, "home_m": 0.1}
        joints.append(joint)
    return {
        "name": "test arm",
        "convention": convention,
        "rail": {"frame": {"xyz_m": [0.5, -1.0, 0.0], "rpy_deg": [0.0, 0.0, 30.0]},
                 "range_m": [0.0, 6.0], "vmax_m_s": 1.0, "amax_m_s2": 2.0},
        "mount": {"xyz_m": [0.1, 0.0, 0.4], "rpy_deg": [0.0, 0.0, 15.0], "radius_m": 0.3},
        "joints": joints,
        "tool": {"xyz_m": [0.0, 0.0, 0.2]},
        "payload": [
            {"name": "block", "box": {"center_m": [0.1, 0.0, 0.3], "size_m": [0.4, 0.3, 0.2],
                                      "rpy_deg": [10.0, 20.0, 30.0]}},
            {"name": "ball", "sphere": {"center_m": [0.0, 0.2, 0.1], "radius_m": 0.05}},
        ],
    }  # fmt: skip


def toolbox_robot(convention: str, base: np.ndarray) -> DHRobot:
    links = []
    for kind, a, alpha, d, theta in ROWS:
        alpha_rad, theta_rad = np.radians(alpha), np.radians(theta)
        if convention == "standard":
            links.append(
                RevoluteDH(a=a, alpha=alpha_rad, d=d, offset=theta_rad)
                if kind == "revolute"
                else PrismaticDH(a=a, alpha=alpha_rad, theta=theta_rad, offset=d, qlim=[-9, 9])
            )
        else:
            links.append(
                RevoluteMDH(a=a, alpha=alpha_rad, d=d, offset=theta_rad)
                if kind == "revolute"
                else PrismaticMDH(a=a, alpha=alpha_rad, theta=theta_rad, offset=d, qlim=[-9, 9])
            )
    return DHRobot(links, base=SE3(base, check=False))


@pytest.mark.parametrize(("convention", "seed"), [("standard", 1101), ("modified", 1102)])
def test_link_capsule_ends_match_roboticstoolbox_fkine_all(convention, seed):
    """Source: roboticstoolbox DHRobot.fkine_all (per-link frames, standard DH and modified
    DH with RevoluteMDH/PrismaticMDH). Row i's capsules run from frame i-1's origin along
    its offsets to frame i's origin (DESIGN §8): standard d along z(i-1) then a along x(i);
    modified a along x(i-1) then d along z(i). Placed in a rig by rig_T_cell."""
    robot = robot_from_dict(arm(convention))
    rng = np.random.default_rng(seed)
    count = 12
    q = np.column_stack(
        [rng.uniform(0, 6, count), rng.uniform(-np.pi, np.pi, (count, 2)),
         rng.uniform(0, 0.5, count), rng.uniform(-np.pi, np.pi, (count, 3))]
    )  # fmt: skip
    rig_T_cell = transform_from_xyz_rpy([2.0, 1.0, 0.0], np.radians([0.0, 0.0, 90.0]))
    points = link_points(robot, rig_T_cell, q)
    for k in range(count):
        carriage = np.eye(4)
        carriage[0, 3] = q[k, 0]
        base = rig_T_cell @ robot.cell_T_rail @ carriage @ robot.carriage_T_base
        frames = [T.A for T in toolbox_robot(convention, base).fkine_all(q[k, 1:])]
        for i, (_, a, _, _, _) in enumerate(ROWS, start=1):
            previous, own = frames[i - 1], frames[i]
            if convention == "standard":  # knee = own origin - a along own x
                knee = own[:3, 3] - a * own[:3, 0]
            else:  # knee = previous origin + a along previous x
                knee = previous[:3, 3] + a * previous[:3, 0]
            np.testing.assert_allclose(points[2 * i - 2][:, k], previous[:3, 3], atol=REFERENCE_TOL)
            np.testing.assert_allclose(points[2 * i - 1][:, k], knee, atol=REFERENCE_TOL)
            np.testing.assert_allclose(points[2 * i][:, k], own[:3, 3], atol=REFERENCE_TOL)
        # payloads ride on the flange: the last DH frame
        flange = frames[-1]
        parts = pose_parts(robot, rig_T_cell, q)
        box = parts["block"][0]
        box_T = flange @ transform_from_xyz_rpy([0.1, 0.0, 0.3], np.radians([10.0, 20.0, 30.0]))
        np.testing.assert_allclose(box.center_m[:, k], box_T[:3, 3], atol=REFERENCE_TOL)
        np.testing.assert_allclose(box.axes[:, :, k].T, box_T[:3, :3], atol=REFERENCE_TOL)
        ball = parts["ball"][0]
        np.testing.assert_allclose(
            ball.p0_m[:, k], (flange @ [0.0, 0.2, 0.1, 1.0])[:3], atol=REFERENCE_TOL
        )


def test_flange_payload_frame_agrees_with_tcp_forward_kinematics():
    """The flange frame that carries payloads is the TCP frame less [tool] (our own FK)."""
    robot = robot_from_dict(arm("modified"))
    rng = np.random.default_rng(1103)
    q = np.column_stack([rng.uniform(0, 6, 8), rng.uniform(-1, 1, (8, 2)),
                         rng.uniform(0, 0.5, 8), rng.uniform(-1, 1, (8, 3))])  # fmt: skip
    sphere = pose_parts(robot, np.eye(4), q)["ball"][0]
    cell_T_flange = forward(robot, q) @ np.linalg.inv(robot.flange_T_tool)
    expected = cell_T_flange[:, :3, :3] @ [0.0, 0.2, 0.1] + cell_T_flange[:, :3, 3]
    np.testing.assert_allclose(sphere.p0_m.T, expected, atol=1e-12)


@pytest.mark.parametrize(("convention", "seed"), [("standard", 1104), ("modified", 1105)])
def test_motion_bounds_hold_for_random_straight_line_steps(convention, seed):
    """Schwarzer, Saha and Latombe (2005): along a straight line in joint space no point of a
    part moves farther than sum_i B[i, part] |Δq_i|. Checked on dense resampling of random
    steps: every primitive end moves less than its part's bound."""
    robot = robot_from_dict(arm(convention))
    bounds = motion_bounds(robot)
    rng = np.random.default_rng(seed)
    for _ in range(20):
        q0 = np.concatenate([[rng.uniform(0, 6)], rng.uniform(-np.pi, np.pi, 2),
                             [rng.uniform(0, 0.5)], rng.uniform(-np.pi, np.pi, 3)])  # fmt: skip
        step = rng.normal(0.0, 0.3, q0.size) * (rng.random(q0.size) < 0.6)
        s = np.linspace(0.0, 1.0, 201)[:, None]
        parts = pose_parts(robot, np.eye(4), q0 + s * step)
        allowed = np.abs(step) @ bounds
        for j, part in enumerate(robot.parts):
            for primitive in parts[part.name]:
                ends = [primitive.center_m] if hasattr(primitive, "axes") else [
                    primitive.p0_m, primitive.p1_m]  # fmt: skip
                for end in ends:
                    moved = np.linalg.norm(end - end[:, :1], axis=0).max()
                    assert moved <= allowed[j] + 1e-12, (part.name, moved, allowed[j])


def test_motion_bounds_cover_a_prismatic_joint_driven_beyond_its_range():
    """A path may push a prismatic joint past its range (the position check reports it); the
    bound then takes the path's own travel, and still holds on dense resampling."""
    robot = robot_from_dict(arm("standard"))
    q0 = np.array([1.0, 0.3, -0.4, 1.4, 0.2, 0.5, -0.3])  # j3 at 1.4 m, range [0, 0.5]
    step = np.array([0.0, 0.5, 0.4, 0.3, 0.0, 0.2, 0.1])
    s = np.linspace(0.0, 1.0, 201)[:, None]
    path = q0 + s * step
    bounds = motion_bounds(robot, (path.min(axis=0), path.max(axis=0)))
    # d = 0.30 + q reaches 2.0 m instead of 0.8 m: the levers of j1 and j2 about the parts
    # from row 3 on (its own d capsule included) grow by 1.2 m, nothing else changes
    growth = bounds - motion_bounds(robot)
    beyond = [j for j, part in enumerate(robot.parts) if part.row >= 3]
    np.testing.assert_allclose(growth[1:3][:, beyond], 1.2, atol=1e-12)
    growth[1:3, beyond] = 0.0
    np.testing.assert_allclose(growth, 0.0, atol=1e-12)
    parts = pose_parts(robot, np.eye(4), path)
    allowed = np.abs(step) @ bounds
    for j, part in enumerate(robot.parts):
        for primitive in parts[part.name]:
            end = primitive.center_m if hasattr(primitive, "axes") else primitive.p1_m
            moved = np.linalg.norm(end - end[:, :1], axis=0).max()
            assert moved <= allowed[j] + 1e-12, (part.name, moved, allowed[j])
