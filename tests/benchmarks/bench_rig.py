"""The whole check of the demo two-robot rig, stage by stage, beside a per-sample coal loop.

Prints, in one run (one thread, one process):
1. `check RIG SCENARIO`'s library call (check_rig) on the demo landing rig
   (rigs/demo_landing_rig.toml: both arms with geometry, a floor and a mast, the carrier's
   rail following at 0.5 Hz, a 20 ms loop delay with linear prediction, every check on) over
   a 200 s two-body case at 1 kHz, in samples per CPU-second and per wall-second;
2. the CPU time of each stage of that check (each robot's rail, IK, rates, singularities,
   lag; the rig's clearance), so that a missed target says where the time goes;
3. the clearance stage alone on the same solved joints;
4. a per-sample Python loop of coal distance queries over the same pairs on the same poses
   (300 samples spread over the case, poses prepared beforehand), and the ratios.
With --long-case: writes a 3,600,001-sample two-body CSV (the same motion for an hour at
1 kHz, about 1 GB) to a temporary folder (or --case-file PATH, kept and reused) and runs
`python -m reachgate check RIG CSV` on it in a child process, printing the child's peak RSS
(from os.wait4), CPU and wall time.

The motion is the demo's calm landing (scripts/make_rig_cases.py) played on a clock that runs
forward and back, tau(t) = T/2 (1 - cos(2 pi t / 200 s)) with T the landing's 40 s: the drone
mock-up flies in, sits on the pad and flies back out every 200 s, starting and ending at rest.
Targets (issue 11): >= 300,000 samples/s on one core, >= 30x the coal loop, < 2 GB peak.

Run: python tests/benchmarks/bench_rig.py [--long-case [--case-file PATH]]
"""

from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("MKL_NUM_THREADS", "1")

import argparse
import importlib.util
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from reachgate.checking import pipeline, rig_check
from reachgate.checking.clearance import check_clearance, plan_pairs
from reachgate.checking.lag import Prediction
from reachgate.checking.pipeline import CheckSettings
from reachgate.checking.rig_check import check_rig, clearance_settings, placed_robots
from reachgate.model.rig import load_rig
from reachgate.model.trajectory import Scenario, Trajectory, write_scenario
from reachgate.model.transforms import matrix_to_quat

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_clearance import COAL_SAMPLES, Clock, coal_rate

ROOT = Path(__file__).resolve().parents[2]
RIG = ROOT / "rigs" / "demo_landing_rig.toml"
RATE_HZ = 1000.0
SAMPLES = 200_001
LONG_SAMPLES = 3_600_001
PERIOD_S = 200.0
LAG_S = 0.02
PREDICT = Prediction.LINEAR
SETTINGS = CheckSettings(lag_s=LAG_S, predict=PREDICT)
#: The stages timed apart: (module, function, label). Nested calls count for the inner one.
STAGES = (
    (pipeline, "rail_positions", "rail (follow filter)"),
    (pipeline, "solve_trajectory", "IK"),
    (pipeline, "_motion_after_end", "held end (rest)"),
    (pipeline, "_rate_rows", "speed, accel, jerk"),
    (pipeline, "_singularity_rows", "singularities"),
    (pipeline, "_lag_rows", "lag (20 ms, linear)"),
    (rig_check, "check_clearance", "clearance"),
)


def _demo_motion():
    """scripts/make_rig_cases.py as a module (its pad and drone motions)."""
    spec = importlib.util.spec_from_file_location(
        "make_rig_cases", ROOT / "scripts" / "make_rig_cases.py"
    )
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def scenario(samples: int) -> Scenario:
    """The calm landing played forward and back at 1 kHz (see the module docstring)."""
    cases = _demo_motion()
    t_s = np.arange(samples) / RATE_HZ
    span_s = cases.APPROACH_S + cases.ON_PAD_S
    clock = 0.5 * span_s * (1.0 - np.cos(2.0 * np.pi * t_s / PERIOD_S))
    pad_p, pad_R = cases.pad_motion(clock)
    drone_p, drone_R = cases.drone_motion(clock, pad_p, pad_R)
    return Scenario.from_trajectories(
        {
            "drone": Trajectory.from_arrays(t_s, drone_p, matrix_to_quat(drone_R)),
            "pad": Trajectory.from_arrays(t_s, pad_p, matrix_to_quat(pad_R)),
        },
        name=f"landing forward and back, {samples} samples",
    )


class StageTimes:
    """CPU time spent in each stage (exclusive of the other stages it calls), while active."""

    def __init__(self) -> None:
        self.cpu = {label: 0.0 for _, _, label in STAGES}
        self._inner = [0.0]
        self._saved = []

    def __enter__(self):
        for module, name, label in STAGES:
            original = getattr(module, name)
            self._saved.append((module, name, original))
            setattr(module, name, self._timed(original, label))
        return self

    def __exit__(self, *exc):
        for module, name, original in self._saved:
            setattr(module, name, original)

    def _timed(self, function, label):
        def timed(*args, **kwargs):
            self._inner.append(0.0)
            start = time.process_time()
            try:
                return function(*args, **kwargs)
            finally:
                spent = time.process_time() - start
                inner = self._inner.pop()
                self.cpu[label] += spent - inner
                self._inner[-1] += spent

        return timed


def best_of(repeats: int, run):
    wall = cpu = np.inf
    result = None
    for _ in range(repeats):
        with Clock() as clock:
            result = run()
        wall, cpu = min(wall, clock.wall), min(cpu, clock.cpu)
    return wall, cpu, result


def rate_figures(repeats: int) -> None:
    rig = load_rig(RIG)
    case = scenario(SAMPLES)
    n = case.n_samples
    robots, limits = placed_robots(rig), clearance_settings(rig)
    plan = plan_pairs(robots, rig.obstacles, limits)

    wall, cpu, report = best_of(repeats, lambda: check_rig(rig, case, SETTINGS))
    with StageTimes() as stages, Clock() as staged:
        check_rig(rig, case, SETTINGS)
    q = {name: r.solution.q for name, r in report.robots.items()}
    trusted = {name: r.solution.reach_excess_m <= 0.0 for name, r in report.robots.items()}
    c_wall, c_cpu, clearance = best_of(
        repeats,
        lambda: check_clearance(case.t_s, robots, q, rig.obstacles, plan, limits, trusted),
    )
    spread = {name: values[:: (n - 1) // (COAL_SAMPLES - 1)] for name, values in q.items()}
    coal_wall, coal_cpu = coal_rate(robots, rig.obstacles, plan, spread)

    print(
        f"demo landing rig, {n:,} samples at 1 kHz: {len(plan.checked)} pairs checked, "
        f"{len(plan.left_out)} left out; lag {LAG_S * 1000:g} ms, prediction {PREDICT.value}; "
        f"verdict {report.verdict.value}, {len(report.violations)} rows"
    )
    title = f"one thread, best of {repeats}"
    print(f"{title:40s} {'samples/CPU-s':>14s} {'samples/wall-s':>15s}")
    print(f"{'whole rig check (check_rig)':40s} {n / cpu:14,.0f} {n / wall:15,.0f}")
    print(
        f"{'clearance stage alone':40s} {n / c_cpu:14,.0f} {n / c_wall:15,.0f}"
        f"   ({len(clearance.rows)} rows)"
    )
    print(f"{f'coal query loop ({COAL_SAMPLES} samples)':40s} {coal_cpu:14,.0f} {coal_wall:15,.0f}")
    print(
        f"{'ratio: whole check / coal loop':40s} {n / cpu / coal_cpu:13.1f}x "
        f"{n / wall / coal_wall:14.1f}x"
    )
    print(
        f"{'ratio: clearance / coal loop':40s} {n / c_cpu / coal_cpu:13.1f}x "
        f"{n / c_wall / coal_wall:14.1f}x"
    )
    print("targets: >= 300,000 samples/s on one core, >= 30x the coal loop")
    print(f"CPU time by stage, one more run ({staged.cpu:.3f} CPU-s in all, both robots):")
    others = staged.cpu - sum(stages.cpu.values())
    for label, spent in [*stages.cpu.items(), ("everything else", others)]:
        share = spent / staged.cpu
        print(f"  {label:26s} {spent:7.3f} s  {share:5.1%}  ({n / spent:12,.0f} samples/s alone)")


def long_case(case_file: Path | None) -> None:
    """The CLI on a 3,600,001-sample two-body CSV in a child process: its peak RSS.

    The CSV is written by another child (or read from case_file if it exists), so that this
    process stays small: a child's peak RSS counts what it had when it was forked."""
    with tempfile.TemporaryDirectory() as folder:
        path = case_file or Path(folder) / "landing_hour.csv"
        if not path.exists():
            with Clock() as made:
                subprocess.run([sys.executable, __file__, "--write-case", str(path)], check=True)
            print(f"wrote {LONG_SAMPLES:,} samples in {made.wall:.0f} s")
        print(f"{path.name}: {path.stat().st_size / 1e6:,.0f} MB")
        command = [
            sys.executable, "-m", "reachgate", "check", str(RIG), str(path),
            "--lag", str(LAG_S), "--predict", PREDICT.value,
            "--format", "json", "--out", str(Path(folder) / "report.json"),
        ]  # fmt: skip
        start = time.perf_counter()
        child = subprocess.Popen(command)
        _, status, usage = os.wait4(child.pid, 0)
        wall = time.perf_counter() - start
        child.returncode = os.waitstatus_to_exitcode(status)
    cpu = usage.ru_utime + usage.ru_stime
    peak_mb = usage.ru_maxrss / 1024.0
    print(f"$ python -m reachgate check rigs/demo_landing_rig.toml {path.name} "
          f"--lag {LAG_S} --predict {PREDICT.value} --format json --out report.json")  # fmt: skip
    print(
        f"exit {child.returncode}; peak RSS {peak_mb:,.0f} MB (target < 2048 MB); "
        f"{cpu:.1f} CPU-s ({usage.ru_utime:.1f} user, {usage.ru_stime:.1f} system), "
        f"{wall:.1f} wall-s, loading included: {LONG_SAMPLES / cpu:,.0f} samples per CPU-s"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--long-case", action="store_true", help="the 3.6 M-sample CLI run")
    parser.add_argument(
        "--case-file", type=Path, help="--long-case: the CSV to use (written there if missing)"
    )
    parser.add_argument("--write-case", type=Path, help=argparse.SUPPRESS)
    parser.add_argument("--repeats", type=int, default=3)
    options = parser.parse_args()
    if options.write_case:
        comments = ("bench_rig.py: the calm landing forward and back for an hour at 1 kHz",)
        write_scenario(options.write_case, scenario(LONG_SAMPLES), comments)
    elif options.long_case:
        long_case(options.case_file)
    else:
        rate_figures(options.repeats)


if __name__ == "__main__":
    main()
