"""The checks: arrays of samples in, violation intervals out (DESIGN §6).

Every check reduces to one shape: an *excess* array (N,) per axis, positive beyond the limit,
and a *band* (>= 0) below the limit in which the value counts as near. `intervals` turns that
into one row per run of samples, never one per sample. A run that crosses the limit gives
`violation` rows (one per crossing); a run that stays inside the band gives one `near` row.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum

import numpy as np


class Check(Enum):
    POSITION = "position"
    SPEED = "speed"
    ACCEL = "accel"
    JERK = "jerk"
    SINGULARITY = "singularity"
    REACH = "reach"
    BRANCH = "branch"
    LAG = "lag"


#: Checks that a uniform time stretch can clear.
RATE_CHECKS = frozenset({Check.SPEED, Check.ACCEL, Check.JERK})


class Severity(Enum):
    VIOLATION = "violation"
    NEAR = "near"


@dataclass(frozen=True)
class Violation:
    """One interval of one check on one axis, SI units (the unit field names them)."""

    check: Check
    axis: str
    severity: Severity
    start_s: float
    end_s: float
    worst_s: float
    worst: float
    limit: float
    unit: str

    def as_dict(self) -> dict:
        return {
            "check": self.check.value,
            "axis": self.axis,
            "severity": self.severity.value,
            "start_s": self.start_s,
            "end_s": self.end_s,
            "worst_s": self.worst_s,
            "worst": self.worst,
            "limit": self.limit,
            "unit": self.unit,
        }


def _runs(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Start and stop (exclusive) indices of the runs of True in a (N,) mask."""
    edges = np.diff(np.concatenate([[False], mask, [False]]).astype(np.int8))
    return np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)


def _argmax_per_run(values: np.ndarray, starts: np.ndarray, stops: np.ndarray) -> np.ndarray:
    """Index of the largest value in each run (first one on ties), without a loop over runs."""
    if starts.size == 0:
        return starts
    # Interleaved [start, stop) bounds: every even segment is exactly one run.
    padded = np.append(values, -np.inf)
    run_max = np.maximum.reduceat(padded, np.ravel(np.column_stack([starts, stops])))[::2]
    lengths = stops - starts
    run_of = np.repeat(np.arange(starts.size), lengths)
    index = _ranges(starts, lengths)
    hits = values[index] == run_max[run_of]
    first = np.unique(run_of[hits], return_index=True)[1]
    return index[hits][first]


def _ranges(starts: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """Concatenated aranges [s, s + len) for every run, vectorised."""
    total = int(lengths.sum())
    offsets = np.repeat(starts - np.concatenate([[0], np.cumsum(lengths)[:-1]]), lengths)
    return np.arange(total) + offsets


def intervals(
    t_s: np.ndarray,
    excess: np.ndarray,
    band: float,
    *,
    check: Check,
    axis: str,
    worst_value: np.ndarray,
    limit_value: np.ndarray | float,
    unit: str,
) -> list[Violation]:
    """Violation and near rows for one axis of one check.

    t_s: (N,) times; excess: (N,) amount beyond the limit (> 0 is a violation);
    band: width of the near band below the limit, in the units of excess (0 = no near rows);
    worst_value: (N,) what a row reports as its worst (e.g. |speed|); limit_value: the limit
    it is compared with, scalar or (N,) (e.g. the range end nearer to each sample).
    """
    excess = np.asarray(excess, dtype=float)
    limit_value = np.broadcast_to(np.asarray(limit_value, dtype=float), excess.shape)
    over = excess > 0
    rows: list[Violation] = []

    def emit(starts, stops, severity):
        for i0, i1, iw in zip(starts, stops, _argmax_per_run(excess, starts, stops), strict=True):
            rows.append(
                Violation(
                    check=check,
                    axis=axis,
                    severity=severity,
                    start_s=float(t_s[i0]),
                    end_s=float(t_s[i1 - 1]),
                    worst_s=float(t_s[iw]),
                    worst=float(worst_value[iw]),
                    limit=float(limit_value[iw]),
                    unit=unit,
                )
            )

    if over.any():
        emit(*_runs(over), Severity.VIOLATION)
    if band > 0:
        near_starts, near_stops = _runs(excess > -band)
        if near_starts.size:
            # a near run that holds any violation sample is reported by its violation rows
            crossed = np.maximum.reduceat(over, near_starts)
            keep = ~crossed
            emit(near_starts[keep], near_stops[keep], Severity.NEAR)
    return rows


def margin_fraction(used_fraction: np.ndarray) -> float:
    """Smallest fraction of a limit left over the run: 1 - max(used/limit)."""
    return float(1.0 - np.max(used_fraction))


def sort_rows(rows: list[Violation]) -> list[Violation]:
    """Violations first, then near rows, each by start time, check and axis."""
    order = {Severity.VIOLATION: 0, Severity.NEAR: 1}
    return sorted(rows, key=lambda r: (order[r.severity], r.start_s, r.check.value, r.axis))
