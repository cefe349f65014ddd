"""The results store under faults: damage inside the file, a row changed behind the program's
back, a full disk, a read-only folder, an old store. Each fault is made for real (bytes
written into the file, SQL run on it, a small tmpfs, a read-only mount) and each must end in
one clear message with exit code 2, or in a report that is right: never a traceback, never a
changed result read as a true one."""

from __future__ import annotations

import shutil
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

import reachgate
from reachgate.batch.scan import load_summary, scan
from reachgate.batch.store import Store
from reachgate.checking.pipeline import CheckSettings
from reachgate.cli import app
from reachgate.errors import ReachgateError
from test_scan import _small_batch, store_contents

from conftest import DEMO_ROBOT

runner = CliRunner()


@pytest.fixture(scope="module")
def robot():
    return reachgate.load_robot(DEMO_ROBOT)


@pytest.fixture(scope="module")
def scanned(robot, tmp_path_factory):
    """Ten small cases (passing and failing) scanned once into a store."""
    folder = tmp_path_factory.mktemp("faults")
    cases = _small_batch(robot, folder / "cases", np.linspace(0.05, 0.45, 10), seed=7100)
    store = folder / "night.sqlite"
    scan(DEMO_ROBOT, cases, CheckSettings(), store_path=store, workers=1)
    return {"cases": cases, "store": store}


def _report(store: Path) -> tuple[int, str]:
    result = runner.invoke(app, ["scan", "--store", str(store), "--report", "--format", "json"])
    return result.exit_code, result.output


@pytest.mark.parametrize("seed", range(12))
def test_garbage_inside_the_store_is_refused_with_one_line_or_reads_true(scanned, tmp_path, seed):
    """8 KiB of random bytes written at a third of the file (seeded), then `scan --report`:
    either SQLite's quick_check or the row checksums refuse the file (exit 2, one line naming
    it), or every stored row still reads back exactly as before the damage."""
    store = tmp_path / "damaged.sqlite"
    shutil.copyfile(scanned["store"], store)
    before = store_contents(scanned["store"])
    data = bytearray(store.read_bytes())
    at = len(data) // 3 + np.random.default_rng(seed).integers(0, 4096)
    data[at : at + 8192] = np.random.default_rng(1000 + seed).bytes(8192)
    store.write_bytes(bytes(data[: max(len(data), at + 8192)]))
    code, output = _report(store)
    if code == 2:
        assert "Traceback" not in output
        assert output.count("\n") == 1 and str(store) in output
        assert "damaged" in output or "not a usable results store" in output
    else:
        assert code == 1  # the batch holds failing cases: the report itself is right
        assert store_contents(store) == before


def test_a_row_changed_outside_reachgate_is_found(scanned, tmp_path):
    """A failing case's verdict turned to pass with plain SQL: its checksum no longer matches,
    so the report refuses the store and a resumed scan does not take the row as checked."""
    store = tmp_path / "edited.sqlite"
    shutil.copyfile(scanned["store"], store)
    db = sqlite3.connect(store)
    name = db.execute("SELECT case_name FROM cases WHERE verdict = 'fail' LIMIT 1").fetchone()[0]
    db.execute("UPDATE cases SET verdict = 'pass' WHERE case_name = ?", (name,))
    db.commit()
    db.close()
    code, output = _report(store)
    assert code == 2
    assert name in output and "checksum" in output
    with pytest.raises(ReachgateError, match="checksum"):
        scan(DEMO_ROBOT, scanned["cases"], CheckSettings(), store_path=store, workers=1)


def test_a_changed_violation_row_is_found(scanned, tmp_path):
    """The checksum covers the interval rows too: a worst value edited down is found."""
    store = tmp_path / "edited_rows.sqlite"
    shutil.copyfile(scanned["store"], store)
    db = sqlite3.connect(store)
    db.execute("UPDATE violations SET worst = worst * 0.5 WHERE rowid = 1")
    db.commit()
    db.close()
    with pytest.raises(ReachgateError, match="checksum"):
        load_summary(store)


def test_a_version_1_store_is_sealed_and_reads_the_same(scanned, tmp_path):
    """A store written before the checksums (schema 1) is brought to schema 2 when a scan
    opens it, reads back the same rows, and from then on its rows are checked."""
    store = tmp_path / "old.sqlite"
    shutil.copyfile(scanned["store"], store)
    db = sqlite3.connect(store)
    db.execute("UPDATE meta SET value = '1' WHERE key = 'schema_version'")
    db.execute("ALTER TABLE cases DROP COLUMN row_sha256")
    db.commit()
    db.close()
    before = load_summary(store)  # read-only: a schema 1 store is read as it is
    Store(store).close()  # opened for writing: upgraded
    assert sqlite3.connect(store).execute("SELECT value FROM meta").fetchone() == ("3",)
    assert load_summary(store).as_dict() == before.as_dict()


#: The cases table as schema 2 wrote it (its check name in worst_margin_limit), kept here as
#: it was so that the test does not depend on the program's own DDL.
_SCHEMA_2_CASES = """
CREATE TABLE cases (
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
    worst_margin_limit TEXT,
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
)"""


def _schema_2_copy(store: Path, into: Path) -> None:
    """A schema 2 store holding the rows (checksums included) of a schema 3 store."""
    db = sqlite3.connect(into)
    db.execute("ATTACH DATABASE ? AS new", (str(store),))
    for name, sql in db.execute("SELECT name, sql FROM new.sqlite_master WHERE type='table'"):
        db.execute(_SCHEMA_2_CASES if name == "cases" else sql)
        db.execute(f"INSERT INTO main.{name} SELECT * FROM new.{name}")
    db.execute("UPDATE main.meta SET value = '2' WHERE key = 'schema_version'")
    db.commit()
    db.execute("DETACH DATABASE new")
    db.close()


def _cases_columns(store: Path) -> set[str]:
    with sqlite3.connect(store) as db:
        return {r[1] for r in db.execute("PRAGMA table_info(cases)")}


def test_a_version_2_store_is_read_as_it_is_and_renamed_when_opened_to_write(scanned, tmp_path):
    """Schema 2 kept the check of the worst margin in a column named worst_margin_limit. Read
    only, such a store reads the same cases as today's (checksums verified) and is not
    changed by a byte; opened for writing, the column is renamed to worst_margin_check in one
    transaction, the rows read the same, and their checksums still hold: an edited row is
    still found."""
    store = tmp_path / "v2.sqlite"
    _schema_2_copy(scanned["store"], store)
    assert "worst_margin_limit" in _cases_columns(store)
    file_before = store.read_bytes()
    today = load_summary(scanned["store"]).as_dict()
    read = load_summary(store).as_dict()
    assert read["results"] == today["results"]
    assert {r["worst_margin_check"] for r in read["results"]} <= {"position", "speed", "accel"}
    assert all("worst_margin_limit" not in r for r in read["results"])
    assert store.read_bytes() == file_before  # reading changed nothing
    code, output = _report(store)
    assert code == 1 and '"worst_margin_check"' in output

    Store(store).close()  # opened for writing: migrated
    columns = _cases_columns(store)
    assert "worst_margin_check" in columns and "worst_margin_limit" not in columns
    with sqlite3.connect(store) as db:
        assert db.execute("SELECT value FROM meta").fetchone() == ("3",)
    assert load_summary(store).as_dict()["results"] == today["results"]
    with sqlite3.connect(store) as db:
        db.execute("UPDATE cases SET worst_margin_check = 'jerk' WHERE rowid = 1")
    with pytest.raises(ReachgateError, match="checksum"):
        load_summary(store)


def test_a_schema_2_store_migrated_by_a_scan_resumes_every_case(scanned):
    """A scan that opens a schema 2 store migrates it and takes every stored case as checked
    (the checksums verified under the new column name): nothing is checked again. The copy
    sits beside the original, since cases are known by their path relative to the store."""
    store = scanned["store"].with_name("v2_resumed.sqlite")
    _schema_2_copy(scanned["store"], store)
    summary = scan(DEMO_ROBOT, scanned["cases"], CheckSettings(), store_path=store, workers=1)
    assert (summary.checked, summary.resumed) == (0, len(scanned["cases"]))
    assert "worst_margin_check" in _cases_columns(store)


def _mount_tmpfs(where: Path, size: str) -> bool:
    where.mkdir()
    done = subprocess.run(
        ["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(where)], capture_output=True
    )
    return done.returncode == 0


def _unmount(where: Path) -> None:
    subprocess.run(["umount", "-l", str(where)], capture_output=True)


def test_a_full_disk_gives_one_message_and_keeps_the_cases_finished_before(robot, tmp_path):
    """A real small filesystem (tmpfs of 200 KiB) holds the store; the scan fills it. The CLI
    prints one line naming the store and the full disk, exit 2, and the store opens cleanly
    with the cases finished before the disk filled."""
    disk = tmp_path / "small"
    if not _mount_tmpfs(disk, "200k"):
        pytest.skip("this machine does not let the test mount a small tmpfs (needs root)")
    try:
        cases = _small_batch(robot, tmp_path / "cases", np.linspace(0.3, 0.45, 40), seed=7200)
        store = disk / "full.sqlite"
        result = subprocess.run(
            [sys.executable, "-m", "reachgate", "scan", str(DEMO_ROBOT), *map(str, cases),
             "--store", str(store), "--workers", "1", "--quiet"],
            capture_output=True, text=True, timeout=300,
        )  # fmt: skip
        assert result.returncode == 2, result.stderr
        assert "Traceback" not in result.stderr
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1 and "disk is full" in lines[0] and str(store) in lines[0]
        kept = load_summary(store)  # consistent: opens, every row matches its checksum
        assert 0 < len(kept.cases) < len(cases)
    finally:
        _unmount(disk)


def test_report_reads_a_store_on_a_read_only_disk(scanned, tmp_path):
    """`scan --report` on a store in a read-only mount (root cannot write there either)."""
    disk = tmp_path / "ro"
    if not _mount_tmpfs(disk, "4m"):
        pytest.skip("this machine does not let the test mount a tmpfs (needs root)")
    try:
        shutil.copyfile(scanned["store"], disk / "night.sqlite")
        remount = subprocess.run(["mount", "-o", "remount,ro", str(disk)], capture_output=True)
        if remount.returncode != 0:
            pytest.skip("this machine does not let the test remount read-only")
        code, output = _report(disk / "night.sqlite")
        assert code == 1 and '"verdicts"' in output  # the batch holds failing cases
        assert sorted(p.name for p in disk.iterdir()) == ["night.sqlite"]  # nothing written
    finally:
        _unmount(disk)


def test_a_second_scan_on_a_running_store_refuses_and_names_the_first(robot, tmp_path):
    """While one scan holds the store, a second one (other settings) refuses with exit 2 and
    names the running one; once the first is killed (-9), its lock dies with it and a scan
    starts again."""
    cases = _small_batch(robot, tmp_path / "cases", np.linspace(0.3, 0.45, 30), seed=7300)
    store = tmp_path / "busy.sqlite"
    first = subprocess.Popen(
        [sys.executable, "-m", "reachgate", "scan", str(DEMO_ROBOT), *map(str, cases),
         "--store", str(store), "--workers", "1", "--quiet"],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )  # fmt: skip
    try:
        lock = store.with_name("busy.sqlite.lock")
        deadline = time.monotonic() + 60
        while f"pid {first.pid}" not in (lock.read_text() if lock.exists() else ""):
            assert time.monotonic() < deadline and first.poll() is None
            time.sleep(0.05)
        second = runner.invoke(
            app, ["scan", str(DEMO_ROBOT), str(cases[0]), "--store", str(store), "--rail",
                  "follow", "--quiet"],
        )  # fmt: skip
        assert second.exit_code == 2
        assert "another scan is running" in second.output and f"pid {first.pid}" in second.output
    finally:
        first.kill()
        first.wait()
    again = runner.invoke(
        app, ["scan", str(DEMO_ROBOT), str(cases[0]), "--store", str(store), "--quiet"]
    )
    assert again.exit_code in (0, 1), again.output
