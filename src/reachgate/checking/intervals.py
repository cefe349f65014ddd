"""The checks: arrays of samples in, violation intervals out (DESIGN §6).

Every check reduces to one shape: an *excess* array (N,) per axis, positive beyond the limit,
and a *band* (>= 0) below the limit in which the value counts as near. `intervals` turns that
into one row per run of samples, never one per sample. A run that crosses the limit gives
`violation` rows (one per crossing); a run that stays inside the band gives one `near` row.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from enum import Enum

import numpy as np

from reachgate.errors import UndefinedValueError


class Check(Enum):
    POSITION = "position"
    SPEED = "speed"
    ACCEL = "accel"
    JERK = "jerk"
    SINGULARITY = "singularity"
    REACH = "reach"
    BRANCH = "branch"
    LAG = "lag"
    CLEARANCE = "clearance"


#: Checks that a uniform time stretch can clear.
RATE_CHECKS = frozenset({Check.SPEED, Check.ACCEL, Check.JERK})


class Severity(Enum):
    VIOLATION = "violation"
    NEAR = "near"


@dataclass(frozen=True)
class Violation:
    """One interval of one check on one axis, SI units (the unit field names them).

    fitting_branches: on `branch` rows and on `position` violation rows of an arm joint of a
    closed-form arm, the other configuration branches ('shoulder -, elbow +, wrist +') that
    reach the target and keep every arm joint in range at every sample of the row; () when
    none does. None on every other row, and on general arms, whose other configurations a
    search finds but cannot name (checking.branch_rows).
    """

    check: Check
    axis: str
    severity: Severity
    start_s: float
    end_s: float
    worst_s: float
    worst: float
    limit: float
    unit: str
    fitting_branches: tuple[str, ...] | None = None

    def as_dict(self) -> dict:
        """JSON-ready row (DESIGN §6 keys, in field order); enums by their report names."""
        return {
            f.name: getattr(self, f.name).value
            if isinstance(getattr(self, f.name), Enum)
            else getattr(self, f.name)
            for f in fields(self)
        }


ROW_KEYS = tuple(f.name for f in fields(Violation))


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


@dataclass
class _Run:
    """A run of samples still being read: its start, end and worst sample so far."""

    start_s: float
    end_s: float
    worst_excess: float
    worst_s: float
    worst: float
    limit: float
    crossed: bool = False


class IntervalStream:
    """Interval rows of one check on one axis, fed in consecutive chunks of samples.

    Gives exactly the rows of one call on the whole arrays: a run that reaches the end of a
    chunk stays open and joins the run that starts the next chunk. Lets a long case be
    checked block by block with bounded memory.
    """

    def __init__(self, band: float, *, check: Check, axis: str, unit: str) -> None:
        self.band, self.check, self.axis, self.unit = band, check, axis, unit
        self.rows: list[Violation] = []
        self._open: dict[Severity, _Run | None] = {Severity.VIOLATION: None, Severity.NEAR: None}

    def feed(self, t_s, excess, worst_value, limit_value) -> None:
        """Add one chunk: t_s, excess, worst_value (n,) and limit_value scalar or (n,).

        -inf in excess means "not judged here" (an unreachable sample, say); NaN or +inf is
        an undefined value and raises UndefinedValueError naming the check, axis and time: a
        comparison with NaN is False, so it would otherwise read as a pass.
        """
        excess = np.asarray(excess, dtype=float)
        undefined = np.isnan(excess) | (excess == np.inf)
        if undefined.any():
            first = int(np.argmax(undefined))
            raise UndefinedValueError(
                f"{self.check.value} of {self.axis} is undefined ({excess[first]}) at "
                f"t = {float(t_s[first]):.6g} s: nothing was judged, the case cannot pass"
            )
        if excess.size and float(excess.max()) <= -max(self.band, 0.0):
            # no sample over or near the limit: only runs left open by the last chunk end
            for severity, pending in self._open.items():
                if pending is not None:
                    self._close(severity, pending)
                self._open[severity] = None
            return
        limit_value = np.broadcast_to(np.asarray(limit_value, dtype=float), excess.shape)
        over = excess > 0
        self._feed_runs(Severity.VIOLATION, over, None, t_s, excess, worst_value, limit_value)
        if self.band > 0:
            near = excess > -self.band
            self._feed_runs(Severity.NEAR, near, over, t_s, excess, worst_value, limit_value)

    def _feed_runs(self, severity, mask, over, t_s, excess, worst_value, limit_value):
        starts, stops = _runs(mask)
        pending = self._open[severity]
        if pending is not None and (starts.size == 0 or starts[0] != 0):
            self._close(severity, pending)
            pending = None
        if starts.size == 0:
            self._open[severity] = None
            return
        best = _argmax_per_run(excess, starts, stops)
        # reduceat runs to the next start, but the samples between near runs are never over
        crossed = np.zeros(starts.size, bool) if over is None else np.maximum.reduceat(over, starts)
        runs = [
            _Run(
                float(t_s[i0]),
                float(t_s[i1 - 1]),
                float(excess[iw]),
                float(t_s[iw]),
                float(worst_value[iw]),
                float(limit_value[iw]),
                bool(c),
            )
            for i0, i1, iw, c in zip(starts, stops, best, crossed, strict=True)
        ]
        if pending is not None:  # the chunk opens inside the run left open by the last one
            first = runs[0]
            if first.worst_excess > pending.worst_excess:
                pending.worst_excess, pending.worst_s = first.worst_excess, first.worst_s
                pending.worst, pending.limit = first.worst, first.limit
            pending.end_s, pending.crossed = first.end_s, pending.crossed or first.crossed
            runs[0] = pending
        still_open = stops[-1] == mask.size
        for run in runs[:-1] if still_open else runs:
            self._close(severity, run)
        self._open[severity] = runs[-1] if still_open else None

    def _close(self, severity: Severity, run: _Run) -> None:
        if severity is Severity.NEAR and run.crossed:
            return  # a near run that holds a violation is reported by its violation rows
        self.rows.append(
            Violation(
                self.check,
                self.axis,
                severity,
                run.start_s,
                run.end_s,
                run.worst_s,
                run.worst,
                run.limit,
                self.unit,
            )
        )

    def finish(self) -> list[Violation]:
        """Close the runs still open and return every row."""
        for severity, run in self._open.items():
            if run is not None:
                self._close(severity, run)
            self._open[severity] = None
        return self.rows


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
    """Violation and near rows for one axis of one check, on whole arrays.

    t_s: (N,) times; excess: (N,) amount beyond the limit (> 0 is a violation);
    band: width of the near band below the limit, in the units of excess (0 = no near rows);
    worst_value: (N,) what a row reports as its worst (e.g. |speed|); limit_value: the limit
    it is compared with, scalar or (N,) (e.g. the range end nearer to each sample).
    """
    stream = IntervalStream(band, check=check, axis=axis, unit=unit)
    stream.feed(t_s, excess, worst_value, limit_value)
    return stream.finish()


def sort_rows(rows: list[Violation]) -> list[Violation]:
    """Violations first, then near rows, each by start time, check and axis."""
    order = {Severity.VIOLATION: 0, Severity.NEAR: 1}
    return sorted(rows, key=lambda r: (order[r.severity], r.start_s, r.check.value, r.axis))
