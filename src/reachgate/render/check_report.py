"""Rendering of a check Report: colour-free table, JSON (DESIGN §6) and CSV.

The table shows lengths in mm and angles in degrees; JSON and CSV keep SI units.
"""

from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path

import numpy as np

from reachgate.checking.intervals import ROW_KEYS, Check, Severity
from reachgate.checking.pipeline import Report
from reachgate.checking.rail import RailPolicy
from reachgate.checking.slowdown import STRETCH_CHECKS
from reachgate.render.files import atomic_output
from reachgate.render.terminal import (
    breakable_axis,
    plain_table,
    table_width,
    tidy,
    wrap_items,
    wrap_text,
)

SAFETY_CAUTIONS = (
    "A pass here is not a safety validation of the cell or the path.",
    "The robot controller's own limits and safety functions stay in force.",
    "Assess the risks and follow the local codes and the standards for industrial robot cells.",
    "Run every new path first at reduced speed (at most 250 mm/s at the TCP, the usual "
    "manual-mode limit of ISO 10218) with nobody inside the safeguarded space.",
)

#: SI unit -> (display unit, factor) for the table.
_DISPLAY = {
    "rad": ("deg", 180.0 / math.pi),
    "rad/s": ("deg/s", 180.0 / math.pi),
    "rad/s^2": ("deg/s^2", 180.0 / math.pi),
    "rad/s^3": ("deg/s^3", 180.0 / math.pi),
    "m": ("mm", 1000.0),
    "m/s": ("mm/s", 1000.0),
    "m/s^2": ("mm/s^2", 1000.0),
    "m/s^3": ("mm/s^3", 1000.0),
    "1": ("", 1.0),
}

CSV_COLUMNS = ROW_KEYS


def plain_console(width: int, **options):
    """A rich Console that writes colour-free text, no control codes, into a buffer.

    Returns (console, buffer); buffer.getvalue() is the rendered text.
    """
    from rich.console import Console

    buffer = io.StringIO()
    console = Console(
        file=buffer,
        width=width,
        no_color=True,
        color_system=None,
        force_terminal=False,
        highlight=False,
        emoji=False,
        markup=False,
        **options,
    )
    return console, buffer


def display(value: float, unit: str) -> tuple[str, str]:
    """A value in SI -> (text in table units, table unit)."""
    shown_unit, factor = _DISPLAY.get(unit, (unit, 1.0))
    return f"{value * factor:.4g}" if unit == "1" else f"{value * factor:.2f}", shown_unit


def plural(count: int, word: str) -> str:
    """'1 violation row', '3 violation rows'."""
    return f"{count} {word}" if count == 1 else f"{count} {word}s"


def _listed(names: list[str]) -> str:
    """'speed', 'speed and jerk', 'speed, accel and jerk'."""
    return names[0] if len(names) == 1 else f"{', '.join(names[:-1])} and {names[-1]}"


def _fixes_beyond_a_stretch(report: Report) -> str:
    """What can help rows no stretch clears (position, reach, branch, singularity, clearance);
    `report` may be a rig's report."""
    # a rig: its robots' own reports and the settings each was checked with
    reports = getattr(report, "robots", {"": report})
    used = getattr(report, "robot_settings", {"": report.settings})
    railed = [name for name, r in reports.items() if "rail" in r.axis_names]
    if not railed:
        rail = ""
    elif all(getattr(used[name], "rail", None) is RailPolicy.FOLLOW for name in railed):
        rail = "let the rail take more (a higher --rail-bandwidth), "
    else:
        rail = "let the rail take more (--rail follow, or another --rail-at), "
    return f"move the placement (--place), {rail}or change the path"


def advice(report: Report) -> str:
    """One line of advice naming only fixes that can work for the violation rows present.

    A slower case clears speed, accel, jerk and lag rows (slowdown); a lag row also clears
    with a shorter loop delay or a prediction of the pose over the delay; no stretch clears
    the other rows, which need a different placement, more motion on the rail or another path.
    """
    failing = [v for v in report.violations if v.severity is Severity.VIOLATION]
    if not failing:
        return "No change needed."
    stretchable = sorted({v.check.value for v in failing if v.check in STRETCH_CHECKS})
    others = sorted({v.check.value for v in failing if v.check not in STRETCH_CHECKS})
    rows = "row" if sum(v.check.value in stretchable for v in failing) == 1 else "rows"
    parts = []
    if stretchable:
        if report.slowdown is not None:
            parts.append(
                f"a slower case: stretch time by at least {report.slowdown:.3f}x to clear the "
                f"{_listed(stretchable)} {rows}"
            )
        else:
            parts.append(f"no stretch was found that clears the {_listed(stretchable)} {rows}")
        if "lag" in stretchable:
            parts.append(
                "the lag rows also clear with a shorter loop delay or with a prediction of "
                "the pose over the delay"
            )
    if others:
        other_rows = "row" if sum(v.check.value in others for v in failing) == 1 else "rows"
        lead = "a stretch does not clear the" if stretchable else "slowing down does not clear the"
        parts.append(f"{lead} {_listed(others)} {other_rows}: {_fixes_beyond_a_stretch(report)}")
    text = "; ".join(parts)
    return text[0].upper() + text[1:] + "."


#: Interval rows the table shows before it summarises the rest (JSON and CSV keep all).
TABLE_MAX_ROWS = 40
#: Clearance pairs the margins table shows, closest first (JSON keeps all).
TABLE_MAX_PAIRS = 12


def _rows_to_show(rows, max_rows: int):
    """The first rows in time order, but always each (check, axis)'s worst violation."""
    if len(rows) <= max_rows:
        return list(rows)
    worst = {}
    for v in rows:
        if v.severity is Severity.VIOLATION:
            key = (v.check, v.axis)
            if key not in worst or abs(v.worst - v.limit) > abs(
                worst[key].worst - worst[key].limit
            ):
                worst[key] = v
    keep = set(map(id, worst.values()))
    for v in rows:
        if len(keep) >= max_rows:
            break
        keep.add(id(v))
    return [v for v in rows if id(v) in keep]


def _group_table(report: Report):
    """One line per (check, axis): row counts, first start, last end, worst and its limit."""

    table = plain_table()
    for title in (
        "check",
        "axis",
        "violation rows",
        "near rows",
        "first s",
        "last s",
        "worst",
        "limit",
        "unit",
    ):
        table.add_column(title, justify="left" if title in ("check", "axis", "unit") else "right")
    groups: dict = {}
    for v in report.violations:
        groups.setdefault((v.check.value, v.axis), []).append(v)
    for (check, axis), rows in groups.items():
        failing = [v for v in rows if v.severity is Severity.VIOLATION] or rows
        worst_row = max(failing, key=lambda v: abs(v.worst - v.limit))
        worst, unit = display(worst_row.worst, worst_row.unit)
        limit, _ = display(worst_row.limit, worst_row.unit)
        n_viol = sum(v.severity is Severity.VIOLATION for v in rows)
        table.add_row(
            check,
            axis,
            str(n_viol),
            str(len(rows) - n_viol),
            f"{min(v.start_s for v in rows):.3f}",
            f"{max(v.end_s for v in rows):.3f}",
            worst,
            limit,
            unit,
        )
    return table


def _margin_text(values: dict, key: str) -> str:
    """A margin cell: '-' where the check does not apply, 'not measured' where it applies but
    no sample could be measured (null in JSON)."""
    if key not in values:
        return "-"
    return "not measured" if values[key] is None else f"{values[key]:.2f}"


def rail_text(settings, has_rail: bool) -> str:
    """How the rail was run: 'none', 'fixed', 'fixed at 3 m' or 'follow (0.5 Hz)'."""
    if not has_rail:
        return "none"
    if settings.rail.value == "follow":
        return f"follow ({settings.rail_bandwidth_hz:g} Hz)"
    if settings.rail_at_m is not None:
        return f"fixed at {settings.rail_at_m:g} m"
    return "fixed"


def render_table(report: Report, width: int | None = None, max_rows: int = TABLE_MAX_ROWS) -> str:
    """The colour-free text report: verdict, interval rows, margins, advice, cautions."""

    console, buffer = plain_console(width or table_width())

    def say(text: str, first: str = "") -> None:
        console.print(wrap_text(text, console.width, first), soft_wrap=True)

    n_viol = sum(v.severity is Severity.VIOLATION for v in report.violations)
    n_near = len(report.violations) - n_viol
    rail = rail_text(report.settings, "rail" in report.axis_names)
    branch = report.solution.branch.describe() if report.solution.branch else "kept from home"
    console.print(f"reachgate {report.tool_version}: {report.robot} / {report.trajectory}")
    header = [
        f"{report.samples} samples over {report.duration_s:.3f} s",
        f"rail {rail}",
        f"solver {report.solution.solver.value}",
        f"branch {branch}",
    ]
    console.print(wrap_items(header, console.width), soft_wrap=True)
    for note in report.notes:
        say(note, "note: ")
    verdict = "PASS" if report.passed else "FAIL"
    console.print(
        f"verdict: {verdict} ({plural(n_viol, 'violation row')}, {plural(n_near, 'near row')})"
    )
    print_findings(console, report, max_rows, branch_explanations(report))
    return tidy(buffer.getvalue())


def print_findings(console, report, max_rows: int, branch_texts: list[str]) -> None:
    """The interval rows (and what the branch rows mean), the margins, the advice and the
    cautions of a report (one robot or a rig) onto a console."""

    def say(text: str, first: str = "") -> None:
        wrapped = wrap_text(text, console.width, first).replace(_UNBROKEN, " ")
        console.print(wrapped, soft_wrap=True)

    if report.violations:
        rows = plain_table()
        for title in (
            "check",
            "axis",
            "severity",
            "from s",
            "to s",
            "worst at s",
            "worst",
            "limit",
            "unit",
        ):
            justify = (
                "right" if title in ("from s", "to s", "worst at s", "worst", "limit") else "left"
            )
            rows.add_column(title, justify=justify)
        shown = _rows_to_show(report.violations, max_rows)
        for v in shown:
            worst, unit = display(v.worst, v.unit)
            limit, _ = display(v.limit, v.unit)
            rows.add_row(
                v.check.value,
                breakable_axis(v.axis),
                v.severity.value,
                f"{v.start_s:.3f}",
                f"{v.end_s:.3f}",
                f"{v.worst_s:.3f}",
                worst,
                limit,
                unit,
            )
        console.print(rows)
        if len(shown) < len(report.violations):
            console.print(
                f"{len(report.violations) - len(shown)} more rows not shown (all rows: "
                "--format csv or json); every row, grouped by check and axis:"
            )
            console.print(_group_table(report))
        for text in branch_texts:
            say(text, "branch: ")

    margins = plain_table()
    margins.add_column("axis")
    keys = ("position", "speed", "accel", "jerk")
    for key in keys:
        margins.add_column(f"{key} left", justify="right")
    pairs = {}
    for axis, values in report.margins.items():
        if "clearance" in values:
            pairs[axis] = values["clearance"]
            continue
        margins.add_row(axis, *(_margin_text(values, k) for k in keys))
    say(
        "margins: fraction of each limit left over the run "
        "(1 unused, 0 at it, < 0 beyond; not measured: no sample to measure it on)"
    )
    console.print(margins)
    if pairs:
        # the closest pairs first; an unmeasured margin counts as the worst
        ranked = sorted(pairs.items(), key=lambda item: -math.inf if item[1] is None else item[1])
        clearance = plain_table()
        clearance.add_column("pair (closest first)")
        clearance.add_column("clearance left", justify="right")
        for pair, value in ranked[:TABLE_MAX_PAIRS]:
            clearance.add_row(pair, _margin_text({"clearance": value}, "clearance"))
        console.print(clearance)
        if len(ranked) > TABLE_MAX_PAIRS:
            least = _margin_text({"clearance": ranked[TABLE_MAX_PAIRS][1]}, "clearance")
            say(
                f"{len(ranked) - TABLE_MAX_PAIRS} more pairs, the closest of them {least} "
                "left (all pairs: --format json)"
            )
    say(advice(report), "advice: ")
    console.print("cautions:")
    for line in SAFETY_CAUTIONS:
        say(line, "  - ")


#: Joined into a branch's name so that prose never breaks it across lines (textwrap breaks
#: only at ASCII whitespace); print_findings turns it back into a plain space.
_UNBROKEN = "\u00a0"


def _branch_names(names: tuple[str, ...]) -> str:
    """'The branch shoulder -, elbow +, wrist +' or 'Each of the branches a and b', each
    name kept on one line."""
    kept_whole = [name.replace(" ", _UNBROKEN) for name in names]
    if len(kept_whole) == 1:
        return f"The branch {kept_whole[0]}"
    return f"Each of the branches {', '.join(kept_whole[:-1])} and {kept_whole[-1]}"


def _overlaps(a, b) -> bool:
    return a.start_s <= b.end_s and a.end_s >= b.start_s


def branch_explanations(report: Report) -> list[str]:
    """In words, for each `branch` row: which joint the kept configuration takes out of its
    range and by how much, and which other configuration keeps every joint in range over the
    row (or that no single one does); for the arm joints that leave their range where no other
    configuration keeps them all in range (position rows no branch row meets): that none does."""
    solution = report.solution
    kept = solution.branch.describe().replace(" ", _UNBROKEN) if solution.branch else None
    kept_text = f"the configuration kept from home ({kept})" if kept else "the kept configuration"
    positions = [
        v for v in report.violations
        if v.check is Check.POSITION and v.severity is Severity.VIOLATION
    ]  # fmt: skip
    branches = [v for v in report.violations if v.check is Check.BRANCH]
    texts = []  # (start_s, text), in time order at the end
    for row in branches:
        beyond, unit = display(row.worst, row.unit)
        others = sorted({p.axis for p in positions if _overlaps(p, row)} - {row.axis})
        also = f"; {_listed(others)} also leave their ranges then" if others else ""
        if row.fitting_branches:
            way_out = (
                f"{_branch_names(row.fitting_branches)} reaches every pose there with every "
                "joint in range, but the arm cannot change configuration in mid-path: start "
                "from a home on such a branch (and check the whole path again), or move the "
                "placement."
            )
        elif row.fitting_branches is not None:
            way_out = (
                "At each sample another branch keeps every joint in range, but no single one "
                "does over the whole stretch, so no other home avoids it: "
                f"{_fixes_beyond_a_stretch(report)}."
            )
        else:
            way_out = (
                "A numeric search found another configuration inside every range at each "
                "sample (general arms have no named branches, and the search does not tell "
                "whether one configuration serves the whole stretch); the arm cannot change "
                "configuration in mid-path: start from a home in another configuration (and "
                "check the whole path again), or move the placement."
            )
        texts.append(
            (
                row.start_s,
                f"from {row.start_s:.3f} s to {row.end_s:.3f} s {kept_text} takes {row.axis} "
                f"up to {beyond} {unit} beyond its range (the row's worst; limit 0: no excess "
                f"allowed){also}. {way_out}",
            )
        )
    # position rows of arm joints that no branch row meets: no other configuration fits there
    arm = set(report.axis_names) - {"rail"}
    alone: dict[str, list] = {}
    for p in positions:
        if p.axis in arm and not any(_overlaps(p, b) for b in branches):
            alone.setdefault(p.axis, []).append(p)
    searched = (
        "none of the other seven branches of the closed-form solution reaches those poses with "
        "every joint in range either: another home will not help"
        if solution.fitting_branch_bits is not None
        else "a numeric search found no other configuration inside every range there (a "
        "search, not a proof: one it missed may exist)"
    )
    for axis, rows in alone.items():
        beyond, unit = display(max(abs(p.worst - p.limit) for p in rows), rows[0].unit)
        where = (
            f"from {rows[0].start_s:.3f} s to {rows[0].end_s:.3f} s"
            if len(rows) == 1
            else f"in {len(rows)} stretches from {rows[0].start_s:.3f} s to {rows[-1].end_s:.3f} s"
        )
        texts.append(
            (
                rows[0].start_s,
                f"{where} {kept_text} takes {axis} up to {beyond} {unit} beyond its range, and "
                f"{searched}; {_fixes_beyond_a_stretch(report)}.",
            )
        )
    return [text for _, text in sorted(texts, key=lambda item: item[0])]


def _csv_field(value) -> str | float:
    """A row's value as a CSV field: floats in full, fitting_branches joined by '; ' (the
    word none for an empty list, an empty field for null)."""
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, tuple):
        return "; ".join(value) or "none"
    return "" if value is None else value


def render_csv(report: Report) -> str:
    """One line per violation interval, SI units, with a header."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for v in report.violations:
        d = v.as_dict()
        writer.writerow([_csv_field(d[c]) for c in CSV_COLUMNS])
    return tidy(buffer.getvalue())


def render(report: Report, fmt: str, inputs: dict[str, str] | None = None) -> str:
    """The report as table, json or csv text. inputs: the sha256 of each input file by
    name ('robot_sha256', 'trajectory_sha256'), recorded in the JSON (DESIGN §6)."""
    if fmt == "json":
        if not inputs:
            return report.to_json() + "\n"
        document = json.loads(report.to_json())
        document["inputs"] = inputs
        return json.dumps(document, indent=2) + "\n"
    if fmt == "csv":
        return render_csv(report)
    return render_table(report)


def write_joints(report: Report, path: Path, robot_axes) -> None:
    """The solved joint trajectory as CSV: t_s, one column per axis (deg or m), `reachable`.

    A sample out of reach has no joint values anyone may replay: its axis fields are empty
    and its `reachable` field 0 (1 elsewhere); the header comment says so.
    """
    q = report.solution.q
    reachable = report.solution.reach_excess_m <= 0
    columns = ["t_s"]
    scaled = [report.t_s]
    for i, axis in enumerate(robot_axes):
        if axis.is_revolute:
            columns.append(f"{axis.name}_deg")
            scaled.append(np.degrees(q[:, i]))
        else:
            columns.append(f"{axis.name}_m")
            scaled.append(q[:, i])
    columns.append("reachable")
    scaled.append(reachable.astype(float))
    buffer = io.StringIO()
    np.savetxt(buffer, np.column_stack(scaled), delimiter=",", fmt="%.17g")
    lines = buffer.getvalue().splitlines()
    empty = "," * len(robot_axes)
    for i in np.flatnonzero(~reachable):
        lines[i] = f"{report.t_s[i]:.17g}{empty},0"
    with atomic_output(path) as handle:
        handle.write(f"# solved joint trajectory of {report.trajectory} on {report.robot}\n")
        handle.write(
            f"# {int((~reachable).sum())} samples out of reach (reachable = 0): no joint values, "
            "their axis fields are empty; never replay them\n"
        )
        handle.write(",".join(columns) + "\n")
        handle.write("\n".join(lines) + ("\n" if lines else ""))
