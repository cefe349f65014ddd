"""The `place` command's output: a plain-text summary or JSON, and its progress line."""

from __future__ import annotations

from reachgate.render.check_report import SAFETY_CAUTIONS
from reachgate.search.placement import Candidate, PlacementResult, PlaceProgress
from reachgate.search.vary import short_number


def _binding_text(c: Candidate) -> str:
    b = c.binding
    if not b.check:
        return f"score {b.score:+.3f}: no margin could be measured in {b.case}"
    what = f"{b.check} of {b.axis}" + ("" if b.measured else " (not measured)")
    return f"score {b.score:+.3f}, bound by {what} in {b.case}"


def _values_text(result: PlacementResult, c: Candidate) -> str:
    return ", ".join(
        f"{v.name} {short_number(x, 3)} {v.unit}"
        for v, x in zip(result.vary, c.values, strict=True)
    )


def _rail_options(choice) -> str:
    """`check`'s rail options that give this rail choice."""
    if choice.policy.value == "follow":
        return f"--rail follow --rail-bandwidth {short_number(choice.bandwidth_hz, 3)}"
    at = "" if choice.at_m is None else f" --rail-at {short_number(choice.at_m, 3)}"
    return f"--rail fixed{at}"


def _rig_rail_text(result: PlacementResult, c: Candidate) -> str:
    """What `check RIG` needs besides --place to check a rig at this candidate: nothing when
    its rails are the rig file's; the rail options when every robot with a rail takes the
    same choice (they apply to all of them); else each robot's rail for the rig file."""
    own = dict(result.file_rails or ())
    changed = {name: choice for name, choice in c.rails if own.get(name) != choice}
    if not changed:
        return ""
    choices = {choice for _, choice in c.rails}
    if len(choices) == 1:
        return " " + _rail_options(next(iter(choices)))
    parts = []
    for name, choice in changed.items():
        value = (
            f'policy = "follow", bandwidth_hz = {short_number(choice.bandwidth_hz, 3)}'
            if choice.policy.value == "follow"
            else 'policy = "fixed"'
            + ("" if choice.at_m is None else f", at_m = {short_number(choice.at_m, 3)}")
        )
        parts.append(f"{name}: rail = {{ {value} }}")
    return f" (in the rig file: {'; '.join(parts)})"


def _option_text(result: PlacementResult, c: Candidate) -> str:
    """The ready options: --place, and the varied rail option (a rig: see _rig_rail_text)."""
    text = f'--place "{c.place}"'
    if c.rails is not None:
        return text + _rig_rail_text(result, c)
    names = {v.name for v in result.vary}
    if "rail_at" in names:
        text += f" --rail-at {short_number(c.settings.rail_at_m, 3)}"
    if "bandwidth" in names:
        text += f" --rail-bandwidth {short_number(c.settings.rail_bandwidth_hz, 3)}"
    return text


def render_table(result: PlacementResult) -> str:
    ranges = ", ".join(f"{v.name} {v.low:g}..{v.high:g} {v.unit}" for v in result.vary)
    n = len(result.cases)
    lines = [
        f"placement search: {'rig ' if result.rig else ''}{result.robot}, "
        f"{n} case{'s' if n != 1 else ''}, varying {ranges}",
        "score: the worst margin over every case, check and axis, as a fraction of its limit "
        "(0 at the limit, < 0 beyond); see README",
    ]
    best, start = result.best, result.start
    if best.passed:
        lines.append(
            f"verdict: pass - this placement passes every case: {_option_text(result, best)}"
        )
    else:
        lines.append("verdict: fail - no placement within these bounds passes; the best found:")
    lines += [
        f"best:  {_option_text(result, best)}  ({_values_text(result, best)})",
        f"       {_binding_text(best)}",
        f"start: {_option_text(result, start)}  ({_values_text(result, start)})",
        f"       {_binding_text(start)}" + ("" if start.passed else " - fails"),
    ]
    steps = sorted(set(result.steps))
    step_text = ", ".join("full cases" if k == 1 else f"1 sample in {k}" for k in steps)
    lines.append(
        f"search: seed {result.seed}, {result.placements_scored} placements scored at "
        f"{step_text} on {len(result.binding_cases)} binding case(s); "
        f"{result.full_checks} full and {result.thinned_checks} thinned case checks; "
        f"the best and the start checked in full on every case"
    )
    lines.append("cautions:")
    lines += [f"  - {line}" for line in SAFETY_CAUTIONS]
    return "\n".join(lines) + "\n"


def render_placement(result: PlacementResult, fmt: str = "table") -> str:
    if fmt == "json":
        return result.to_json() + "\n"
    return render_table(result)


class ProgressLine:
    """One colour-free status line on stderr (a rich live line); a callable for place()."""

    def __init__(self) -> None:
        from rich.console import Console
        from rich.progress import Progress, TextColumn, TimeElapsedColumn

        console = Console(stderr=True, no_color=True, color_system=None, highlight=False)
        self._progress = Progress(
            TextColumn("place: {task.description}"),
            TextColumn("{task.fields[checks]} case checks"),
            TextColumn("{task.fields[best]}"),
            TimeElapsedColumn(),
            console=console,
            transient=False,
        )
        self._task = None

    def __enter__(self) -> ProgressLine:
        self._progress.start()
        return self

    def __exit__(self, *exc) -> None:
        self._progress.stop()

    def __call__(self, state: PlaceProgress) -> None:
        best = "" if state.best_score is None else f"best score {state.best_score:+.3f}"
        if self._task is None:
            self._task = self._progress.add_task(state.stage, total=None, checks=0, best="")
        self._progress.update(
            self._task, description=state.stage, checks=state.case_checks, best=best
        )
