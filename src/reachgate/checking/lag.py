"""Tracking error from the rig's loop delay, with or without prediction (DESIGN §11).

The rig reaches a commanded pose `lag_s` after it was computed. Without prediction the TCP is
at time t where the command was at t − lag: the error is p(t) − p(t − lag) for position and
the rotation between R(t − lag) and R(t) for orientation. With prediction the rig extrapolates
the command over the delay from what it already has at t − lag (causally), and the error is
what the extrapolation misses:

  p̂(t) = p(s) + c1(s)·lag + c2(s)·lag²,   R̂(t) = R(s) · exp(ξ1(s)·lag + ξ2(s)·lag²),   s = t − lag,

with c1, c2 the first- and second-order coefficients of the polynomial through the newest
samples up to each sample (linear: c1 from the quadratic through the newest 3; quadratic: c1,
c2 from the cubic through the newest 4, so each estimate is exact for motion one degree above
what the prediction uses). Rotations are extrapolated on the rotation group: ξ are the
coefficients of the same fit to the rotation vectors log(R_kᵀ·R_j) of the past samples j seen
from the newest k, so ξ1 is the body angular velocity and 2·ξ2 its rate of change (the chart's
second-order term equals the body angular acceleration because [ξ1, ξ1] = 0).

Between samples the pose (slerp for orientations) and the coefficients are interpolated
linearly; before the first sample the command is held at its first pose, as a rig at rest.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import Enum

import numpy as np

from reachgate.model.transforms import quat_to_matrix, rotation_log

#: Default tolerance on the orientation error the delay may cause (ours): about the angle
#: that moves a point 0.5 m from the TCP (a mock-up's half-span) by the position default's
#: 1 mm, 1/500 rad = 0.115°, rounded down to 0.1°.
DEFAULT_LAG_TOL_RAD = math.radians(0.1)
#: Samples per block of the prediction fits (bounds the (block, m, m) systems).
PREDICT_BLOCK_SAMPLES = 65_536


class Prediction(Enum):
    """The rig's delay compensation: none, or extrapolation of degree 1 or 2."""

    NONE = "none"
    LINEAR = "linear"
    QUADRATIC = "quadratic"

    @property
    def degree(self) -> int:
        return {"none": 0, "linear": 1, "quadratic": 2}[self.value]


@dataclass(frozen=True, eq=False)
class LagErrors:
    """position_m (N,): |p(t) − p̂(t)| in m; angle_rad (N,): angle of R̂(t)ᵀ·R(t) in rad."""

    position_m: np.ndarray
    angle_rad: np.ndarray


def _quat_multiply(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Hamilton products of (..., 4) scalar-first quaternions."""
    aw, ax, ay, az = np.moveaxis(a, -1, 0)
    bw, bx, by, bz = np.moveaxis(b, -1, 0)
    return np.stack(
        [
            aw * bw - ax * bx - ay * by - az * bz,
            aw * bx + ax * bw + ay * bz - az * by,
            aw * by - ax * bz + ay * bw + az * bx,
            aw * bz + ax * by - ay * bx + az * bw,
        ],
        axis=-1,
    )


def _conjugate(q: np.ndarray) -> np.ndarray:
    return q * np.array([1.0, -1.0, -1.0, -1.0])


def quat_exp(rotvec: np.ndarray) -> np.ndarray:
    """Unit quaternions (..., 4) of rotation vectors (..., 3) (axis · angle, rad)."""
    angle = np.linalg.norm(rotvec, axis=-1)
    half = 0.5 * angle
    # sin(θ/2)/θ → 1/2 − θ²/48 as θ → 0 (series keeps tiny rotations exact).
    small = angle < 1e-6
    scale = np.where(small, 0.5 - angle**2 / 48.0, np.sin(half) / np.where(small, 1.0, angle))
    return np.concatenate([np.cos(half)[..., None], rotvec * scale[..., None]], axis=-1)


def quat_log(q: np.ndarray) -> np.ndarray:
    """Rotation vectors (..., 3) of unit quaternions (..., 4), angle in [0, π]."""
    q = q * np.where(q[..., :1] < 0.0, -1.0, 1.0)
    vec_norm = np.linalg.norm(q[..., 1:], axis=-1)
    angle = 2.0 * np.arctan2(vec_norm, q[..., 0])
    small = vec_norm < 1e-12
    scale = np.where(small, 2.0, angle / np.where(small, 1.0, vec_norm))
    return q[..., 1:] * scale[..., None]


def rotation_between(q_a: np.ndarray, q_b: np.ndarray) -> np.ndarray:
    """Angles (N,) in rad of the rotations q_aᵀ·q_b, accurate near 0."""
    rel = _quat_multiply(_conjugate(q_a), q_b)
    return 2.0 * np.arctan2(np.linalg.norm(rel[..., 1:], axis=-1), np.abs(rel[..., 0]))


def _bracket(t_s: np.ndarray, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(k (N,), α (N,)): s lies at t_k + α (t_{k+1} − t_k), α clipped to [0, 1]."""
    k = np.clip(np.searchsorted(t_s, s, side="right") - 1, 0, t_s.size - 2)
    alpha = np.clip((s - t_s[k]) / (t_s[k + 1] - t_s[k]), 0.0, 1.0)
    return k, alpha


def _slerp(q: np.ndarray, k: np.ndarray, alpha: np.ndarray) -> np.ndarray:
    """Orientations between samples k and k + 1 at fractions α, on the shortest arc."""
    step = _quat_multiply(_conjugate(q[k]), q[k + 1])
    return _quat_multiply(q[k], quat_exp(alpha[:, None] * quat_log(step)))


def _padded(t_s, values, count):
    """Times and values with `count` samples held at the first value before the start."""
    first_step = t_s[1] - t_s[0]
    t_before = t_s[0] - first_step * np.arange(count, 0, -1)
    held = np.repeat(values[:1], count, axis=0)
    return np.concatenate([t_before, t_s]), np.concatenate([held, values])


def _causal_coefficients(t_s: np.ndarray, p_m: np.ndarray, q_wxyz: np.ndarray, degree: int):
    """(c (N, 2, 3), ξ (N, 2, 3)): first and second coefficients of the polynomial, in time
    from each sample, through the newest degree + 2 samples up to it; positions and rotation
    vectors seen from the newest sample's orientation (body frame)."""
    m = degree + 2
    t_pad, p_pad = _padded(t_s, p_m, m - 1)
    _, q_pad = _padded(t_s, q_wxyz, m - 1)
    n = t_s.size
    c = np.empty((n, 2, 3))
    xi = np.empty((n, 2, 3))
    for first in range(0, n, PREDICT_BLOCK_SAMPLES):
        last = min(first + PREDICT_BLOCK_SAMPLES, n)
        newest = np.arange(first, last) + (m - 1)  # index in the padded arrays
        past = newest[:, None] - np.arange(m)[None, :]  # (B, m): newest first
        scale = t_pad[newest] - t_pad[newest - 1]  # one step, for conditioning
        d = (t_pad[past] - t_pad[newest][:, None]) / scale[:, None]  # (B, m) ≤ 0
        vander = d[:, :, None] ** np.arange(m)[None, None, :]  # (B, m, m)
        positions = p_pad[past] - p_pad[newest][:, None, :]
        R_newest = quat_to_matrix(q_pad[newest])
        R_past = quat_to_matrix(q_pad[past].reshape(-1, 4)).reshape(-1, m, 3, 3)
        rotations = rotation_log(np.swapaxes(R_newest, -1, -2)[:, None] @ R_past)
        solved = np.linalg.solve(vander, np.concatenate([positions, rotations], axis=2))
        per_time = np.stack([1.0 / scale, 1.0 / scale**2], axis=1)[:, :, None]  # (B, 2, 1)
        c[first:last] = solved[:, 1:3, :3] * per_time
        xi[first:last] = solved[:, 1:3, 3:] * per_time
    return c, xi


def predicted_poses(
    t_s: np.ndarray,
    p_m: np.ndarray,
    q_wxyz: np.ndarray,
    lag_s: float,
    prediction: Prediction = Prediction.NONE,
) -> tuple[np.ndarray, np.ndarray]:
    """Where the rig puts the TCP at each sample time: (p̂ (N, 3) m, q̂ (N, 4)).

    t_s (N,) s; p_m (N, 3) m; q_wxyz (N, 4) scalar-first, any one frame. See the module
    docstring: the command at t − lag, extrapolated over lag by the prediction's degree.
    """
    t_s, p_m, q_wxyz = (np.asarray(a, dtype=float) for a in (t_s, p_m, q_wxyz))
    k, alpha = _bracket(t_s, t_s - lag_s)
    a = alpha[:, None]
    p_hat = (1.0 - a) * p_m[k] + a * p_m[k + 1]
    q_hat = _slerp(q_wxyz, k, alpha)
    degree = prediction.degree
    if degree:
        c, xi = _causal_coefficients(t_s, p_m, q_wxyz, degree)
        powers = np.array([lag_s, lag_s**2])[:degree]
        ab = a[:, :, None]
        step_c = ((1.0 - ab) * c[k] + ab * c[k + 1])[:, :degree]
        step_xi = ((1.0 - ab) * xi[k] + ab * xi[k + 1])[:, :degree]
        p_hat = p_hat + np.einsum("j,njd->nd", powers, step_c)
        q_hat = _quat_multiply(q_hat, quat_exp(np.einsum("j,njd->nd", powers, step_xi)))
    return p_hat, q_hat


def lag_errors(
    t_s: np.ndarray,
    p_m: np.ndarray,
    q_wxyz: np.ndarray,
    lag_s: float,
    prediction: Prediction = Prediction.NONE,
) -> LagErrors:
    """Tracking errors (N,) of a rig that reaches each commanded pose lag_s late: the distance
    and the rotation angle between the commanded pose and predicted_poses(). A rigid
    placement changes neither, so any one frame serves."""
    p_hat, q_hat = predicted_poses(t_s, p_m, q_wxyz, lag_s, prediction)
    return LagErrors(
        position_m=np.linalg.norm(np.asarray(p_m, dtype=float) - p_hat, axis=1),
        angle_rad=rotation_between(q_hat, np.asarray(q_wxyz, dtype=float)),
    )
