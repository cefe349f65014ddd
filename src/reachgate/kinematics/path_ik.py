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

from reachgate.kinematics.chain import IDENTITY_COLUMNS, compose_links
from reachgate.kinematics.closed_form import (
    Branch,
    SphericalWristSolver,
    is_spherical_wrist,
)
from reachgate.kinematics.configurations import branch_fits, other_configuration_fits
from reachgate.kinematics.numeric import solve_path_numeric
from reachgate.model.robot import Robot
from reachgate.model.trajectory import Trajectory
from reachgate.model.transforms import invert_transform

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
        branch of the closed-form solution (general arms: another configuration the search
        of kinematics.configurations finds) stays inside every range.
    fitting_branch_bits: (N,) uint8 for closed-form arms, None for general arms (whose
        configurations the search does not name): bit k set where ALL_BRANCHES[k] stays
        inside every range (kinematics.configurations.branch_fits; 0 where the kept branch
        stays inside them all or the target is out of reach).
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
    fitting_branch_bits: np.ndarray | None = None


#: Rows of the target arrays (15, N) the solvers read, all in the chain's base frame:
#: the flange rotation's entries row by row, the flange origin, the TCP origin.
ROTATION_ROWS, FLANGE_ROWS, TCP_ROWS = slice(0, 9), slice(9, 12), slice(12, 15)
TARGET_ROWS = 15

# A unit quaternion's rotation entries (row by row) as a linear map of its ten quadratic
# monomials w², x², y², z², wx, wy, wz, xy, xz, yz (the homogeneous form of the usual matrix).
_MONOMIAL_PAIRS = ((0, 0), (1, 1), (2, 2), (3, 3), (0, 1), (0, 2), (0, 3), (1, 2), (1, 3), (2, 3))
_QUAT_TO_ROTATION = np.array(
    [
        [1, 1, -1, -1, 0, 0, 0, 0, 0, 0],  # r00 = w² + x² - y² - z²
        [0, 0, 0, 0, 0, 0, -2, 2, 0, 0],  # r01 = 2(xy - wz)
        [0, 0, 0, 0, 0, 2, 0, 0, 2, 0],  # r02 = 2(xz + wy)
        [0, 0, 0, 0, 0, 0, 2, 2, 0, 0],  # r10 = 2(xy + wz)
        [1, -1, 1, -1, 0, 0, 0, 0, 0, 0],  # r11 = w² - x² + y² - z²
        [0, 0, 0, 0, -2, 0, 0, 0, 0, 2],  # r12 = 2(yz - wx)
        [0, 0, 0, 0, 0, -2, 0, 0, 2, 0],  # r20 = 2(xz - wy)
        [0, 0, 0, 0, 2, 0, 0, 0, 0, 2],  # r21 = 2(yz + wx)
        [1, -1, -1, 1, 0, 0, 0, 0, 0, 0],  # r22 = w² - x² - y² + z²
    ],
    dtype=float,
)


def target_map(robot: Robot, cell_T_scenario: np.ndarray) -> np.ndarray:
    """The linear map from scenario poses to target rows, (15, 14).

    Applied to the features [R entries row by row (9), p (3), rail_m, 1] of a scenario pose
    (R, p) it gives the TARGET_ROWS. With P = cell_T_scenario, C = cell_T_rail and
    B = carriage_T_base · base_T_chain: chain_T_flange = B⁻¹ · Tx(-rail) · C⁻¹ · P · S · tool⁻¹,
    which is linear in S's entries and in the rail position.
    """
    G = invert_transform(robot.cell_T_rail) @ cell_T_scenario
    H = invert_transform(robot.carriage_T_base @ robot.chain.base_T_chain)
    tool_inv = invert_transform(robot.flange_T_tool)
    A = H[:3, :3] @ G[:3, :3]
    offset = H[:3, :3] @ G[:3, 3] + H[:3, 3]
    rail_axis = H[:3, 0]  # the carriage moves the base along the rail frame's +x
    W = np.zeros((TARGET_ROWS, 14))
    W[ROTATION_ROWS, :9] = np.kron(A, tool_inv[:3, :3].T)  # A S T: entry (3i+j, 3k+l) = A_ik T_lj
    W[FLANGE_ROWS, :9] = np.kron(A, tool_inv[:3, 3][None, :])  # A S t
    for rows in (FLANGE_ROWS, TCP_ROWS):
        W[rows, 9:12] = A
        W[rows, 12] = -rail_axis
        W[rows, 13] = offset
    return W


def _features(pose_terms: int, p_m: np.ndarray, rail_m: np.ndarray | None) -> np.ndarray:
    """Feature rows (pose_terms + 5, N): pose terms left for the caller, p, rail_m, 1."""
    n = p_m.shape[0]
    features = np.empty((pose_terms + 5, n))
    features[pose_terms : pose_terms + 3] = p_m.T
    features[-2] = 0.0 if rail_m is None else rail_m
    features[-1] = 1.0
    return features


def quaternion_map(W: np.ndarray) -> np.ndarray:
    """target_map's W (15, 14) for poses given by quaternion monomials instead: (15, 15)."""
    return np.concatenate([W[:, :9] @ _QUAT_TO_ROTATION, W[:, 9:]], axis=1)


def target_rows_from_quaternions(
    W_quat: np.ndarray, q_wxyz: np.ndarray, p_m: np.ndarray, rail_m: np.ndarray | None
) -> np.ndarray:
    """Target rows (15, N) of scenario poses given as (N, 4) unit quaternions and (N, 3) m.

    W_quat: quaternion_map(target_map(...)).
    """
    q_rows = np.ascontiguousarray(q_wxyz.T)  # (4, N)
    features = _features(10, p_m, rail_m)
    for m, (i, j) in enumerate(_MONOMIAL_PAIRS):  # row by row: a fancy-index gather is slower
        np.multiply(q_rows[i], q_rows[j], out=features[m])
    return W_quat @ features


def target_rows(robot: Robot, cell_T_tool: np.ndarray, rail_m: np.ndarray | None) -> np.ndarray:
    """Target rows (15, N) of (N, 4, 4) TCP poses in the cell at rail positions (N,) or None."""
    n = cell_T_tool.shape[0]
    features = _features(9, cell_T_tool[:, :3, 3], rail_m)
    features[:9] = cell_T_tool[:, :3, :3].reshape(n, 9).T
    return target_map(robot, np.eye(4)) @ features


def rows_to_matrices(rows: np.ndarray) -> np.ndarray:
    """Flange poses (N, 4, 4) in the chain's base frame from target rows (15, N)."""
    n = rows.shape[1]
    T = np.zeros((n, 4, 4))
    T[:, :3, :3] = rows[ROTATION_ROWS].T.reshape(n, 3, 3)
    T[:, :3, 3] = rows[FLANGE_ROWS].T
    T[:, 3, 3] = 1.0
    return T


def chain_targets(robot: Robot, cell_T_tool: np.ndarray, rail_m: np.ndarray | None) -> np.ndarray:
    """Flange targets in the chain's base frame, (N, 4, 4) cell TCP poses -> (N, 4, 4)."""
    return rows_to_matrices(target_rows(robot, cell_T_tool, rail_m))


def continuous_angles(theta: np.ndarray, reference: np.ndarray) -> np.ndarray:
    """Unwrap angles along time, starting at the value nearest the reference.

    (N, k) angles, (k,) reference -> (N, k); each sample is within π of the previous one.
    """
    rows = theta.T  # (k, N): contiguous when theta is a transposed view, as the solvers give
    out = np.empty(rows.shape)
    for row, values, start in zip(out, rows, reference, strict=True):
        turns = np.round(np.diff(values) / TWO_PI)
        row[:] = values + TWO_PI * np.round((start - values[0]) / TWO_PI)
        if turns.any():  # most joints never wrap on a path: skip the running sum
            row[1:] -= TWO_PI * np.cumsum(turns)
    return out.T  # (N, k), each column contiguous


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
    W_quat = quaternion_map(target_map(robot, cell_T_scenario))
    solver = _closed_form(robot)
    # filled chunk by chunk, so no list of parts is joined at the end
    q_rows = np.empty((robot.n_axes, n))  # axis-major, as each chunk's q
    reach, position, orientation = np.empty(n), np.empty(n), np.empty(n)
    other_fits = np.empty(n, dtype=bool)
    fit_bits = np.empty(n, dtype=np.uint8) if solver is not None else None
    measures: dict[str, np.ndarray] = {}
    solved, start_arm = None, None
    for first in range(0, n, chunk_samples):
        part = slice(first, min(first + chunk_samples, n))
        rail_part = None if rail_m is None else rail_m[part]
        rows = target_rows_from_quaternions(
            W_quat, trajectory.scenario_q_wxyz[part], trajectory.scenario_p_m[part], rail_part
        )
        solved = _solve_rows(robot, rows, rail_part, start_arm, solver)
        if part.stop - part.start == n:
            return solved
        start_arm = solved.q[-1, 1:] if robot.has_rail else solved.q[-1]
        q_rows[:, part] = solved.q.T
        reach[part] = solved.reach_excess_m
        position[part] = solved.position_error_m
        orientation[part] = solved.orientation_error_rad
        other_fits[part] = solved.other_branch_fits
        if fit_bits is not None:
            fit_bits[part] = solved.fitting_branch_bits
        for kind, values in solved.measures.items():
            measures.setdefault(kind, np.empty(n))[part] = values
    return PathSolution(
        q=q_rows.T,
        solver=solved.solver,
        branch=solved.branch,
        reach_excess_m=reach,
        position_error_m=position,
        orientation_error_rad=orientation,
        other_branch_fits=other_fits,
        measures=measures,
        fitting_branch_bits=fit_bits,
    )


def _residuals(robot: Robot, q_arm: np.ndarray, rows: np.ndarray):
    """FK(q) against the target rows: (N,) TCP position error in m, orientation error in rad.

    Compared in the chain's base frame, which the rigid placement, rail and mount transforms
    map onto the cell without changing either distance. The orientation error is the angle
    of Raᵀ Rb from the chordal distance |Ra - Rb|_F = 2√2 sin(θ/2) (Hartley et al., "Rotation
    averaging", 2013), which stays exact for small angles.
    """
    x, y, z, p = compose_links(robot.chain, q_arm, *IDENTITY_COLUMNS)
    tool_p = robot.flange_T_tool[:3, 3]
    columns = (x, y, z)
    chord_sq = sum((columns[j][i] - rows[3 * i + j]) ** 2 for i in range(3) for j in range(3))
    tcp_m = [p[k] + x[k] * tool_p[0] + y[k] * tool_p[1] + z[k] * tool_p[2] for k in range(3)]
    position = np.sqrt(sum((tcp_m[k] - rows[TCP_ROWS.start + k]) ** 2 for k in range(3)))
    orientation = 2.0 * np.arcsin(np.minimum(np.sqrt(chord_sq) / (2.0 * np.sqrt(2.0)), 1.0))
    return position, orientation


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
    rows = target_rows(robot, cell_T_tool, rail_m)
    return _solve_rows(robot, rows, rail_m, start_arm, _closed_form(robot))


def _closed_form(robot: Robot) -> tuple[SphericalWristSolver, Branch] | None:
    """The closed-form solver and the home configuration's branch, or None (numeric arm)."""
    if not is_spherical_wrist(robot.chain):
        return None
    solver = SphericalWristSolver(robot.chain)
    home_arm = robot.home[1:] if robot.has_rail else robot.home
    return solver, solver.branch_of(home_arm + robot.chain.theta_offset_rad)


def _solve_rows(
    robot: Robot,
    rows: np.ndarray,
    rail_m: np.ndarray | None,
    start_arm: np.ndarray | None,
    closed_form: tuple[SphericalWristSolver, Branch] | None,
) -> PathSolution:
    """solve_path on target rows (15, N) (see target_map)."""
    chain = robot.chain
    arm = slice(1, None) if robot.has_rail else slice(None)
    previous = robot.home[arm] if start_arm is None else np.asarray(start_arm, dtype=float)
    lower, upper = robot.lower[arm], robot.upper[arm]
    n_samples = rows.shape[1]

    if closed_form is not None:
        solver, branch = closed_form
        sol = solver.solve_rows(rows, branch)
        q_arm = continuous_angles(sol.theta - chain.theta_offset_rad, previous)
        reach = sol.reach_excess_m
        measures = {"shoulder": sol.shoulder_m, "elbow": sol.elbow_rad, "wrist": sol.wrist_rad}
        kind, kept = SolverKind.CLOSED_FORM, branch

        def another_fits(outside: np.ndarray) -> np.ndarray:
            return branch_fits(solver, rows[:, outside], branch, lower, upper)
    else:
        targets = rows_to_matrices(rows)
        numeric = solve_path_numeric(chain, targets, previous)
        q_arm = numeric.q_arm
        reach = np.where(numeric.solved, 0.0, numeric.position_error_m)
        measures = {}
        kind, kept = SolverKind.NUMERIC, None

        def another_fits(outside: np.ndarray) -> np.ndarray:
            return other_configuration_fits(chain, targets[outside], q_arm[outside], lower, upper)

    # where the kept solution leaves a range: does another configuration stay inside them all?
    outside = ~((q_arm >= lower) & (q_arm <= upper)).all(axis=1) & (reach == 0)
    other_fits = np.zeros(n_samples, dtype=bool)
    fit_bits = np.zeros(n_samples, dtype=np.uint8) if closed_form is not None else None
    if outside.any():
        found = another_fits(outside)
        other_fits[outside] = found != 0
        if fit_bits is not None:
            fit_bits[outside] = found

    # axis-major storage: q[:, i] is contiguous, which the column-wise FK and checks read
    q_rows = np.empty((robot.n_axes, n_samples))
    q_rows[-chain.n :] = q_arm.T
    if rail_m is not None:
        q_rows[0] = rail_m
    q = q_rows.T
    position_error, orientation_error = _residuals(robot, q[:, -chain.n :], rows)
    # written so that a NaN residual (a solver gone astray) counts as missed, never as met
    missed = ~((position_error <= RESIDUAL_TOL_M) & (orientation_error <= RESIDUAL_TOL_RAD))
    # An unsolved sample with no geometric excess still counts as out of reach, by its miss
    # (fmax: a NaN miss counts as the smallest one, not as none).
    reach = np.where(missed & (reach == 0), np.fmax(position_error, 1e-12), reach)
    other_fits &= reach == 0  # no configuration is judged where the kept one misses the target
    if fit_bits is not None:
        fit_bits[reach > 0] = 0
    return PathSolution(
        q=q,
        solver=kind,
        branch=kept,
        reach_excess_m=reach,
        position_error_m=position_error,
        orientation_error_rad=orientation_error,
        other_branch_fits=other_fits,
        measures=measures,
        fitting_branch_bits=fit_bits,
    )
