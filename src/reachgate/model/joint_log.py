"""Logs of axis values against time (CSV): what a rig reports back, or what it was sent.

The format is the one `check --joints-out` writes: '#' comment lines, a header, then rows.
Columns: ``t_s`` and one column per axis named ``<axis>_deg``, ``<axis>_rad``, ``<axis>_m`` or
``<axis>_mm``; other columns are kept out and named. Time strictly increases; every value is a
finite number. Faults name the file, the line and the column.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from reachgate.errors import ReachgateError
from reachgate.model.trajectory import _is_skipped, _parse_number, _read_header

#: Column-name suffixes of axis values and their factor to SI (rad or m).
AXIS_UNITS = {"deg": math.pi / 180.0, "rad": 1.0, "m": 1.0, "mm": 1e-3}


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
    """Load and validate an axis-value log. Raises ReachgateError naming file, line, column."""
    path = Path(path)
    label = str(path)
    header_line, header = _read_header(path, label)
    if "t_s" not in header:
        raise ReachgateError(f"{label} line {header_line}: missing column t_s")
    try:
        axes = axis_columns(header)
    except ReachgateError as error:
        raise ReachgateError(f"{label} line {header_line}, {error}") from None
    if not axes:
        raise ReachgateError(
            f"{label} line {header_line}: no axis columns (name them <axis>_deg, _rad, _m or _mm)"
        )
    use = [header.index("t_s")] + [index for index, _ in axes.values()]
    rows, lines = [], []
    text = path.read_text(encoding="utf-8", errors="replace").split("\n")
    for line_no in range(header_line + 1, len(text) + 1):
        line = text[line_no - 1]
        if _is_skipped(line):
            continue
        fields = line.split(",")
        if len(fields) != len(header):
            raise ReachgateError(
                f"{label} line {line_no}: {len(fields)} fields, the header has {len(header)}"
            )
        row = []
        for j in use:
            value = _parse_number(fields[j].strip())
            if value is None or not math.isfinite(value):
                raise ReachgateError(
                    f"{label} line {line_no}, column {header[j]}: "
                    f"{fields[j].strip()!r} is not a finite number"
                )
            row.append(value)
        rows.append(row)
        lines.append(line_no)
    if len(rows) < 2:
        raise ReachgateError(f"{label}: fewer than 2 data rows")
    table = np.array(rows)
    steps = np.diff(table[:, 0])
    if (steps <= 0).any():
        bad = int(np.argmax(steps <= 0)) + 1
        raise ReachgateError(
            f"{label} line {lines[bad]}, column t_s: time does not increase "
            f"({table[bad, 0]!r} s after {table[bad - 1, 0]!r} s)"
        )
    factors = np.array([factor for _, factor in axes.values()])
    used = {header[j] for j in use}
    return JointLog(
        t_s=table[:, 0],
        values=table[:, 1:] * factors,
        names=tuple(axes),
        ignored_columns=tuple(c for c in header if c not in used),
    )
