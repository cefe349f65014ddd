"""`scan`: verdicts equal to `check` case by case, resume after kill -9, Dask, errors, CLI."""

from __future__ import annotations

import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

import reachgate
from reachgate.batch.scan import (
    WORKER_THREAD_VARIABLES,
    ScanProgress,
    _run_local,
    check_case,
    discover_cases,
    load_summary,
    scan,
)
from reachgate.batch.store import CaseVerdict
from reachgate.checking.pipeline import CheckSettings, check
from reachgate.cli import app
from reachgate.kinematics.chain import forward
from reachgate.model.trajectory import Trajectory, load_trajectory, write_trajectory
from reachgate.model.transforms import matrix_to_quat, rpy_to_matrix
from reachgate.render.scan_report import render_summary, render_table

from conftest import DEMO_ROBOT

runner = CliRunner()

#: Amplitude bands of the generated batch (m), found by checking the demo arm and kept with
#: a gap on each side: small sways pass, middle ones break only rate limits (accel first),
#: large ones leave the arm's reach.
PASS_AMPLITUDES_M = np.linspace(0.0, 0.15, 20)
RATE_AMPLITUDES_M = np.linspace(0.3, 0.45, 20)
REACH_AMPLITUDES_M = np.linspace(1.5, 2.0, 12)
SWAY_HZ = 0.8
RATE_HZ = 200.0


def sway_case(robot, amplitude_m: float, seed: int, duration_s: float = 6.0, rate_hz=RATE_HZ):
    """A sway around the arm's home TCP pose, scaled by amplitude_m; ±10 % time jitter."""
    rng = np.random.default_rng(seed)
    n = int(duration_s * rate_hz)
    t = np.cumsum(np.r_[0.0, rng.uniform(0.9, 1.1, n) / rate_hz])
    home = forward(robot, robot.home[None])[0]
    w = 2 * np.pi * SWAY_HZ
    # faded in and out over 1 s (septic smoothstep): starts and ends at rest, as a rig case
    # must (check --ends rest)
    u = np.clip(np.minimum(t, t[-1] - t), 0.0, 1.0)
    fade = u**4 * (35.0 + u * (-84.0 + u * (70.0 - 20.0 * u)))
    s = fade * (1.0 - np.cos(w * t))
    p = home[:3, 3] + amplitude_m * np.column_stack([0.3 * s, s, 0.5 * fade * np.sin(0.5 * w * t)])
    zeros = np.zeros_like(t)
    rot = home[:3, :3] @ rpy_to_matrix(np.column_stack([0.5 * amplitude_m * s, zeros, zeros]))
    return Trajectory.from_arrays(t, p, matrix_to_quat(rot))


def write_batch(robot, folder: Path, seed: int) -> dict[str, str]:
    """Write the banded batch; -> file name -> band ("pass" | "rate" | "reach")."""
    folder.mkdir(parents=True, exist_ok=True)
    bands = {}
    plan = [("pass", PASS_AMPLITUDES_M), ("rate", RATE_AMPLITUDES_M), ("reach", REACH_AMPLITUDES_M)]
    k = 0
    for band, amplitudes in plan:
        for amplitude in amplitudes:
            name = f"sway_{k:03d}.csv"
            write_trajectory(
                folder / name,
                sway_case(robot, float(amplitude), seed + k),
                (f"sway test case, amplitude {amplitude:.4f} m",),
            )
            bands[name] = band
            k += 1
    return bands


@pytest.fixture(scope="module")
def robot():
    return reachgate.load_robot(DEMO_ROBOT)


@pytest.fixture(scope="module")
def batch(robot, tmp_path_factory):
    """52 generated cases + one corrupted file in a nested folder, scanned once locally."""
    folder = tmp_path_factory.mktemp("batch")
    bands = write_batch(robot, folder / "sway", seed=1000)
    corrupt = folder / "sway" / "late" / "corrupt.csv"
    corrupt.parent.mkdir()
    good = (folder / "sway" / "sway_000.csv").read_text().splitlines()
    good[40] = good[40].split(",")[0] + ",1.0,oops,2.0,1,0,0,0"
    corrupt.write_text("\n".join(good) + "\n")
    store = folder / "local.sqlite"
    states: list[ScanProgress] = []
    summary = scan(
        DEMO_ROBOT, [folder], CheckSettings(), store_path=store, workers=2, progress=states.append
    )
    return {
        "folder": folder,
        "bands": bands,
        "corrupt": corrupt,
        "store": store,
        "summary": summary,
        "states": states,
    }


def store_contents(store: Path) -> dict[str, tuple]:
    """What a scan found per case (no timings, workers or row ids)."""
    db = sqlite3.connect(store)
    rows = db.execute(
        "SELECT case_id, case_name, case_sha256, robot_sha256, settings_json, verdict, error, "
        "samples, duration_s, worst_margin, worst_margin_axis, worst_margin_check, slowdown, "
        "counts_json, margins_json FROM cases"
    ).fetchall()
    out = {}
    for case_id, name, *fields in rows:
        children = db.execute(
            "SELECT seq, check_name, axis, severity, start_s, end_s, worst_s, worst, "
            "limit_value, unit, excess_fraction FROM violations WHERE case_id = ? ORDER BY seq",
            (case_id,),
        ).fetchall()
        out[name] = (*fields, tuple(children))
    db.close()
    return out


# -- the batch -----------------------------------------------------------------------------


def test_scan_verdicts_violations_and_margins_equal_check_case_by_case(robot, batch):
    by_name = {c.name: c for c in batch["summary"].cases}
    assert len(by_name) == len(batch["bands"]) + 1 >= 50
    for name in batch["bands"]:
        case = by_name[f"sway/{name}"]
        report = check(robot, load_trajectory(batch["folder"] / "sway" / name), CheckSettings())
        assert case.verdict.value == report.verdict.value, name
        assert [v.as_dict() for v in case.violations] == [v.as_dict() for v in report.violations]
        assert case.margins == report.margins
        assert case.slowdown == report.slowdown
        smallest = min(v for m in report.margins.values() for v in m.values())
        assert case.worst_margin == smallest
        assert case.samples == report.samples


def test_generated_bands_give_the_verdicts_they_were_built_for(batch):
    by_name = {c.name: c for c in batch["summary"].cases}
    for name, band in batch["bands"].items():
        case = by_name[f"sway/{name}"]
        failing = {v.check.value for v in case.violations if v.severity.value == "violation"}
        if band == "pass":
            assert case.verdict is CaseVerdict.PASS and case.worst_margin > 0, name
        elif band == "rate":
            assert case.verdict is CaseVerdict.FAIL, name
            assert failing <= {"speed", "accel", "jerk"} and case.slowdown > 1.0, name
            assert case.worst_margin < 0
        else:
            assert "reach" in failing and case.worst.check.value == "reach", name


def test_summary_ranks_errors_then_failures_by_worst_margin(batch):
    cases = batch["summary"].cases
    order = [c.verdict for c in cases]
    assert order == sorted(order, key=[CaseVerdict.ERROR, CaseVerdict.FAIL, CaseVerdict.PASS].index)
    fails = [c.worst_margin for c in cases if c.verdict is CaseVerdict.FAIL]
    assert fails == sorted(fails)


def test_corrupt_case_is_an_error_naming_the_file_and_the_scan_goes_on(batch):
    cases = batch["summary"].cases
    assert cases[0].name == "sway/late/corrupt.csv"
    assert cases[0].verdict is CaseVerdict.ERROR
    assert "corrupt.csv" in cases[0].error and "line 41" in cases[0].error
    assert all(c.verdict is not CaseVerdict.ERROR for c in cases[1:])
    text = render_summary(batch["summary"])
    assert "corrupt.csv" in text and "errors:" in text


def test_table_marks_slowdowns_that_leave_other_violations(batch):
    text = render_table(batch["summary"], width=200)  # wide: no row wraps
    rows = {
        line.split()[1]: line for line in text.splitlines() if line.split()[1:2] and "sway/" in line
    }
    for name, band in batch["bands"].items():
        slow = rows[f"sway/{name}"].split()[-1]
        case = next(c for c in batch["summary"].cases if c.name == f"sway/{name}")
        if band == "rate":
            assert slow == f"{case.slowdown:.3f}"  # time stretch clears every row
        elif band == "reach":
            assert slow in ("-", f"{case.slowdown:.3f}*") if case.slowdown else slow == "-"
    assert "slow-down*: clears the speed, accel, jerk and lag rows only" in text


def test_counts_per_check_add_up_over_the_batch(batch):
    summary = batch["summary"]
    for kind, count in summary.counts.items():
        rows = [v for c in summary.cases for v in c.violations if v.check.value == kind]
        assert count.violations == sum(v.severity.value == "violation" for v in rows)
        assert count.near == sum(v.severity.value == "near" for v in rows)


def test_progress_reports_every_case_and_the_failures(batch):
    states = batch["states"]
    total = len(batch["bands"]) + 1
    assert states[0] == ScanProgress(0, total, 0, 0)
    assert [s.done for s in states] == list(range(total + 1))
    assert states[-1].failing == sum(c.failed for c in batch["summary"].cases)


def test_store_reads_back_the_same_summary(batch):
    again = load_summary(batch["store"])
    assert [c.as_dict() for c in again.cases] == [c.as_dict() for c in batch["summary"].cases]


def test_dask_local_cluster_gives_the_same_store_as_local_workers(batch):
    distributed = pytest.importorskip("dask.distributed")
    store = batch["folder"] / "dask.sqlite"  # beside the local store: same case names
    with distributed.LocalCluster(
        n_workers=2, processes=True, threads_per_worker=1, dashboard_address=None
    ) as cluster:
        summary = scan(
            DEMO_ROBOT, [batch["folder"]], CheckSettings(), store_path=store,
            cluster=cluster.scheduler_address,
        )  # fmt: skip
    assert summary.checked == len(batch["bands"]) + 1
    local = store_contents(batch["store"])
    assert set(local) == {f"sway/{n}" for n in batch["bands"]} | {"sway/late/corrupt.csv"}
    # The two stores lie in the same folder, so the case names and the error texts agree.
    assert store_contents(store) == local
    workers = {c.worker for c in summary.cases}
    assert len(workers) == 2  # both cluster workers took cases


# -- resume --------------------------------------------------------------------------------


def _rows(store: Path) -> dict[str, tuple]:
    db = sqlite3.connect(store)
    rows = db.execute("SELECT case_name, case_id, checked_at, run_id FROM cases").fetchall()
    db.close()
    return {name: rest for name, *rest in rows}


def _count(store: Path) -> int:
    try:
        db = sqlite3.connect(f"file:{store}?mode=ro", uri=True, timeout=0.2)
        try:
            return db.execute("SELECT count(*) FROM cases").fetchone()[0]
        finally:
            db.close()
    except sqlite3.Error:
        return 0


def _group_gone(pgid: int, timeout_s: float) -> bool:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        try:
            os.killpg(pgid, 0)
        except ProcessLookupError:
            return True
        time.sleep(0.1)
    return False


def test_kill_9_then_resume_keeps_every_case_once_and_checks_none_twice(robot, tmp_path):
    folder = tmp_path / "cases"
    folder.mkdir()
    n_cases = 80
    rng = np.random.default_rng(2024)
    for k in range(n_cases):
        path = sway_case(robot, float(rng.uniform(0.0, 0.4)), 3000 + k, duration_s=10.0)
        write_trajectory(folder / f"c{k:03d}.csv", path)
    store = tmp_path / "kill.sqlite"
    command = [sys.executable, "-m", "reachgate", "scan", str(DEMO_ROBOT), str(folder)]
    command += ["--store", str(store), "--workers", "1", "--quiet"]
    proc = subprocess.Popen(
        command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, start_new_session=True
    )
    try:
        deadline = time.monotonic() + 60
        while _count(store) < 5 and proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.01)
        assert proc.poll() is None, "the scan ended before it could be killed"
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=10)
        # The worker notices its scan process is gone and leaves (no orphans).
        assert _group_gone(proc.pid, timeout_s=10)
    finally:
        if proc.poll() is None:
            proc.kill()
        try:
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    db = sqlite3.connect(store)
    assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    db.close()
    before = _rows(store)
    assert 5 <= len(before) < n_cases

    rerun = subprocess.run(command, capture_output=True, text=True, timeout=120)
    assert rerun.returncode == 1, rerun.stderr  # the batch holds failing cases
    after = _rows(store)
    assert sorted(after) == [f"cases/c{k:03d}.csv" for k in range(n_cases)]  # each case once
    for name, row in before.items():
        assert after[name] == row  # same row id, same check time, first run: not re-checked
    assert {after[n][2] for n in set(after) - set(before)} == {2}
    db = sqlite3.connect(store)
    runs = db.execute("SELECT run_id, cases, resumed FROM runs ORDER BY run_id").fetchall()
    db.close()
    assert runs == [(1, n_cases, 0), (2, n_cases, len(before))]
    assert f"taken from the store unchanged: {len(before)}" in rerun.stdout


def test_ctrl_c_stops_cleanly_with_exit_130_and_the_store_intact(robot, tmp_path):
    folder = tmp_path / "cases"
    folder.mkdir()
    for k in range(60):
        path = sway_case(robot, 0.1, 5000 + k, duration_s=10.0)
        write_trajectory(folder / f"c{k:03d}.csv", path)
    store = tmp_path / "int.sqlite"
    command = [sys.executable, "-m", "reachgate", "scan", str(DEMO_ROBOT), str(folder)]
    command += ["--store", str(store), "--workers", "2"]
    proc = subprocess.Popen(
        command,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,
    )
    try:
        deadline = time.monotonic() + 60
        while _count(store) < 3 and proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.01)
        assert proc.poll() is None, "the scan ended before it could be interrupted"
        os.killpg(proc.pid, signal.SIGINT)  # what Ctrl-C in a terminal does
        out, err = proc.communicate(timeout=30)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
    assert proc.returncode == 130
    assert "interrupted" in err and "resume" in err and "Traceback" not in err
    assert out == ""  # no summary of a batch that did not finish
    db = sqlite3.connect(store)
    assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert 3 <= db.execute("SELECT count(*) FROM cases").fetchone()[0] < 60
    assert db.execute("SELECT finished_at FROM runs").fetchall() == [(None,)]
    db.close()


def _small_batch(robot, folder: Path, amplitudes, seed: int) -> list[Path]:
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for k, amplitude in enumerate(amplitudes):
        paths.append(folder / f"s{k}.csv")
        write_trajectory(paths[-1], sway_case(robot, amplitude, seed + k, duration_s=4.0))
    return paths


def test_changed_content_settings_or_fresh_trigger_a_recheck(robot, tmp_path):
    paths = _small_batch(robot, tmp_path / "c", [0.05, 0.1, 0.35], seed=4100)
    store = tmp_path / "s.sqlite"
    first = scan(DEMO_ROBOT, [tmp_path / "c"], store_path=store, workers=1)
    assert (first.checked, first.resumed) == (3, 0)
    assert scan(DEMO_ROBOT, paths, store_path=store, workers=1).resumed == 3
    write_trajectory(paths[0], sway_case(robot, 0.4, 4199, duration_s=4.0))
    changed = scan(DEMO_ROBOT, paths, store_path=store, workers=1)
    assert (changed.checked, changed.resumed) == (1, 2)
    assert {c.name: c.verdict for c in changed.cases}["c/s0.csv"] is CaseVerdict.FAIL
    other = CheckSettings(lag_s=0.02)
    assert scan(DEMO_ROBOT, paths, other, store_path=store, workers=1).checked == 3
    assert scan(DEMO_ROBOT, paths, other, store_path=store, workers=1, fresh=True).checked == 3
    assert len(_rows(store)) == 3  # one row per case, replaced on each re-check


def test_default_store_lies_in_the_cases_common_folder(robot, tmp_path):
    _small_batch(robot, tmp_path / "a" / "x", [0.05], seed=4200)
    _small_batch(robot, tmp_path / "a" / "y", [0.05], seed=4300)
    summary = scan(DEMO_ROBOT, [str(tmp_path / "a" / "*" / "*.csv")], workers=1)
    assert summary.store_path == (tmp_path / "a" / "reachgate_scan.sqlite").resolve()
    assert sorted(c.name for c in summary.cases) == ["x/s0.csv", "y/s0.csv"]


def _dying_task(case_path, settings, robot_raw, robot_label):
    """Stands in for check_case; the worker dies on one case, as in a hard crash."""
    if case_path.endswith("s1.csv"):
        os._exit(3)
    return check_case(case_path, settings, robot_raw, robot_label)


def test_a_case_that_kills_its_worker_is_an_error_and_the_others_are_checked(robot, tmp_path):
    paths = [str(p) for p in _small_batch(robot, tmp_path, [0.05] * 5, seed=4400)]
    raw = DEMO_ROBOT.read_bytes()
    results = list(_run_local(paths, CheckSettings(), raw, "demo", 2, task=_dying_task))
    by_path = {r["case_path"]: r for r in results}
    assert sorted(by_path) == sorted(paths) and len(results) == len(paths)
    assert by_path[paths[1]]["verdict"] == "error"
    assert "worker process died" in by_path[paths[1]]["error"]
    assert all(by_path[p]["verdict"] == "pass" for p in paths if p != paths[1])


def _thread_settings_task(case_path, settings, robot_raw, robot_label):
    """Stands in for check_case: reports the worker's thread-pool variables."""
    return {"case_path": case_path, **{k: os.environ.get(k) for k in WORKER_THREAD_VARIABLES}}


def test_workers_start_with_one_blas_thread_and_the_parent_keeps_its_environment(
    tmp_path, monkeypatch
):
    for name in WORKER_THREAD_VARIABLES:
        monkeypatch.delenv(name, raising=False)
    monkeypatch.setenv("OMP_NUM_THREADS", "3")  # a user's own choice is kept
    paths = [str(tmp_path / f"c{k}.csv") for k in range(2)]
    raw = DEMO_ROBOT.read_bytes()
    results = list(_run_local(paths, CheckSettings(), raw, "demo", 2, task=_thread_settings_task))
    assert len(results) == 2
    for result in results:
        assert result["OPENBLAS_NUM_THREADS"] == "1" and result["MKL_NUM_THREADS"] == "1"
        assert result["OMP_NUM_THREADS"] == "3"
    assert "OPENBLAS_NUM_THREADS" not in os.environ


def test_discovery_takes_files_folders_and_globs_once_each(tmp_path):
    (tmp_path / "d" / "e").mkdir(parents=True)
    for name in ("d/a.csv", "d/e/b.csv", "d/notes.txt", "c.csv"):
        (tmp_path / name).write_text("t_s\n")
    found = discover_cases([tmp_path / "d", str(tmp_path / "*.csv"), tmp_path / "d" / "a.csv"])
    assert [p.name for p in found] == ["a.csv", "b.csv", "c.csv"]
    with pytest.raises(reachgate.ReachgateError, match="no case found"):
        discover_cases([str(tmp_path / "*.nothing")])
    with pytest.raises(reachgate.ReachgateError, match=r"missing\.csv: no such"):
        discover_cases([tmp_path / "missing.csv"])


# -- the command line ----------------------------------------------------------------------


def test_cli_exit_codes_and_report_reprints_without_checking(robot, tmp_path):
    _small_batch(robot, tmp_path / "ok", [0.0, 0.1], seed=4500)
    _small_batch(robot, tmp_path / "bad", [0.05, 0.4], seed=4600)
    ok_store, bad_store = tmp_path / "ok.sqlite", tmp_path / "bad.sqlite"
    common = ["--workers", "1"]
    passed = runner.invoke(
        app, ["scan", str(DEMO_ROBOT), str(tmp_path / "ok"), "--store", str(ok_store), *common]
    )
    assert passed.exit_code == 0, passed.output
    assert "2 cases" in passed.output and "2 pass, 0 fail, 0 error" in passed.output
    assert "not a safety validation" in passed.output and "\x1b[" not in passed.output

    failed = runner.invoke(
        app,
        ["scan", str(DEMO_ROBOT), str(tmp_path / "bad"), "--store", str(bad_store), *common],
    )
    assert failed.exit_code == 1
    rows_before = _rows(bad_store)

    report = runner.invoke(app, ["scan", "--store", str(bad_store), "--report"])
    assert report.exit_code == 1
    assert _ranked_table(failed.output) == _ranked_table(report.output)
    assert _rows(bad_store) == rows_before  # nothing re-checked
    db = sqlite3.connect(bad_store)
    assert db.execute("SELECT count(*) FROM runs").fetchone()[0] == 1
    db.close()

    as_json = runner.invoke(
        app, ["scan", str(DEMO_ROBOT), "--store", str(bad_store), "--report", "--format", "json"]
    )
    data = json.loads(as_json.stdout)
    assert data["verdicts"] == {"pass": 1, "fail": 1, "error": 0}
    assert data["results"][0]["verdict"] == "fail"

    out = tmp_path / "summary.csv"
    as_csv = runner.invoke(
        app, ["scan", "--store", str(ok_store), "--report", "--format", "csv", "--out", str(out)]
    )
    assert as_csv.exit_code == 0
    lines = out.read_text().splitlines()
    assert lines[0].startswith("rank,case,verdict,worst_margin") and len(lines) == 3


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["scan", str(DEMO_ROBOT), "{tmp}/empty"], "no case found"),
        (["scan", str(DEMO_ROBOT), "{tmp}/none.csv"], "none.csv: no such case file"),
        (["scan", "{tmp}/robot.toml", "{tmp}/empty"], "robot.toml"),
        (["scan", str(DEMO_ROBOT), "{tmp}/empty", "--rail-at", "99"], "--rail-at"),
        (["scan", "--report"], "--store"),
        (["scan", "--report", "--store", "{tmp}/none.sqlite"], "no such results store"),
        (["scan", "--report", "--store", "{tmp}/robot.toml"], "not a usable results store"),
        (["scan", str(DEMO_ROBOT)], "at least one case"),
        (["scan", str(DEMO_ROBOT), "{tmp}/empty", "--workers", "0"], "--workers"),
        (["scan", str(DEMO_ROBOT), "{tmp}/empty", "--workers", "2", "--cluster", "x"], "give one"),
    ],
)
def test_cli_bad_input_exits_2_with_one_line(tmp_path, args, message):
    (tmp_path / "empty").mkdir()
    (tmp_path / "empty" / "a.csv").write_text("t_s,x_m\n")
    (tmp_path / "robot.toml").write_text("name = 'x'\n[[joints]]\nname = 3\n")
    keep_case = {"--rail-at", "--workers"} & set(args) or "robot.toml" in " ".join(args)
    if not keep_case:
        (tmp_path / "empty" / "a.csv").unlink()
    result = runner.invoke(app, [a.replace("{tmp}", str(tmp_path)) for a in args])
    assert result.exit_code == 2, result.output
    assert message in result.output
    assert "Traceback" not in result.output


def _ranked_table(output: str) -> list[str]:
    """The lines of the ranked table in a scan's text summary (between its title and the note
    on margins)."""
    lines = output.splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith("ranked worst first"))
    end = next(i for i, line in enumerate(lines) if line.startswith("margins:"))
    assert end > start + 2
    return lines[start + 1 : end]
