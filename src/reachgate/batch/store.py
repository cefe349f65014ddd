"""The scan results store: one SQLite file, one row per case, violation rows in a child table.

The store is written only by the process that runs the scan; workers hand back plain dicts.
Each case is written in one transaction in WAL mode, so an interrupted scan (Ctrl-C,
kill -9) loses at most the cases in flight and leaves a consistent file. A case is known by
its name (its path relative to the store's folder, or its absolute path when outside it);
rechecking a case replaces its row.

Trust: every open runs SQLite's own `quick_check` and refuses a damaged file; every case row
carries the sha256 of its values and of its violation rows, checked whenever it is read, so a
row changed behind the program's back is found instead of being reported. A store opened
only to read (`scan --report`) is opened read-only and works in a read-only folder.
"""

from __future__ import annotations

import fcntl
import hashlib
import json
import math
import os
import socket
import sqlite3
from collections.abc import Iterable
from dataclasses import dataclass, field
from enum import Enum
from pathlib import Path

from reachgate.batch.model_files import file_fingerprint
from reachgate.checking.intervals import Check, Severity, Violation
from reachgate.errors import ReachgateError

#: Bumped when the tables change; a store of another version is refused, not guessed at.
#: Older versions are read as they are when opened read-only and brought up to this one, in
#: one transaction, when opened for writing: version 1 lacks the row checksums (the rows are
#: sealed as they are), versions 1 and 2 name a column by its old name (_RENAMED_COLUMNS).
SCHEMA_VERSION = 3
#: Versions this program reads (and, opened for writing, upgrades).
_READABLE_VERSIONS = ("1", "2", str(SCHEMA_VERSION))
#: How long a write waits for another process holding the store (a second scan), s.
BUSY_TIMEOUT_S = 30.0
#: Columns added to a table after its schema version was set, with their SQL type: a store
#: written before them opens as it is (the rows read None there) and gains the column when
#: opened for writing. Programs that predate a column ignore it (checksums included: see
#: row_checksum).
_ADDED_COLUMNS = {
    "cases": {"parameters_json": "TEXT"},
    # a row's fitting_branches as a JSON list (null: not judged, as in the report)
    "violations": {"fitting_branches_json": "TEXT"},
}
#: Columns renamed in version 3, old name -> new name (worst_margin_limit held the name of a
#: check, not a limit). A row checksum covers values by position, not by name, so rows sealed
#: under the old name keep their checksums.
_RENAMED_COLUMNS = {"cases": {"worst_margin_limit": "worst_margin_check"}}
#: Checks that have no fraction of a limit to rank by: the path cannot be followed at all.
_UNRANKED_CHECKS = frozenset({Check.REACH, Check.BRANCH})

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS runs (
    run_id INTEGER PRIMARY KEY,
    started_at TEXT NOT NULL,
    finished_at TEXT,
    tool_version TEXT NOT NULL,
    robot_path TEXT NOT NULL,
    robot_sha256 TEXT NOT NULL,
    settings_json TEXT NOT NULL,
    engine TEXT NOT NULL,
    cases INTEGER NOT NULL,
    resumed INTEGER NOT NULL
);
CREATE TABLE IF NOT EXISTS cases (
    case_id INTEGER PRIMARY KEY,
    case_name TEXT NOT NULL UNIQUE,
    case_path TEXT NOT NULL,
    case_sha256 TEXT,
    robot_name TEXT,
    robot_sha256 TEXT NOT NULL,
    settings_json TEXT NOT NULL,
    verdict TEXT NOT NULL CHECK (verdict IN ('pass', 'fail', 'error')),
    error TEXT,
    samples INTEGER,
    duration_s REAL,
    worst_margin REAL,
    worst_margin_axis TEXT,
    worst_margin_check TEXT,
    slowdown REAL,
    counts_json TEXT NOT NULL,
    margins_json TEXT,
    tool_version TEXT NOT NULL,
    elapsed_s REAL NOT NULL,
    checked_at TEXT NOT NULL,
    worker TEXT NOT NULL,
    run_id INTEGER NOT NULL REFERENCES runs (run_id),
    row_sha256 TEXT,
    parameters_json TEXT
);
CREATE TABLE IF NOT EXISTS violations (
    case_id INTEGER NOT NULL REFERENCES cases (case_id),
    seq INTEGER NOT NULL,
    check_name TEXT NOT NULL,
    axis TEXT NOT NULL,
    severity TEXT NOT NULL,
    start_s REAL NOT NULL,
    end_s REAL NOT NULL,
    worst_s REAL NOT NULL,
    worst REAL NOT NULL,
    limit_value REAL NOT NULL,
    unit TEXT NOT NULL,
    excess_fraction REAL,
    fitting_branches_json TEXT,
    PRIMARY KEY (case_id, seq)
);
"""


class CaseVerdict(Enum):
    PASS = "pass"
    FAIL = "fail"
    ERROR = "error"


@dataclass(frozen=True)
class CheckCount:
    """Rows of one check in one case or a batch: violation rows, near rows, failing cases."""

    violations: int = 0
    near: int = 0
    cases: int = 0

    def as_dict(self) -> dict:
        return {"violations": self.violations, "near": self.near, "cases": self.cases}


@dataclass(frozen=True)
class CaseResult:
    """One case as stored. worst_margin: smallest fraction of any limit left (None on error).

    first: the earliest violation row; worst: the violation row furthest beyond its limit
    (reach and branch rows rank first, then by excess_fraction). SI units throughout.
    """

    name: str
    path: str
    verdict: CaseVerdict
    error: str | None
    case_sha256: str | None
    robot_name: str | None
    robot_sha256: str
    settings: dict
    samples: int | None
    duration_s: float | None
    worst_margin: float | None
    worst_margin_axis: str | None
    worst_margin_check: str | None
    slowdown: float | None
    counts: dict[str, CheckCount]
    margins: dict[str, dict[str, float]] | None
    violations: tuple[Violation, ...]
    excess_fractions: tuple[float | None, ...]
    first: Violation | None
    worst: Violation | None
    elapsed_s: float
    checked_at: str
    worker: str
    run_id: int
    case_id: int
    #: The case file's own 'key = value' comment lines (perturb's settings); {} when it has
    #: none, None when the store predates recording them.
    parameters: dict | None = None

    @property
    def failed(self) -> bool:
        return self.verdict is not CaseVerdict.PASS

    def as_dict(self) -> dict:
        """JSON-ready: non-finite numbers become null."""
        return _finite(
            {
                "case": self.name,
                "path": self.path,
                "verdict": self.verdict.value,
                "error": self.error,
                "case_sha256": self.case_sha256,
                "robot": self.robot_name,
                "robot_sha256": self.robot_sha256,
                "settings": self.settings,
                "samples": self.samples,
                "duration_s": self.duration_s,
                "worst_margin": self.worst_margin,
                "worst_margin_axis": self.worst_margin_axis,
                "worst_margin_check": self.worst_margin_check,
                "slowdown": self.slowdown,
                "counts": {k: c.as_dict() for k, c in self.counts.items()},
                "first_violation": None if self.first is None else self.first.as_dict(),
                "worst_violation": None if self.worst is None else self.worst.as_dict(),
                "violations": [v.as_dict() for v in self.violations],
                "margins": self.margins,
                "elapsed_s": self.elapsed_s,
                "checked_at": self.checked_at,
                "worker": self.worker,
                "parameters": self.parameters,
            }
        )


@dataclass(frozen=True)
class ScanSummary:
    """A batch, ranked worst first: errors, then failing cases, then passing ones, each by
    worst margin (smallest first). checked/resumed: cases checked by this run / taken from
    the store unchanged (both 0 for a summary read back from the store)."""

    store_path: Path
    cases: tuple[CaseResult, ...]
    checked: int = 0
    resumed: int = 0
    counts: dict[str, CheckCount] = field(default_factory=dict)

    @property
    def passed(self) -> bool:
        return bool(self.cases) and not any(c.failed for c in self.cases)

    def tally(self) -> dict[str, int]:
        out = {v.value: 0 for v in CaseVerdict}
        for c in self.cases:
            out[c.verdict.value] += 1
        return out

    def as_dict(self) -> dict:
        return {
            "store": str(self.store_path),
            "cases": len(self.cases),
            "checked": self.checked,
            "resumed": self.resumed,
            "verdicts": self.tally(),
            "counts": {k: c.as_dict() for k, c in self.counts.items()},
            "results": [c.as_dict() for c in self.cases],
        }


def _finite(value):
    """Replace inf / nan by None, recursively (JSON has no such numbers)."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_finite(v) for v in value]
    return value


def rank_key(case: CaseResult) -> tuple:
    """Worst first: error < fail < pass, then smallest worst margin, then name."""
    order = {CaseVerdict.ERROR: 0, CaseVerdict.FAIL: 1, CaseVerdict.PASS: 2}
    margin = -math.inf if case.worst_margin is None else case.worst_margin
    return (order[case.verdict], margin, case.name)


def worst_row_key(check: Check, excess_fraction: float | None) -> tuple:
    """Sort key putting the worst violation row first: reach, branch, then by fraction."""
    if check in _UNRANKED_CHECKS or excess_fraction is None:
        return (0, 0 if check is Check.REACH else 1, 0.0)
    return (1, 0, -excess_fraction)


def batch_counts(cases: tuple[CaseResult, ...]) -> dict[str, CheckCount]:
    """Counts per check over a batch, in the report order of Check."""
    out: dict[str, CheckCount] = {}
    for kind in Check:
        per = [c.counts[kind.value] for c in cases if kind.value in c.counts]
        if per:
            out[kind.value] = CheckCount(
                violations=sum(p.violations for p in per),
                near=sum(p.near for p in per),
                cases=sum(p.violations > 0 for p in per),
            )
    return out


#: Columns of table cases that a row checksum covers: every one but its id and the checksum.
_CHECKED_COLUMNS = (
    "case_name", "case_path", "case_sha256", "robot_name", "robot_sha256", "settings_json",
    "verdict", "error", "samples", "duration_s", "worst_margin", "worst_margin_axis",
    "worst_margin_check", "slowdown", "counts_json", "margins_json", "tool_version",
    "elapsed_s", "checked_at", "worker", "run_id",
)  # fmt: skip
_VIOLATION_COLUMNS = (
    "check_name", "axis", "severity", "start_s", "end_s", "worst_s", "worst", "limit_value",
    "unit", "excess_fraction",
)  # fmt: skip


def _violation_values(row) -> tuple:
    """A stored violation row's checksummed values: _VIOLATION_COLUMNS, then [name, value]
    of each column of _ADDED_COLUMNS that holds a value (see row_checksum)."""
    added = tuple(
        [c, row[c]] for c in _ADDED_COLUMNS["violations"] if c in row.keys() and row[c] is not None
    )
    return tuple(row[c] for c in _VIOLATION_COLUMNS) + added


def row_checksum(values: dict, violations: Iterable[tuple]) -> str:
    """sha256 of a case row's values (_CHECKED_COLUMNS) and its violation rows, in order.

    Floats enter by repr, which round-trips exactly through SQLite's 8-byte REAL. A column of
    _ADDED_COLUMNS enters only where the row has a value in it, so rows sealed before the
    column existed keep their checksums, and a value put in or taken out later breaks them.
    """
    added = [
        [c, values[c]]
        for c in _ADDED_COLUMNS["cases"]
        if c in values.keys() and values[c] is not None
    ]
    text = json.dumps(
        [[values[c] for c in _CHECKED_COLUMNS], [list(v) for v in violations], *added],
        allow_nan=True,
        separators=(",", ":"),
    )
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _current_names(names: Iterable[str], values: Iterable) -> dict:
    """column -> value of a cases row, under today's column names whatever the store's version."""
    renamed = _RENAMED_COLUMNS["cases"]
    return {renamed.get(name, name): value for name, value in zip(names, values, strict=True)}


def _stored_checksum(db: sqlite3.Connection, case_id: int) -> str:
    """row_checksum of one case as it reads back from the store."""
    cursor = db.execute("SELECT * FROM cases WHERE case_id = ?", (case_id,))
    values = _current_names((d[0] for d in cursor.description), cursor.fetchone())
    factory, db.row_factory = db.row_factory, sqlite3.Row
    try:
        children = db.execute(
            "SELECT * FROM violations WHERE case_id = ? ORDER BY seq", (case_id,)
        ).fetchall()
    finally:
        db.row_factory = factory
    return row_checksum(values, [_violation_values(v) for v in children])


def _damaged(path: Path, detail: str) -> ReachgateError:
    detail = " ".join(detail.split())  # one line, whatever SQLite put in its message
    return ReachgateError(
        f"{path}: the results store is damaged ({detail}); keep it aside for inspection and "
        "scan again into a new --store (or restore a copy)"
    )


class Store:
    """An open results store. Use as a context manager; every write is one transaction.

    create=False opens an existing store read-only (nothing is written, not even the
    checksums a version 1 store lacks), which also works on a read-only folder or disk.
    """

    def __init__(self, path: Path, create: bool = True) -> None:
        self.path = Path(path)
        self.read_only = not create
        if not create and not self.path.is_file():
            raise ReachgateError(f"{self.path}: no such results store")
        try:
            if create:
                self.path.parent.mkdir(parents=True, exist_ok=True)
                self.db = sqlite3.connect(self.path, timeout=BUSY_TIMEOUT_S, isolation_level=None)
                self.db.execute("PRAGMA journal_mode=WAL")
                # NORMAL in WAL mode: committed cases survive a killed process; never corrupts.
                self.db.execute("PRAGMA synchronous=NORMAL")
            else:
                self.db = self._connect_read_only()
            self._verify_file()
            self._prepare()
        except sqlite3.DatabaseError as error:
            if "not a database" in str(error):
                raise ReachgateError(f"{self.path}: not a usable results store ({error})") from None
            raise _damaged(self.path, f"SQLite: {error}") from None
        except OSError as error:
            raise ReachgateError(f"{self.path}: cannot open ({error.strerror})") from None

    def _connect_read_only(self) -> sqlite3.Connection:
        """mode=ro shares the store with a running scan; immutable=1 is the fallback for a
        read-only folder or disk, where SQLite cannot create the WAL index beside the file."""
        uri = self.path.resolve().as_uri()
        try:
            db = sqlite3.connect(f"{uri}?mode=ro", uri=True, timeout=BUSY_TIMEOUT_S)
            db.execute("SELECT count(*) FROM sqlite_master").fetchone()
            return db
        except sqlite3.OperationalError:
            return sqlite3.connect(f"{uri}?immutable=1", uri=True)

    def _verify_file(self) -> None:
        """SQLite's own page and index check; a damaged store is refused, never read."""
        problems = [r[0] for r in self.db.execute("PRAGMA quick_check(1)")]
        if problems != ["ok"]:
            raise _damaged(self.path, "SQLite quick_check: " + " ".join(problems[0].split()))

    def _prepare(self) -> None:
        tables = {r[0] for r in self.db.execute("SELECT name FROM sqlite_master")}
        if "meta" in tables:
            found = self._version()
            if found not in _READABLE_VERSIONS:
                raise ReachgateError(
                    f"{self.path}: store schema version {found}, this program writes "
                    f"{SCHEMA_VERSION}; use another --store"
                )
            if not self.read_only:
                if found != str(SCHEMA_VERSION):
                    self._write(self._upgrade)
                self._add_missing_columns()
            return
        if tables:
            raise ReachgateError(f"{self.path}: an SQLite file, but not a reachgate results store")
        if self.read_only:
            raise ReachgateError(f"{self.path}: an empty file, not a reachgate results store")
        self.db.executescript(
            "BEGIN IMMEDIATE;"
            + _SCHEMA
            + f"INSERT OR IGNORE INTO meta VALUES ('schema_version', '{SCHEMA_VERSION}');"
            + "COMMIT;"
        )

    def _version(self) -> str | None:
        row = self.db.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
        return None if row is None else row[0]

    def _add_missing_columns(self) -> None:
        """Give a store written before a column of _ADDED_COLUMNS that column (once)."""
        for table, columns in _ADDED_COLUMNS.items():
            for name, kind in columns.items():

                def add(db, table=table, name=name, kind=kind) -> None:
                    have = {r[1] for r in db.execute(f"PRAGMA table_info({table})")}
                    if name not in have:  # checked inside the write lock: added once
                        db.execute(f"ALTER TABLE {table} ADD COLUMN {name} {kind}")

                have = {r[1] for r in self.db.execute(f"PRAGMA table_info({table})")}
                if name not in have:
                    self._write(add)

    def _upgrade(self, db: sqlite3.Connection) -> None:
        """Bring an older store to SCHEMA_VERSION (inside _write's transaction, so a second
        process that got there first leaves nothing to do, and a failure changes nothing).
        Version 1 had no row checksums: add the column and seal the rows as they are. Versions
        1 and 2: rename the columns of _RENAMED_COLUMNS."""
        found = self._version()
        if found == str(SCHEMA_VERSION):
            return
        if found == "1":
            db.execute("ALTER TABLE cases ADD COLUMN row_sha256 TEXT")
            for (case_id,) in db.execute("SELECT case_id FROM cases").fetchall():
                db.execute(
                    "UPDATE cases SET row_sha256 = ? WHERE case_id = ?",
                    (_stored_checksum(db, case_id), case_id),
                )
        for table, renamed in _RENAMED_COLUMNS.items():
            have = {r[1] for r in db.execute(f"PRAGMA table_info({table})")}
            for old, new in renamed.items():
                if old in have:
                    db.execute(f"ALTER TABLE {table} RENAME COLUMN {old} TO {new}")
        db.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", (SCHEMA_VERSION,))

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        self.db.close()

    def _write(self, statements) -> None:
        """Run statements(db) in one transaction; a full disk or an I/O fault becomes one
        clear ReachgateError, with every case committed before it kept."""
        db = self.db
        try:
            db.execute("BEGIN IMMEDIATE")
            try:
                statements(db)
                db.execute("COMMIT")
            except BaseException:
                if db.in_transaction:
                    db.execute("ROLLBACK")
                raise
        except sqlite3.OperationalError as error:
            text = str(error)
            if "full" in text:
                raise ReachgateError(
                    f"{self.path}: the disk is full (SQLite: {text}); every case finished "
                    "before is kept: free some space and run the same command to resume"
                ) from None
            raise ReachgateError(f"{self.path}: cannot write the results store ({text})") from None
        except sqlite3.DatabaseError as error:
            raise _damaged(self.path, f"SQLite: {error}") from None

    # -- runs -------------------------------------------------------------------------------

    def start_run(self, **fields) -> int:
        keys = ", ".join(fields)
        marks = ", ".join("?" for _ in fields)
        run_id: list[int] = []
        self._write(
            lambda db: run_id.append(
                db.execute(
                    f"INSERT INTO runs ({keys}) VALUES ({marks})", tuple(fields.values())
                ).lastrowid
            )
        )
        return int(run_id[0])

    def finish_run(self, run_id: int, finished_at: str) -> None:
        self._write(
            lambda db: db.execute(
                "UPDATE runs SET finished_at = ? WHERE run_id = ?", (finished_at, run_id)
            )
        )

    # -- cases ------------------------------------------------------------------------------

    def _raw_rows(self) -> Iterable[tuple[int, dict, list[tuple]]]:
        """(case_id, column -> value under today's names, violation rows in seq order) of
        every stored case."""
        db = self.db
        db.row_factory = sqlite3.Row
        try:
            rows = [_current_names(r.keys(), r) for r in db.execute("SELECT * FROM cases")]
            children: dict[int, list] = {}
            for v in db.execute("SELECT * FROM violations ORDER BY case_id, seq"):
                children.setdefault(v["case_id"], []).append(v)
        finally:
            db.row_factory = None
        for r in rows:
            kids = children.get(r["case_id"], [])
            yield r["case_id"], r, kids

    def _verified(self) -> list[tuple[dict, list[sqlite3.Row]]]:
        """Every case row with its violation rows, each checked against its checksum."""
        out = []
        try:
            for _, row, kids in self._raw_rows():
                stored = row.get("row_sha256")
                if stored is not None or not self.read_only:  # v1 read-only: nothing to check
                    tuples = [_violation_values(k) for k in kids]
                    if stored != row_checksum(row, tuples):
                        raise _damaged(
                            self.path,
                            f"the stored row of case {row['case_name']!r} does not match its "
                            "checksum: it was changed outside reachgate",
                        )
                out.append((row, kids))
        except sqlite3.DatabaseError as error:
            raise _damaged(self.path, f"SQLite: {error}") from None
        return out

    def fingerprints(self) -> dict[str, tuple[str | None, str, str, str]]:
        """case name -> (case sha256, robot sha256, settings json, verdict) of stored rows
        (every row checked against its checksum first, so a changed row is never resumed)."""
        return {
            r["case_name"]: (r["case_sha256"], r["robot_sha256"], r["settings_json"], r["verdict"])
            for r, _ in self._verified()
        }

    def write_case(self, row: dict, violations: list[tuple]) -> int:
        """Replace the case's row and its violation rows in one transaction. -> case_id.

        row: column -> value of table cases (without case_id); violations: tuples of
        (check, axis, severity, start_s, end_s, worst_s, worst, limit, unit, excess_fraction,
        fitting_branches_json).
        The checksum is taken from the values as SQLite stored them (column types applied).
        """
        keys = ", ".join(row)
        marks = ", ".join("?" for _ in row)
        case_id: list[int] = []

        def statements(db) -> None:
            old = db.execute(
                "SELECT case_id FROM cases WHERE case_name = ?", (row["case_name"],)
            ).fetchone()
            if old is not None:
                db.execute("DELETE FROM violations WHERE case_id = ?", (old[0],))
                db.execute("DELETE FROM cases WHERE case_id = ?", (old[0],))
            new_id = int(
                db.execute(
                    f"INSERT INTO cases ({keys}) VALUES ({marks})", tuple(row.values())
                ).lastrowid
            )
            db.executemany(
                "INSERT INTO violations (case_id, seq, check_name, axis, severity, start_s, "
                "end_s, worst_s, worst, limit_value, unit, excess_fraction, "
                "fitting_branches_json) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                [(new_id, i, *v) for i, v in enumerate(violations)],
            )
            db.execute(
                "UPDATE cases SET row_sha256 = ? WHERE case_id = ?",
                (_stored_checksum(db, new_id), new_id),
            )
            case_id.append(new_id)

        self._write(statements)
        return case_id[0]

    def results(self, names: list[str] | None = None) -> tuple[CaseResult, ...]:
        """Stored cases (all, or those named), ranked worst first, each checked against its
        checksum."""
        rows = self._verified()
        if names is not None:
            wanted = set(names)
            rows = [(r, kids) for r, kids in rows if r["case_name"] in wanted]
        return tuple(sorted((_case(r, kids) for r, kids in rows), key=rank_key))


def _fitting_branches(row: sqlite3.Row) -> tuple[str, ...] | None:
    """A stored row's fitting_branches (None in a store written before the column)."""
    text = row["fitting_branches_json"] if "fitting_branches_json" in row.keys() else None
    return None if text is None else tuple(json.loads(text))


def _case(row: dict, children: list[sqlite3.Row]) -> CaseResult:
    violations = tuple(
        Violation(
            check=Check(v["check_name"]),
            axis=v["axis"],
            severity=Severity(v["severity"]),
            start_s=v["start_s"],
            end_s=v["end_s"],
            worst_s=v["worst_s"],
            worst=v["worst"],
            limit=v["limit_value"],
            unit=v["unit"],
            fitting_branches=_fitting_branches(v),
        )
        for v in children
    )
    fractions = tuple(v["excess_fraction"] for v in children)
    failing = [
        (v, f)
        for v, f in zip(violations, fractions, strict=True)
        if v.severity is Severity.VIOLATION
    ]
    first = min(
        (v for v, _ in failing), key=lambda v: (v.start_s, v.check.value, v.axis), default=None
    )
    worst = min(failing, key=lambda p: worst_row_key(p[0].check, p[1]), default=(None, None))[0]
    counts = {k: CheckCount(**c) for k, c in json.loads(row["counts_json"]).items()}
    return CaseResult(
        name=row["case_name"],
        path=row["case_path"],
        verdict=CaseVerdict(row["verdict"]),
        error=row["error"],
        case_sha256=row["case_sha256"],
        robot_name=row["robot_name"],
        robot_sha256=row["robot_sha256"],
        settings=json.loads(row["settings_json"]),
        samples=row["samples"],
        duration_s=row["duration_s"],
        worst_margin=row["worst_margin"],
        worst_margin_axis=row["worst_margin_axis"],
        worst_margin_check=row["worst_margin_check"],
        slowdown=row["slowdown"],
        counts=counts,
        margins=None if row["margins_json"] is None else json.loads(row["margins_json"]),
        violations=violations,
        excess_fractions=fractions,
        first=first,
        worst=worst,
        elapsed_s=row["elapsed_s"],
        checked_at=row["checked_at"],
        worker=row["worker"],
        run_id=row["run_id"],
        case_id=row["case_id"],
        parameters=_parameters(row),
    )


def _parameters(row: dict) -> dict | None:
    if row.get("parameters_json") is None:
        return None
    return json.loads(row["parameters_json"])


class ScanLock:
    """One running scan per store: an exclusive lock on STORE.lock, held while the scan runs.

    The lock is the kernel's (flock), so it dies with its process, kill -9 included; the
    file's text only names the holder for the message. A second scan refuses to start.
    (flock works on a local disk; on a network filesystem it may not: keep stores local.)
    """

    def __init__(self, store_path: Path, what: str) -> None:
        self.path = Path(store_path).with_name(Path(store_path).name + ".lock")
        self.what = what
        self._file = None

    def __enter__(self) -> ScanLock:
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            handle = open(self.path, "a+", encoding="utf-8")
        except OSError as error:
            raise ReachgateError(
                f"{self.path}: cannot create the scan lock ({error.strerror})"
            ) from None
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            handle.seek(0)
            holder = handle.read().strip() or "another process"
            handle.close()
            raise ReachgateError(
                f"{self.path.with_suffix('')}: another scan is running on this store "
                f"({holder}); wait for it to end, or give another --store"
            ) from None
        handle.seek(0)
        handle.truncate()
        handle.write(f"pid {os.getpid()} on {socket.gethostname()}, {self.what}\n")
        handle.flush()
        self._file = handle
        return self

    def __exit__(self, *exc) -> None:
        if self._file is not None:
            self._file.close()  # closing releases the lock
            self._file = None


def load_summary(store_path: str | Path, *, robot_path: str | Path | None = None) -> ScanSummary:
    """Every case in a results store, ranked worst first, without checking anything.

    robot_path: keep only the cases checked with this robot file's content (by sha256), or
    this rig's (the fingerprint of the rig file and every robot file it names).
    """
    path = Path(store_path)
    with Store(path, create=False) as store:
        cases = store.results()
    if robot_path is not None:
        sha = file_fingerprint(robot_path)
        cases = tuple(c for c in cases if c.robot_sha256 == sha)
        if not cases:
            raise ReachgateError(
                f"{path}: no stored case was checked with this content of {robot_path}"
            )
    elif not cases:
        raise ReachgateError(f"{path}: the results store holds no case yet")
    return ScanSummary(store_path=path, cases=cases, counts=batch_counts(cases))
