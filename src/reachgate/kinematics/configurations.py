"""Other configurations: where the kept one leaves a joint range, does another solution of
the same pose stay inside every range?

The closed-form solver lists every branch of a spherical-wrist arm, so branch_fits says
which of the eight branches fit, sample by sample. A general arm has no such list, so seeds
for the numeric solver stand in for it: the closed-form solutions of the nearest
spherical-wrist arm (the same DH table with the wrist offsets a4, a5 and d5 set to zero)
when the arm has that shape otherwise, and a fixed set of configurations spread over the
joint ranges. A seed that converges to a configuration other than the kept one and inside
every range counts. This is a search, not a proof: a configuration that no seed leads to is
missed, and the one found has no name. It only ever adds `branch` rows next to the position
rows that stand anyway.
"""

from __future__ import annotations

import math

import numpy as np

from reachgate.kinematics.closed_form import (
    ALL_BRANCHES,
    Branch,
    SphericalWristSolver,
    is_spherical_wrist,
)
from reachgate.kinematics.numeric import refine
from reachgate.model.robot import Chain

TWO_PI = 2.0 * np.pi
#: Samples searched at most per call; on longer stretches every k-th sample is searched and
#: each other sample takes the answer of the nearest searched one.
SEARCH_SAMPLES_MAX = 512
#: Configurations spread over the joint ranges as seeds, from a fixed generator seed so
#: that every run gives the same answer.
SPREAD_SEEDS = 12
SPREAD_GENERATOR_SEED = 7_301
#: Iterations per seed (the numeric solver's damped least squares).
MAX_ITERATIONS = 60
#: A seed's result counts as a solution below these residuals (m, rad), as for the path.
SOLVED_TOL_M = 1e-9
SOLVED_TOL_RAD = 1e-9
#: Two solutions closer than this in every joint (revolute modulo whole turns) are the same.
SAME_CONFIGURATION_TOL = 1e-6


def fits_range(
    q: np.ndarray, lower: np.ndarray, upper: np.ndarray, revolute: np.ndarray | None = None
) -> np.ndarray:
    """(M, n) joint values -> (M,) True where every joint fits its range; revolute joints
    (all of them when revolute is None) may be shifted by whole turns to fit."""
    shifted = lower + np.mod(q - lower, TWO_PI)  # smallest value >= lower a whole turn away
    if revolute is not None:
        shifted = np.where(revolute, shifted, q)
    return ((shifted >= lower) & (shifted <= upper)).all(axis=1)


def branch_fits(
    solver: SphericalWristSolver,
    rows: np.ndarray,
    kept: Branch,
    lower: np.ndarray,
    upper: np.ndarray,
) -> np.ndarray:
    """(M,) uint8: bit k set where ALL_BRANCHES[k], another branch than the kept one, reaches
    the target and keeps every joint inside its range (shifted by whole turns if need be).

    rows: (>= 12, M) flange targets in the chain's base frame (see SphericalWristSolver.
    solve_rows); lower, upper: (6,) joint ranges, rad.
    """
    offset = solver.chain.theta_offset_rad
    bits = np.zeros(rows.shape[1], dtype=np.uint8)
    for k, branch in enumerate(ALL_BRANCHES):
        if branch != kept:
            other = solver.solve_rows(rows, branch)
            # a branch whose wrist centre lies outside its shell has no solution there
            fits = (other.reach_excess_m == 0) & fits_range(other.theta - offset, lower, upper)
            bits |= fits.astype(np.uint8) << k
    return bits


def branches_in(bits: int) -> tuple[Branch, ...]:
    """The branches whose bits (as branch_fits sets them) are set, in ALL_BRANCHES order."""
    return tuple(branch for k, branch in enumerate(ALL_BRANCHES) if bits >> k & 1)


def _wrist_centred(chain: Chain) -> Chain | None:
    """The chain with its wrist offsets a4, a5, d5 removed, if that is a spherical wrist."""
    if chain.n != 6 or not chain.revolute.all():
        return None
    a, d = chain.a_m.copy(), chain.d_m.copy()
    a[3] = a[4] = d[4] = 0.0
    centred = Chain(a, chain.alpha_rad, d, chain.theta_offset_rad, chain.revolute, np.eye(4))
    return centred if is_spherical_wrist(centred) else None


def _seeds(chain: Chain, chain_T_target: np.ndarray, lower, upper) -> np.ndarray:
    """Seeds (S, M, n) for M targets (M, 4, 4) in the chain frame."""
    m = chain_T_target.shape[0]
    seeds = []
    centred = _wrist_centred(chain)
    if centred is not None:
        solver = SphericalWristSolver(centred)
        for branch in ALL_BRANCHES:
            seeds.append(solver.solve(chain_T_target, branch).theta - chain.theta_offset_rad)
    low = np.where(chain.revolute, np.maximum(lower, -np.pi), lower)
    high = np.where(chain.revolute, np.minimum(upper, np.pi), upper)
    spread = np.random.default_rng(SPREAD_GENERATOR_SEED).uniform(
        low, high, (SPREAD_SEEDS, chain.n)
    )
    seeds += [np.broadcast_to(seed, (m, chain.n)) for seed in spread]
    return np.stack(seeds)


def other_configuration_fits(
    chain: Chain,
    chain_T_target: np.ndarray,
    q_kept: np.ndarray,
    lower: np.ndarray,
    upper: np.ndarray,
) -> np.ndarray:
    """(M,) True where another solution of the target fits every joint range.

    chain_T_target: (M, 4, 4) flange targets in the chain frame; q_kept: (M, n) the path's
    solutions there (outside some range); lower, upper: (n,) joint ranges.
    """
    m_all = chain_T_target.shape[0]
    if m_all == 0:
        return np.zeros(0, dtype=bool)
    stride = math.ceil(m_all / SEARCH_SAMPLES_MAX)
    searched = np.arange(0, m_all, stride)
    targets, kept = chain_T_target[searched], q_kept[searched]
    seeds = _seeds(chain, targets, lower, upper)  # (S, m, n)
    n_seeds, m, n = seeds.shape
    q, error = refine(
        chain, np.tile(targets, (n_seeds, 1, 1)), seeds.reshape(n_seeds * m, n), MAX_ITERATIONS
    )
    solved = (np.linalg.norm(error[:, :3], axis=1) < SOLVED_TOL_M) & (
        np.linalg.norm(error[:, 3:], axis=1) < SOLVED_TOL_RAD
    )
    difference = q - np.tile(kept, (n_seeds, 1))
    difference = np.where(chain.revolute, np.angle(np.exp(1j * difference)), difference)
    other = (np.abs(difference) > SAME_CONFIGURATION_TOL).any(axis=1)
    found = (solved & other & fits_range(q, lower, upper, chain.revolute)).reshape(n_seeds, m)
    nearest = np.minimum(np.round(np.arange(m_all) / stride).astype(int), m - 1)
    return found.any(axis=0)[nearest]
