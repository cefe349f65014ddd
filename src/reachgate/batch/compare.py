"""What changed between two scans of a batch (`scan --report --compare OTHER_STORE`).

Cases are matched by their name in each store (the path relative to the store's folder), so
two stores beside two copies of the same batch compare case by case. "Before" is the other
store, "now" the --store one.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

from reachgate.batch.store import CaseResult, ScanSummary, load_summary

#: A worst row whose check and axis stay the same counts as changed when its excess beyond
#: the limit (a fraction of the limit's scale) moves by more than this: 1 % of a limit is
#: what the tables print to (two decimals), below it two scans read the same (ours).
WORST_EXCESS_TOL = 0.01


def worst_row(c: CaseResult) -> tuple[str, str, float | None] | None:
    """(check, axis, excess fraction) of the case's worst violation row, or None."""
    if c.worst is None:
        return None
    index = c.violations.index(c.worst)
    return (c.worst.check.value, c.worst.axis, c.excess_fractions[index])


def worst_row_changed(before: CaseResult, after: CaseResult) -> bool:
    a, b = worst_row(before), worst_row(after)
    if a is None or b is None:
        return a is not b
    if a[:2] != b[:2]:
        return True
    if a[2] is None or b[2] is None:
        return (a[2] is None) is not (b[2] is None)
    return abs(a[2] - b[2]) > WORST_EXCESS_TOL


@dataclass(frozen=True)
class Comparison:
    """Two scans of a batch. Pairs are (before, after), by case name.

    verdict_changed: pass/fail/error differs; worst_changed: same verdict, another worst row
    (see worst_row_changed); unchanged: cases in both with neither change.
    """

    store: Path
    other: Path
    verdict_changed: tuple[tuple[CaseResult, CaseResult], ...]
    worst_changed: tuple[tuple[CaseResult, CaseResult], ...]
    only_here: tuple[CaseResult, ...]
    only_there: tuple[CaseResult, ...]
    unchanged: int
    same_robot: bool
    same_settings: bool

    @property
    def changed(self) -> bool:
        return bool(self.verdict_changed or self.worst_changed or self.only_here or self.only_there)


def compare_summaries(now: ScanSummary, before: ScanSummary) -> Comparison:
    by_name = {c.name: c for c in before.cases}
    here = {c.name for c in now.cases}
    verdict, worst, unchanged = [], [], 0
    for c in now.cases:  # ranked worst first, as now
        old = by_name.get(c.name)
        if old is None:
            continue
        if old.verdict is not c.verdict:
            verdict.append((old, c))
        elif worst_row_changed(old, c):
            worst.append((old, c))
        else:
            unchanged += 1
    return Comparison(
        store=now.store_path,
        other=before.store_path,
        verdict_changed=tuple(verdict),
        worst_changed=tuple(worst),
        only_here=tuple(c for c in now.cases if c.name not in by_name),
        only_there=tuple(c for c in before.cases if c.name not in here),
        unchanged=unchanged,
        same_robot={c.robot_sha256 for c in now.cases} == {c.robot_sha256 for c in before.cases},
        same_settings={_settings_key(c) for c in now.cases}
        == {_settings_key(c) for c in before.cases},
    )


def _settings_key(c: CaseResult) -> str:
    return json.dumps(c.settings, sort_keys=True)


def compare_stores(now: ScanSummary, other_store: str | Path) -> Comparison:
    """Compare a summary with every case of another results store."""
    return compare_summaries(now, load_summary(other_store))
