"""How the rail shares the motion: held fixed, or following the slow part of the path.

``follow`` is what a rig controller does: the carriage tracks the TCP's motion along the rail
axis through a causal low-pass filter, so the rail takes the low frequencies and the arm the
rest. The filter is a critically damped second-order low-pass (two equal first-order stages)
discretised exactly on the real, possibly uneven, time steps.
"""

from __future__ import annotations

import math
from enum import Enum

import numpy as np

from reachgate.errors import ReachgateError
from reachgate.kinematics.chain import forward
from reachgate.model.robot import Robot

#: Default follow bandwidth, Hz (ours: slow enough for a heavy carriage, documented in README).
DEFAULT_BANDWIDTH_HZ = 0.5
#: Two equal first-order stages reach -3 dB at f_c·sqrt(sqrt(2) - 1); each stage's corner is
#: raised by this factor so that the pair has its -3 dB point at the requested bandwidth.
_STAGE_FACTOR = 1.0 / math.sqrt(math.sqrt(2.0) - 1.0)
#: Length of one block of the filter's closed-form scan, in stage time constants; keeps
#: exp(t/τ) far from overflow.
_BLOCK_TIME_CONSTANTS = 30.0


class RailPolicy(Enum):
    FIXED = "fixed"
    FOLLOW = "follow"


def first_order_lowpass(t_s: np.ndarray, u: np.ndarray, tau_s: float) -> np.ndarray:
    """Causal first-order low-pass y' = (u - y)/τ, exact for u linear over each step.

    (N,) times, (N,) input -> (N,) output, starting at rest on u[0]. Linear interpolation of u
    between samples (first-order hold) keeps the output's derivatives free of the steps a
    held input would put into them. The recurrence y_k = a_k y_(k-1) + c_k, with
    a_k = exp(-Δt_k/τ) and c_k = u_k - a_k u_(k-1) - (u_k - u_(k-1)) (1 - a_k) τ/Δt_k, is
    evaluated in closed form per block of samples s..e, with times from the block's first
    sample s: y_k = e^(-(t_k - t_s)/τ) (y_s + Σ_(s<j<=k) c_j e^((t_j - t_s)/τ)), so there is
    no per-sample Python loop. The block's first sample takes one plain step of the
    recurrence (a_s may underflow to 0, which is exact enough), so a step of any length, even
    thousands of time constants, never reaches exp's overflow: inside a block the exponents
    stay below _BLOCK_TIME_CONSTANTS.
    """
    t_s = np.asarray(t_s, dtype=float)
    u = np.asarray(u, dtype=float)
    y = np.empty_like(u)
    y[0] = u[0]
    dt = np.diff(t_s)
    gain = -np.expm1(-dt / tau_s)  # 1 - a_k for k >= 1
    du = np.diff(u)
    drive = u[1:] - (1.0 - gain) * u[:-1] - du * gain * (tau_s / dt)  # c_k for k >= 1
    start = 1
    block_s = _BLOCK_TIME_CONSTANTS * tau_s
    while start < u.size:
        # the block's first sample: one step of the recurrence, whatever its length
        y[start] = (1.0 - gain[start - 1]) * y[start - 1] + drive[start - 1]
        stop = int(np.searchsorted(t_s, t_s[start] + block_s, side="right"))
        stop = max(stop, start + 1)
        if stop > start + 1:
            rel = (t_s[start + 1 : stop] - t_s[start]) / tau_s  # in [0, block] time constants
            grow = np.exp(rel)
            y[start + 1 : stop] = (y[start] + np.cumsum(drive[start : stop - 1] * grow)) / grow
        start = stop
    return y


def follow_filter(t_s: np.ndarray, u: np.ndarray, bandwidth_hz: float) -> np.ndarray:
    """The rail's follow filter: two first-order stages, -3 dB at bandwidth_hz. (N,) -> (N,)."""
    tau_s = 1.0 / (2.0 * math.pi * bandwidth_hz * _STAGE_FACTOR)
    return first_order_lowpass(t_s, first_order_lowpass(t_s, u, tau_s), tau_s)


def rail_positions(
    robot: Robot,
    t_s: np.ndarray,
    scenario_p_tcp: np.ndarray,
    cell_T_scenario: np.ndarray,
    policy: RailPolicy,
    rail_at_m: float | None = None,
    bandwidth_hz: float = DEFAULT_BANDWIDTH_HZ,
) -> np.ndarray | None:
    """Rail carriage positions (N,) in m for TCP positions (N, 3) in the scenario frame,
    placed in the cell by cell_T_scenario (4, 4), or None.

    fixed: every sample at rail_at_m (default the rail's home); rail_at_m must lie on the rail
    whatever the policy (follow does not use it). follow: the TCP's coordinate
    along the rail axis, low-pass filtered, minus the TCP's along-rail offset from the carriage
    at the arm's home pose, so that the arm works around home on average. Positions are
    clipped to the rail's range (a target beyond it then shows as arm reach or limit rows).
    """
    if robot.rail is None:
        if policy is RailPolicy.FOLLOW or rail_at_m is not None:
            raise ReachgateError(f"{robot.source}: robot {robot.name!r} has no rail")
        return None
    rail = robot.rail
    n = scenario_p_tcp.shape[0]
    at = rail.home if rail_at_m is None else float(rail_at_m)
    if not rail.lower <= at <= rail.upper:  # whatever the policy: a wrong number is wrong
        raise ReachgateError(
            f"--rail-at: {at:g} m is outside the rail range [{rail.lower:g}, {rail.upper:g}] m"
        )
    if policy is RailPolicy.FIXED:
        return np.full(n, at)
    if not (math.isfinite(bandwidth_hz) and bandwidth_hz > 0):
        raise ReachgateError(
            f"--rail-bandwidth: must be a positive frequency, got {bandwidth_hz!r}"
        )
    rail_axis = robot.cell_T_rail[:3, 0]
    rail_origin = robot.cell_T_rail[:3, 3]
    # the TCP's coordinate along the rail, (cell_p - origin) · axis, as one (N, 3) @ (3,)
    placed_axis = cell_T_scenario[:3, :3].T @ rail_axis
    along_m = scenario_p_tcp @ placed_axis + (cell_T_scenario[:3, 3] - rail_origin) @ rail_axis
    home_tcp = forward(robot, robot.home[None])[0, :3, 3]
    offset_m = (home_tcp - rail_origin) @ rail_axis - rail.home
    return np.clip(follow_filter(t_s, along_m - offset_m, bandwidth_hz), rail.lower, rail.upper)
