"""The `envelope` command's output: a table (mm, deg), CSV and JSON of an Envelope."""

from __future__ import annotations

import csv
import io
import math

import numpy as np

from reachgate.model.transforms import matrix_to_rpy
from reachgate.motion.envelope import (
    MIN_AMPLITUDE_M,
    MIN_AMPLITUDE_RAD,
    RAMP_PERIODS,
    STEADY_PERIODS,
    Direction,
    DirectionEnvelope,
    Envelope,
)
from reachgate.render.check_report import plain_console
from reachgate.render.terminal import fixed, plain_table, table_width, tidy, wrap_items
from reachgate.version import __version__


def _shown(direction: Direction) -> tuple[str, float]:
    return ("deg", 180.0 / math.pi) if direction.is_rotation else ("mm", 1000.0)


def _cell(item: DirectionEnvelope, k: int) -> str:
    factor = _shown(item.direction)[1]
    value = item.amplitudes[k] * factor
    if not item.bounded[k]:
        return f">= {value:.4g} (none)"
    if value == 0.0:
        small = (MIN_AMPLITUDE_RAD if item.direction.is_rotation else MIN_AMPLITUDE_M) * factor
        return f"< {small:.2g} {item.limiting_check[k]} {item.limiting_axis[k]}"
    return f"{value:.4g} {item.limiting_check[k]} {item.limiting_axis[k]}"


def render_envelope_table(result: Envelope, width: int | None = None) -> str:
    """Colour-free table: one row per frequency, one column per direction (mm or deg)."""

    console, buffer = plain_console(width or table_width())
    xyz_mm = result.cell_T_operating[:3, 3] * 1000.0
    rpy_deg = np.degrees(matrix_to_rpy(result.cell_T_operating))
    console.print(f"reachgate {__version__}: envelope of {result.robot}")
    items = [
        "operating pose (cell): " + ", ".join(fixed(v, 1) for v in xyz_mm) + " mm",
        "roll, pitch, yaw " + ", ".join(fixed(v) for v in rpy_deg) + " deg",
        f"rail {result.rail.value}",
    ]
    console.print(wrap_items(items, console.width), soft_wrap=True)
    items = [
        f"sinusoid: {RAMP_PERIODS} ramp + {STEADY_PERIODS} steady + {RAMP_PERIODS} ramp periods",
        f"{result.samples_per_period} samples per period",
        f"amplitude to {result.rel_tol * 100:g} % by bisection ({result.checks_run} check runs)",
    ]
    console.print(wrap_items(items, console.width), soft_wrap=True)
    table = plain_table()
    table.add_column("f Hz", justify="right")
    for item in result.directions:
        table.add_column(f"{item.direction.value} {_shown(item.direction)[0]}", justify="left")
    for k, f in enumerate(result.directions[0].frequencies_hz):
        table.add_row(f"{f:.3g}", *(_cell(item, k) for item in result.directions))
    console.print(table)
    console.print(
        "Each cell: largest amplitude (peak, about the operating pose) that passes every check, "
        "then the check and axis that fail just above it. Translations along cell axes, "
        "rotations about the TCP's own axes."
    )
    return tidy(buffer.getvalue())


CSV_COLUMNS = ("direction", "frequency_hz", "amplitude", "unit", "bounded", "check", "axis")


def render_envelope_csv(result: Envelope) -> str:
    """One line per (direction, frequency), SI units."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for item in result.directions:
        for k, f in enumerate(item.frequencies_hz):
            writer.writerow(
                [
                    item.direction.value,
                    repr(float(f)),
                    repr(float(item.amplitudes[k])),
                    item.direction.unit,
                    "true" if item.bounded[k] else "false",
                    item.limiting_check[k],
                    item.limiting_axis[k],
                ]
            )
    return tidy(buffer.getvalue())


def render_envelope(result: Envelope, fmt: str) -> str:
    """The envelope as 'table', 'json' or 'csv' text."""
    if fmt == "json":
        return result.to_json()
    if fmt == "csv":
        return render_envelope_csv(result)
    return render_envelope_table(result)
