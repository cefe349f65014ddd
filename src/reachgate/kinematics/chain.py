"""Forward kinematics, geometric Jacobian and manipulability over whole arrays.

Configurations are arrays ``q`` of shape (N, n_axes) in the robot's axis order (rail first,
then the arm joints), SI units. Loops run over the joints (a handful), never over samples.
"""

from __future__ import annotations

import numpy as np

from reachgate.model.robot import Chain, Robot
from reachgate.model.transforms import cos_sin


def cell_T_base(robot: Robot, rail_m: np.ndarray | None) -> np.ndarray:
    """Arm base poses in the cell, (N,) rail positions (or None) -> (N, 4, 4) (or (4, 4))."""
    if robot.rail is None or rail_m is None:
        return robot.cell_T_rail @ robot.carriage_T_base
    rail_m = np.asarray(rail_m, dtype=float)
    rail_T_carriage = np.broadcast_to(np.eye(4), (*rail_m.shape, 4, 4)).copy()
    rail_T_carriage[..., 0, 3] = rail_m
    return robot.cell_T_rail @ rail_T_carriage @ robot.carriage_T_base


def split_axes(robot: Robot, q: np.ndarray) -> tuple[np.ndarray | None, np.ndarray]:
    """Split (N, n_axes) into rail positions (N,) (None without rail) and arm values (N, n)."""
    q = np.asarray(q, dtype=float)
    if robot.has_rail:
        return q[..., 0], q[..., 1:]
    return None, q


#: |cos α| or |sin α| within this of 0 or 1 is taken as exactly that, so that links with
#: α = 0 or ±90° (most arms) skip the terms that vanish.
UNIT_SNAP = 1e-12
#: The identity frame as columns (x, y, z axes and origin) for compose_links.
IDENTITY_COLUMNS = ([1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, 0.0, 0.0])


def _snap(value: float) -> float:
    for exact in (0.0, 1.0, -1.0):
        if abs(value - exact) < UNIT_SNAP:
            return exact
    return value


# Products and sums of frame columns where an entry may be a plain float; exact zeros and
# unit factors cost no array operation.
def _mul(a, b):
    for u, v in ((a, b), (b, a)):
        if isinstance(u, float):
            if u == 0.0:
                return 0.0
            if u == 1.0:
                return v
            if u == -1.0:
                return -v
    return a * b


def _add(a, b):
    if isinstance(b, float) and b == 0.0:
        return a
    if isinstance(a, float) and a == 0.0:
        return b
    return a + b


def _sub(a, b):
    if isinstance(b, float) and b == 0.0:
        return a
    if isinstance(a, float) and a == 0.0:
        return -b
    return a - b


def _link_step(chain: Chain, i: int, qi: np.ndarray, x, y, z, p):
    """Frame columns (x, y, z, p) after link i at joint values qi (N,); see compose_links."""
    offset = float(chain.theta_offset_rad[i])
    if chain.revolute[i]:
        theta, d = (qi + offset if offset else qi), float(chain.d_m[i])
    else:
        theta, d = offset, qi + chain.d_m[i]
    ct, st = cos_sin(theta) if isinstance(theta, np.ndarray) else (np.cos(theta), np.sin(theta))
    ca, sa = _snap(float(np.cos(chain.alpha_rad[i]))), _snap(float(np.sin(chain.alpha_rad[i])))
    a = float(chain.a_m[i])
    p = [_add(p[k], _mul(d, z[k])) for k in range(3)]
    x_new = [_add(_mul(ct, x[k]), _mul(st, y[k])) for k in range(3)]
    y_rot = [_sub(_mul(ct, y[k]), _mul(st, x[k])) for k in range(3)]
    y_new = [_add(_mul(ca, y_rot[k]), _mul(sa, z[k])) for k in range(3)]
    z_new = [_sub(_mul(ca, z[k]), _mul(sa, y_rot[k])) for k in range(3)]
    p = [_add(p[k], _mul(a, x_new[k])) for k in range(3)]
    return x_new, y_new, z_new, p


def _as_arrays(columns, n_samples: int):
    return tuple(
        [np.full(n_samples, v) if isinstance(v, float) else v for v in column] for column in columns
    )


def compose_links(chain: Chain, q_arm: np.ndarray, x, y, z, p):
    """Walk the DH chain on frame columns held as separate (N,) arrays.

    x, y, z: the current frame's axes, p: its origin, each a list of three (N,) arrays or
    floats in some fixed frame (IDENTITY_COLUMNS to start in the chain's base frame). Returns
    the flange's (x, y, z, p) in that frame, every entry an (N,) array. One link is
    Rz(θ) Tz(d) Tx(a) Rx(α) written out on columns: contiguous (N,) arrays instead of
    strided (N, 4, 4) products, which is what makes long paths fast.
    """
    for i in range(chain.n):
        x, y, z, p = _link_step(chain, i, q_arm[:, i], x, y, z, p)
    return _as_arrays((x, y, z, p), q_arm.shape[0])


def tcp_columns(robot: Robot, q: np.ndarray):
    """TCP axes and origin in the cell as columns: (N, n_axes) -> x, y, z, p.

    Each is a list of three (N,) arrays (cell x, y, z components); x, y, z are the columns of
    the TCP rotation, p its position.
    """
    rail_m, q_arm = split_axes(robot, q)
    start = robot.cell_T_rail @ robot.carriage_T_base @ robot.chain.base_T_chain
    x, y, z = ([start[k, c] for k in range(3)] for c in range(3))
    p = [start[k, 3] for k in range(3)]
    if rail_m is not None:  # the carriage shifts the base along the rail's +x
        p = [p[k] + rail_m * robot.cell_T_rail[k, 0] for k in range(3)]
    x, y, z, p = compose_links(robot.chain, q_arm, x, y, z, p)
    tool = robot.flange_T_tool
    axes = [
        [x[k] * tool[0, c] + y[k] * tool[1, c] + z[k] * tool[2, c] for k in range(3)]
        for c in range(3)
    ]
    origin = [p[k] + x[k] * tool[0, 3] + y[k] * tool[1, 3] + z[k] * tool[2, 3] for k in range(3)]
    return axes[0], axes[1], axes[2], origin


def forward(robot: Robot, q: np.ndarray) -> np.ndarray:
    """TCP poses in the cell, (N, n_axes) -> (N, 4, 4) cell_T_tool."""
    columns = tcp_columns(robot, q)
    T = np.zeros((np.asarray(q).shape[0], 4, 4))
    for c, column in enumerate(columns):
        for k in range(3):
            T[:, k, c] = column[k]
    T[:, 3, 3] = 1.0
    return T


def jacobian(robot: Robot, q: np.ndarray) -> np.ndarray:
    """Geometric Jacobian at the TCP in the cell frame, (N, n_axes) -> (N, 6, n_axes).

    Rows are [v_x, v_y, v_z, ω_x, ω_y, ω_z] (m/s and rad/s per unit axis rate); the rail
    column (if any) is the rail's +x direction in the cell.
    """
    _, q_arm = split_axes(robot, q)
    chain_T_flange, J_chain = chain_pose_jacobian(robot.chain, q_arm)  # at the flange origin
    # move the reference point to the TCP (v += ω × r, r the flange-to-TCP lever in the
    # chain frame), then turn both parts into the cell (the rail only translates the chain)
    lever = chain_T_flange[:, :3, :3] @ robot.flange_T_tool[:3, 3]  # (N, 3)
    v, w = J_chain[:, :3], J_chain[:, 3:]  # (N, 3, n)
    v = v + np.cross(w, lever[:, :, None], axis=1)
    cell_R_chain = (robot.cell_T_rail @ robot.carriage_T_base @ robot.chain.base_T_chain)[:3, :3]
    J_arm = np.concatenate([cell_R_chain @ v, cell_R_chain @ w], axis=1)  # (N, 6, n)
    if not robot.has_rail:
        return J_arm
    rail_x = np.broadcast_to(robot.cell_T_rail[:3, 0], (J_arm.shape[0], 3))
    rail_column = np.concatenate([rail_x, np.zeros_like(rail_x)], axis=1)[:, :, None]
    return np.concatenate([rail_column, J_arm], axis=2)


def chain_pose_jacobian(chain: Chain, q_arm: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Flange poses and geometric Jacobians in the chain's own base frame.

    (N, n) arm values -> ((N, 4, 4) chain_T_flange, (N, 6, n) Jacobian at the flange origin).
    """
    q_arm = np.asarray(q_arm, dtype=float)
    n_samples = q_arm.shape[0]
    x, y, z, p = IDENTITY_COLUMNS
    axes, origins = [], []
    for i in range(chain.n):
        axes.append(z)
        origins.append(p)
        x, y, z, p = _link_step(chain, i, q_arm[:, i], x, y, z, p)
    J = np.zeros((n_samples, 6, chain.n))
    for i, (zi, oi) in enumerate(zip(axes, origins, strict=True)):
        if chain.revolute[i]:
            lever = [_sub(p[k], oi[k]) for k in range(3)]
            for k in range(3):  # z × lever
                a, b = (k + 1) % 3, (k + 2) % 3
                J[:, k, i] = _sub(_mul(zi[a], lever[b]), _mul(zi[b], lever[a]))
                J[:, 3 + k, i] = zi[k]
        else:
            for k in range(3):
                J[:, k, i] = zi[k]
    T = np.zeros((n_samples, 4, 4))
    for c, column in enumerate((x, y, z, p)):
        for k in range(3):
            T[:, k, c] = column[k]
    T[:, 3, 3] = 1.0
    return T, J


def manipulability(J: np.ndarray) -> np.ndarray:
    """Yoshikawa's measure w = sqrt(det(J Jᵀ)), (N, 6, n) -> (N,); 0 at a singularity."""
    JJt = J @ np.swapaxes(J, -1, -2)
    return np.sqrt(np.clip(np.linalg.det(JJt), 0.0, None))


#: Samples per Jacobian block in arm_manipulability: bounds the (block, 6, n) work arrays.
MANIPULABILITY_BLOCK_SAMPLES = 65_536


def arm_manipulability(robot: Robot, q: np.ndarray) -> np.ndarray:
    """Yoshikawa's measure of the arm alone (rail column left out), (N, n_axes) -> (N,).

    Works in blocks, so an hour-long path never holds all (N, 6, n) Jacobians at once.
    """
    q = np.asarray(q, dtype=float)
    out = np.empty(q.shape[0])
    for first in range(0, q.shape[0], MANIPULABILITY_BLOCK_SAMPLES):
        part = slice(first, first + MANIPULABILITY_BLOCK_SAMPLES)
        J = jacobian(robot, q[part])
        out[part] = manipulability(J[:, :, 1:] if robot.has_rail else J)
    return out
