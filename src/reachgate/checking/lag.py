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

Between samples the pose and the coefficients are interpolated linearly (orientations by
normalised linear interpolation of the quaternions, which strays from the shortest arc by under
δ³/200 rad for a step of δ rad: 2e-8 rad for 1°); before the first sample the command is held
at its first pose, as a rig at rest.

Quaternions are handled as four contiguous (N,) arrays (w, x, y, z): column slices of an
(N, 4) array are strided, and whole-array arithmetic on them was several times slower.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import Enum

import numpy as np

#: Default tolerance on the orientation error the delay may cause (ours): about the angle
#: that moves a point 0.5 m from the TCP (a mock-up's half-span) by the position default's
#: 1 mm, 1/500 rad = 0.115°, rounded down to 0.1°.
DEFAULT_LAG_TOL_RAD = math.radians(0.1)
#: Below this rotation angle (rad) the series forms of exp and log are used.
SMALL_ANGLE = 1e-6
#: Samples per block of lag_errors: bounds its temporary arrays (a few dozen per sample) on
#: long runs; each block reads the samples its delayed times fall between.
LAG_BLOCK_SAMPLES = 65_536


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


Quat = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


def _split(q_wxyz: np.ndarray) -> Quat:
    return tuple(np.ascontiguousarray(q_wxyz[:, i], dtype=float) for i in range(4))


def _multiply(a: Quat, b: Quat) -> Quat:
    """Hamilton product a ⊗ b."""
    aw, ax, ay, az = a
    bw, bx, by, bz = b
    return (
        aw * bw - ax * bx - ay * by - az * bz,
        aw * bx + ax * bw + ay * bz - az * by,
        aw * by - ax * bz + ay * bw + az * bx,
        aw * bz + ax * by - ay * bx + az * bw,
    )


def _conjugate(a: Quat) -> Quat:
    return a[0], -a[1], -a[2], -a[3]


def _exp(v: tuple[np.ndarray, np.ndarray, np.ndarray]) -> Quat:
    """Unit quaternion of a rotation vector (axis · angle, rad)."""
    angle = np.sqrt(v[0] ** 2 + v[1] ** 2 + v[2] ** 2)
    small = angle < SMALL_ANGLE
    # sin(θ/2)/θ → 1/2 − θ²/48 as θ → 0
    scale = np.where(small, 0.5 - angle**2 / 48.0, np.sin(0.5 * angle) / np.where(small, 1, angle))
    return np.cos(0.5 * angle), v[0] * scale, v[1] * scale, v[2] * scale


def _log(a: Quat) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Rotation vector of a unit quaternion, angle in [0, π]."""
    sign = np.where(a[0] < 0.0, -1.0, 1.0)
    vec_norm = np.sqrt(a[1] ** 2 + a[2] ** 2 + a[3] ** 2)
    small = vec_norm < SMALL_ANGLE
    # 2·atan2(|v|, |w|)/|v| → 2/|w| as |v| → 0 (|w| → 1)
    scale = sign * np.where(
        small, 2.0, 2.0 * np.arctan2(vec_norm, sign * a[0]) / np.where(small, 1, vec_norm)
    )
    return a[1] * scale, a[2] * scale, a[3] * scale


def _angle_between(a: Quat, b: Quat) -> np.ndarray:
    """Angle (rad) of the rotation aᵀ·b; a need not be of unit length (the ratio cancels it)."""
    aw, ax, ay, az = a
    bw, bx, by, bz = b
    w = aw * bw + ax * bx + ay * by + az * bz
    # vector part of conj(a) ⊗ b: aw·bv − bw·av − av × bv
    vx = aw * bx - bw * ax - (ay * bz - az * by)
    vy = aw * by - bw * ay - (az * bx - ax * bz)
    vz = aw * bz - bw * az - (ax * by - ay * bx)
    return 2.0 * np.arctan2(np.sqrt(vx * vx + vy * vy + vz * vz), np.abs(w))


def _bracket(t_s: np.ndarray, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(k (N,), α (N,)): s lies at t_k + α (t_{k+1} − t_k), α clipped to [0, 1]."""
    k = np.clip(np.searchsorted(t_s, s, side="right") - 1, 0, t_s.size - 2)
    alpha = np.clip((s - t_s[k]) / (t_s[k + 1] - t_s[k]), 0.0, 1.0)
    return k, alpha


def _between(q: Quat, k: np.ndarray, alpha: np.ndarray) -> Quat:
    """Orientations between samples k and k + 1 at fractions α (normalised linear
    interpolation on the shorter arc; left unnormalised, callers normalise or need not)."""
    a = tuple(c[k] for c in q)
    b = tuple(c[k + 1] for c in q)
    dot = a[0] * b[0] + a[1] * b[1] + a[2] * b[2] + a[3] * b[3]
    weight = np.where(dot < 0.0, -alpha, alpha)
    mixed = tuple((1.0 - alpha) * ca + weight * cb for ca, cb in zip(a, b, strict=True))
    norm = np.sqrt(sum(c * c for c in mixed))
    return tuple(c / norm for c in mixed)


def _causal_weights(d: list[np.ndarray]) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Weights of the first and second polynomial coefficients at the newest sample.

    d: times (N,) of the newest sample (0) and the m − 1 before it (negative), relative to
    the newest. The polynomial through the m samples has c1 = Σ w1_j f_j, c2 = Σ w2_j f_j with
    the Lagrange basis L_j: w1_j = L_j'(0), w2_j = L_j''(0)/2, in closed form (nodes at 0):
    j ≥ 1: w1_j = Π_{i≥1, i≠j} (−d_i) / Π_{i≠j} (d_j − d_i), w2_j = w1_j · Σ_{i≥1, i≠j} −1/d_i;
    j = 0: w1_0 = Σ_{i≥1} −1/d_i, w2_0 = Σ_{1≤i<l} 1/(d_i d_l).
    """
    m = len(d)
    inverse = [None] + [-1.0 / d[i] for i in range(1, m)]
    w1 = [sum(inverse[1:])]
    w2 = [sum(1.0 / (d[i] * d[j]) for i in range(1, m) for j in range(i + 1, m))]
    for j in range(1, m):
        numerator = np.ones_like(d[0])
        denominator = d[j].copy()  # the i = 0 factor, d_j − 0
        for i in range(1, m):
            if i != j:
                numerator = numerator * -d[i]
                denominator = denominator * (d[j] - d[i])
        w1.append(numerator / denominator)
        w2.append(w1[j] * sum(inverse[i] for i in range(1, m) if i != j))
    return w1, w2


def _causal_coefficients(t_s: np.ndarray, p_m: np.ndarray, q: Quat, degree: int, lo: int, hi: int):
    """First and second coefficients, in time from each sample lo..hi-1, of the polynomials
    through the newest degree + 2 samples up to it: (c1, c2) for positions, each (hi - lo, 3),
    and (ξ1, ξ2) for the rotation vectors log(q_kᵀ·q_j) seen from the newest sample k, each a
    tuple of 3 (hi - lo,) arrays; c2 and ξ2 are None for degree 1, which does not use them.
    Before the first sample the command is held at its first pose, one first step apart."""
    m = degree + 2
    newest = np.arange(lo, hi)
    first_step = t_s[1] - t_s[0]

    def back(values: np.ndarray, j: int) -> np.ndarray:
        """values at the sample j before each of lo..hi-1 (the first sample before it)."""
        return values[lo - j : hi - j] if lo >= j else values[np.maximum(newest - j, 0)]

    d = [np.zeros(newest.size)]
    for j in range(1, m):
        source = newest - j
        d.append(np.where(source < 0, t_s[0] + source * first_step, back(t_s, j)) - t_s[lo:hi])
    w1, w2 = _causal_weights(d)
    past_p = [back(p_m, j) for j in range(m)]
    c1 = sum(w1[j][:, None] * past_p[j] for j in range(m))
    c2 = sum(w2[j][:, None] * past_p[j] for j in range(m)) if degree > 1 else None
    seen = _conjugate(tuple(c[lo:hi] for c in q))
    xi1, xi2 = [np.zeros(newest.size)] * 3, [np.zeros(newest.size)] * 3
    for j in range(1, m):  # the newest sample's own rotation vector is 0
        v = _log(_multiply(seen, tuple(back(c, j) for c in q)))
        xi1 = [a + w1[j] * b for a, b in zip(xi1, v, strict=True)]
        if degree > 1:
            xi2 = [a + w2[j] * b for a, b in zip(xi2, v, strict=True)]
    return (c1, c2), (xi1, xi2 if degree > 1 else None)


def predicted_poses(
    t_s: np.ndarray,
    p_m: np.ndarray,
    q_wxyz: np.ndarray,
    lag_s: float,
    prediction: Prediction = Prediction.NONE,
) -> tuple[np.ndarray, np.ndarray]:
    """Where the rig puts the TCP at each sample time: (p̂ (N, 3) m, q̂ (N, 4) unit).

    t_s (N,) s; p_m (N, 3) m; q_wxyz (N, 4) scalar-first, any one frame. See the module
    docstring: the command at t − lag, extrapolated over lag by the prediction's degree.
    """
    t_s, p_m = np.asarray(t_s, dtype=float), np.asarray(p_m, dtype=float)
    q = _split(np.asarray(q_wxyz, dtype=float))
    p_hat, q_hat = _predicted(t_s, p_m, q, lag_s, prediction, 0, t_s.size)
    return np.column_stack(p_hat), np.column_stack(q_hat)


def _predicted(t_s, p_m, q: Quat, lag_s, prediction, start: int, stop: int):
    """(p̂ as 3 arrays, q̂ as a Quat) at samples start..stop-1, from the samples they need."""
    s = t_s[start:stop] - lag_s
    k, alpha = _bracket(t_s, s)
    lo, hi = int(k.min()), int(k.max()) + 2  # the samples s falls between
    # np.interp: the same clamped linear interpolation as _bracket, and the fastest
    p_hat = [np.interp(s, t_s[lo:hi], p_m[lo:hi, c]) for c in range(3)]
    q_hat = _between(q, k, alpha)
    degree = prediction.degree
    if degree:
        (c1, c2), (xi1, xi2) = _causal_coefficients(t_s, p_m, q, degree, lo, hi)
        here, after = k - lo, k + 1 - lo
        step = [np.zeros(s.size)] * 3
        for power, (c, xi) in enumerate([(c1, xi1), (c2, xi2)][:degree], start=1):
            scale = lag_s**power
            for axis in range(3):
                c_axis = c[:, axis]
                p_hat[axis] = p_hat[axis] + scale * (
                    (1.0 - alpha) * c_axis[here] + alpha * c_axis[after]
                )
                step[axis] = step[axis] + scale * (
                    (1.0 - alpha) * xi[axis][here] + alpha * xi[axis][after]
                )
        q_hat = _multiply(q_hat, _exp(tuple(step)))
    return p_hat, q_hat


def lag_errors(
    t_s: np.ndarray,
    p_m: np.ndarray,
    q_wxyz: np.ndarray,
    lag_s: float,
    prediction: Prediction = Prediction.NONE,
) -> LagErrors:
    """Tracking errors (N,) of a rig that reaches each commanded pose lag_s late: the distance
    and the rotation angle between the commanded pose and the one the rig holds
    (predicted_poses). A rigid placement changes neither, so any one frame serves.
    Computed LAG_BLOCK_SAMPLES at a time, each block from the samples it reaches back to."""
    t_s, p_m = np.asarray(t_s, dtype=float), np.asarray(p_m, dtype=float)
    q = _split(np.asarray(q_wxyz, dtype=float))
    n = t_s.size
    position_m, angle_rad = np.empty(n), np.empty(n)
    for start in range(0, n, LAG_BLOCK_SAMPLES):
        stop = min(start + LAG_BLOCK_SAMPLES, n)
        p_hat, q_hat = _predicted(t_s, p_m, q, lag_s, prediction, start, stop)
        squared = sum((p_m[start:stop, c] - p_hat[c]) ** 2 for c in range(3))
        position_m[start:stop] = np.sqrt(squared)
        angle_rad[start:stop] = _angle_between(q_hat, tuple(c[start:stop] for c in q))
    return LagErrors(position_m=position_m, angle_rad=angle_rad)
