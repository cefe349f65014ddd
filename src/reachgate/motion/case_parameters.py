"""The parameters a case file records about itself: its leading ``# key = value`` lines.

`reachgate perturb` writes one such line per setting (DisturbanceCase.header_lines); a scan
reads them back so that the morning report can give the pass rate by intensity, sigma or
seed. Comment lines of any other form (free text) are not parameters and are skipped. Kept
apart from disturb.py so that scan workers read headers without importing scipy.
"""

from __future__ import annotations

import math
from pathlib import Path

from reachgate.errors import ReachgateError

#: Header lines read at most: a case's comments come before its data, and a file without a
#: header must not be read whole just to find none.
MAX_HEADER_LINES = 200


def parse_value(text: str) -> int | float | str:
    """'3' -> 3, '0.77' -> 0.77, anything else (or a non-finite number) -> the stripped text."""
    text = text.strip()
    try:
        return int(text)
    except ValueError:
        pass
    try:
        value = float(text)
    except ValueError:
        return text
    return value if math.isfinite(value) else text


def parse_parameter_lines(lines: list[str]) -> dict[str, int | float | str]:
    """Comment lines (with or without their '#') -> {key: value} of the 'key = value' ones.

    A key is one word (letters, digits, '_'); a later line of the same key wins.
    """
    out: dict[str, int | float | str] = {}
    for raw in lines:
        line = raw.lstrip().removeprefix("#").strip()
        key, sep, value = line.partition(" = ")
        key = key.strip()
        if sep and key and key.replace("_", "").isalnum():
            out[key] = parse_value(value)
    return out


def read_case_parameters(path: str | Path) -> dict[str, int | float | str]:
    """The 'key = value' parameters of a case file's leading comment lines ({} when none)."""
    lines = []
    try:
        with Path(path).open(encoding="utf-8", errors="replace") as handle:
            for _, line in zip(range(MAX_HEADER_LINES), handle, strict=False):
                stripped = line.lstrip()
                if stripped and not stripped.startswith("#"):
                    break
                lines.append(stripped)
    except OSError as error:
        raise ReachgateError(f"{path}: cannot read ({error.strerror or error})") from None
    return parse_parameter_lines(lines)
