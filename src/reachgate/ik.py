"""Path IK: joint values for every sample of a TCP path, on the home configuration's branch.

The closed-form solver serves arms with a spherical wrist (ik_closed); every other arm gets
the numeric solver (ik_numeric). Revolute joints are made continuous along the path: each
sample takes the value nearest the previous one (the first, nearest home), so a joint with
more than 360° of range is never wrapped to ±180°. The rail and prismatic joints never wrap.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import Enum

import numpy as np

from reachgate.ik_closed import ALL_BRANCHES, Branch, SphericalWristSolver, is_spherical_wrist
from reachgate.ik_numeric import solve_path_numeric
from reachgate.kinematics import tcp_columns
from reachgate.robot import Robot
from reachgate.trajectory import Trajectory
from reachgate.transforms import invert_transform, quat_to_matrix, transform

#: A solved sample whose FK misses the target by more than this is counted unreachable (m, rad).
RESIDUAL_TOL_M = 1e-9
RESIDUAL_TOL_RAD = 1e-9
TWO_PI = 2.0 * np.pi
#: Samples solved at once; bounds the (chunk, 4, 4) work arrays to a few tens of MB.
CHUNK_SAMPLES = 16_384


class SolverKind(Enum):
    CLOSED_FORM = "closed-form (spherical wrist)"
    NUMERIC = "numeric (damped least squares)"


def solver_kind(robot: Robot) -> SolverKind:
    return SolverKind.CLOSED_FORM if is_spherical_wrist(robot.chain) else SolverKind.NUMERIC


@dataclass(frozen=True)
class PathSolution:
    """Joint trajectory and what the solver learnt on the way.

    q: (N, n_axes) axis values (rail first), SI.
    reach_excess_m: (N,) distance of the target out of reach (0 where reachable).
    position_error_m, orientation_error_rad: (N,) FK(q) residuals against the targets.
    other_branch_fits: (N,) True where the kept branch leaves a joint range but another
        branch of the closed-form solution stays inside every range.
    measures: singularity measures by kind, each (N,): 'wrist', 'elbow' (rad),
        'shoulder' (m) for closed-form arms.
    """

    q: np.ndarray
    solver: SolverKind
    branch: Branch | None
    reach_excess_m: np.ndarray
    position_error_m: np.ndarray
    orientation_error_rad: np.ndarray
    other_branch_fits: np.ndarray
    measures: dict[str, np.ndarray] = field(default_factory=dict)


def chain_targets(robot: Robot, cell_T_tool: np.ndarray, rail_m: np.ndarray | None) -> np.ndarray:
    """Flange targets in the chain's base frame, (N, 4, 4) cell TCP poses -> (N, 4, 4).

    chain_T_flange = B⁻¹ · Tx(-rail) · C⁻¹ · cell_T_tool · tool⁻¹, with C = cell_T_rail and
    B = carriage_T_base · base_T_chain (without a rail, C is the identity and B the mount).
    """
    C_inv = invert_transform(robot.cell_T_rail)
    B_inv = invert_transform(robot.carriage_T_base @ robot.chain.base_T_chain)
    tool_inv = invert_transform(robot.flange_T_tool)
    n = cell_T_tool.shape[0]
    # Constant 3x3 factors applied to all samples as single stacked (3n, 3) products.
    rows = np.ascontiguousarray(cell_T_tool[:, :3, :3]).reshape(-1, 3)  # rows of each R
    R_tool = (rows @ tool_inv[:3, :3]).reshape(n, 3, 3)  # R · tool⁻¹
    left = B_inv[:3, :3] @ C_inv[:3, :3]
    R_out = (R_tool.transpose(0, 2, 1).reshape(-1, 3) @ left.T).reshape(n, 3, 3)
    flange_p = cell_T_tool[:, :3, 3] + (rows @ tool_inv[:3, 3]).reshape(n, 3)
    rail_p = flange_p @ C_inv[:3, :3].T + C_inv[:3, 3]  # flange in the rail frame
    if rail_m is not None:
        rail_p[:, 0] -= rail_m
    out = np.empty_like(cell_T_tool)
    out[:, :3, :3] = R_out.transpose(0, 2, 1)
    out[:, :3, 3] = rail_p @ B_inv[:3, :3].T + B_inv[:3, 3]
    out[:, 3] = (0.0, 0.0, 0.0, 1.0)
    return out


def continuous_angles(theta: np.ndarray, reference: np.ndarray) -> np.ndarray:
    """Unwrap angles along time, starting at the value nearest the reference.

    (N, k) angles, (k,) reference -> (N, k); each sample is within π of the previous one.
    """
    rows = theta.T  # (k, N): contiguous when theta is a transposed view, as the solvers give
    turns = np.round(np.diff(rows, axis=1) / TWO_PI)
    out = np.empty(rows.shape)
    out[:, 0] = rows[:, 0]
    out[:, 1:] = rows[:, 1:] - TWO_PI * np.cumsum(turns, axis=1)
    out += TWO_PI * np.round((reference - out[:, 0]) / TWO_PI)[:, None]
    return out.T  # (N, k), each column contiguous


def _fits_range(theta: np.ndarray, lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    """(M, 6) angles -> (M,) True where every angle, shifted by whole turns, fits its range."""
    shifted = lower + np.mod(theta - lower, TWO_PI)  # smallest value >= lower
    return (shifted <= upper).all(axis=1)


def solve_trajectory(
    robot: Robot,
    trajectory: Trajectory,
    cell_T_scenario: np.ndarray,
    rail_m: np.ndarray | None,
    chunk_samples: int = CHUNK_SAMPLES,
) -> PathSolution:
    """Joint values for a whole trajectory, in chunks so memory stays bounded.

    cell_T_scenario: (4, 4) placement; rail_m: (N,) rail positions or None. Each chunk
    continues from the last joint values of the one before, so the result equals one solve.
    """
    n = trajectory.n_samples
    place_R, place_p = cell_T_scenario[:3, :3], cell_T_scenario[:3, 3]
    parts: list[PathSolution] = []
    start_arm = None
    for first in range(0, n, chunk_samples):
        part = slice(first, min(first + chunk_samples, n))
        scenario_R_tcp = quat_to_matrix(trajectory.scenario_q_wxyz[part])  # (n, 3, 3)
        # cell_R_scenario @ R for every sample as one (3n, 3) product: Rᵀ Pᵀ stacked
        cell_R_tcp = (
            (scenario_R_tcp.transpose(0, 2, 1).reshape(-1, 3) @ place_R.T)
            .reshape(scenario_R_tcp.shape)
            .transpose(0, 2, 1)
        )
        cell_p_tcp = trajectory.scenario_p_m[part] @ place_R.T + place_p
        solved = solve_path(
            robot,
            transform(cell_R_tcp, cell_p_tcp),
            None if rail_m is None else rail_m[part],
            start_arm=start_arm,
        )
        parts.append(solved)
        start_arm = solved.q[-1, 1:] if robot.has_rail else solved.q[-1]
    if len(parts) == 1:
        return parts[0]
    first = parts[0]
    return PathSolution(
        q=np.concatenate([p.q.T for p in parts], axis=1).T,
        solver=first.solver,
        branch=first.branch,
        reach_excess_m=np.concatenate([p.reach_excess_m for p in parts]),
        position_error_m=np.concatenate([p.position_error_m for p in parts]),
        orientation_error_rad=np.concatenate([p.orientation_error_rad for p in parts]),
        other_branch_fits=np.concatenate([p.other_branch_fits for p in parts]),
        measures={k: np.concatenate([p.measures[k] for p in parts]) for k in first.measures},
    )


def _residuals(robot: Robot, q: np.ndarray, cell_T_tool: np.ndarray):
    """FK(q) against the targets: (N,) position error in m and orientation error in rad.

    With a = FK columns and b = target columns, M = Raᵀ Rb has M_ij = a_i · b_j; the angle of
    M is atan2(|skew(M)|, trace(M) - 1), evaluated on (N,) columns without (N, 3, 3) products.
    """
    xa, ya, za, pa = tcp_columns(robot, q)
    a = (xa, ya, za)
    b = [[cell_T_tool[:, k, c] for k in range(3)] for c in range(3)]

    def m(i, j):
        return a[i][0] * b[j][0] + a[i][1] * b[j][1] + a[i][2] * b[j][2]

    trace = m(0, 0) + m(1, 1) + m(2, 2)
    skew = np.sqrt((m(2, 1) - m(1, 2)) ** 2 + (m(0, 2) - m(2, 0)) ** 2 + (m(1, 0) - m(0, 1)) ** 2)
    dp = [pa[k] - cell_T_tool[:, k, 3] for k in range(3)]
    position = np.sqrt(dp[0] ** 2 + dp[1] ** 2 + dp[2] ** 2)
    return position, np.arctan2(skew, trace - 1.0)


def solve_path(
    robot: Robot,
    cell_T_tool: np.ndarray,
    rail_m: np.ndarray | None,
    start_arm: np.ndarray | None = None,
) -> PathSolution:
    """Joint values for a TCP path (N, 4, 4) in the cell with given rail positions (N,).

    start_arm: (n,) arm values the path continues from (default: home); the branch is always
    the home configuration's.
    """
    targets = chain_targets(robot, cell_T_tool, rail_m)
    chain = robot.chain
    arm = slice(1, None) if robot.has_rail else slice(None)
    home_arm = robot.home[arm]
    previous = home_arm if start_arm is None else np.asarray(start_arm, dtype=float)
    lower, upper = robot.lower[arm], robot.upper[arm]
    n_samples = targets.shape[0]

    if is_spherical_wrist(chain):
        solver = SphericalWristSolver(chain)
        branch = solver.branch_of(home_arm + chain.theta_offset_rad)
        sol = solver.solve(targets, branch)
        q_arm = continuous_angles(sol.theta - chain.theta_offset_rad, previous)
        reach = sol.reach_excess_m
        measures = {"shoulder": sol.shoulder_m, "elbow": sol.elbow_rad, "wrist": sol.wrist_rad}
        outside = ~((q_arm >= lower) & (q_arm <= upper)).all(axis=1) & (reach == 0)
        other_fits = np.zeros(n_samples, dtype=bool)
        if outside.any():
            for other in ALL_BRANCHES:
                if other == branch:
                    continue
                alt = solver.solve(targets[outside], other).theta - chain.theta_offset_rad
                other_fits[outside] |= _fits_range(alt, lower, upper)
        kind, kept = SolverKind.CLOSED_FORM, branch
    else:
        numeric = solve_path_numeric(chain, targets, previous)
        q_arm = numeric.q_arm
        reach = np.where(numeric.solved, 0.0, numeric.position_error_m)
        measures = {}
        other_fits = np.zeros(n_samples, dtype=bool)
        kind, kept = SolverKind.NUMERIC, None

    # axis-major storage: q[:, i] is contiguous, which the column-wise FK and checks read
    q_rows = np.empty((robot.n_axes, n_samples))
    q_rows[-chain.n :] = q_arm.T
    if rail_m is not None:
        q_rows[0] = rail_m
    q = q_rows.T
    position_error, orientation_error = _residuals(robot, q, cell_T_tool)
    missed = (position_error > RESIDUAL_TOL_M) | (orientation_error > RESIDUAL_TOL_RAD)
    # An unsolved sample with no geometric excess still counts as out of reach, by its miss.
    reach = np.where(missed & (reach == 0), np.maximum(position_error, 1e-12), reach)
    return PathSolution(
        q=q,
        solver=kind,
        branch=kept,
        reach_excess_m=reach,
        position_error_m=position_error,
        orientation_error_rad=orientation_error,
        other_branch_fits=other_fits,
        measures=measures,
    )
