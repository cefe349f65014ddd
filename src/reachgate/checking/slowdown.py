"""The slow-down factor: the smallest uniform time stretch that clears every row a stretch
can clear (DESIGN §6, §11).

A stretch by k divides speeds by k, accelerations by k², jerks by k³ and, for smooth motion,
the tracking error of a loop delay by about k (it grows with the TCP's speed). That scaling
law gives the first guess. It is not exact wherever the check does more than differentiate
the same axis values on longer steps: the rail's follow filter passes a different motion,
the rest at the ends is reached in one fit step, the fit's node spacing is a duration above
1 kHz, a lag error is not linear in the speed. So the factor is always *measured*: a guess is
checked on the stretched case, raised until the case clears (bracketing), then narrowed by
bisection to SLOWDOWN_RTOL. The factor returned is one whose stretched case was checked and
had no such row; the one just below it (by SLOWDOWN_RTOL) was checked and still had one.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable

from reachgate.checking.intervals import Check, Severity, Violation

#: Checks whose rows a uniform time stretch lowers: speeds, accelerations, jerks, and the
#: tracking error of a loop delay (any lag row, position or orientation).
STRETCH_CHECKS = frozenset({Check.SPEED, Check.ACCEL, Check.JERK, Check.LAG})
#: Power of the stretch by which each check's value falls (scaling law, for the first guess).
_POWER = {Check.SPEED: 1.0, Check.ACCEL: 2.0, Check.JERK: 3.0, Check.LAG: 1.0}
#: The factor is found to this relative width: the reported factor clears, the factor
#: 1/(1 + SLOWDOWN_RTOL) times it was checked and did not (or is 1). Reports show 3 decimals.
SLOWDOWN_RTOL = 1e-3
#: Beyond this stretch the search stops and reports no factor (a note says so). Every row of
#: a stretch check falls with the stretch on any finite path, so this is a guard, not a limit
#: met in practice.
SLOWDOWN_MAX = 1000.0


def stretch_rows(rows: Iterable[Violation]) -> list[Violation]:
    """The violation rows a stretch can clear."""
    return [r for r in rows if r.severity is Severity.VIOLATION and r.check in STRETCH_CHECKS]


def stretch_guess(rows: Iterable[Violation]) -> float:
    """The stretch the scaling law asks for to bring every row to its limit (1 if none)."""
    needed = 1.0
    for row in stretch_rows(rows):
        if row.limit > 0 and math.isfinite(row.worst):
            needed = max(needed, (abs(row.worst) / row.limit) ** (1.0 / _POWER[row.check]))
    return needed


def smallest_stretch(
    rows_after: Callable[[float], list[Violation]],
    first_guess: float,
    *,
    rtol: float = SLOWDOWN_RTOL,
    max_factor: float = SLOWDOWN_MAX,
) -> float | None:
    """The smallest stretch k >= 1 (to rtol) whose stretched case has no stretch row.

    rows_after(k) -> the rows of the case stretched by k (the real check). The unstretched case
    is taken to have such rows. Bracketing: the guess, raised by what the rows left ask for
    (at least by 1 + rtol, at most doubled or to max_factor), until one clears; then
    bisection (geometric) between the last failing and the first clearing factor, starting
    with a probe just below the clearing one (where the scaling law holds, that one probe
    settles it). None only if max_factor does not clear.
    """
    lo, hi = 1.0, min(max(first_guess, 1.0 + rtol), max_factor)
    while True:
        left = stretch_rows(rows_after(hi))
        if not left:
            break
        lo = hi
        if hi >= max_factor:
            return None
        raise_by = min(max(stretch_guess(left), 1.0 + rtol), 2.0)
        hi = min(hi * raise_by * (1.0 + rtol), max_factor)
    probe = hi / (1.0 + rtol)
    while probe > lo:
        if stretch_rows(rows_after(probe)):
            lo = probe
        else:
            hi = probe
        if hi <= lo * (1.0 + rtol) * (1.0 + 1e-9):
            break
        probe = math.sqrt(lo * hi)
    return hi
