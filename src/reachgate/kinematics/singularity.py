"""Singularities of general arms (no closed-form solver): a scale-free measure over whole
paths, and the kind of singularity where the geometry tells it.

The measure is the inverse condition number of the arm's Jacobian in the Frobenius norm
(Angeles' conditioning index, with a characteristic length that makes translations and
rotations commensurate; as we recall it from his robotics textbook):

    Ĵ = diag(1/L, 1/L, 1/L, 1, 1, 1) · J · diag(L for prismatic joints, 1 for revolute)
    G = ĴᵀĴ (n <= 6) or ĴĴᵀ (n > 6),  k = min(n, 6)
    conditioning = k / sqrt(tr(G) · tr(G⁻¹))

It is 1 for an isotropic arm and 0 at a singularity, does not change with the unit of length
(L scales with the arm), and lies between σ_min/σ_max and k·σ_min/σ_max of Ĵ. It needs one
small inverse per sample instead of a singular value decomposition, which costs about four
times as much. The rail is left out, as in Yoshikawa's measure (chain.arm_manipulability).
"""

from __future__ import annotations

import numpy as np

from reachgate.kinematics.chain import IDENTITY_COLUMNS, chain_pose_jacobian, compose_links
from reachgate.model.robot import Chain, Robot

#: Samples per block: bounds the (block, 6, n) and (block, k, k) work arrays.
BLOCK_SAMPLES = 65_536
#: G gets this multiple of its trace added on its diagonal before the inverse, so that an
#: exactly singular G still inverts; the measure there is about k·sqrt(this), 2e-8: zero for
#: any floor. Elsewhere it changes the measure by about this over the measure squared
#: (1e-10 relative at a measure of 1e-3).
REGULARISATION = 1e-16
#: A named kind's own measure must be below this multiple of its floor (wrist_min_deg,
#: shoulder_min_m, elbow_min_deg) at a row's worst sample; the same factor as a `near` band.
KIND_FACTOR = 2.0


def characteristic_length_m(robot: Robot) -> float:
    """L: the arm's reach from its second axis, Σ over links 2..n of hypot(a_i, d_i) plus the
    tool offset's length (m); 1 m for an arm with no length at all."""
    chain = robot.chain
    length = float(np.sum(np.hypot(chain.a_m[1:], chain.d_m[1:])))
    length += float(np.linalg.norm(robot.flange_T_tool[:3, 3]))
    return length if length > 0 else 1.0


def conditioning(robot: Robot, q: np.ndarray) -> np.ndarray:
    """The scale-free measure of the module docstring, (N, n_axes) -> (N,) in [0, 1]."""
    q = np.asarray(q, dtype=float)
    chain = robot.chain
    length = characteristic_length_m(robot)
    column_scale = np.where(chain.revolute, 1.0, length)
    k = min(chain.n, 6)
    out = np.empty(q.shape[0])
    tool_p = robot.flange_T_tool[:3, 3]
    for first in range(0, q.shape[0], BLOCK_SAMPLES):
        part = slice(first, first + BLOCK_SAMPLES)
        # the Jacobian at the TCP in the chain frame: the cell's rotation of both halves
        # leaves the measure unchanged, so it is skipped (chain.jacobian has it)
        chain_T_flange, J = chain_pose_jacobian(chain, q[part, -chain.n :])
        lever = np.einsum("mij,j->mi", chain_T_flange[:, :3, :3], tool_p) / length
        w = J[:, 3:]
        J[:, :3] /= length
        for k_row in range(3):  # v += ω × lever, row by row
            a, b = (k_row + 1) % 3, (k_row + 2) % 3
            J[:, k_row] += w[:, a] * lever[:, b, None] - w[:, b] * lever[:, a, None]
        out[part] = _inverse_condition(J * column_scale, k)
    return out


def _inverse_condition(J: np.ndarray, k: int) -> np.ndarray:
    """k / sqrt(tr(G) tr(G⁻¹)) of scaled Jacobians (M, 6, n), G their k x k Gram matrices.

    For a square Ĵ, tr(G) = |Ĵ|_F² and tr(G⁻¹) = |Ĵ⁻¹|_F²: one inverse, no product. Where
    that inverse fails (an exactly singular Ĵ) and for n != 6: G, regularised.
    """
    trace = np.einsum("mij,mij->m", J, J)
    if J.shape[1] == J.shape[2]:
        try:
            inverse = np.linalg.inv(J)
        except np.linalg.LinAlgError:
            pass
        else:
            return k / np.sqrt(trace * np.einsum("mij,mij->m", inverse, inverse))
    G = np.swapaxes(J, 1, 2) @ J if J.shape[2] <= 6 else J @ np.swapaxes(J, 1, 2)
    G = G + (REGULARISATION * trace)[:, None, None] * np.eye(k)
    return k / np.sqrt(trace * np.trace(np.linalg.inv(G), axis1=1, axis2=2))


def _frames(chain: Chain, q_arm: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Joint axes and their origins in the chain frame: (M, n) -> ((M, n, 3), (M, n, 3));
    joint i turns about axes[:, i] through origins[:, i] (DH frame i-1)."""
    m, n = q_arm.shape
    axes, origins = np.empty((m, n, 3)), np.empty((m, n, 3))
    axes[:, 0], origins[:, 0] = (0.0, 0.0, 1.0), 0.0
    for i in range(1, n):
        prefix = Chain(
            chain.a_m[:i],
            chain.alpha_rad[:i],
            chain.d_m[:i],
            chain.theta_offset_rad[:i],
            chain.revolute[:i],
            np.eye(4),
        )
        _, _, z, p = compose_links(prefix, q_arm[:, :i], *IDENTITY_COLUMNS)
        axes[:, i], origins[:, i] = np.stack(z, axis=1), np.stack(p, axis=1)
    return axes, origins


def _nearest_point_on_second(p1, d1, p2, d2) -> np.ndarray:
    """Points (M, 3) of the lines (p2, d2) nearest the lines (p1, d1); p2 where parallel."""
    w = p1 - p2
    b = np.einsum("mi,mi->m", d1, d2)
    denominator = 1.0 - b * b  # unit directions
    parallel = denominator < 1e-12
    t = (np.einsum("mi,mi->m", d2, w) - b * np.einsum("mi,mi->m", d1, w)) / np.where(
        parallel, 1.0, denominator
    )
    return p2 + np.where(parallel, 0.0, t)[:, None] * d2


def _wrist_point(axes: np.ndarray, origins: np.ndarray) -> np.ndarray:
    """The point of axis 5 nearest axis 4 (M, 3), from _frames' arrays."""
    return _nearest_point_on_second(origins[:, 3], axes[:, 3], origins[:, 4], axes[:, 4])


def wrist_point(robot: Robot, q: np.ndarray) -> np.ndarray:
    """The wrist point in the chain's base frame, (M, n_axes) -> (M, 3) (arms of six joints
    or more): the point of axis 5 nearest axis 4, the wrist centre where the axes meet."""
    q_arm = np.asarray(q, dtype=float)[:, -robot.chain.n :]
    return _wrist_point(*_frames(robot.chain, q_arm))


def kind_measures(robot: Robot, q: np.ndarray) -> dict[str, np.ndarray]:
    """The geometric measures that name a general arm's singularity, each (M,), for the kinds
    the arm's structure allows (six joints or more; the joints involved revolute):

    - 'wrist' (rad): angle between axes 4 and 6 (0 = parallel);
    - 'shoulder' (m): distance of the wrist point from axis 1;
    - 'elbow' (rad): angle of the forearm (axis 3's origin to the wrist point) from the upper
      arm (axis 2's origin to axis 3's), from stretched or folded (0 = either).

    The wrist point is the point of axis 5 nearest axis 4: the wrist centre where the wrist
    axes meet. q: (M, n_axes).
    """
    chain = robot.chain
    if chain.n < 6:
        return {}
    q_arm = np.asarray(q, dtype=float)[:, -chain.n :]
    axes, origins = _frames(chain, q_arm)
    measures = {}
    revolute = chain.revolute
    if revolute[3] and revolute[5]:
        cos_46 = np.abs(np.einsum("mi,mi->m", axes[:, 3], axes[:, 5]))
        measures["wrist"] = np.arccos(np.clip(cos_46, 0.0, 1.0))
    if revolute[:3].all():
        wrist = _wrist_point(axes, origins)
        measures["shoulder"] = np.hypot(wrist[:, 0], wrist[:, 1])
        upper, forearm = origins[:, 2] - origins[:, 1], wrist - origins[:, 2]
        cos_elbow = np.einsum("mi,mi->m", upper, forearm) / np.maximum(
            np.linalg.norm(upper, axis=1) * np.linalg.norm(forearm, axis=1), 1e-300
        )
        gamma = np.arccos(np.clip(cos_elbow, -1.0, 1.0))
        measures["elbow"] = np.minimum(gamma, np.pi - gamma)
    return measures


def singularity_kinds(robot: Robot, q: np.ndarray) -> list[str]:
    """The kind of singularity at each configuration (M, n_axes): the kind whose measure
    (kind_measures) is the smallest fraction of its floor, if below KIND_FACTOR, else
    'general'."""
    th = robot.thresholds
    floors = {"wrist": th.wrist_min_rad, "shoulder": th.shoulder_min_m, "elbow": th.elbow_min_rad}
    measures = kind_measures(robot, q)
    named = [kind for kind in measures if floors[kind] > 0]
    if not named:
        return ["general"] * np.asarray(q).shape[0]
    ratios = np.stack([measures[kind] / floors[kind] for kind in named])  # (K, M)
    best = np.argmin(ratios, axis=0)
    below = np.min(ratios, axis=0) < KIND_FACTOR
    return [named[b] if ok else "general" for b, ok in zip(best, below, strict=True)]
