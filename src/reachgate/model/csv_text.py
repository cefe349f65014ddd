"""CSV text as every reachgate reader takes it: comment and blank lines, the header, numbers.

Shared by the trajectory and scenario reader (model/trajectory.py) and the axis-value log
reader (model/joint_log.py), so that both accept the same text and word a fault the same
way: the file, the line (and column), what is wrong. Comment lines start with '#'; the
header is the first other line, comma separated, names optionally in double quotes (RFC
4180); a byte-order mark is skipped; the text is UTF-8; numbers use the ASCII digits only.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import NoReturn

import numpy as np

from reachgate.errors import ReachgateError


def is_skipped(line: str) -> bool:
    """Blank lines and comment lines (first non-blank character '#') carry no data."""
    stripped = line.strip()
    return not stripped or stripped.startswith("#")


def decode_line(raw: bytes, label: str, line_no: int) -> str:
    if b"\x00" in raw:
        raise ReachgateError(f"{label} line {line_no}: binary data (NUL byte), not a CSV text file")
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as error:
        bad = raw[error.start : error.start + 1]
        column = len(raw[: error.start].decode("utf-8", errors="replace")) + 1
        raise ReachgateError(
            f"{label} line {line_no}, column {column}: byte 0x{bad.hex()} is not UTF-8 text; "
            f"{ENCODING_ADVICE}"
        ) from None


#: What to do about a file in another encoding (a spreadsheet's Latin-1 or Windows-1252).
ENCODING_ADVICE = (
    "save the file as UTF-8 (it may be Latin-1 or Windows-1252, as some spreadsheets write)"
)

#: Separators people use instead of the comma, by the name a message gives them.
_WRONG_SEPARATORS = {";": "semicolon ';'", "\t": "tab", "|": "vertical bar '|'"}


def _header_names(text: str, label: str, line_no: int) -> list[str]:
    """Column names of a header line: comma separated, each optionally in double quotes as
    RFC 4180 allows ("t_s","x_m"); a header that uses another separator is refused by name."""
    if "," not in text:
        for separator, name in _WRONG_SEPARATORS.items():
            if separator in text:
                raise ReachgateError(
                    f"{label} line {line_no}: columns are separated by {name}, not by commas; "
                    "reachgate reads comma-separated files (export the file as CSV with ',')"
                )
    names = next(csv.reader([text]))
    return [name.strip() for name in names]


@contextmanager
def file_faults(label: str) -> Iterator[None]:
    """Turn a missing, folder or unreadable trajectory file into one ReachgateError naming it."""
    try:
        yield
    except FileNotFoundError:
        raise ReachgateError(f"{label}: file not found") from None
    except IsADirectoryError:
        raise ReachgateError(f"{label}: is a folder, not a trajectory file") from None
    except PermissionError:
        raise ReachgateError(f"{label}: cannot read the file (permission denied)") from None


def read_header(path: Path, label: str) -> tuple[int, list[str]]:
    """(1-based line number of the header, stripped column names). Raises on an empty file."""
    with file_faults(label):
        if path.stat().st_size == 0:
            raise ReachgateError(f"{label}: file is empty")
        _refuse_cr_only_line_ends(path, label)
        with path.open("rb") as handle:
            for line_no, raw in enumerate(handle, start=1):
                text = decode_line(raw, label, line_no)
                if line_no == 1:
                    text = text.removeprefix("\ufeff")  # byte-order mark some editors write
                if not is_skipped(text):
                    return line_no, _header_names(text.rstrip("\r\n"), label, line_no)
    raise ReachgateError(f"{label}: no header line (the file holds only comments or blank lines)")


def _refuse_cr_only_line_ends(path: Path, label: str) -> None:
    """A file whose lines end in CR alone (classic Mac OS) reads as one line: say so."""
    with path.open("rb") as handle:
        start = handle.read(1 << 16)
    if b"\r" in start and b"\n" not in start:
        raise ReachgateError(
            f"{label}: lines end in a carriage return (CR) alone, an old Mac OS format; "
            "save the file with LF or CR LF line ends"
        )


def parse_number(text: str) -> float | None:
    """float(text), or None if text is not a plain decimal number (float() also takes '1_0'
    and digits of other scripts, such as '١')."""
    if not text or "_" in text or not text.isascii():
        return None
    try:
        return float(text)
    except ValueError:
        return None


def scan_rows(
    path: Path,
    label: str,
    header_line: int,
    names: tuple[str, ...],
    use: tuple[int, ...],
    earlier_fault: Callable[[np.ndarray, list[int]], None] | None = None,
) -> tuple[np.ndarray, list[int]]:
    """Parse the data lines after the header, one by one: (values (N, len(use)) of the
    columns `use`, their line numbers (N,)).

    Raises ReachgateError at the first fault of the text (a short or long row, an empty
    value, a non-number, a non-finite number), naming the line and column; earlier_fault,
    given the rows read before it, may raise first (a rule those rows break comes earlier
    in the file). Also raises for fewer than 2 data rows.
    """
    raw = path.read_bytes()
    if b"\x00" in raw or not raw.isascii():
        # Find the faulty line and let the one-line decoder word the message.
        for line_no, raw_line in enumerate(raw.split(b"\n"), start=1):
            decode_line(raw_line, label, line_no)
    text = raw.decode("utf-8")
    lines = text.split("\n")
    n_fields = len(names)

    def fail(message: str) -> NoReturn:
        """Raise a rule broken by the rows read so far (it comes earlier), else `message`."""
        if rows and earlier_fault is not None:
            earlier_fault(np.array(rows, dtype=float), line_numbers)
        raise ReachgateError(message)

    rows: list[list[float]] = []
    line_numbers: list[int] = []
    for line_no in range(header_line + 1, len(lines) + 1):
        line = lines[line_no - 1]
        if is_skipped(line):
            continue
        fields = line.split(",")
        if len(fields) != n_fields:
            if len(fields) < n_fields:
                missing = ", ".join(names[len(fields) :])
                detail = (
                    f"short row: {len(fields)} fields, the header has {n_fields} "
                    f"({missing} missing)"
                )
            else:
                detail = f"long row: {len(fields)} fields, the header has {n_fields}"
            fail(f"{label} line {line_no}: {detail}")
        row = []
        for j in use:
            field_text = fields[j].strip()
            value = parse_number(field_text)
            where = f"{label} line {line_no}, column {names[j]}"
            if value is None:
                if not field_text:
                    fail(f"{where}: empty value")
                if not field_text.isascii():
                    fail(f"{where}: {field_text!r} is not a number (only the ASCII digits 0-9)")
                fail(f"{where}: {field_text!r} is not a number")
            if not math.isfinite(value):
                fail(f"{where}: {field_text!r} is not a finite number")
            row.append(value)
        rows.append(row)
        line_numbers.append(line_no)
    if not rows:
        raise ReachgateError(f"{label} line {header_line}: a header but no data rows")
    if len(rows) < 2:
        raise ReachgateError(
            f"{label} line {line_numbers[0]}: only one sample; at least 2 are needed"
        )
    return np.array(rows, dtype=float), line_numbers
