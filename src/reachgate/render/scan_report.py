"""The `scan` command's output: the ranked summary as a table, CSV or JSON, and the progress bar."""

from __future__ import annotations

import csv
import io
import json
import math

from reachgate.batch.scan import ScanProgress
from reachgate.batch.store import CaseResult, CaseVerdict, ScanSummary
from reachgate.checking.intervals import Severity
from reachgate.checking.slowdown import STRETCH_CHECKS
from reachgate.render.check_report import SAFETY_CAUTIONS, plain_console
from reachgate.render.terminal import (
    breakable_axis,
    plain_table,
    table_width,
    tidy,
    wrap_items,
    wrap_text,
)
from reachgate.version import __version__


def _row_text(v, time_s: float | None) -> str:
    return "-" if v is None else f"{v.check.value} {breakable_axis(v.axis)} {time_s:.2f} s"


def _rail_text(settings: dict) -> str:
    rail = settings["rail"]
    if rail == "follow":
        rail += f" {settings['rail_bandwidth_hz']:g} Hz"
    elif settings["rail_at_m"] is not None:
        rail += f" at {settings['rail_at_m']:g} m"
    return rail


def settings_text(settings: dict) -> str:
    """CheckSettings.as_dict() (or a rig's, with a rail per robot) as one short line, in the
    check options' words and units."""
    place = ",".join(f"{v:g}" for v in [*settings["place_xyz_m"], *settings["place_rpy_deg"]])
    if "robots" in settings:  # a rig: each robot with a rail, and who chose it
        rails = [f"{name} {_rail_text(r)}" for name, r in settings["robots"].items() if r["rail"]]
        rail = ", ".join(rails) or "none"
        if rails and settings.get("rails_from"):
            rail += f" (from the {settings['rails_from']})"
    else:
        rail = _rail_text(settings)
    lag = "off" if settings["lag_s"] is None else f"{settings['lag_s']:g} s"
    tol = f"{1000 * settings['lag_tol_m']:g} mm"
    if settings.get("lag_tol_rad") is not None:
        tol += f", {math.degrees(settings['lag_tol_rad']):g} deg"
    if settings.get("predict", "none") != "none":
        lag += f" with {settings['predict']} prediction"
    return f"place {place} (m, deg); rail {rail}; lag {lag}, tolerance {tol}"


def _stretch_leaves_rows(c: CaseResult) -> bool:
    """True when the case has violations a uniform time stretch does not clear."""
    return any(
        v.severity is Severity.VIOLATION and v.check not in STRETCH_CHECKS for v in c.violations
    )


def _margin_text(c: CaseResult) -> str:
    if c.worst_margin is None:
        return "-"
    axis = breakable_axis(c.worst_margin_axis or "?")
    return f"{c.worst_margin:.2f} ({axis} {c.worst_margin_check})"


RANKED_TITLES = (
    "#",
    "case",
    "verdict",
    "worst margin",
    "first violation from",
    "worst violation at",
    "slow-down",
)
MARGIN_NOTE = "margins: fraction of a limit left (1 unused, 0 at it, < 0 beyond)"
STAR_NOTE = "slow-down*: clears the speed, accel, jerk and lag rows only; other violations remain"


def ranked_rows(cases: tuple[CaseResult, ...]) -> tuple[list[tuple[str, ...]], bool]:
    """The ranked table's cells, one tuple per case (RANKED_TITLES), as text; -> (rows,
    starred: some slow-down carries the '*' of STAR_NOTE). Shared by the text and HTML reports."""
    rows = []
    starred = False
    for rank, c in enumerate(cases, start=1):
        slow = "-" if c.slowdown is None or c.verdict is CaseVerdict.ERROR else f"{c.slowdown:.3f}"
        if c.slowdown is not None and _stretch_leaves_rows(c):
            slow += "*"
            starred = True
        rows.append(
            (
                str(rank),
                c.name,
                c.verdict.value,
                _margin_text(c),
                _row_text(c.first, c.first and c.first.start_s),
                _row_text(c.worst, c.worst and c.worst.worst_s),
                slow,
            )
        )
    return rows, starred


def render_table(summary: ScanSummary, width: int | None = None) -> str:
    """Colour-free summary: ranked cases, counts per check, errors, cautions."""

    console, buffer = plain_console(width or table_width(), soft_wrap=True)

    def say(text: str, first: str = "") -> None:
        console.print(wrap_text(text, console.width, first))

    tally = summary.tally()
    items = [f"reachgate {__version__} scan", f"results store {summary.store_path}"]
    console.print(wrap_items(items, console.width, ", "))
    console.print(
        f"{len(summary.cases)} cases: "
        f"{tally['pass']} pass, {tally['fail']} fail, {tally['error']} error"
    )
    if summary.checked or summary.resumed:
        console.print(
            f"checked now: {summary.checked}; taken from the store unchanged: {summary.resumed}"
        )
    robots = sorted({c.robot_name or "?" for c in summary.cases})
    setups = {settings_text(c.settings) for c in summary.cases}
    say(", ".join(robots), "robot: ")
    say(setups.pop() if len(setups) == 1 else "differ between cases (see json)", "settings: ")
    say("ranked worst first: errors, failing cases, passing cases, by worst margin")
    table = plain_table()
    for title in RANKED_TITLES:
        table.add_column(title, justify="right" if title in ("#", "slow-down") else "left")
    rows, starred = ranked_rows(summary.cases)
    for row in rows:
        table.add_row(*row)
    console.print(table)
    say(MARGIN_NOTE)
    if starred:
        say(STAR_NOTE)
    if summary.counts:
        counts = plain_table()
        for title in ("check", "violation rows", "near rows", "failing cases"):
            counts.add_column(title, justify="left" if title == "check" else "right")
        for kind, n in summary.counts.items():
            counts.add_row(kind, str(n.violations), str(n.near), str(n.cases))
        console.print("counts per check over the batch:")
        console.print(counts)
    errors = [c for c in summary.cases if c.verdict is CaseVerdict.ERROR]
    if errors:
        console.print("errors:")
        for c in errors:
            say(f"{c.name}: {c.error}", "  - ")
    console.print("cautions:")
    for line in SAFETY_CAUTIONS:
        say(line, "  - ")
    return tidy(buffer.getvalue())


CSV_COLUMNS = (
    "rank",
    "case",
    "verdict",
    "worst_margin",
    "worst_margin_axis",
    "worst_margin_check",
    "first_check",
    "first_axis",
    "first_start_s",
    "worst_check",
    "worst_axis",
    "worst_s",
    "slowdown",
    "samples",
    "duration_s",
    "elapsed_s",
    "case_sha256",
    "error",
)


def render_csv(summary: ScanSummary) -> str:
    """One line per case, ranked worst first, SI units."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for rank, c in enumerate(summary.cases, start=1):
        f, w = c.first, c.worst
        values = [
            rank,
            c.name,
            c.verdict.value,
            c.worst_margin,
            c.worst_margin_axis,
            c.worst_margin_check,
            f and f.check.value,
            f and f.axis,
            f and f.start_s,
            w and w.check.value,
            w and w.axis,
            w and w.worst_s,
            c.slowdown,
            c.samples,
            c.duration_s,
            c.elapsed_s,
            c.case_sha256,
            c.error,
        ]
        writer.writerow(
            ["" if v is None else repr(v) if isinstance(v, float) else v for v in values]
        )
    return tidy(buffer.getvalue())


def render_summary(summary: ScanSummary, fmt: str = "table") -> str:
    if fmt == "json":
        return json.dumps({"tool_version": __version__, **summary.as_dict()}, indent=2) + "\n"
    if fmt == "csv":
        return render_csv(summary)
    return render_table(summary)


class ProgressBar:
    """A colour-free rich progress bar on stderr; a callable for scan(progress=...)."""

    def __init__(self) -> None:
        from rich.console import Console
        from rich.progress import (
            BarColumn,
            MofNCompleteColumn,
            Progress,
            TextColumn,
            TimeRemainingColumn,
        )

        console = Console(stderr=True, no_color=True, color_system=None, highlight=False)
        self._progress = Progress(
            TextColumn("scan"),
            BarColumn(),
            MofNCompleteColumn(),
            TextColumn("failing {task.fields[failing]}"),
            TextColumn("{task.fields[rate]}"),
            TextColumn("left"),
            TimeRemainingColumn(),
            console=console,
            transient=False,
        )
        self._task = None

    def __enter__(self) -> ProgressBar:
        self._progress.start()
        return self

    def __exit__(self, *exc) -> None:
        self._progress.stop()

    def __call__(self, state: ScanProgress) -> None:
        if self._task is None:
            self._task = self._progress.add_task("scan", total=state.total, failing=0, rate="")
        task = self._progress.tasks[0]
        rate = f"{task.speed:.2f} cases/s" if task.speed else ""
        self._progress.update(self._task, completed=state.done, failing=state.failing, rate=rate)
