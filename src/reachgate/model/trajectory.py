"""Commanded TCP paths: the Trajectory value, CSV loading and writing (DESIGN §4).

A trajectory gives TCP poses in the *scenario* frame at strictly increasing times.

Loading takes a fast path (one call of pyarrow's CSV reader for large files, where it is
installed, else one ``np.loadtxt`` call over the numeric block) and, only when that path
fails or the values break a rule, rescans the file line by line in Python to name the exact
line and column at fault. The line-by-line scan is the authority: a fast path only ever
accepts files that the scan would accept with the same values.
"""

from __future__ import annotations

import math
import sys
import warnings
from collections.abc import Iterator
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, NoReturn

import numpy as np

from reachgate.errors import ReachgateError
from reachgate.model.columnar import column_values, is_columnar, read_table
from reachgate.model.csv_text import read_header, scan_rows
from reachgate.model.samples import (
    TIME_RULE,
    ColumnRule,
    angle_rule,
    first_fault,
    length_rule,
    quaternion_lengths,
)
from reachgate.model.transforms import quat_to_matrix, transform

#: A quaternion whose length is already this close to 1 is kept bit for bit instead of being
#: divided by its length: x / |x| is not idempotent in floating point, and a written-then-loaded
#: trajectory must come back identical. 8 ulp of 1.0 covers the rounding of the norm itself.
RENORMALISE_ABOVE = 8 * np.finfo(float).eps

#: Header of the files that write_trajectory produces.
WRITTEN_COLUMNS = ("t_s", "x_m", "y_m", "z_m", "qw", "qx", "qy", "qz")

#: Files of at least this many bytes go through pyarrow's CSV reader (one thread; about 2.6
#: times faster than np.loadtxt on 1,000,000 rows, measured) when pyarrow is installed.
#: Smaller files use it only once it is imported (as in a scan's workers): importing it
#: costs about 0.1 s, more than it saves on a file of under about 100,000 rows.
ARROW_MIN_BYTES = 16_000_000

#: Rows formatted per block when writing: bounds the memory of the formatted text.
_WRITE_BLOCK_ROWS = 100_000

_TIME_COLUMN = "t_s"
_AXES = ("x", "y", "z")
_ANGLES = ("roll", "pitch", "yaw")
_QUAT_COLUMNS = ("qw", "qx", "qy", "qz")
_LENGTH_UNITS = {"m": 1.0, "mm": 1e-3}
_ANGLE_UNITS = {"deg": math.pi / 180.0, "rad": 1.0}


@dataclass(frozen=True, eq=False)
class Trajectory:
    """A commanded TCP path.

    t_s: (N,) strictly increasing times in s.
    scenario_p_m: (N, 3) TCP positions in the scenario frame, m.
    scenario_q_wxyz: (N, 4) TCP orientations in the scenario frame, unit quaternions, scalar-first.
    name: what the path is called in reports (the file name for loaded files).
    ignored_columns: columns of the file that were kept out of the check.
    """

    t_s: np.ndarray
    scenario_p_m: np.ndarray
    scenario_q_wxyz: np.ndarray
    name: str = "arrays"
    ignored_columns: tuple[str, ...] = field(default=())

    @classmethod
    def from_arrays(
        cls,
        t_s,
        p_m,
        q_wxyz=None,
        *,
        rpy_rad=None,
        name: str = "arrays",
    ) -> Trajectory:
        """Build and validate a trajectory from arrays.

        t_s (N,) s; p_m (N, 3) m; orientation as q_wxyz (N, 4) scalar-first or rpy_rad (N, 3)
        [roll, pitch, yaw] in rad, scenario frame. Raises ReachgateError naming the array and
        the fault.
        """
        t_s = np.asarray(t_s, dtype=float)
        p_m = np.asarray(p_m, dtype=float)
        if (q_wxyz is None) == (rpy_rad is None):
            raise ReachgateError(f"{name}: give the orientation as quaternions or as rpy, once")
        if t_s.ndim != 1 or t_s.size < 2:
            raise ReachgateError(f"{name}: t_s must have shape (N,) with N >= 2, got {t_s.shape}")
        n = t_s.size
        if p_m.shape != (n, 3):
            raise ReachgateError(f"{name}: positions must have shape ({n}, 3), got {p_m.shape}")
        orientation = q_wxyz if q_wxyz is not None else rpy_rad
        width = 4 if q_wxyz is not None else 3
        orientation = np.asarray(orientation, dtype=float)
        if orientation.shape != (n, width):
            label = "quaternions" if width == 4 else "rpy"
            raise ReachgateError(
                f"{name}: {label} must have shape ({n}, {width}), got {orientation.shape}"
            )
        columns = np.column_stack([t_s, p_m, orientation])
        names = ("t_s", "x", "y", "z", *(_QUAT_COLUMNS if width == 4 else ("roll", "pitch", "yaw")))
        rules = (TIME_RULE, *[length_rule("m", 1.0)] * 3)
        rules += (None,) * 4 if width == 4 else (angle_rule("rad", 1.0),) * 3
        fault = first_fault(columns, rules, quaternion_at=4 if width == 4 else None)
        if fault is not None:
            row, col, text = fault
            raise ReachgateError(f"{name}: sample {row}, {names[col]}: {text}")
        if width == 4:
            q = _normalised(orientation)
        else:
            q = rpy_to_quat(orientation)
        return cls(t_s=t_s, scenario_p_m=p_m, scenario_q_wxyz=q, name=name)

    @property
    def n_samples(self) -> int:
        return int(self.t_s.size)

    @property
    def duration_s(self) -> float:
        return float(self.t_s[-1] - self.t_s[0])

    def scenario_T_tcp(self) -> np.ndarray:
        """TCP poses in the scenario frame, (N, 4, 4)."""
        return transform(quat_to_matrix(self.scenario_q_wxyz), self.scenario_p_m)


def rpy_to_quat(rpy_rad: np.ndarray) -> np.ndarray:
    """Unit quaternions (scalar-first, qw >= 0) of roll-pitch-yaw angles. (N, 3) rad -> (N, 4).

    R = Rz(yaw) · Ry(pitch) · Rx(roll), so q = qz(yaw) ⊗ qy(pitch) ⊗ qx(roll); the closed form
    is several times faster than going through matrices, which matters for 10⁶-row files.
    """
    half = 0.5 * np.asarray(rpy_rad, dtype=float)
    cr, cp, cy = np.cos(half[:, 0]), np.cos(half[:, 1]), np.cos(half[:, 2])
    sr, sp, sy = np.sin(half[:, 0]), np.sin(half[:, 1]), np.sin(half[:, 2])
    q = np.empty((half.shape[0], 4))
    q[:, 0] = cr * cp * cy + sr * sp * sy
    q[:, 1] = sr * cp * cy - cr * sp * sy
    q[:, 2] = cr * sp * cy + sr * cp * sy
    q[:, 3] = cr * cp * sy - sr * sp * cy
    q *= np.where(q[:, :1] < 0.0, -1.0, 1.0)
    return q


# --- rules shared by arrays and files ---------------------------------------------------------


def _normalised(q: np.ndarray) -> np.ndarray:
    """(N, 4) quaternions divided by their length, except those already unit to rounding."""
    length = quaternion_lengths(q)
    scale = np.where(np.abs(length - 1.0) > RENORMALISE_ABOVE, 1.0 / length, 1.0)
    return q * scale[:, None]


# --- the header ---------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Columns:
    """Where each quantity sits in a file's header.

    names: every header name in file order; use: indices of the columns read, in the order
    t, x, y, z, then qw..qz or roll, pitch, yaw; scales turn those columns into SI.
    """

    names: tuple[str, ...]
    use: tuple[int, ...]
    length_unit: str
    angle_unit: str | None  # None: quaternion columns
    ignored: tuple[str, ...]

    @property
    def has_quaternion(self) -> bool:
        return self.angle_unit is None

    @property
    def length_scale(self) -> float:
        return _LENGTH_UNITS[self.length_unit]

    @property
    def angle_scale(self) -> float | None:
        return None if self.angle_unit is None else _ANGLE_UNITS[self.angle_unit]

    @property
    def rules(self) -> tuple[ColumnRule | None, ...]:
        """The sample rules of the used columns, in the order of use."""
        lengths = (length_rule(self.length_unit, self.length_scale),) * 3
        if self.angle_unit is None:
            return (TIME_RULE, *lengths, None, None, None, None)
        return (TIME_RULE, *lengths, *(angle_rule(self.angle_unit, self.angle_scale),) * 3)

    @property
    def quaternion_at(self) -> int | None:
        """Index in the used columns of qw, or None."""
        return 4 if self.has_quaternion else None


class _HeaderError(Exception):
    """A header fault: which column (or None) and what is wrong."""

    def __init__(self, column: str | None, text: str):
        super().__init__(text)
        self.column = column
        self.text = text


def _unit_of(names: list[str], stem: str) -> list[tuple[str, str]]:
    """(name, unit) of every column spelled stem or stem_unit."""
    found = []
    for name in names:
        if name == stem:
            found.append((name, ""))
        elif name.startswith(stem + "_"):
            found.append((name, name[len(stem) + 1 :]))
    return found


def _pick_units(
    names: list[str], stems: tuple[str, ...], units: dict[str, float], what: str
) -> tuple[list[str], str] | None:
    """The columns giving each stem with one allowed unit, and that unit; None when no stem
    has any."""
    allowed = ", ".join(units)
    chosen: list[str] = []
    chosen_units: list[str] = []
    if not any(f"{s}_{u}" in names for s in stems for u in units):
        return None
    for stem in stems:
        present = [f"{stem}_{u}" for u in units if f"{stem}_{u}" in names]
        if len(present) > 1:
            raise _HeaderError(present[1], f"{' and '.join(present)} both give {stem}; keep one")
        if not present:
            _raise_unknown_unit_or_missing(names, stem, units)
        chosen.append(present[0])
        chosen_units.append(present[0][len(stem) + 1 :])
    if len(set(chosen_units)) > 1:
        odd = next(c for c, u in zip(chosen, chosen_units, strict=True) if u != chosen_units[0])
        raise _HeaderError(
            odd,
            f"{what} columns mix units ({', '.join(chosen)}); use one of {allowed} for all",
        )
    return chosen, chosen_units[0]


def _raise_unknown_unit_or_missing(
    names: list[str], stem: str, units: dict[str, float]
) -> NoReturn:
    """No allowed column for stem: name one with the stem and a wrong unit, or say it is missing."""
    allowed = ", ".join(f"{stem}_{u}" for u in units)
    for name, unit in _unit_of(names, stem):
        if not unit:
            raise _HeaderError(name, f"no unit in the column name; allowed: {allowed}")
        raise _HeaderError(name, f"unit '{unit}' is unknown; allowed: {allowed}")
    raise _HeaderError(None, f"missing column {allowed.replace(', ', ' or ')}")


def _named_columns(names: list[str]) -> dict[str, int]:
    """Column index by name; raise _HeaderError for an empty or repeated name or no t_s."""
    seen: dict[str, int] = {}
    for i, name in enumerate(names):
        if not name:
            raise _HeaderError(None, f"column {i + 1} of the header has no name")
        if name in seen:
            raise _HeaderError(
                name, f"appears twice in the header (columns {seen[name] + 1} and {i + 1})"
            )
        seen[name] = i
    if _TIME_COLUMN not in seen:
        _raise_unknown_unit_or_missing(names, "t", {"s": 1.0})
    return seen


def _map_columns(names: list[str]) -> _Columns:
    """Find t, position and orientation columns in a header; raise _HeaderError on a fault."""
    seen = _named_columns(names)
    position = _pick_units(names, _AXES, _LENGTH_UNITS, "position")
    if position is None:
        _raise_unknown_unit_or_missing(names, "x", _LENGTH_UNITS)
    p_names, length_unit = position
    quat_present = [n for n in _QUAT_COLUMNS if n in seen]
    rpy = _pick_units(names, _ANGLES, _ANGLE_UNITS, "orientation")
    if quat_present and rpy is not None:
        raise _HeaderError(
            rpy[0][0],
            "both orientation forms given (qw,qx,qy,qz and roll/pitch/yaw); keep one",
        )
    if quat_present:
        for n in _QUAT_COLUMNS:
            if n not in seen:
                raise _HeaderError(None, f"missing column {n} (have {', '.join(quat_present)})")
        o_names, angle_unit = list(_QUAT_COLUMNS), None
    elif rpy is not None:
        o_names, angle_unit = rpy
    else:
        for stem in _ANGLES:
            if _unit_of(names, stem):
                _raise_unknown_unit_or_missing(names, stem, _ANGLE_UNITS)
        raise _HeaderError(
            None,
            "no orientation columns: give qw,qx,qy,qz or roll_deg,pitch_deg,yaw_deg "
            "(or roll_rad,pitch_rad,yaw_rad)",
        )
    used = [_TIME_COLUMN, *p_names, *o_names]
    return _Columns(
        names=tuple(names),
        use=tuple(seen[n] for n in used),
        length_unit=length_unit,
        angle_unit=angle_unit,
        ignored=tuple(n for n in names if n not in used),
    )


@dataclass(frozen=True, eq=False)
class _Layout:
    """What to read from a file: its header names and each body's columns (their `use`
    indexing the header); use: the columns read, time first, then each body's in order."""

    names: tuple[str, ...]
    bodies: dict[str, _Columns]
    use: tuple[int, ...] = field(init=False)

    def __post_init__(self) -> None:
        own = (i for columns in self.bodies.values() for i in columns.use[1:])
        object.__setattr__(self, "use", (self.names.index(_TIME_COLUMN), *own))


@dataclass(frozen=True, eq=False)
class _Source:
    """A trajectory file opened for reading: its column names, and its header line (CSV) or
    its whole table (Parquet, Arrow IPC)."""

    names: tuple[str, ...]
    header_line: int = 0
    table: Any = None

    def header_fault(self, label: str, error: _HeaderError, hint: str = "") -> ReachgateError:
        line = "" if self.table is not None else f" line {self.header_line}"
        where = f", column {error.column}" if error.column else ""
        return ReachgateError(f"{label}{line}{where}: {error.text}{hint}")


def _open_source(path: Path, label: str) -> _Source:
    """The file's column names and where its values are (columnar files by their ending)."""
    if is_columnar(path):
        table = read_table(path, label)
        return _Source(tuple(str(name).strip() for name in table.column_names), table=table)
    header_line, names = read_header(path, label)
    return _Source(tuple(names), header_line=header_line)


# --- reading ------------------------------------------------------------------------------------


def import_fast_reader() -> bool:
    """Import pyarrow's CSV reader now, so that files of any size use it. -> available."""
    try:
        import pyarrow.csv  # noqa: F401
    except ImportError:
        return False
    return True


#: Bytes read at a time when screening a file for the arrow reader.
_SCREEN_BLOCK_BYTES = 1 << 23


def _screen(path: Path, header_line: int) -> tuple[int, int] | None:
    """(byte offset of the data block, lines in it at most) if the whole file is plain ASCII
    without NUL bytes, read in blocks; else None."""
    start, lines, newlines = 0, 0, 0
    with path.open("rb") as handle:
        offset = 0
        while block := handle.read(_SCREEN_BLOCK_BYTES):
            if b"\x00" in block or not block.isascii():
                return None
            at = 0
            while lines < header_line and (found := block.find(b"\n", at)) >= 0:
                lines, at, start = lines + 1, found + 1, offset + found + 1
            newlines += block.count(b"\n")
            offset += len(block)
    if lines < header_line:
        return None
    return start, newlines - header_line + 1  # + 1: a last line without a newline


def _arrow_values(path: Path, header_line: int, layout: _Layout) -> np.ndarray | None:
    """The used columns as (N, len(layout.use)) floats from pyarrow's CSV reader, or None.

    None (and so the next path) for anything unusual: pyarrow missing, bytes that are not
    plain ASCII (the scan words those faults), a row with another number of fields, a value
    that is no plain number, an empty or 'nan' field (pyarrow reads those as null). Reads
    batch by batch into one preallocated array, so memory stays near the result's size.
    """
    if not import_fast_reader():
        return None
    import pyarrow as pa
    import pyarrow.csv as arrow_csv

    screened = _screen(path, header_line)
    if screened is None:
        return None
    start, most_rows = screened
    names = [f"c{i}" for i in range(len(layout.names))]  # header names may be anything
    used = [names[i] for i in layout.use]
    values = np.empty((most_rows, len(used)))
    rows = 0
    try:
        with pa.OSFile(str(path)) as source:
            source.seek(start)
            batches = arrow_csv.open_csv(
                source,
                read_options=arrow_csv.ReadOptions(column_names=names, use_threads=False),
                parse_options=arrow_csv.ParseOptions(quote_char=False, ignore_empty_lines=True),
                convert_options=arrow_csv.ConvertOptions(
                    include_columns=used, column_types=dict.fromkeys(used, pa.float64())
                ),
            )
            for batch in batches:
                if rows + batch.num_rows > most_rows:
                    return None
                for k, name in enumerate(used):
                    column = batch.column(name)
                    if column.null_count:
                        return None
                    values[rows : rows + batch.num_rows, k] = column.to_numpy()
                rows += batch.num_rows
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError, OSError):
        return None
    return values[:rows] if rows >= 2 else None


def _fast_values(path: Path, header_line: int, layout: _Layout) -> np.ndarray | None:
    """The used columns as (N, len(layout.use)) floats from one np.loadtxt call, or None if
    it fails.

    comments=None: a comment line inside the data block makes loadtxt fail (too few fields),
    so such files go to the line-by-line scan, which knows where comments may start. Columns
    kept out of the check go through a converter that ignores their text (they may hold
    labels), while loadtxt still counts every field of every line.
    """
    if "pyarrow.csv" in sys.modules or path.stat().st_size >= ARROW_MIN_BYTES:
        values = _arrow_values(path, header_line, layout)
        if values is not None:
            return values
    unused = set(range(len(layout.names))) - set(layout.use)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # "input contained no data": the scan says it better
            block = np.loadtxt(
                path,
                delimiter=",",
                comments=None,
                skiprows=header_line,
                ndmin=2,
                encoding="utf-8",
                converters=dict.fromkeys(unused, _ignored_field),
            )
    except ValueError:  # includes UnicodeDecodeError
        return None
    if block.shape[0] < 2 or block.shape[1] != len(layout.names):
        return None
    if layout.use == tuple(range(block.shape[1])):
        return block  # the usual file: no column to drop, no copy
    return block[:, layout.use]


def _ignored_field(text: str) -> float:
    return 0.0


def _scan_values(path: Path, label: str, header_line: int, layout: _Layout):
    """Line-by-line parse: (values (N, len(use)), line numbers (N,)). Raises at the first
    fault, a broken sample rule of the rows before a fault of the text included."""
    return scan_rows(
        path,
        label,
        header_line,
        layout.names,
        layout.use,
        lambda values, line_numbers: _raise_sample_fault(values, line_numbers, layout, label),
    )


def _sample_fault(values: np.ndarray, layout: _Layout) -> tuple[int, str, str] | None:
    """(row, 'column NAME' or 'columns A,B,C,D', what is wrong) of the earliest broken rule
    over every body's columns, or None. values: (N, len(layout.use)), time first."""
    faults = []
    at = 1
    for columns in layout.bodies.values():
        width = len(columns.use) - 1
        own = values if len(layout.bodies) == 1 else values[:, [0, *range(at, at + width)]]
        fault = first_fault(own, columns.rules, columns.quaternion_at)
        if fault is not None:
            row, col, text = fault
            if col == columns.quaternion_at:
                where = "columns " + ",".join(columns.names[i] for i in columns.use[4:8])
            else:
                where = "column " + columns.names[columns.use[col]]
            faults.append((row, where, text))
        at += width
    return min(faults, key=lambda f: f[0]) if faults else None


def _raise_sample_fault(
    values: np.ndarray, line_numbers: list[int] | None, layout: _Layout, label: str
) -> None:
    """Raise the earliest broken rule among rows (N, len(layout.use)), if any, at its line
    (CSV) or, without line numbers, at its row (1 = the first data row of a columnar file)."""
    fault = _sample_fault(values, layout)
    if fault is None:
        return
    row, where, text = fault
    place = f"row {row + 1}" if line_numbers is None else f"line {line_numbers[row]}"
    raise ReachgateError(f"{label} {place}, {where}: {text}")


def _layout_values(path: Path, label: str, source: _Source, layout: _Layout) -> np.ndarray:
    """The validated used columns (N, len(layout.use)) of a file, time first, in file units.

    CSV: the fast path, and the line-by-line scan only when that fails or a rule is broken;
    a columnar file: its columns as they are stored.
    """
    if source.table is not None:
        values = column_values(source.table, layout.names, layout.use, label)
        if values.shape[0] < 2:
            raise ReachgateError(f"{label}: {values.shape[0]} rows; a trajectory needs at least 2")
        _raise_sample_fault(values, None, layout, label)
        return values
    values = _fast_values(path, source.header_line, layout)
    if values is None or _sample_fault(values, layout) is not None:
        values, line_numbers = _scan_values(path, label, source.header_line, layout)
        _raise_sample_fault(values, line_numbers, layout, label)
    return values


def load_trajectory(path: str | Path) -> Trajectory:
    """Load and validate a trajectory: CSV (DESIGN §4), or Parquet or Arrow IPC (Feather)
    with the same columns (by the name's ending, model/columnar.py). Raises ReachgateError
    on bad input, naming the file, the line (CSV) or row (columnar) and the column.

    Returns t_s (N,), scenario_p_m (N, 3) in m and scenario_q_wxyz (N, 4) unit quaternions;
    name is the file name, ignored_columns the header names that were not read.
    """
    path = Path(path)
    label = str(path)
    source = _open_source(path, label)
    try:
        columns = _map_columns(list(source.names))
    except _HeaderError as error:
        hint = _several_bodies_hint(list(source.names))
        raise source.header_fault(label, error, hint) from None
    layout = _Layout(source.names, {PLAIN_BODY: columns})
    values = _layout_values(path, label, source, layout)
    return _trajectory_from_values(values, columns, path.name)


def _trajectory_from_values(values: np.ndarray, columns: _Columns, name: str) -> Trajectory:
    """A Trajectory from the used columns (N, 7 or 8) in file units, already validated."""
    t_s = np.ascontiguousarray(values[:, 0])
    p_m = values[:, 1:4] * columns.length_scale
    if columns.has_quaternion:
        q = _normalised(values[:, 4:8])
    else:
        q = rpy_to_quat(values[:, 4:7] * columns.angle_scale)
    return Trajectory(
        t_s=t_s,
        scenario_p_m=p_m,
        scenario_q_wxyz=q,
        name=name,
        ignored_columns=columns.ignored,
    )


# --- writing ------------------------------------------------------------------------------------


def write_trajectory(
    path: str | Path, trajectory: Trajectory, comments: tuple[str, ...] = ()
) -> None:
    """Write a trajectory as CSV: '# ' comment lines, then t_s,x_m,y_m,z_m,qw,qx,qy,qz.

    Values are written as the shortest decimal that reads back to the same float64 (Python's
    repr), so write -> load gives identical arrays.
    """
    _write_csv(Path(path), trajectory_csv_chunks(trajectory, comments))


def trajectory_csv_chunks(trajectory: Trajectory, comments: tuple[str, ...] = ()) -> Iterator[str]:
    """The text write_trajectory writes, in pieces of bounded size (for writers of their own)."""
    table = np.column_stack([trajectory.t_s, trajectory.scenario_p_m, trajectory.scenario_q_wxyz])
    return _csv_chunks(WRITTEN_COLUMNS, table, comments)


def _csv_chunks(
    header: tuple[str, ...], table: np.ndarray, comments: tuple[str, ...]
) -> Iterator[str]:
    """Comment lines, the header, then (N, C) values as their shortest round-trip decimals."""
    row_format = ",".join(["%r"] * table.shape[1]) + "\n"
    for comment in comments:
        for line in str(comment).splitlines() or [""]:
            yield f"# {line}\n"
    yield ",".join(header) + "\n"
    for start in range(0, table.shape[0], _WRITE_BLOCK_ROWS):
        block = table[start : start + _WRITE_BLOCK_ROWS]
        # tolist() gives Python floats, whose repr is the shortest round-trip form.
        yield (row_format * block.shape[0]) % tuple(block.ravel().tolist())


def _write_csv(path: Path, chunks: Iterator[str]) -> None:
    try:
        with path.open("w", encoding="utf-8", newline="\n") as handle:
            for chunk in chunks:
                handle.write(chunk)
    except OSError as error:
        raise ReachgateError(f"{path}: cannot write ({error.strerror or error})") from None


# --- several bodies -----------------------------------------------------------------------------

#: Separates a body's name from its column stem in a several-body file (`drone.x_m`).
BODY_SEPARATOR = "."
#: The key of the one body of a file with plain (unprefixed) columns.
PLAIN_BODY = ""


@dataclass(frozen=True, eq=False)
class Scenario:
    """The poses of one or more bodies at common times (DESIGN §8).

    t_s: (N,) strictly increasing times in s, shared by every body.
    bodies: body name -> Trajectory (each with this t_s, poses in the scenario frame); a file
    of plain columns gives one body under PLAIN_BODY.
    name: what the scenario is called in reports (the file name for loaded files).
    ignored_columns: columns of the file that were kept out of the check.
    """

    t_s: np.ndarray
    bodies: dict[str, Trajectory]
    name: str = "arrays"
    ignored_columns: tuple[str, ...] = field(default=())

    @classmethod
    def from_trajectories(cls, bodies: dict[str, Trajectory], name: str = "arrays") -> Scenario:
        """Several bodies' trajectories sampled at the same times -> Scenario."""
        if not bodies:
            raise ReachgateError(f"{name}: a scenario needs at least one body")
        t_s = next(iter(bodies.values())).t_s
        for body, trajectory in bodies.items():
            if not np.array_equal(trajectory.t_s, t_s):
                raise ReachgateError(f"{name}: body {body!r} is not sampled at the same times")
        return cls(t_s=t_s, bodies=dict(bodies), name=name)

    @property
    def is_plain(self) -> bool:
        """True for one body given by plain columns."""
        return tuple(self.bodies) == (PLAIN_BODY,)

    @property
    def n_samples(self) -> int:
        return int(self.t_s.size)

    @property
    def duration_s(self) -> float:
        return float(self.t_s[-1] - self.t_s[0])

    def body(self, name: str, only_one: bool = False) -> Trajectory:
        """The trajectory of body `name`; the plain columns serve when `only_one` body is asked
        for. Raises ReachgateError naming the bodies the scenario has."""
        if name in self.bodies:
            return self.bodies[name]
        if self.is_plain and only_one:
            return self.bodies[PLAIN_BODY]
        if self.is_plain:
            have = "only plain columns (one body); prefix each body's columns, e.g. drone.x_m"
        else:
            have = "bodies " + ", ".join(self.bodies)
        raise ReachgateError(f"{self.name}: no body {name!r} in the scenario (it has {have})")


def _several_bodies_hint(names: list[str]) -> str:
    """For a one-body reader given a several-body header: what to do instead, else ''."""
    try:
        bodies = _body_columns(names)
    except _HeaderError:
        return ""
    if not bodies:
        return ""
    return f" (the file gives several bodies: {', '.join(bodies)}; check it with a rig file)"


def _body_columns(names: list[str]) -> dict[str, list[tuple[int, str]]]:
    """Columns prefixed with a body name: body -> [(index in the header, stem)], file order."""
    by_body: dict[str, list[tuple[int, str]]] = {}
    for i, name in enumerate(names):
        if BODY_SEPARATOR in name:
            body, stem = name.rsplit(BODY_SEPARATOR, 1)
            if not body:
                raise _HeaderError(name, "no body name before the dot")
            by_body.setdefault(body, []).append((i, stem))
    return by_body


def _is_pose_column(name: str) -> bool:
    """True for a name the single-body header reads as a position or orientation."""
    stem = name.split("_", 1)[0]
    return name in _QUAT_COLUMNS or stem in _AXES + _ANGLES


def _map_bodies(names: list[str]) -> dict[str, _Columns]:
    """Each body's columns in a several-body header; `use` indexes the whole header.

    Every body is read with the single-body rules (same column choices, same messages, with
    the column named in full). Raises _HeaderError.
    """
    seen = _named_columns(names)
    for name in names:
        if BODY_SEPARATOR not in name and _is_pose_column(name):
            raise _HeaderError(
                name, "a pose column without a body name in a file of several bodies; "
                "prefix it with its body (e.g. drone.x_m)",
            )  # fmt: skip
    mapped: dict[str, _Columns] = {}
    for body, columns in _body_columns(names).items():
        stems = [stem for _, stem in columns]
        try:
            own = _map_columns([_TIME_COLUMN, *stems])
        except _HeaderError as error:
            column = error.column and f"{body}{BODY_SEPARATOR}{error.column}"
            text = error.text if error.column else f"body {body}: {error.text}"
            raise _HeaderError(column, text) from None
        full = [seen[_TIME_COLUMN], *(i for i, _ in columns)]
        mapped[body] = replace(
            own,
            names=tuple(names),
            use=tuple(full[k] for k in own.use),
            ignored=tuple(f"{body}{BODY_SEPARATOR}{n}" for n in own.ignored),
        )
    return mapped


def load_scenario(path: str | Path) -> Scenario:
    """Load and validate a scenario of one or more bodies (DESIGN §4, §8): CSV, or Parquet or
    Arrow IPC (Feather) with the same columns.

    Plain columns (`x_m`, `qw`, ...) give one body, loaded exactly as load_trajectory does, under
    PLAIN_BODY. Columns prefixed with a body name and a dot (`drone.x_m`, `pad.qw`) give one
    body each, with the single-body column choices and rules; other columns are kept out and
    named in ignored_columns. Raises ReachgateError naming the file, the line (CSV) or row
    (columnar) and the column.
    """
    path = Path(path)
    label = str(path)
    source = _open_source(path, label)
    names = list(source.names)
    try:
        has_bodies = bool(_body_columns(names))
        bodies = _map_bodies(names) if has_bodies else {PLAIN_BODY: _map_columns(names)}
    except _HeaderError as error:
        raise source.header_fault(label, error) from None
    layout = _Layout(source.names, bodies)
    values = _layout_values(path, label, source, layout)
    if not has_bodies:
        trajectory = _trajectory_from_values(values, bodies[PLAIN_BODY], path.name)
        return Scenario(
            t_s=trajectory.t_s,
            bodies={PLAIN_BODY: trajectory},
            name=trajectory.name,
            ignored_columns=trajectory.ignored_columns,
        )
    t_s = np.ascontiguousarray(values[:, 0])
    trajectories = {}
    at = 1
    for body, columns in bodies.items():
        width = len(columns.use) - 1
        own = _trajectory_from_values(
            values[:, [0, *range(at, at + width)]], columns, f"{path.name} ({body})"
        )
        trajectories[body] = replace(own, t_s=t_s, ignored_columns=())
        at += width
    used = set(layout.use)
    ignored = tuple(n for i, n in enumerate(names) if i not in used)
    return Scenario(t_s=t_s, bodies=trajectories, name=path.name, ignored_columns=ignored)


def write_scenario(path: str | Path, scenario: Scenario, comments: tuple[str, ...] = ()) -> None:
    """Write a scenario as CSV: '# ' comment lines, then t_s and each body's
    BODY.x_m,...,BODY.qz (plain columns for a PLAIN_BODY scenario); shortest round-trip decimals.
    """
    _write_csv(Path(path), scenario_csv_chunks(scenario, comments))


def scenario_csv_chunks(scenario: Scenario, comments: tuple[str, ...] = ()) -> Iterator[str]:
    """The text write_scenario writes, in pieces of bounded size (for writers of their own)."""
    if scenario.is_plain:
        return trajectory_csv_chunks(scenario.bodies[PLAIN_BODY], comments)
    header = [_TIME_COLUMN]
    parts = [scenario.t_s]
    for body, trajectory in scenario.bodies.items():
        header += [f"{body}{BODY_SEPARATOR}{c}" for c in WRITTEN_COLUMNS[1:]]
        parts += [trajectory.scenario_p_m, trajectory.scenario_q_wxyz]
    return _csv_chunks(tuple(header), np.column_stack(parts), comments)
