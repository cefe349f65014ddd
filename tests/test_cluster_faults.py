"""`scan --cluster` when the cluster fails: a real Dask scheduler and worker, started on
127.0.0.1 by the test as separate processes and stopped by it. A scheduler killed mid-scan,
or one with no worker, must end the scan within a bounded time (documented in the README),
with exit code 3, one message that says what happened and how to resume, and a store that
holds every case finished before."""

from __future__ import annotations

import ctypes
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

import reachgate
from reachgate.batch import scan as scan_module
from reachgate.batch.scan import _cases_per_task, load_summary
from reachgate.errors import ClusterLostError
from test_scan import _small_batch

from conftest import DEMO_ROBOT

pytest.importorskip("dask.distributed")

#: The scan's own bound plus start-up and shutdown: what the test allows in all.
ENDS_WITHIN_S = scan_module.CLUSTER_NO_WORKER_S + 45.0


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _die_with_the_tests() -> None:
    """In a child before exec: SIGTERM when the test process ends, however it ends (Linux
    prctl PR_SET_PDEATHSIG), so a killed test run leaves no scheduler or worker behind."""
    pr_set_pdeathsig = 1
    ctypes.CDLL(None, use_errno=True).prctl(pr_set_pdeathsig, signal.SIGTERM)


def _start(args: list[str]) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", *args], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
        preexec_fn=_die_with_the_tests,
    )  # fmt: skip


def _stop(*procs: subprocess.Popen) -> None:
    for proc in procs:
        if proc.poll() is None:
            proc.kill()
        proc.wait(timeout=30)


def _scheduler(port: int) -> subprocess.Popen:
    proc = _start(["distributed.cli.dask_scheduler", "--host", "127.0.0.1", "--port", str(port),
                   "--dashboard-address", ":0"])  # fmt: skip
    deadline = time.monotonic() + 30
    while True:
        try:
            socket.create_connection(("127.0.0.1", port), timeout=1).close()
            return proc
        except OSError:
            assert time.monotonic() < deadline and proc.poll() is None, "no scheduler"
            time.sleep(0.2)


def _scan(address: str, cases: list[Path], store: Path) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "reachgate", "scan", str(DEMO_ROBOT), *map(str, cases),
         "--store", str(store), "--cluster", address, "--quiet"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        preexec_fn=_die_with_the_tests,
    )  # fmt: skip


@pytest.fixture(scope="module")
def cases(tmp_path_factory):
    robot = reachgate.load_robot(DEMO_ROBOT)
    folder = tmp_path_factory.mktemp("cluster_cases")
    return _small_batch(robot, folder, np.linspace(0.05, 0.45, 60), seed=7400)


def test_a_scheduler_killed_mid_scan_ends_the_scan_with_exit_3_and_keeps_the_cases(cases, tmp_path):
    port = _free_port()
    scheduler = _scheduler(port)
    address = f"tcp://127.0.0.1:{port}"
    worker = _start(["distributed.cli.dask_worker", address, "--nthreads", "1",
                     "--dashboard-address", ":0"])  # fmt: skip
    store = tmp_path / "lost.sqlite"
    scan = _scan(address, cases, store)
    try:
        deadline = time.monotonic() + 120
        while not (store.exists() and _stored(store) >= 3):  # some cases are done
            assert time.monotonic() < deadline and scan.poll() is None, scan.stderr
            time.sleep(0.2)
        scheduler.kill()
        killed_at = time.monotonic()
        _, err = scan.communicate(timeout=ENDS_WITHIN_S)
        took = time.monotonic() - killed_at
    finally:
        _stop(scan, worker, scheduler)
    assert scan.returncode == 3, err
    assert took < ENDS_WITHIN_S
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "lost" in lines[0] and "resume" in lines[0]
    kept = load_summary(store)  # consistent: opens, every row matches its checksum
    assert 3 <= len(kept.cases) < len(cases)


def test_a_scheduler_without_workers_ends_the_scan_within_the_wait(cases, tmp_path, monkeypatch):
    """The library call, with the wait shortened to 3 s: ClusterLostError (the CLI's exit 3)
    naming the missing workers, and no store written."""
    monkeypatch.setattr(scan_module, "CLUSTER_NO_WORKER_S", 3.0)
    port = _free_port()
    scheduler = _scheduler(port)
    started = time.monotonic()
    try:
        with pytest.raises(ClusterLostError, match="no worker"):
            scan_module.scan(
                DEMO_ROBOT, cases[:2], store_path=tmp_path / "idle.sqlite",
                cluster=f"tcp://127.0.0.1:{port}",
            )  # fmt: skip
    finally:
        _stop(scheduler)
    assert time.monotonic() - started < 3.0 + 15.0
    assert not (tmp_path / "idle.sqlite").exists()


def _stored(store: Path) -> int:
    import sqlite3

    try:
        with sqlite3.connect(f"{store.resolve().as_uri()}?mode=ro", uri=True) as db:
            return db.execute("SELECT count(*) FROM cases").fetchone()[0]
    except sqlite3.Error:
        return 0


def test_cases_per_task_gives_every_thread_several_tasks():
    assert _cases_per_task(1000, 2) == 16
    assert _cases_per_task(40, 2) == 5
    assert _cases_per_task(3, 8) == 1
