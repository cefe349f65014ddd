"""Closed-form IK for arms with a spherical wrist (Pieper's case), over whole arrays.

Applies to six revolute joints in canonical standard DH form (robot.Chain) with
- joint 1 perpendicular to joint 2 (|sin α1| = 1), joints 2 and 3 parallel (sin α2 = 0),
- wrist axes 4, 5, 6 meeting in one point: a4 = a5 = d5 = 0 and |sin α4| = |sin α5| = 1.
The wrist centre then fixes joints 1-3 (a shoulder offset a1, lateral offsets d2, d3 and a
forearm offset a3 are all allowed) and the wrist rotation fixes joints 4-6.

Branches are three signs: shoulder (which side of axis 1 the arm reaches over), elbow (sign
of the elbow bend) and wrist (sign of sin θ5). Every function works on (N, ...) arrays.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import product

import numpy as np

from reachgate.kinematics.chain import IDENTITY_COLUMNS, compose_links
from reachgate.model.robot import Chain
from reachgate.model.transforms import cos_sin

#: DH parameters closer than this to the special values count as equal (m or rad).
GEOMETRY_TOL = 1e-9


@dataclass(frozen=True)
class Branch:
    """Configuration branch: each sign is +1 or -1."""

    shoulder: int
    elbow: int
    wrist: int

    def describe(self) -> str:
        """E.g. 'shoulder +, elbow -, wrist +' (signs as defined in the module docstring)."""
        return ", ".join(
            f"{key} {'+' if getattr(self, key) > 0 else '-'}"
            for key in ("shoulder", "elbow", "wrist")
        )


ALL_BRANCHES = tuple(Branch(s, e, w) for s, e, w in product((1, -1), repeat=3))


@dataclass(frozen=True)
class WristSolution:
    """Closed-form solutions on one branch for N targets.

    theta: (N, 6) DH joint angles θ (not yet minus offsets), within a turn of (-π, π].
    reach_excess_m: (N,) how far the wrist centre lies outside the reachable shell (0 inside).
    shoulder_m: (N,) distance of the wrist centre from the shoulder singular surface.
    elbow_rad: (N,) elbow angle from stretched or folded (0 = singular).
    wrist_rad: (N,) wrist bend from straight (0 = axes 4 and 6 aligned, singular).
    """

    theta: np.ndarray
    reach_excess_m: np.ndarray
    shoulder_m: np.ndarray
    elbow_rad: np.ndarray
    wrist_rad: np.ndarray


def _close(value: float, target: float) -> bool:
    return abs(value - target) < GEOMETRY_TOL


def wrist_axes_meet(chain: Chain) -> bool:
    """True when the axes of joints 4, 5 and 6 (of six or more) are revolute and meet in one
    point: a4 = a5 = 0 (neighbouring axes cross), d5 = 0 (at the same point) and neither pair
    parallel."""
    if chain.n < 6 or not chain.revolute[3:6].all():
        return False
    a, alpha, d = chain.a_m, chain.alpha_rad, chain.d_m
    return (
        _close(a[3], 0.0)
        and _close(a[4], 0.0)
        and _close(d[4], 0.0)
        and not _close(np.sin(alpha[3]), 0.0)
        and not _close(np.sin(alpha[4]), 0.0)
    )


def closed_form_obstacle(chain: Chain) -> str | None:
    """What keeps the chain from the closed-form solver, in words; None when it applies."""
    if chain.n != 6:
        return f"the arm has {chain.n} joints, not six"
    if not chain.revolute.all():
        prismatic = ", ".join(str(i + 1) for i in np.flatnonzero(~chain.revolute))
        return f"joint(s) {prismatic} are prismatic"
    a, alpha, d = chain.a_m, chain.alpha_rad, chain.d_m
    for ok, reason in (
        (_close(abs(np.sin(alpha[0])), 1.0), "axes 1 and 2 are not perpendicular"),
        (_close(np.sin(alpha[1]), 0.0), "axes 2 and 3 are not parallel"),
        (not _close(a[1], 0.0), "the upper arm has no length (a2 = 0)"),
        (
            _close(a[3], 0.0) and _close(a[4], 0.0) and _close(d[4], 0.0),
            "the wrist axes 4, 5 and 6 do not meet in one point",
        ),
        (
            _close(abs(np.sin(alpha[3])), 1.0) and _close(abs(np.sin(alpha[4])), 1.0),
            "the wrist axes are not perpendicular in turn",
        ),
    ):
        if not ok:
            return reason
    return None


def is_spherical_wrist(chain: Chain) -> bool:
    """True when the chain has the structure this module solves in closed form."""
    return closed_form_obstacle(chain) is None


def _combine(arrays, weights, start=None):
    """start + Σ weights[k] · arrays[k] on (N,) arrays, skipping zero and unit weights."""
    total = start
    for array, weight in zip(arrays, weights, strict=True):
        if weight == 0.0:
            continue
        term = array if weight == 1.0 else weight * array
        total = term if total is None else total + term
    return total


class SphericalWristSolver:
    """Closed-form solver for one chain; see the module docstring for the geometry."""

    def __init__(self, chain: Chain) -> None:
        if not is_spherical_wrist(chain):
            raise ValueError("chain is not of the spherical-wrist form")
        a, alpha, d = chain.a_m, chain.alpha_rad, chain.d_m
        self.chain = chain
        self.s1 = float(np.sign(np.sin(alpha[0])))
        self.eps = float(np.sign(np.cos(alpha[1])))
        self.s4 = float(np.sign(np.sin(alpha[3])))
        self.s5 = float(np.sign(np.sin(alpha[4])))
        b3 = -np.sin(alpha[2]) * d[3]
        c3 = d[2] + np.cos(alpha[2]) * d[3]
        self.a1, self.d1, self.a2 = float(a[0]), float(d[0]), float(a[1])
        self.lateral_m = float(d[1] + self.eps * c3)  # h: offset across the arm plane
        self.forearm_m = float(np.hypot(a[2], b3))  # L2
        self.forearm_angle = float(np.arctan2(self.eps * b3, a[2]))  # ψ
        # flange -> wrist centre, expressed in the flange frame (a6, sin α6·d6, cos α6·d6)
        self.flange_to_centre = np.array([a[5], np.sin(alpha[5]) * d[5], np.cos(alpha[5]) * d[5]])
        ca6, sa6 = np.cos(alpha[5]), np.sin(alpha[5])
        self.rx_alpha6_T = np.array([[1, 0, 0], [0, ca6, sa6], [0, -sa6, ca6]])
        self._ca1, self._sa1 = float(np.cos(alpha[0])), float(np.sin(alpha[0]))
        beta = alpha[1] + alpha[2]
        self._cb, self._sb = float(np.cos(beta)), float(np.sin(beta))
        self._links123 = Chain(a[:3], alpha[:3], d[:3], np.zeros(3), np.ones(3, bool), np.eye(4))
        self.inner_radius_m = abs(self.a2 - self.forearm_m)
        self.outer_radius_m = self.a2 + self.forearm_m

    # -- geometry of a configuration ------------------------------------------------------

    def branch_of(self, theta: np.ndarray) -> Branch:
        """The branch of one configuration of DH angles θ (6,)."""
        t = np.asarray(theta, dtype=float)
        _, _, z3, p3 = self._first_three_columns(t[None, :3])
        wc = [float(p3[k][0] + self.chain.d_m[3] * z3[k][0]) for k in range(3)]
        along = np.cos(t[0]) * wc[0] + np.sin(t[0]) * wc[1]
        gamma = self.eps * t[2] + self.forearm_angle
        return Branch(
            shoulder=1 if along >= 0 else -1,
            elbow=1 if np.sin(gamma) >= 0 else -1,
            wrist=1 if np.sin(t[4]) >= 0 else -1,
        )

    def _first_three_columns(self, theta123: np.ndarray):
        """Frame 3's axes x, y, z and origin p as lists of three (N,) arrays."""
        return compose_links(self._links123, theta123, *IDENTITY_COLUMNS)

    def _frame3_axes(self, theta1: np.ndarray, phi: np.ndarray):
        """Frame 3's axes x, y, z (each three (N,) arrays) in the chain frame.

        With joints 2 and 3 parallel, R03 = Rz(θ1) Rx(α1) Rz(φ) Rx(β) where φ = θ2 + ε θ3 and
        β = α2 + α3 (Rx(π) Rz(θ) = Rz(-θ) Rx(π)), written out: two angles, not three.
        """
        (c1, s1), (cp, sp) = cos_sin(theta1), cos_sin(phi)
        ca, sa, cb, sb = self._ca1, self._sa1, self._cb, self._sb
        columns = (
            (cp, ca * sp, sa * sp),
            (-cb * sp, cb * ca * cp - sb * sa, cb * sa * cp + sb * ca),
            (sb * sp, -sb * ca * cp - cb * sa, -sb * sa * cp + cb * ca),
        )
        return tuple(
            [c1 * v0 - s1 * v1, s1 * v0 + c1 * v1, v2 * np.ones_like(c1)] for v0, v1, v2 in columns
        )

    # -- solving ----------------------------------------------------------------------------

    def solve(self, chain_T_flange: np.ndarray, branch: Branch) -> WristSolution:
        """Solve (N, 4, 4) flange poses (in the chain's base frame) on one branch."""
        n = chain_T_flange.shape[0]
        rows = np.empty((12, n))
        rows[:9] = chain_T_flange[:, :3, :3].reshape(n, 9).T
        rows[9:] = chain_T_flange[:, :3, 3].T
        return self.solve_rows(rows, branch)

    def solve_rows(self, rows: np.ndarray, branch: Branch) -> WristSolution:
        """Solve flange poses given as rows (>= 12, N) on one branch.

        Rows 0-8 hold the flange rotation's entries row by row, rows 9-11 its origin, in the
        chain's base frame (as ik.target_rows builds them).
        """
        R = [[rows[3 * i + k] for k in range(3)] for i in range(3)]  # R[i][k]: (N,)
        f = self.flange_to_centre
        wx, wy, wz = (_combine([R[i][k] for k in range(3)], -f, rows[9 + i]) for i in range(3))
        h = self.lateral_m

        # joint 1: the horizontal reach A = ±sqrt(ρ² - h²) along the arm plane
        planar_sq = wx * wx + wy * wy - h * h
        inside_cylinder_m = np.where(planar_sq < 0, abs(h) - np.sqrt(wx * wx + wy * wy), 0.0)
        along = branch.shoulder * np.sqrt(np.clip(planar_sq, 0.0, None))
        theta1 = np.arctan2(wy, wx) - np.arctan2(-self.s1 * h, along)

        # joints 2, 3: a two-link problem in the arm plane
        x1 = along - self.a1
        y1 = self.s1 * (wz - self.d1)
        r = np.sqrt(x1 * x1 + y1 * y1)
        L1, L2 = self.a2, self.forearm_m
        cos_gamma = (r * r - L1 * L1 - L2 * L2) / (2 * L1 * L2)
        shell_excess_m = np.maximum(r - self.outer_radius_m, self.inner_radius_m - r)
        cos_g = np.clip(cos_gamma, -1.0, 1.0)
        gamma_abs = np.arccos(cos_g)
        gamma = branch.elbow * gamma_abs
        sin_g = branch.elbow * np.sqrt((1.0 - cos_g) * (1.0 + cos_g))  # sin γ
        theta2 = np.arctan2(y1, x1) - np.arctan2(L2 * sin_g, L1 + L2 * cos_g)
        theta3 = self.eps * (gamma - self.forearm_angle)

        # joints 4, 5, 6 from the wrist rotation R' = R03ᵀ R06 Rx(α6)ᵀ
        x3, y3, z3 = self._frame3_axes(theta1, theta2 + self.eps * theta3)
        # columns of M = R06 Rx(α6)ᵀ, then R'[i, j] = (column i of R03) · (column j of M)
        Rt = self.rx_alpha6_T
        M = [[_combine(R[i], Rt[:, j]) for i in range(3)] for j in range(3)]  # M[j][i]: (N,)

        def dot(column, j):
            return column[0] * M[j][0] + column[1] * M[j][1] + column[2] * M[j][2]

        r02, r12, r22, r20, r21 = dot(x3, 2), dot(y3, 2), dot(z3, 2), dot(z3, 0), dot(z3, 1)
        w, s4, s5 = branch.wrist, self.s4, self.s5
        sin5 = w * np.sqrt(r02 * r02 + r12 * r12)
        cos5 = -s4 * s5 * r22
        theta5 = np.arctan2(sin5, cos5)
        theta4 = np.arctan2(w * s5 * r12, w * s5 * r02)
        theta6 = np.arctan2(-w * s4 * r21, w * s4 * r20)

        # θ1-θ3 may lie a turn outside (-π, π]: every user unwraps or takes them modulo 2π
        theta = np.stack([theta1, theta2, theta3, theta4, theta5, theta6]).T  # (N, 6) view
        return WristSolution(
            theta=theta,
            reach_excess_m=np.maximum(np.maximum(shell_excess_m, inside_cylinder_m), 0.0),
            shoulder_m=np.sqrt(np.clip(planar_sq, 0.0, None)),
            elbow_rad=np.minimum(gamma_abs, np.pi - gamma_abs),
            wrist_rad=np.arctan2(np.abs(sin5), np.abs(cos5)),
        )
