"""Many cases in one go (DESIGN §5 `scan`): discovery, workers, resume, the ranked results.

Workers (local processes, or the workers of an existing Dask scheduler) check one case each
and hand back a plain dict; only the calling process writes the results store (store.py).
A case whose content, robot file and settings match its stored row is not checked again.
"""

from __future__ import annotations

import glob
import hashlib
import json
import math
import multiprocessing
import os
import signal
import socket
import threading
import time
import traceback
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from contextlib import ExitStack, closing, contextmanager
from dataclasses import dataclass, replace
from datetime import UTC, datetime
from pathlib import Path

from reachgate.batch.model_files import RigFiles, fingerprint, read_model_files, scan_settings
from reachgate.batch.store import (
    CaseResult,
    CaseVerdict,
    ScanLock,
    ScanSummary,
    Store,
    batch_counts,
    load_summary,
)
from reachgate.batch.worker_process import keep_heap, steady_worker
from reachgate.checking.intervals import Check, Severity
from reachgate.checking.pipeline import CheckSettings, check
from reachgate.checking.rail import rail_positions
from reachgate.checking.rig_check import RailChoice, check_rig, robot_settings
from reachgate.errors import ClusterLostError, ReachgateError
from reachgate.model.columnar import COLUMNAR_SUFFIXES
from reachgate.model.rig import Rig
from reachgate.model.robot import Robot, parse_toml_bytes, robot_from_dict
from reachgate.model.trajectory import import_fast_reader, load_scenario, load_trajectory
from reachgate.motion.case_parameters import read_case_parameters
from reachgate.version import __version__

__all__ = [
    "DEFAULT_STORE_NAME",
    "CaseResult",
    "CaseVerdict",
    "ScanProgress",
    "ScanSummary",
    "check_case",
    "discover_cases",
    "load_summary",
    "scan",
]

#: Store file name used when --store is not given (in the cases' common folder).
DEFAULT_STORE_NAME = "reachgate_scan.sqlite"
#: What a folder contributes: every file with one of these endings inside it, recursively.
CASE_SUFFIXES = (".csv", *COLUMNAR_SUFFIXES)
#: Cases handed out per worker ahead of time: keeps workers busy, and keeps the work lost
#: to an interruption small.
IN_FLIGHT_PER_WORKER = 2
#: A case whose worker process died is tried once more in a fresh pool before it is an error.
WORKER_DEATH_RETRIES = 1
#: How often a local worker checks that the scan process is still there, s.
PARENT_WATCH_PERIOD_S = 1.0
#: Connection timeout for --cluster, s.
CLUSTER_CONNECT_TIMEOUT_S = 20.0
#: How long a scan waits for a scheduler to have a worker, at the start or when all have
#: gone, before it stops with ClusterLostError, s.
CLUSTER_NO_WORKER_S = 30.0
#: Longest wait for a cluster result before the connection is looked at again, s.
CLUSTER_POLL_S = 1.0
#: Cases per cluster task at most, and tasks per worker thread aimed at (_cases_per_task).
CLUSTER_MAX_CASES_PER_TASK = 16
CLUSTER_TASKS_PER_THREAD = 4


@dataclass(frozen=True)
class ScanProgress:
    """Where a scan is: cases stored by this run (done of total), failing so far, resumed."""

    done: int
    total: int
    failing: int
    resumed: int
    last_case: str | None = None


# -- discovery -----------------------------------------------------------------------------


def discover_cases(patterns: Iterable[str | Path]) -> tuple[Path, ...]:
    """Case files from files, folders (every *.csv inside, recursively) and glob patterns.

    Order: as given, folders and globs sorted; duplicates dropped. Raises ReachgateError for a
    plain path that does not exist, or when nothing is found.
    """
    found: dict[Path, None] = {}
    patterns = [str(p) for p in patterns]

    def add(path: Path) -> None:
        if path.is_dir():
            for inner in sorted(path.rglob("*")):
                if inner.is_file() and inner.suffix.lower() in CASE_SUFFIXES:
                    found.setdefault(inner.resolve(), None)
        elif path.is_file():
            found.setdefault(path.resolve(), None)

    for pattern in patterns:
        if glob.has_magic(pattern):
            for match in sorted(glob.glob(pattern, recursive=True)):
                add(Path(match))
        elif Path(pattern).exists():
            add(Path(pattern))
        else:
            raise ReachgateError(f"{pattern}: no such case file or folder")
    if not found:
        shown = ", ".join(patterns) if patterns else "(none given)"
        raise ReachgateError(
            f"no case found in {shown} (folders give their {', '.join(CASE_SUFFIXES)} files)"
        )
    return tuple(found)


def default_store_path(cases: Sequence[Path]) -> Path:
    """reachgate_scan.sqlite in the cases' common folder."""
    folders = [str(Path(c).resolve().parent) for c in cases]
    return Path(os.path.commonpath(folders)) / DEFAULT_STORE_NAME


def case_name(case_path: Path, store_path: Path) -> str:
    """How a case is known in a store: its path relative to the store's folder, else absolute."""
    path = Path(case_path).resolve()
    try:
        return path.relative_to(Path(store_path).resolve().parent).as_posix()
    except ValueError:
        return path.as_posix()


def file_sha256(path: str | Path) -> str:
    try:  # read in blocks: a case file may be larger than the memory the check needs
        with Path(path).open("rb") as file:
            return hashlib.file_digest(file, "sha256").hexdigest()
    except OSError as error:
        raise ReachgateError(f"{path}: cannot read ({error.strerror or error})") from None


# -- the worker side -----------------------------------------------------------------------

_MODELS: dict[bytes | RigFiles, Robot | Rig] = {}


def _model_for(robot_raw: bytes | RigFiles, robot_label: str) -> Robot | Rig:
    """The robot (from its file's bytes) or the rig (RigFiles), built once per worker process
    (the parent validated the files already)."""
    model = _MODELS.get(robot_raw)
    if model is None:
        if isinstance(robot_raw, RigFiles):
            model = robot_raw.load()
        else:
            data = parse_toml_bytes(robot_raw, robot_label, "robot")
            model = robot_from_dict(data, source=robot_label)
        _MODELS[robot_raw] = model
    return model


def _rig_excess_fraction(rig: Rig, row) -> float | None:
    """_excess_fraction of a rig check's row: its axis `robot.axis` (plain names for a rig of
    one robot) looked up in its own robot; clearance rows by their distance."""
    if row.check is Check.CLEARANCE or len(rig.robots) == 1:
        return _excess_fraction(rig.robots[0].robot, row)
    name, _, axis = row.axis.partition(".")
    return _excess_fraction(rig.robot(name).robot, replace(row, axis=axis))


def _excess_fraction(robot: Robot, row) -> float | None:
    """How far a violation row is beyond its limit, as a fraction of the limit's scale.

    position: beyond the range end / half the range (the scale of report margins);
    speed, accel, jerk, lag: worst / limit - 1; singularity: (floor - measure) / floor;
    clearance: (min_m - distance) / min_m; reach, branch: None (no limit to scale by).
    Negative for near rows.
    """
    kind = row.check
    if kind is Check.POSITION:
        axis = next(a for a in robot.axes if a.name == row.axis)
        at_upper = abs(row.limit - axis.upper) <= abs(row.limit - axis.lower)
        beyond = row.worst - row.limit if at_upper else row.limit - row.worst
        return beyond / (0.5 * (axis.upper - axis.lower))
    if kind in (Check.SPEED, Check.ACCEL, Check.JERK, Check.LAG):
        return row.worst / row.limit - 1.0
    if kind in (Check.SINGULARITY, Check.CLEARANCE):
        return (row.limit - row.worst) / row.limit
    return None


def check_case(
    case_path: str, settings: CheckSettings, robot_raw: bytes | RigFiles, robot_label: str
) -> dict:
    """Check one case file; never raises for a bad or crashing case. -> plain dict.

    robot_raw: a robot file's bytes (the case is a trajectory), or a rig's files (RigFiles;
    the case is a scenario, checked by check_rig with RigFiles.rails).

    Keys: case_path, case_sha256, verdict ("pass" | "fail" | "error"), error, report
    (Report.as_dict() or None), excess_fractions (one per violation row), parameters (the
    file's 'key = value' comment lines, or None when unreadable), elapsed_s, worker.
    """
    started = time.perf_counter()
    out: dict = {"case_path": case_path, "case_sha256": None, "verdict": "error"}
    out.update(error=None, report=None, excess_fractions=None, parameters=None)
    try:
        import_fast_reader()  # a worker reads many files: the faster reader repays its import
        out["case_sha256"] = file_sha256(case_path)
        out["parameters"] = read_case_parameters(case_path)
        model = _model_for(robot_raw, robot_label)
        if isinstance(model, Rig):
            report = check_rig(model, load_scenario(case_path), settings, robot_raw.rails)
            fractions = [_rig_excess_fraction(model, v) for v in report.violations]
        else:
            report = check(model, load_trajectory(case_path), settings)
            fractions = [_excess_fraction(model, v) for v in report.violations]
        out["report"] = report.as_dict()
        out["verdict"] = report.verdict.value
        out["excess_fractions"] = fractions
    except ReachgateError as error:
        text = str(error)
        out["error"] = text if Path(case_path).name in text else f"{case_path}: {text}"
    except Exception as error:  # a crash in one case must not stop the batch
        where = traceback.extract_tb(error.__traceback__)[-1]
        out["error"] = (
            f"{case_path}: crashed with {type(error).__name__}: {error} "
            f"(at {Path(where.filename).name}:{where.lineno})"
        )
    out["elapsed_s"] = time.perf_counter() - started
    out["worker"] = f"{socket.gethostname()}:{os.getpid()}"
    return out


def _watch_parent(parent_pid: int) -> None:
    while os.getppid() == parent_pid:
        time.sleep(PARENT_WATCH_PERIOD_S)
    os._exit(1)  # the scan process is gone (kill -9): do not linger as an orphan


def _local_worker_init(robot_raw: bytes | RigFiles, robot_label: str, parent_pid: int) -> None:
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C is the scan process's to handle
    threading.Thread(target=_watch_parent, args=(parent_pid,), daemon=True).start()
    keep_heap()
    _model_for(robot_raw, robot_label)


# -- engines: yield one result dict per case -----------------------------------------------


def _error_result(case_path: str, message: str) -> dict:
    return {
        "case_path": case_path,
        "case_sha256": None,
        "verdict": "error",
        "error": f"{case_path}: {message}",
        "report": None,
        "excess_fractions": None,
        "parameters": None,
        "elapsed_s": 0.0,
        "worker": "",
    }


@contextmanager
def _sigint_blocked() -> Iterator[None]:
    """Block SIGINT while worker processes may be started, so that they inherit the block.

    A Ctrl-C arriving meanwhile stays pending and is raised here on leaving: nothing is lost.
    (The same way the standard library starts its resource tracker.)
    """
    if (
        not hasattr(signal, "pthread_sigmask")
        or threading.current_thread() is not threading.main_thread()
    ):
        yield
        return
    signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT})


#: Thread-pool variables that spawned workers read when numpy loads. Workers already fill
#: the cores, so a BLAS pool per worker only oversubscribes them: two workers on two cores
#: ran the 1000-case benchmark 2.1 times slower with two BLAS threads each (measured).
WORKER_THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")


@contextmanager
def _single_threaded_children() -> Iterator[None]:
    """Processes started inside get one BLAS thread, unless the user set the variables."""
    added = [name for name in WORKER_THREAD_VARIABLES if name not in os.environ]
    os.environ.update(dict.fromkeys(added, "1"))
    try:
        yield
    finally:
        for name in added:
            os.environ.pop(name, None)


def _may_submit(todo: list, running: dict, window: int, broken: bool) -> bool:
    """A case that was in flight when a worker died (a suspect) runs alone, so that a case
    that kills its worker cannot take the cases beside it down with it."""
    if not todo or broken or any(deaths for _, deaths in running.values()):
        return False
    if todo[-1][1] and running:
        return False
    return len(running) < window


def _run_local(
    paths: list[str],
    settings: CheckSettings,
    robot_raw: bytes | RigFiles,
    label: str,
    workers: int,
    task: Callable[..., dict] = check_case,
) -> Iterator[dict]:
    """Local worker processes (spawned fresh, the robot or rig built once in each).

    task: the per-case function (check_case; tests swap in one that kills its worker).
    """
    todo = [(p, 0) for p in reversed(paths)]  # stack of (case path, deaths so far)
    context = multiprocessing.get_context("spawn")
    window = IN_FLIGHT_PER_WORKER * workers
    while todo:
        pool = ProcessPoolExecutor(
            max_workers=workers,
            mp_context=context,
            initializer=_local_worker_init,
            initargs=(robot_raw, label, os.getpid()),
        )
        running: dict = {}
        broken = False
        try:
            while todo or running:
                # workers start inside submit(): born deaf to Ctrl-C, with one BLAS thread
                with _sigint_blocked(), _single_threaded_children():
                    while _may_submit(todo, running, window, broken):
                        path, deaths = todo.pop()
                        future = pool.submit(task, path, settings, robot_raw, label)
                        running[future] = (path, deaths)
                if not running:
                    break
                done, _ = wait(running, return_when=FIRST_COMPLETED)
                for future in done:
                    path, deaths = running.pop(future)
                    try:
                        yield future.result()
                    except BrokenProcessPool:
                        broken = True
                        if deaths < WORKER_DEATH_RETRIES:
                            todo.append((path, deaths + 1))
                        else:
                            yield _error_result(path, "the worker process died checking it")
                if broken and not running:
                    break
        finally:
            pool.shutdown(wait=not broken, cancel_futures=True)


def _connect_cluster(address: str):
    """A dask.distributed Client on an existing scheduler that has a worker, or an error."""
    try:
        from dask.distributed import Client
    except ImportError as error:
        raise ReachgateError(f"--cluster needs dask.distributed ({error})") from None
    try:
        client = Client(address, timeout=CLUSTER_CONNECT_TIMEOUT_S)
    except (OSError, ValueError) as error:
        raise ReachgateError(f"--cluster {address}: cannot reach the scheduler ({error})") from None
    try:
        client.wait_for_workers(1, timeout=CLUSTER_NO_WORKER_S)
    except TimeoutError:
        client.close()
        raise ClusterLostError(
            f"--cluster {address}: the scheduler has no worker (waited {CLUSTER_NO_WORKER_S:g} s); "
            "start workers on it and run the same command"
        ) from None
    return client


def _cases_per_task(n_cases: int, threads: int) -> int:
    """Cases per cluster task: enough that the scheduler's per-task cost stays small, few
    enough that every thread gets several tasks (so the load evens out)."""
    return max(1, min(CLUSTER_MAX_CASES_PER_TASK, n_cases // (CLUSTER_TASKS_PER_THREAD * threads)))


def check_cases(
    case_paths: list[str], settings: CheckSettings, robot_raw: bytes | RigFiles, robot_label: str
) -> list[dict]:
    """check_case for several cases in one cluster task, in a worker process set up for it
    meanwhile (worker_process.steady_worker: heap reuse, one BLAS thread)."""
    with steady_worker():
        return [check_case(p, settings, robot_raw, robot_label) for p in case_paths]


def _run_cluster(
    paths: list[str], settings: CheckSettings, robot_raw: bytes | RigFiles, label: str, client
) -> Iterator[dict]:
    """The workers of an existing Dask distributed scheduler (they must see the case paths).

    Cases go in tasks of several (_cases_per_task). The loop waits at most
    CLUSTER_POLL_S at a time and checks the connection in between: a scheduler that is gone,
    or one with no worker for CLUSTER_NO_WORKER_S, raises ClusterLostError (every case
    already yielded is stored by the caller). Closing the client (the caller does) cancels
    whatever is still queued.
    """
    from dask.distributed import wait

    address = client.scheduler.address
    token = hashlib.sha256(f"{os.getpid()} {time.time_ns()}".encode()).hexdigest()[:12]
    threads = sum(client.nthreads().values()) or 1
    size = _cases_per_task(len(paths), threads)
    chunks = [paths[i : i + size] for i in range(0, len(paths), size)]
    todo = list(reversed(list(enumerate(chunks))))
    running: dict = {}
    window = IN_FLIGHT_PER_WORKER * threads
    no_worker_since: float | None = None

    def lost(what: str) -> ClusterLostError:
        return ClusterLostError(
            f"--cluster {address}: {what}; the cases finished before are in the store: run "
            "the same command again, with the scheduler and its workers up, to resume"
        )

    while todo or running:
        while todo and len(running) < window:
            index, chunk = todo.pop()
            future = client.submit(
                check_cases, chunk, settings, robot_raw, label, key=f"reachgate-{token}-{index}"
            )
            running[future] = chunk
        try:
            done, _ = wait(list(running), timeout=CLUSTER_POLL_S, return_when="FIRST_COMPLETED")
        except TimeoutError:
            done = set()
        except Exception:  # the client gave up on its futures: the scheduler is gone
            raise lost("the connection to the scheduler was lost") from None
        if client.status != "running":
            raise lost("the connection to the scheduler was lost")
        if not done:
            if client.scheduler_info().get("workers"):
                no_worker_since = None
            elif no_worker_since is None:
                no_worker_since = time.monotonic()
            elif time.monotonic() - no_worker_since > CLUSTER_NO_WORKER_S:
                raise lost(f"the scheduler has had no worker for {CLUSTER_NO_WORKER_S:g} s")
            continue
        for future in done:
            chunk = running.pop(future)
            if future.status == "cancelled" or client.status != "running":
                raise lost("the connection to the scheduler was lost")
            try:
                results = future.result()
            except Exception as error:  # a lost worker, a task the cluster gave up on
                results = [
                    _error_result(p, f"the cluster failed it ({type(error).__name__})")
                    for p in chunk
                ]
            future.release()
            yield from results


# -- the parent side -----------------------------------------------------------------------


def _validate_settings(rig: Rig, settings: CheckSettings, rails: RailChoice | None) -> None:
    """Refuse settings a robot cannot take (e.g. --rail-at off the rail) before any case."""
    import numpy as np

    for placed in rig.robots:
        own = settings if rig.alone else robot_settings(placed, settings, rails)
        rail_positions(
            placed.robot,
            np.array([0.0, 1.0]),
            np.zeros((2, 3)),
            np.eye(4),
            own.rail,
            own.rail_at_m,
            own.rail_bandwidth_hz,
        )


def _worst_margin(margins: dict) -> tuple[float | None, str | None, str | None]:
    best = (None, None, None)
    for axis, values in margins.items():
        for kind, value in values.items():
            if value is None or math.isnan(value):  # not measured
                continue
            if best[0] is None or value < best[0]:
                best = (value, axis, kind)
    return best


def _store_row(result: dict, name: str, common: dict) -> tuple[dict, list[tuple]]:
    report = result["report"] or {}
    violations = report.get("violations", [])
    fractions = result["excess_fractions"] or [None] * len(violations)
    counts: dict[str, dict[str, int]] = {}
    for v in violations:
        c = counts.setdefault(v["check"], {"violations": 0, "near": 0, "cases": 0})
        c["violations" if v["severity"] == Severity.VIOLATION.value else "near"] += 1
    for c in counts.values():
        c["cases"] = int(c["violations"] > 0)
    margins = report.get("margins")
    worst, worst_axis, worst_limit = _worst_margin(margins or {})
    row = {
        "case_name": name,
        "case_path": result["case_path"],
        "case_sha256": result["case_sha256"],
        **common,
        "verdict": result["verdict"],
        "error": result["error"],
        "samples": report.get("samples"),
        "duration_s": report.get("duration_s"),
        "worst_margin": worst,
        "worst_margin_axis": worst_axis,
        "worst_margin_check": worst_limit,
        "slowdown": report.get("slowdown"),
        "counts_json": json.dumps(counts, sort_keys=True),
        "margins_json": None if margins is None else json.dumps(margins),
        "tool_version": report.get("tool_version", __version__),
        "elapsed_s": result["elapsed_s"],
        "checked_at": _now(),
        "worker": result["worker"],
        "parameters_json": None
        if result.get("parameters") is None
        else json.dumps(result["parameters"], sort_keys=True),
    }
    rows = [
        (
            v["check"],
            v["axis"],
            v["severity"],
            v["start_s"],
            v["end_s"],
            v["worst_s"],
            v["worst"],
            v["limit"],
            v["unit"],
            f,
            None if v.get("fitting_branches") is None else json.dumps(v["fitting_branches"]),
        )
        for v, f in zip(violations, fractions, strict=True)
    ]
    return row, rows


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="milliseconds")


def scan(
    robot_path: str | Path,
    case_paths: Iterable[str | Path],
    settings: CheckSettings | None = None,
    *,
    store_path: str | Path | None = None,
    workers: int | None = None,
    cluster: str | None = None,
    fresh: bool = False,
    progress: Callable[[ScanProgress], None] | None = None,
    rails: RailChoice | None = None,
) -> ScanSummary:
    """Check every case with the same robot (or rig) and settings; results go to the store.

    robot_path: a robot file (cases are trajectories) or a rig file (cases are scenarios,
    each checked as check_rig does: every robot's checks and clearance). rails: one rail
    choice for every robot with a rail (a robot alone: instead of settings' rail fields);
    None: a rig's robots take the rig file's. The store knows the robot or rig by the
    sha256 of its file, or of the rig file and every robot file it names (model_files), so
    a change to any of them checks the cases again.
    case_paths: files, folders (every *.csv inside) and glob patterns. store_path: default
    reachgate_scan.sqlite in the cases' common folder. workers: local processes (default
    os.cpu_count()); cluster: address of a running Dask scheduler instead. fresh: re-check
    cases the store already holds. Cases stored as errors are always tried again.
    Returns the summary of these cases, ranked worst first. Raises ReachgateError on bad input;
    KeyboardInterrupt leaves every finished case in the store.
    Local workers are started with the "spawn" method, which imports the calling script
    afresh: scripts that call scan() need the usual ``if __name__ == "__main__":`` guard.
    """
    settings = settings or CheckSettings()
    cases = discover_cases(case_paths)
    store_file = Path(store_path) if store_path is not None else default_store_path(cases)
    robot_file = Path(robot_path)
    robot_raw, rig = read_model_files(robot_file, rails)
    if rig.alone and rails is not None:
        settings = replace(
            settings, rail=rails.policy, rail_at_m=rails.at_m, rail_bandwidth_hz=rails.bandwidth_hz
        )
    robot_sha = fingerprint(robot_raw)
    _validate_settings(rig, settings, rails)
    if workers is not None and workers < 1:
        raise ReachgateError(f"--workers: must be at least 1, got {workers}")
    if workers is not None and cluster:
        raise ReachgateError("--workers and --cluster: give one (the cluster has its own workers)")
    settings_json = json.dumps(scan_settings(rig, settings, rails, robot_raw), sort_keys=True)
    common = {
        "robot_name": rig.name,
        "robot_sha256": robot_sha,
        "settings_json": settings_json,
    }

    with ExitStack() as stack:
        client = None
        if cluster:
            client = _connect_cluster(cluster)  # before the store: no run row if unreachable
            stack.callback(client.close)
        stack.enter_context(ScanLock(store_file, f"started {_now()}"))
        store = stack.enter_context(Store(store_file))
        names = {str(c): case_name(c, store_file) for c in cases}
        stored = {} if fresh else store.fingerprints()
        todo: list[str] = []
        for c in cases:
            known = stored.get(names[str(c)])
            same_setup = known is not None and known[1:3] == (robot_sha, settings_json)
            if same_setup and known[3] != CaseVerdict.ERROR.value:
                try:
                    if file_sha256(c) == known[0]:
                        continue
                except ReachgateError:
                    pass  # unreadable now: check it again, and record the error
            todo.append(str(c))
        resumed = len(cases) - len(todo)
        n_workers = workers or os.cpu_count() or 1
        engine = f"dask {cluster}" if cluster else f"local x{n_workers}"
        run_id = store.start_run(
            started_at=_now(),
            tool_version=__version__,
            robot_path=str(robot_file.resolve()),
            robot_sha256=robot_sha,
            settings_json=settings_json,
            engine=engine,
            cases=len(cases),
            resumed=resumed,
        )
        common["run_id"] = run_id
        failing = 0
        if progress:
            progress(ScanProgress(0, len(todo), 0, resumed))
        if todo:
            label = str(robot_file)
            results = (
                _run_cluster(todo, settings, robot_raw, label, client)
                if cluster
                else _run_local(todo, settings, robot_raw, label, min(n_workers, len(todo)))
            )
            with closing(results):
                for done, result in enumerate(results, start=1):
                    name = names[result["case_path"]]
                    store.write_case(*_store_row(result, name, common))
                    failing += result["verdict"] != CaseVerdict.PASS.value
                    if progress:
                        progress(ScanProgress(done, len(todo), failing, resumed, name))
        store.finish_run(run_id, _now())
        results_now = store.results(list(names.values()))
    return ScanSummary(
        store_path=store_file,
        cases=results_now,
        checked=len(todo),
        resumed=resumed,
        counts=batch_counts(results_now),
    )
