"""Scoring placements on cases: in this process, in local worker processes, or on the workers
of an existing Dask scheduler (the batch layer's machinery for starting and stopping them).

A *task* is one placement (its CheckSettings, and for a rig each robot's rail) on one case
at one time step: the case's every `step`-th sample (and its last), step 1 being the full
case. Workers hold the robot (or rig) and the cases once and keep the thinned copies they
made. A rig's case is a Scenario, checked by the rig check (every robot and clearance).
"""

from __future__ import annotations

import os
import threading
from collections.abc import Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, replace

import numpy as np

from reachgate.batch.scan import (
    _connect_cluster,
    _sigint_blocked,
    _single_threaded_children,
    _watch_parent,
)
from reachgate.batch.worker_process import keep_heap, steady_worker
from reachgate.checking.pipeline import CheckSettings, check
from reachgate.checking.rig_check import RailChoice, check_rig, rig_pairs
from reachgate.errors import ReachgateError
from reachgate.model.rig import Rig
from reachgate.model.robot import Robot
from reachgate.model.trajectory import Scenario, Trajectory
from reachgate.search.score import Binding, arm_span_m, report_binding

#: Tasks are handed to the workers in about this many chunks per worker: enough to even out
#: unequal cases, few enough that a chunk's hand-over costs little beside its checks.
CHUNKS_PER_WORKER = 2
#: A case: a robot's trajectory, or a rig's scenario.
Cases = Trajectory | Scenario


def thinned(trajectory: Trajectory | Scenario, step: int) -> Trajectory | Scenario:
    """Every `step`-th sample of a case, and always its last one (step 1: the case itself);
    of a scenario, of every body at the same times."""
    if step <= 1:
        return trajectory
    keep = np.arange(0, trajectory.n_samples, step)
    if keep[-1] != trajectory.n_samples - 1:
        keep = np.append(keep, trajectory.n_samples - 1)
    if isinstance(trajectory, Scenario):
        bodies = {name: _kept(body, keep) for name, body in trajectory.bodies.items()}
        return replace(trajectory, t_s=trajectory.t_s[keep], bodies=bodies)
    return _kept(trajectory, keep)


def _kept(trajectory: Trajectory, keep: np.ndarray) -> Trajectory:
    return replace(
        trajectory,
        t_s=trajectory.t_s[keep],
        scenario_p_m=trajectory.scenario_p_m[keep],
        scenario_q_wxyz=trajectory.scenario_q_wxyz[keep],
    )


@dataclass(frozen=True)
class Task:
    """settings: the placement and check options; rails: a rig's robots' rails (name,
    policy), None for a robot (its rail is in settings)."""

    settings: CheckSettings
    case: int
    step: int
    rails: tuple[tuple[str, RailChoice], ...] | None = None


@dataclass(frozen=True)
class Outcome:
    """A task's result: the case's worst margin and whether its check passed."""

    binding: Binding
    passed: bool


class _Cases:
    """The robot (or rig), the cases and their thinned copies, as one worker holds them."""

    def __init__(self, robot: Robot | Rig, cases: Sequence[Cases], labels: Sequence[str]):
        self.robot, self.cases, self.labels = robot, list(cases), list(labels)
        if isinstance(robot, Rig):
            self.span_m = {p.name: arm_span_m(p.robot) for p in robot.robots}
            self.pairs = rig_pairs(robot)
        else:
            self.span_m = arm_span_m(robot)
        self._thinned: dict[tuple[int, int], Trajectory | Scenario] = {}

    def run(self, task: Task) -> Outcome:
        key = (task.case, task.step)
        path = self._thinned.get(key)
        if path is None:
            path = self._thinned[key] = thinned(self.cases[task.case], task.step)
        if isinstance(self.robot, Rig):
            rails = None if task.rails is None else dict(task.rails)
            report = check_rig(
                self.robot, path, task.settings, rails, verify_slowdown=False, plan=self.pairs
            )
        else:
            report = check(self.robot, path, task.settings, verify_slowdown=False)
        return Outcome(report_binding(report, self.span_m, self.labels[task.case]), report.passed)

    def run_all(self, tasks: Sequence[Task]) -> list[Outcome]:
        return [self.run(task) for task in tasks]


_WORKER: dict[str, _Cases] = {}


def _init_local_worker(robot, cases, labels, parent_pid: int) -> None:
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C is the calling process's to handle
    threading.Thread(target=_watch_parent, args=(parent_pid,), daemon=True).start()
    keep_heap()
    _WORKER["cases"] = _Cases(robot, cases, labels)


def _run_local_chunk(tasks: Sequence[Task]) -> list[Outcome]:
    return _WORKER["cases"].run_all(tasks)


_CLUSTER_CASES: dict[int, _Cases] = {}


def _run_cluster_chunk(tasks: Sequence[Task], robot, cases, labels, token: int) -> list[Outcome]:
    held = _CLUSTER_CASES.get(token)
    if held is None:
        held = _CLUSTER_CASES[token] = _Cases(robot, cases, labels)
    with steady_worker():  # heap reuse and one BLAS thread, as for scan's cluster tasks
        return held.run_all(tasks)


def _chunks(tasks: list, parts: int) -> list[list]:
    size = max(1, -(-len(tasks) // parts))
    return [tasks[i : i + size] for i in range(0, len(tasks), size)]


class Evaluator:
    """Runs tasks and counts the case checks (full and thinned). Use as a context manager.

    workers: local processes (1: in this process); cluster: a Dask scheduler's address.
    """

    def __init__(
        self,
        robot: Robot | Rig,
        cases: Sequence[Cases],
        labels: Sequence[str],
        *,
        workers: int = 1,
        cluster: str | None = None,
    ) -> None:
        if workers < 1:
            raise ReachgateError(f"--workers: must be at least 1, got {workers}")
        self.robot, self.cases, self.labels = robot, list(cases), list(labels)
        self.workers, self.cluster = workers, cluster
        self.full_checks = 0
        self.thinned_checks = 0
        self._local = _Cases(robot, cases, labels)
        self._pool = None
        self._client = None
        self._cluster_args: dict = {}

    def __enter__(self) -> Evaluator:
        if self.cluster:
            import time

            self._client = _connect_cluster(self.cluster)
            robot, cases = self._client.scatter([self.robot, self.cases], broadcast=True)
            self._cluster_args = dict(
                robot=robot, cases=cases, labels=self.labels, token=time.time_ns() ^ os.getpid()
            )
        elif self.workers > 1:
            import multiprocessing

            self._pool = ProcessPoolExecutor(
                max_workers=self.workers,
                mp_context=multiprocessing.get_context("spawn"),
                initializer=_init_local_worker,
                initargs=(self.robot, self.cases, self.labels, os.getpid()),
            )
        return self

    def __exit__(self, *exc) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
        if self._client is not None:
            self._client.close()

    @property
    def case_checks(self) -> int:
        return self.full_checks + self.thinned_checks

    def run(self, tasks: Sequence[Task]) -> list[Outcome]:
        """Every task's outcome, in the tasks' order."""
        tasks = list(tasks)
        self.full_checks += sum(task.step <= 1 for task in tasks)
        self.thinned_checks += sum(task.step > 1 for task in tasks)
        if self._client is not None:
            threads = sum(self._client.nthreads().values()) or 1
            futures = self._client.map(
                _run_cluster_chunk, _chunks(tasks, CHUNKS_PER_WORKER * threads),
                pure=False, **self._cluster_args,
            )  # fmt: skip
            parts = self._client.gather(futures)
        elif self._pool is not None and len(tasks) > 1:
            # workers start inside map(): born deaf to Ctrl-C, with one BLAS thread each
            with _sigint_blocked(), _single_threaded_children():
                results = self._pool.map(
                    _run_local_chunk, _chunks(tasks, CHUNKS_PER_WORKER * self.workers)
                )
            parts = list(results)
        else:
            parts = [self._local.run_all(tasks)]
        return [outcome for part in parts for outcome in part]

    def scores(
        self,
        settings: Sequence[CheckSettings],
        cases: Sequence[int],
        steps: Sequence[int],
        rails: Sequence[tuple | None] | None = None,
    ) -> list[list[Outcome]]:
        """Outcomes (len(settings), len(cases)): each placement on each case at its step.
        rails: a rig's rails for each placement (Task.rails), default None."""
        rails = [None] * len(settings) if rails is None else rails
        tasks = [
            Task(s, c, steps[c], r) for s, r in zip(settings, rails, strict=True) for c in cases
        ]
        flat = self.run(tasks)
        n = len(cases)
        return [flat[i * n : (i + 1) * n] for i in range(len(settings))]
