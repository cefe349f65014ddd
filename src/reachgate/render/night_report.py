"""The morning report (DESIGN §12): one self-contained HTML page of a results store.

The page is rendered by Jinja2 from templates/night_report.html.j2 (package data). Every
picture is a PNG inside the page as a data: URI; the page loads nothing and runs no script,
so it opens the same from a mail attachment, a file share or a browser without network.
"""

from __future__ import annotations

import base64
import json
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

from reachgate.batch.compare import Comparison
from reachgate.batch.digest import (
    SOURCE_FILE,
    SOURCE_NONE,
    SOURCE_STORE,
    NightDigest,
    night_digest,
    recheck_worst,
    settings_digest,
)
from reachgate.batch.store import CaseVerdict, ScanSummary
from reachgate.render.check_report import SAFETY_CAUTIONS
from reachgate.render.compare_report import comparison_rows
from reachgate.render.scan_report import (
    MARGIN_NOTE,
    RANKED_TITLES,
    STAR_NOTE,
    ranked_rows,
    settings_text,
)
from reachgate.version import __version__

#: Failing cases, worst first, whose check picture the page shows (each is checked again).
WORST_PICTURES = 3
TEMPLATE = "night_report.html.j2"


def data_uri(png: bytes) -> str:
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


@dataclass(frozen=True)
class _Picture:
    case: str
    verdict: str
    uri: str | None
    note: str | None


def _environment():
    from jinja2 import Environment, PackageLoader, StrictUndefined, select_autoescape

    return Environment(
        loader=PackageLoader("reachgate.render", "templates"),
        autoescape=select_autoescape(default=True, default_for_string=True),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )


def _percent(part: int, whole: int) -> str:
    return f"{100.0 * part / whole:.1f} %" if whole else "-"


def _pictures(summary: ScanSummary, robot_path: Path | None, count: int) -> list[_Picture]:
    from reachgate.render.night_pictures import case_picture

    out = []
    for item in recheck_worst(summary, count, robot_path):
        uri = None if item.report is None else data_uri(case_picture(item.report, item.robot))
        out.append(_Picture(item.case.name, item.case.verdict.value, uri, item.reason))
    return out


def _parameter_note(digest: NightDigest) -> str:
    sources = digest.parameter_sources
    parts = [f"{sources[SOURCE_STORE]} from the results store"] if sources[SOURCE_STORE] else []
    if sources[SOURCE_FILE]:
        parts.append(
            f"{sources[SOURCE_FILE]} read from the case files now (the store predates "
            "recording them; only files whose sha256 still matches the scan)"
        )
    if sources[SOURCE_NONE]:
        parts.append(
            f"{sources[SOURCE_NONE]} unknown (case file gone or changed since the scan, "
            "in a store that predates recording them)"
        )
    return "Case parameters: " + "; ".join(parts) + "."


def _file_hashes(summary: ScanSummary) -> list[tuple[str, str]]:
    """(what, sha256) of every robot, and of every rig with its rig file and robot files."""
    rows = set()
    for c in summary.cases:
        name = c.robot_name or "?"
        files = c.settings.get("files_sha256")
        if files is None:
            rows.add((name, c.robot_sha256))
            continue
        rows.add((f"{name} (rig: over the files below)", c.robot_sha256))
        rows.add((f"{name}: rig file", files["rig"]))
        rows.update((f"{name}: robot file of {r}", sha) for r, sha in files["robots"].items())
    return sorted(rows)


def render_night_page(
    summary: ScanSummary,
    *,
    robot_path: Path | None = None,
    comparison: Comparison | None = None,
    pictures: int = WORST_PICTURES,
) -> str:
    """The whole page as text. robot_path: where to find the robot for the pictures when the
    runs' recorded robot paths have moved (matched by sha256 either way)."""
    from reachgate.render.night_pictures import (
        margin_histograms,
        parameter_label,
        pass_rate_chart,
    )

    digest = night_digest(summary)
    rows, starred = ranked_rows(summary.cases)
    robots = _file_hashes(summary)
    setups = {json.dumps(c.settings, sort_keys=True): c.settings for c in summary.cases}
    tally = digest.tally
    context = {
        "version": __version__,
        "generated": datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC"),
        "store": str(summary.store_path),
        "cases": digest.cases,
        "tally": [
            (v.value, tally[v.value], _percent(tally[v.value], digest.cases)) for v in CaseVerdict
        ],
        "pass_rate": _percent(tally["pass"], digest.cases),
        "parameter_note": _parameter_note(digest),
        "rates": [
            {
                "key": r.key,
                "label": parameter_label(r.key),
                "same_as": r.same_as,
                "binned": r.binned,
                "uri": None if r.same_as else data_uri(pass_rate_chart(r)),
                "groups": [
                    (g.label, g.cases, g.passed, _percent(g.passed, g.cases)) for g in r.groups
                ],
            }
            for r in digest.rates
        ],
        "constant": sorted((k, str(v)) for k, v in digest.constant.items()),
        "skipped": digest.skipped,
        "histograms": data_uri(margin_histograms(digest.margins_by_check))
        if any(v.size for v in digest.margins_by_check.values())
        else None,
        "unmeasured": [(k, n) for k, n in digest.unmeasured.items() if n],
        "check_counts": [(k, n.violations, n.near, n.cases) for k, n in summary.counts.items()],
        "axis_counts": digest.axis_counts,
        "titles": RANKED_TITLES,
        "rows": rows,
        "margin_note": MARGIN_NOTE,
        "star_note": STAR_NOTE if starred else None,
        "pictures": _pictures(summary, robot_path, pictures),
        "pictures_asked": pictures,
        "robots": robots,
        "settings": [(settings_text(s), settings_digest(s)) for s in setups.values()],
        "case_hashes": [(c.name, c.case_sha256 or "-") for c in summary.cases],
        "errors": [(c.name, c.error) for c in summary.cases if c.verdict is CaseVerdict.ERROR],
        "comparison": None if comparison is None else comparison_rows(comparison),
        "cautions": SAFETY_CAUTIONS,
    }
    return _environment().get_template(TEMPLATE).render(**context)
