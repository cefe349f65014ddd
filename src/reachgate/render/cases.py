"""Disturbance case files: written whole, never mixed with cases made another way.

Each case file starts with '# key = value' comment lines that record how it was made
(motion/disturb.py). A folder that already holds perturb's cases of other settings (another
seed, intensity, nominal, ...) is refused unless the caller asks to replace them; replacing
removes only files whose own comment lines say perturb wrote them.
"""

from __future__ import annotations

import itertools
from collections.abc import Iterable
from pathlib import Path

from reachgate.errors import ReachgateError
from reachgate.model.trajectory import scenario_csv_chunks, trajectory_csv_chunks
from reachgate.motion.case_parameters import read_case_parameters
from reachgate.motion.disturb import DisturbanceCase
from reachgate.render.files import same_file, write_chunks

#: Recorded settings that do not make a case different: the number and seed of each case,
#: how many were asked for (case i is the same whatever the count), the program version.
_SETTINGS_NOT_COMPARED = frozenset({"case", "case_seed", "count", "made_by"})

#: Digits of a case number in its file name, at least (more only past 9999 cases).
CASE_NUMBER_DIGITS = 4


def recorded_settings(path: Path) -> dict[str, str] | None:
    """The 'key = value' comment lines at the top of a case file perturb wrote, else None."""
    try:
        found = {key: str(value) for key, value in read_case_parameters(path).items()}
    except ReachgateError:
        return None
    made_by = found.get("made_by", "")
    return found if made_by.startswith("reachgate ") and made_by.endswith(" perturb") else None


def _differences(recorded: dict[str, str], wanted: dict[str, str]) -> list[str]:
    keys = (set(recorded) | set(wanted)) - _SETTINGS_NOT_COMPARED
    return sorted(k for k in keys if recorded.get(k) != wanted.get(k))


def write_case_files(
    cases: Iterable[DisturbanceCase],
    out_dir: str | Path,
    stem: str,
    *,
    replace: bool = False,
    inputs: tuple[Path, ...] = (),
) -> list[Path]:
    """Write cases as ``out_dir/stem_0001.csv`` ... (numbered by case), each atomically.

    cases may be a generator: each case is written as it comes, so memory stays that of one
    case. Names have at least four digits, so growing a batch (12 cases, then 13) keeps the
    names, and the bytes, of the cases written before.

    Refuses (ReachgateError) when out_dir holds case files perturb wrote with other settings,
    unless replace is True: then those files, and only those, are removed first; never one of
    ``inputs`` (the nominal path). A case file replaces its target by a rename, so even a
    link to an input keeps the input's content.
    """
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise ReachgateError(f"--out {out_dir}: is a file, not a folder")
    cases = iter(cases)
    first_case = next(cases, None)
    if first_case is None:
        return []
    wanted = {key: str(value) for key, value in first_case.settings.items()}
    foreign: list[tuple[Path, dict[str, str], list[str]]] = []
    if out_dir.is_dir():
        for existing in sorted(out_dir.glob("*.csv")):
            recorded = recorded_settings(existing)
            if recorded is not None and (differ := _differences(recorded, wanted)):
                foreign.append((existing, recorded, differ))
    if foreign and not replace:
        first, recorded, differ = foreign[0]
        shown = ", ".join(
            f"{k} {recorded.get(k, '-')} there, {wanted.get(k, '-')} now" for k in differ[:3]
        )
        raise ReachgateError(
            f"--out {out_dir}: holds {len(foreign)} case file(s) made with other settings "
            f"({first.name}: {shown}); mixing them would spoil a scan. Give another folder, "
            "or --replace to remove the cases perturb wrote there"
        )
    for existing, _, _ in foreign:
        if any(same_file(existing, source) for source in inputs):
            raise ReachgateError(
                f"--replace: {existing} is an input of this command; it would be removed. "
                "Write the cases to another folder"
            )
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
        for existing, _, _ in foreign:
            existing.unlink()
    except OSError as error:
        raise ReachgateError(f"{out_dir}: cannot prepare the folder ({error.strerror})") from None
    targets = []
    for case in itertools.chain([first_case], cases):
        targets.append(out_dir / f"{stem}_{case.settings['case']:0{CASE_NUMBER_DIGITS}d}.csv")
        if case.scenario is None:
            chunks = trajectory_csv_chunks(case.trajectory, case.header_lines)
        else:
            chunks = scenario_csv_chunks(case.scenario, case.header_lines)
        write_chunks(targets[-1], chunks)
    return targets
