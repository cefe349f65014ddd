"""`scan --report --compare OTHER_STORE`: what changed since another scan, as text, CSV, JSON
(the HTML page takes comparison_rows)."""

from __future__ import annotations

import csv
import io
import json

from reachgate.batch.compare import Comparison, worst_row
from reachgate.batch.store import CaseResult, _finite
from reachgate.render.check_report import plain_console
from reachgate.render.terminal import plain_table, table_width
from reachgate.version import __version__

#: Short names of the kinds of change for the count line.
SHORT = {"verdict": "verdict changed", "worst": "worst row changed", "only_store": "new",
         "only_other": "gone"}  # fmt: skip
#: The kinds of change, in the order they are listed, with their headings.
CHANGES = {
    "verdict": "verdict changed",
    "worst": "same verdict, worst violation row changed",
    "only_store": "only in this store (new cases)",
    "only_other": "only in the other store (cases gone)",
}
#: The JSON key of each kind's list.
JSON_KEYS = {
    "verdict": "verdict_changed",
    "worst": "worst_changed",
    "only_store": "only_in_store",
    "only_other": "only_in_other",
}
EXCESS_NOTE = "excess: how far the worst row is beyond its limit, as a fraction of the limit"
COLUMNS = ("change", "case", "verdict before", "verdict now", "worst row before", "worst row now")


def worst_text(c: CaseResult | None) -> str:
    if c is None:
        return ""
    row = worst_row(c)
    if row is None:
        return "-"
    where = f"{row[0]} {row[1]} {c.worst.worst_s:.2f} s"
    return where if row[2] is None else f"{where}, excess {row[2]:.2f}"


def _pairs(comparison: Comparison):
    """(change key, before or None, now or None), in CHANGES order."""
    for before, now in comparison.verdict_changed:
        yield "verdict", before, now
    for before, now in comparison.worst_changed:
        yield "worst", before, now
    for now in comparison.only_here:
        yield "only_store", None, now
    for before in comparison.only_there:
        yield "only_other", before, None


def comparison_rows(comparison: Comparison) -> dict:
    """Text cells for a page: heading facts and one list of COLUMNS rows per change kind."""
    sections = {key: [] for key in CHANGES}
    for key, before, now in _pairs(comparison):
        name = (now or before).name
        sections[key].append(
            (
                name,
                "" if before is None else before.verdict.value,
                "" if now is None else now.verdict.value,
                worst_text(before),
                worst_text(now),
            )
        )
    return {
        "store": str(comparison.store),
        "other": str(comparison.other),
        "same_robot": comparison.same_robot,
        "same_settings": comparison.same_settings,
        "unchanged": comparison.unchanged,
        "columns": COLUMNS[1:],
        "sections": [(key, CHANGES[key], sections[key]) for key in CHANGES],
        "excess_note": EXCESS_NOTE,
    }


def _setup_lines(comparison: Comparison) -> list[str]:
    lines = []
    if not comparison.same_robot:
        lines.append("note: the two stores were checked with different robot files")
    if not comparison.same_settings:
        lines.append("note: the two stores were checked with different settings")
    return lines


def render_comparison_table(comparison: Comparison, width: int | None = None) -> str:
    console, buffer = plain_console(width or table_width(), soft_wrap=True)
    data = comparison_rows(comparison)
    console.print(f"reachgate {__version__} scan comparison")
    console.print(f"now: {data['store']}")
    console.print(f"before: {data['other']}")
    for line in _setup_lines(comparison):
        console.print(line)
    counts = "; ".join(f"{SHORT[key]} {len(rows)}" for key, _, rows in data["sections"])
    console.print(f"{counts}; unchanged {data['unchanged']}")
    for _, title, rows in data["sections"]:
        if not rows:
            continue
        console.print(f"{title}:")
        table = plain_table()
        for column in data["columns"]:
            table.add_column(column)
        for row in rows:
            table.add_row(*row)
        console.print(table)
    console.print(EXCESS_NOTE)
    return buffer.getvalue()


CSV_COLUMNS = (
    "change",
    "case",
    "verdict_before",
    "verdict_now",
    "worst_check_before",
    "worst_axis_before",
    "worst_excess_before",
    "worst_check_now",
    "worst_axis_now",
    "worst_excess_now",
    "worst_margin_before",
    "worst_margin_now",
)


def _worst_fields(c: CaseResult | None) -> list:
    row = None if c is None else worst_row(c)
    return [None, None, None] if row is None else list(row)


def _record(key: str, before: CaseResult | None, now: CaseResult | None) -> dict:
    values = [
        key,
        (now or before).name,
        before and before.verdict.value,
        now and now.verdict.value,
        *_worst_fields(before),
        *_worst_fields(now),
        before and before.worst_margin,
        now and now.worst_margin,
    ]
    return _finite(dict(zip(CSV_COLUMNS, values, strict=True)))


def render_comparison_csv(comparison: Comparison) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for key, before, now in _pairs(comparison):
        record = _record(key, before, now)
        writer.writerow(
            "" if v is None else repr(v) if isinstance(v, float) else v for v in record.values()
        )
    return buffer.getvalue()


def render_comparison_json(comparison: Comparison) -> str:
    records = [_record(*p) for p in _pairs(comparison)]
    data = {
        "tool_version": __version__,
        "store": str(comparison.store),
        "other": str(comparison.other),
        "same_robot": comparison.same_robot,
        "same_settings": comparison.same_settings,
        "unchanged": comparison.unchanged,
        **{JSON_KEYS[key]: [r for r in records if r["change"] == key] for key in CHANGES},
    }
    return json.dumps(data, indent=2) + "\n"


def render_comparison(comparison: Comparison, fmt: str = "table") -> str:
    if fmt == "json":
        return render_comparison_json(comparison)
    if fmt == "csv":
        return render_comparison_csv(comparison)
    return render_comparison_table(comparison)
