"""Logs of axis values against time: what a rig reports back, or what it was sent.

The format is the one `check --joints-out` writes: '#' comment lines, a header, then rows;
or Parquet or Arrow IPC files with the same columns (model/columnar.py), faults by row.
Columns: ``t_s`` and one column per axis named ``<axis>_deg``, ``<axis>_rad``, ``<axis>_m`` or
``<axis>_mm``; other columns are kept out and named. The text, time and number rules are
those of trajectories (model/csv_text.py, model/samples.py); axis values lie within a robot
file's plausible bounds. Faults name the file, the line and the column.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from reachgate.errors import ReachgateError
from reachgate.model.columnar import column_values, is_columnar, read_table
from reachgate.model.csv_text import read_header, scan_rows
from reachgate.model.robot import PLAUSIBLE
from reachgate.model.samples import TIME_RULE, ColumnRule, SampleBound, first_fault

#: Column-name suffixes of axis values and their factor to SI (rad or m).
AXIS_UNITS = {"deg": math.pi / 180.0, "rad": 1.0, "m": 1.0, "mm": 1e-3}
#: Axis values beyond a robot file's plausible bounds (robot.PLAUSIBLE) are refused alike.
_AXIS_BOUNDS = {
    "rad": SampleBound(math.radians(PLAUSIBLE["deg"].highest), "rad", PLAUSIBLE["deg"].why),
    "m": SampleBound(PLAUSIBLE["m"].highest, "m", PLAUSIBLE["m"].why),
}


def _axis_rule(column: str) -> ColumnRule:
    unit = column.rpartition("_")[2]
    return ColumnRule(_AXIS_BOUNDS["m" if unit in ("m", "mm") else "rad"], unit, AXIS_UNITS[unit])


@dataclass(frozen=True, eq=False)
class JointLog:
    """Axis values against time.

    t_s: (N,) strictly increasing times, s. values: (N, n) axis values in SI (rad or m).
    names: the n axis names (column names without their unit). ignored_columns: the rest.
    """

    t_s: np.ndarray
    values: np.ndarray
    names: tuple[str, ...]
    ignored_columns: tuple[str, ...] = ()


def axis_columns(header: list[str]) -> dict[str, tuple[int, float]]:
    """{axis name: (column index, factor to SI)} of every ``<axis>_<unit>`` column but t_s."""
    found: dict[str, tuple[int, float]] = {}
    for index, column in enumerate(header):
        stem, _, unit = column.rpartition("_")
        if column != "t_s" and stem and unit in AXIS_UNITS:
            if stem in found:
                raise ReachgateError(f"column {column}: axis {stem!r} is given twice")
            found[stem] = (index, AXIS_UNITS[unit])
    return found


def load_joint_log(path: str | Path) -> JointLog:
    """Load and validate an axis-value log: CSV, or Parquet or Arrow IPC with the same columns.
    Raises ReachgateError naming the file, the line (CSV) or row (columnar) and the column."""
    path = Path(path)
    label = str(path)
    table = read_table(path, label) if is_columnar(path) else None
    if table is None:
        header_line, header = read_header(path, label)
        at_header = f"{label} line {header_line}"
    else:
        header = [str(name).strip() for name in table.column_names]
        at_header = label
    if "t_s" not in header:
        raise ReachgateError(f"{at_header}: missing column t_s")
    try:
        axes = axis_columns(header)
    except ReachgateError as error:
        raise ReachgateError(f"{at_header}, {error}") from None
    if not axes:
        raise ReachgateError(
            f"{at_header}: no axis columns (name them <axis>_deg, _rad, _m or _mm)"
        )
    use = (header.index("t_s"), *(index for index, _ in axes.values()))
    rules = (TIME_RULE, *(_axis_rule(header[j]) for j in use[1:]))

    def raise_fault(values: np.ndarray, line_numbers: list[int] | None) -> None:
        fault = first_fault(values, rules)
        if fault is not None:
            row, col, text = fault
            place = f"row {row + 1}" if line_numbers is None else f"line {line_numbers[row]}"
            raise ReachgateError(f"{label} {place}, column {header[use[col]]}: {text}")

    if table is None:
        values, lines = scan_rows(path, label, header_line, tuple(header), use, raise_fault)
    else:
        values, lines = column_values(table, tuple(header), use, label), None
        if values.shape[0] < 2:
            raise ReachgateError(f"{label}: {values.shape[0]} rows; at least 2 are needed")
    raise_fault(values, lines)
    factors = np.array([factor for _, factor in axes.values()])
    used = {header[j] for j in use}
    return JointLog(
        t_s=values[:, 0],
        values=values[:, 1:] * factors,
        names=tuple(axes),
        ignored_columns=tuple(c for c in header if c not in used),
    )
