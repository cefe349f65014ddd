"""A cluster worker set up for checking cases (batch/worker_process.py): heap reuse while
Dask's MALLOC_TRIM_THRESHOLD_ is pinned, one BLAS thread, and the worker put back after.

Sources: mallopt(3) (Linux man-pages) on M_MMAP_THRESHOLD: glibc raises the threshold by itself
when a mapped block is freed, unless a threshold or M_TOP_PAD/M_MMAP_MAX was set, by mallopt or
by the MALLOC_*_ environment variables; Dask's distributed.yaml sets MALLOC_TRIM_THRESHOLD_ in
``distributed.nanny.pre-spawn-environ``. threadpoolctl's threadpool_info() reports the
BLAS pools' thread counts.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap

import pytest

from reachgate.batch.scan import _run_local
from reachgate.batch.worker_process import pinned_thresholds
from reachgate.checking.pipeline import CheckSettings

from conftest import DEMO_ROBOT


def test_pinned_thresholds_read_from_the_malloc_variables_or_none_when_glibc_adjusts():
    assert pinned_thresholds({}) is None
    assert pinned_thresholds({"OMP_NUM_THREADS": "1"}) is None
    assert pinned_thresholds({"MALLOC_TRIM_THRESHOLD_": "65536"}) == (65536, 128 * 1024)
    assert pinned_thresholds({"MALLOC_MMAP_MAX_": "0", "MALLOC_MMAP_THRESHOLD_": "4096"}) == (
        128 * 1024,
        4096,
    )
    # a value glibc would read differently from us is left alone: nothing to put back safely
    assert pinned_thresholds({"MALLOC_TRIM_THRESHOLD_": "64k"}) is None


FAULTS_SCRIPT = textwrap.dedent(
    """
    import json, resource
    import numpy as np
    from reachgate.batch.worker_process import steady_worker

    def faults(rounds=40):
        before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
        for _ in range(rounds):
            block = np.ones(256 * 1024)  # 2 MiB: above the default mmap threshold
            del block
        return resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before

    faults(2)
    outside = faults()
    with steady_worker():
        faults(2)
        inside = faults()
    after = faults()
    print(json.dumps({"outside": outside, "inside": inside, "after": after}))
    """
)


@pytest.mark.skipif(sys.platform != "linux", reason="glibc's malloc thresholds: Linux only")
def test_under_a_pinned_trim_threshold_large_arrays_reuse_the_heap_inside_and_not_after():
    """With Dask's MALLOC_TRIM_THRESHOLD_=65536 every 2 MiB array is mapped and faulted in anew
    (512 page faults each); inside steady_worker() the heap is reused; after it, the
    environment's setting holds again."""
    try:
        os.confstr("CS_GNU_LIBC_VERSION")
    except (ValueError, OSError):
        pytest.skip("not glibc")
    env = {**os.environ, "MALLOC_TRIM_THRESHOLD_": "65536"}
    done = subprocess.run(
        [sys.executable, "-c", FAULTS_SCRIPT], env=env, capture_output=True, text=True, check=True
    )
    faults = json.loads(done.stdout)
    pages = 40 * 2 * 1024 * 1024 // 4096
    assert faults["outside"] > 0.8 * pages  # the slow path is real here
    assert faults["inside"] < 0.05 * pages
    assert faults["after"] > 0.8 * pages  # put back as the owner configured it


BLAS_SCRIPT = textwrap.dedent(
    """
    import json, threading
    from threadpoolctl import threadpool_info
    from reachgate.batch import scan, worker_process
    from reachgate.batch.worker_process import steady_worker

    def blas():
        return sorted({p["num_threads"] for p in threadpool_info() if p["user_api"] == "blas"})

    seen = {"start": blas()}
    with steady_worker():
        seen["inside"] = blas()
    seen["after"] = blas()

    # two tasks of one worker in two threads: the setting holds until the last one leaves
    first_in, second_in, first_out = threading.Event(), threading.Event(), threading.Event()

    def first():
        with steady_worker():
            first_in.set()
            second_in.wait(10)
        first_out.set()

    worker = threading.Thread(target=first)
    worker.start()
    first_in.wait(10)
    with steady_worker():
        second_in.set()
        first_out.wait(10)
        seen["second task alone"] = blas()
    worker.join(10)
    seen["after both"] = blas()
    seen["active after both"] = worker_process._active

    # a cluster task checks its cases inside
    scan.check_case = lambda path, *_: blas()
    seen["in check_cases"] = scan.check_cases(["a.csv", "b.csv"], None, b"", "robot")
    print(json.dumps(seen))
    """
)


def test_blas_runs_one_thread_inside_a_task_until_the_last_task_of_the_worker_leaves():
    """Run where a Dask worker runs its tasks: in threads other than the main one (OpenBLAS
    ignores a count set from another thread once the main thread has set one, so the main
    thread sets none here; two BLAS threads come from OPENBLAS_NUM_THREADS=2)."""
    env = {**os.environ, "OPENBLAS_NUM_THREADS": "2"}
    done = subprocess.run(
        [sys.executable, "-c", BLAS_SCRIPT], env=env, capture_output=True, text=True, check=True
    )
    seen = json.loads(done.stdout)
    if not seen["start"]:
        pytest.skip("numpy without a BLAS that threadpoolctl sees")
    assert seen == {
        "start": [2],
        "inside": [1],
        "after": [2],
        "second task alone": [1],
        "after both": [2],
        "active after both": 0,
        "in check_cases": [[1], [1]],
    }


def _heap_faults_task(case_path, settings, robot_raw, robot_label):
    """Stands in for check_case: page faults of 40 arrays of 2 MiB made and freed in turn."""
    import resource

    import numpy as np

    before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
    for _ in range(40):
        block = np.ones(256 * 1024)
        del block
    return {
        "case_path": case_path,
        "faults": resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before,
    }


@pytest.mark.skipif(sys.platform != "linux", reason="glibc's malloc thresholds: Linux only")
def test_local_workers_keep_their_heap_when_they_inherit_a_pinned_trim_threshold(
    tmp_path, monkeypatch
):
    """A scan run from a process that started a Dask LocalCluster inherits the nanny's
    MALLOC_TRIM_THRESHOLD_ (it sets it in the process that starts it); scan's own workers
    still reuse their heap."""
    try:
        os.confstr("CS_GNU_LIBC_VERSION")
    except (ValueError, OSError):
        pytest.skip("not glibc")
    monkeypatch.setenv("MALLOC_TRIM_THRESHOLD_", "65536")
    paths = [str(tmp_path / f"c{k}.csv") for k in range(2)]
    results = list(
        _run_local(
            paths, CheckSettings(), DEMO_ROBOT.read_bytes(), "demo", 1, task=_heap_faults_task
        )
    )
    pages = 40 * 2 * 1024 * 1024 // 4096
    assert len(results) == 2
    assert all(r["faults"] < 0.05 * pages for r in results[1:])  # the first maps the heap once
