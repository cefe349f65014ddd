"""Numeric path IK for any arm, vectorised across samples.

Damped least squares with the error-dependent damping of Sugihara (2011, "Solvability-
unconcerned inverse kinematics by the Levenberg–Marquardt method"): Δq = (JᵀJ + λI)⁻¹Jᵀe with
λ = ½|e|² + λ_min. The path is solved coarse to fine: a sparse subset of samples in sequence
(each warm-started from the one before, the first from home), then each finer level at once
from seeds interpolated between solved neighbours. Continuity from home keeps the branch.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from reachgate.kinematics.chain import chain_pose_jacobian
from reachgate.model.robot import Chain
from reachgate.model.transforms import rotation_angle, rotation_log

#: Iterations stop once the position error is below this (m) and the orientation error
#: below that (rad). Far below the 1e-9 that counts as solved, because the jerk estimate
#: multiplies residual noise by about 0.4/h³: 1e-11 m at 3 kHz reads as 0.1 m/s³, which
#: measurably moved the gantry's jerk-limited envelope; near convergence each step squares
#: the error, so the tighter stop costs about one iteration.
POSITION_TOL_M = 1e-13
ORIENTATION_TOL_RAD = 1e-13
#: Floor of the damping λ; keeps the step finite at exact singularities.
DAMPING_MIN = 1e-12
#: A sample stops iterating once its next step would remove less than this fraction of its
#: squared error (to first order, 2·gᵀΔq with g = Jᵀe; gᵀΔq is compared with |e|²·tol/2).
#: That is the least-squares point of a target out of reach (or a local minimum), where the
#: damped steps only creep, by a constant factor per step; without this stop every sample out
#: of reach spent the whole iteration budget. A Gauss–Newton step on a reachable target
#: removes most of the error, so this never stops one short of its solution unless the
#: Jacobian is singular to within about sqrt(tol)·|e| in the error's direction.
STALL_TOL = 1e-6
#: Iteration budget per sample in the sequential pass and per batch level.
MAX_ITERATIONS_SEQUENTIAL = 200
MAX_ITERATIONS_BATCH = 30
#: Samples between two solves of the sequential (coarsest) pass, at most; fast target
#: motion adds more (COARSE_STEP_*). Larger strides leave more samples to the batched levels.
COARSE_STRIDE = 256
#: Largest target motion between two samples of the sequential pass (rad, m).
COARSE_STEP_RAD = 0.2
COARSE_STEP_M = 0.05


@dataclass(frozen=True)
class NumericSolution:
    """q_arm: (N, n) joint values; position_error_m, orientation_error_rad: (N,) residuals."""

    q_arm: np.ndarray
    position_error_m: np.ndarray
    orientation_error_rad: np.ndarray

    @property
    def solved(self) -> np.ndarray:
        return (self.position_error_m < 1e-9) & (self.orientation_error_rad < 1e-9)


def _pose_error(chain_T_target: np.ndarray, T: np.ndarray) -> np.ndarray:
    """(N, 6) error [Δp; rotation vector of R_target Rᵀ] in the chain frame."""
    dp = chain_T_target[:, :3, 3] - T[:, :3, 3]
    dr = rotation_log(chain_T_target[:, :3, :3] @ np.swapaxes(T[:, :3, :3], 1, 2))
    return np.concatenate([dp, dr], axis=1)


def _converged(error: np.ndarray) -> np.ndarray:
    return (np.linalg.norm(error[:, :3], axis=1) < POSITION_TOL_M) & (
        np.linalg.norm(error[:, 3:], axis=1) < ORIENTATION_TOL_RAD
    )


def _stalled(gain, error_sq):
    """True where a step's first-order gain gᵀΔq is below STALL_TOL/2 of |e|²; arrays or floats."""
    return gain < 0.5 * STALL_TOL * error_sq


def refine(
    chain: Chain, chain_T_target: np.ndarray, q_seed: np.ndarray, max_iterations: int
) -> tuple[np.ndarray, np.ndarray]:
    """Damped least-squares iterations on all samples at once.

    (N, 4, 4) targets, (N, n) seeds -> ((N, n) solutions, (N, 6) final errors). Samples that
    have converged, or whose next step would gain next to nothing (STALL_TOL), are frozen; the
    loop ends when all are, or after max_iterations.
    """
    q = np.array(q_seed, dtype=float)
    active = np.arange(q.shape[0])
    error = np.zeros((q.shape[0], 6))
    eye = np.eye(chain.n)
    for _ in range(max_iterations):
        T, J = chain_pose_jacobian(chain, q[active])
        e = _pose_error(chain_T_target[active], T)
        error[active] = e
        keep = ~_converged(e)
        if not keep.any():
            return q, error
        active, e, J = active[keep], e[keep], J[keep]
        error_sq = np.einsum("ni,ni->n", e, e)
        gradient = np.einsum("nji,nj->ni", J, e)
        JtJ = np.swapaxes(J, 1, 2) @ J + (0.5 * error_sq + DAMPING_MIN)[:, None, None] * eye
        step = np.linalg.solve(JtJ, gradient[..., None])[..., 0]
        moving = ~_stalled(np.einsum("ni,ni->n", gradient, step), error_sq)
        if not moving.any():
            return q, error
        active = active[moving]
        q[active] += step[moving]
    T, _ = chain_pose_jacobian(chain, q[active])
    error[active] = _pose_error(chain_T_target[active], T)
    return q, error


def _refine_single(
    chain: Chain, chain_T_target: np.ndarray, q_seed: np.ndarray, max_iterations: int
) -> tuple[np.ndarray, np.ndarray]:
    """refine() for one sample, (4, 4) target and (n,) seed -> ((n,) solution, (6,) error).

    The same iteration written on small arrays and floats: the sequential pass calls it once
    per coarse sample, where refine()'s per-call array overhead would dominate.
    """
    n = chain.n
    revolute = chain.revolute
    ca, sa = np.cos(chain.alpha_rad), np.sin(chain.alpha_rad)
    A = np.zeros((n, 4, 4))
    A[:, 2, 1], A[:, 2, 2], A[:, 3, 3] = sa, ca, 1.0
    target_R, target_p = chain_T_target[:3, :3], chain_T_target[:3, 3]
    z_axes, origins = np.empty((n, 3)), np.empty((n, 3))
    J = np.empty((6, n))
    eye = np.eye(n)
    q = np.array(q_seed, dtype=float)
    for iteration in range(max_iterations + 1):
        theta = np.where(revolute, q + chain.theta_offset_rad, chain.theta_offset_rad)
        ct, st = np.cos(theta), np.sin(theta)
        A[:, 0, 0], A[:, 0, 1], A[:, 0, 2], A[:, 0, 3] = ct, -st * ca, st * sa, chain.a_m * ct
        A[:, 1, 0], A[:, 1, 1], A[:, 1, 2], A[:, 1, 3] = st, ct * ca, -ct * sa, chain.a_m * st
        A[:, 2, 3] = np.where(revolute, chain.d_m, q + chain.d_m)
        T = np.eye(4)
        for i in range(n):
            z_axes[i], origins[i] = T[:3, 2], T[:3, 3]
            T = T @ A[i]
        R_err = target_R @ T[:3, :3].T
        skew = 0.5 * np.array(
            [R_err[2, 1] - R_err[1, 2], R_err[0, 2] - R_err[2, 0], R_err[1, 0] - R_err[0, 1]]
        )
        sin_angle = math.sqrt(skew @ skew)
        angle = math.atan2(sin_angle, 0.5 * (R_err[0, 0] + R_err[1, 1] + R_err[2, 2] - 1.0))
        scale = 1.0 + angle**2 / 6.0 if sin_angle < 1e-8 else angle / sin_angle
        error = np.concatenate([target_p - T[:3, 3], skew * scale])
        position_sq, orientation_sq = error[:3] @ error[:3], error[3:] @ error[3:]
        converged = position_sq < POSITION_TOL_M**2 and orientation_sq < ORIENTATION_TOL_RAD**2
        if converged or iteration == max_iterations:
            return q, error
        lever = (T[:3, 3] - origins).T  # (3, n)
        z = z_axes.T
        linear = z[[1, 2, 0]] * lever[[2, 0, 1]] - z[[2, 0, 1]] * lever[[1, 2, 0]]  # z × lever
        J[:3] = np.where(revolute, linear, z)
        J[3:] = np.where(revolute, z, 0.0)
        gradient = J.T @ error
        error_sq = position_sq + orientation_sq
        step = np.linalg.solve(J.T @ J + (0.5 * error_sq + DAMPING_MIN) * eye, gradient)
        if _stalled(float(gradient @ step), error_sq):
            return q, error
        q = q + step
    raise AssertionError("unreachable")  # the loop returns on its last iteration


def coarse_samples(chain_T_target: np.ndarray) -> np.ndarray:
    """Indices of the samples solved in sequence: every COARSE_STRIDE-th, and more where the
    target moves fast, so that no two neighbours differ by more than COARSE_STEP_RAD in
    orientation or COARSE_STEP_M in position (else a seed interpolated between them may land
    a whole turn away). (N, 4, 4) -> (M,) sorted, with the first and the last sample.
    """
    n_samples = chain_T_target.shape[0]
    R = chain_T_target[:, :3, :3]
    turn = rotation_angle(np.swapaxes(R[:-1], 1, 2) @ R[1:])
    shift = np.linalg.norm(np.diff(chain_T_target[:, :3, 3], axis=0), axis=1)
    travel = np.concatenate(
        [[0.0], np.cumsum(np.maximum(turn / COARSE_STEP_RAD, shift / COARSE_STEP_M))]
    )
    fast = np.flatnonzero(np.diff(np.floor(travel)) > 0) + 1
    grid = np.arange(0, n_samples, COARSE_STRIDE)
    return np.unique(np.concatenate([grid, fast, [n_samples - 1]]))


def _interpolated_seeds(
    q: np.ndarray,
    known: np.ndarray,
    right: np.ndarray,
    todo: np.ndarray,
    met: np.ndarray | None = None,
) -> np.ndarray:
    """Seeds (M, n) for the samples `todo` (M,) from the solved samples `known` (K,) around
    them (right: position in known of each one's right neighbour): cubic Lagrange
    interpolation through two solved samples on each side, linear where one side has fewer.

    A cubic seed is off by O(h⁴) instead of O(h²), which saves a damped least-squares step
    on the coarser levels. met: (K,) True where the known sample met its target (default
    all). At the edge of a stretch out of reach the interpolation would mix met solutions
    with least-squares points: there the cubic needs four met nodes, and a sample between a
    met and an unmet neighbour starts from the met one.
    """
    k = known.size
    right_c = np.minimum(right, k - 1)
    left_i, right_i = known[right - 1], known[right_c]
    span = np.maximum(right_i - left_i, 1)
    weight = ((todo - left_i) / span)[:, None]
    cubic = (right >= 2) & (right + 1 <= k - 1)
    if met is not None:
        left_met, right_met = met[right - 1], met[right_c]
        weight = np.where((left_met & ~right_met)[:, None], 0.0, weight)
        weight = np.where((right_met & ~left_met)[:, None], 1.0, weight)
        nodes_met = met[np.clip(right[:, None] + np.arange(-2, 2), 0, k - 1)].all(axis=1)
        cubic &= nodes_met
    seed = (1 - weight) * q[left_i] + weight * q[right_i]
    if cubic.any():
        nodes = known[right[cubic, None] + np.arange(-2, 2)]  # (m, 4) sample indices
        x = todo[cubic].astype(float)
        values = np.zeros((nodes.shape[0], q.shape[1]))
        for j in range(4):
            basis = np.ones(nodes.shape[0])
            for m in range(4):
                if m != j:
                    basis *= (x - nodes[:, m]) / (nodes[:, j] - nodes[:, m])
            values += basis[:, None] * q[nodes[:, j]]
        seed[cubic] = values
    return seed


def solve_path_numeric(
    chain: Chain, chain_T_target: np.ndarray, q_home: np.ndarray
) -> NumericSolution:
    """Solve a whole path, coarse to fine, starting on the home configuration's branch.

    chain_T_target: (N, 4, 4) flange targets in the chain frame; q_home: (n,) -> NumericSolution.
    """
    n_samples = chain_T_target.shape[0]
    q = np.empty((n_samples, chain.n))
    error = np.empty((n_samples, 6))
    solved = np.zeros(n_samples, dtype=bool)

    coarse = coarse_samples(chain_T_target)
    previous = np.asarray(q_home, dtype=float)
    for index in coarse:
        q[index], error[index] = _refine_single(
            chain, chain_T_target[index], previous, MAX_ITERATIONS_SEQUENTIAL
        )
        solved[index] = True
        previous = q[index]

    stride = COARSE_STRIDE
    while stride > 1:
        stride //= 2
        todo = np.flatnonzero(~solved & (np.arange(n_samples) % stride == 0))
        if todo.size:
            known = np.flatnonzero(solved)
            right = np.searchsorted(known, todo)
            left_i = known[right - 1]
            seed = _interpolated_seeds(q, known, right, todo, _converged(error[known]))
            q[todo], error[todo] = refine(chain, chain_T_target[todo], seed, MAX_ITERATIONS_BATCH)
            solved[todo] = True
            # Samples the batch could not finish, next to a solved one on their left, get a
            # retry, all at once, from that neighbour's solution with the sequential pass's
            # budget; the better result stays. (Inside a stretch out of reach the neighbour is
            # no better a start than the interpolated seed.)
            stuck = ~_converged(error[todo]) & _converged(error[left_i])
            if stuck.any():
                index = todo[stuck]
                retry_q, retry_error = refine(
                    chain, chain_T_target[index], q[left_i[stuck]], MAX_ITERATIONS_SEQUENTIAL
                )
                better = np.linalg.norm(retry_error, axis=1) < np.linalg.norm(error[index], axis=1)
                q[index[better]], error[index[better]] = retry_q[better], retry_error[better]
    return NumericSolution(
        q_arm=q,
        position_error_m=np.linalg.norm(error[:, :3], axis=1),
        orientation_error_rad=np.linalg.norm(error[:, 3:], axis=1),
    )
