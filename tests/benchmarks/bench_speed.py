"""Every figure of the speed issue in one run, each beside its target or reference, as ratios.

Not a test: pytest collects test_*.py only, and this file is bench_*.py. Run from anywhere:

    python tests/benchmarks/bench_speed.py [--quick] [--repeats 3] [--loop-samples 20000]
                                           [--lag 0.02]

What it measures, single-threaded (OMP/OPENBLAS/MKL_NUM_THREADS=1, set before numpy loads):

1. ``reachgate.check`` samples/s on the demo rail arm (spherical wrist, closed-form IK,
   ``--rail follow``, every check on: the lag check too, with --lag), 60 s and 3600 s at
   1 kHz, against 1,000,000 samples/s.
2. The same on the offset-wrist arm (numeric IK), 60 s, against 100,000 samples/s.
3. Our samples/s over those of a per-sample roboticstoolbox ``ik_LM`` loop
   (bench_check.toolbox_loop), against 40x (closed form) and 4x (numeric), and the largest
   joint difference where both solve, against 1e-6 rad. The loop is slow, so by default it
   runs once on the first --loop-samples contiguous samples and its rate stands for the case.
4. ``load_trajectory`` on a 1,000,000-row CSV written by ``write_trajectory``, against
   1.5 s and against ``np.loadtxt`` on the same file.
5. Peak resident memory of a check of the 3600 s case, measured in a fresh child process
   (this file with --memory-child), against 1.5 GB (10^9 bytes), with the child's peak
   before the check started and the check's own rise; and time per sample at 10,001 to
   3,600,001 samples, whose slowest/fastest ratio must stay within 2.
6. IK quality: the largest position and orientation residuals on reachable samples
   (against 1e-9 m and 1e-9 rad), the number of `branch` rows, and the largest joint step
   between neighbouring samples beside the step a joint's speed limit allows (vmax·dt).

Our times are the median of --repeats runs after one warm-up run. --quick shrinks the cases
(10 s for 60 s, 600 s for 3600 s, 200,000 rows) for development; its load target is scaled
by the row count, its other targets stay those of the full cases.
"""

from __future__ import annotations

import os

# One core: BLAS/OpenMP pools read these when numpy loads (the speed issue's figures are per core).
os.environ["OMP_NUM_THREADS"] = "1"
os.environ["OPENBLAS_NUM_THREADS"] = "1"
os.environ["MKL_NUM_THREADS"] = "1"

import argparse
import json
import platform
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import bench_check
import bench_load
import numpy as np

import reachgate
from reachgate import Check, CheckSettings, RailPolicy
from reachgate.model.trajectory import load_trajectory, write_trajectory

DEMO_ROBOT = Path(__file__).resolve().parents[2] / bench_check.DEMO_ROBOT
RATE_HZ = bench_check.RATE_HZ

# Targets, as the speed issue states them.
CLOSED_FORM_RATE_TARGET = 1_000_000.0  # samples/s, demo arm, one core
NUMERIC_RATE_TARGET = 100_000.0  # samples/s, offset-wrist arm, one core
CLOSED_FORM_LOOP_RATIO_TARGET = 40.0  # our samples/s over the toolbox loop's
NUMERIC_LOOP_RATIO_TARGET = 4.0
AGREEMENT_TOL_RAD = bench_check.AGREEMENT_TOL_RAD  # 1e-6 rad, joints where both solve
LOAD_TARGET_S = 1.5  # for LOAD_TARGET_ROWS rows
LOAD_TARGET_ROWS = 1_000_000
PEAK_RSS_TARGET_GB = 1.5  # whole process, 3600 s at 1 kHz
FLAT_TIME_RATIO_TARGET = 2.0  # slowest over fastest time per sample
POSITION_RESIDUAL_TOL_M = 1e-9
ORIENTATION_RESIDUAL_TOL_RAD = 1e-9

BYTES_PER_GB = 1e9
KIB = 1024  # Linux reports ru_maxrss in KiB


@dataclass(frozen=True)
class Sizes:
    """Case sizes of one run: durations in s at RATE_HZ, CSV rows."""

    short_s: float
    long_s: float
    scaling_s: tuple[float, ...]
    rows: int


FULL = Sizes(short_s=60.0, long_s=3600.0, scaling_s=(10.0, 100.0, 1000.0, 3600.0), rows=1_000_000)
QUICK = Sizes(short_s=10.0, long_s=600.0, scaling_s=(10.0, 100.0, 600.0), rows=200_000)


@dataclass(frozen=True)
class Row:
    """One line of the result table; `met` is None for rows without a target."""

    number: str
    figure: str
    measured: str
    reference: str
    ratio: float | None
    met: bool | None


def times_s(duration_s: float) -> np.ndarray:
    """(N,) sample times from 0 to duration_s at RATE_HZ, both ends included."""
    return np.arange(round(duration_s * RATE_HZ) + 1) / RATE_HZ


#: Relative spread of the jittered case's time steps.
JITTER = 0.2


def jittered_times_s(duration_s: float) -> np.ndarray:
    """(N,) times at RATE_HZ on average, each step (1 ± JITTER)/RATE_HZ, seeded."""
    steps = 1.0 + np.random.default_rng(77).uniform(-JITTER, JITTER, round(duration_s * RATE_HZ))
    return np.concatenate([[0.0], np.cumsum(steps / RATE_HZ)])


def median_wall(call, repeats: int):
    """(median wall time s of `repeats` calls after one warm-up call, last result)."""
    result = call()
    walls = []
    for _ in range(repeats):
        result = None  # let the previous result go before the next run
        start = time.perf_counter()
        result = call()
        walls.append(time.perf_counter() - start)
    return statistics.median(walls), result


def current_rss_bytes() -> int | None:
    """Resident set size of this process now (Linux /proc), or None elsewhere."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) * KIB
    except OSError:
        pass
    return None


def peak_rss_bytes() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * KIB


def demo_settings(lag_s: float | None) -> CheckSettings:
    return CheckSettings(rail=RailPolicy.FOLLOW, lag_s=lag_s)


def memory_child(duration_s: float, lag_s: float | None) -> None:
    """Run in a fresh process: one check of the demo case; print its memory figures as JSON."""
    rss_imports = current_rss_bytes()
    robot = reachgate.load_robot(DEMO_ROBOT)
    path = bench_check.approach_path(times_s(duration_s))
    peak_before = peak_rss_bytes()
    rss_before = current_rss_bytes()
    start = time.perf_counter()
    report = reachgate.check(robot, path, demo_settings(lag_s))
    wall_s = time.perf_counter() - start
    figures = dict(
        samples=path.n_samples,
        wall_s=wall_s,
        verdict=report.verdict.value,
        rss_imports=rss_imports,
        peak_before=peak_before,
        rss_before=rss_before,
        peak_after=peak_rss_bytes(),
        roboticstoolbox_loaded="roboticstoolbox" in sys.modules,
    )
    print(json.dumps(figures))


def measure_memory(duration_s: float, lag_s: float | None) -> dict:
    """Memory figures of one check in a fresh child process (see memory_child)."""
    command = [sys.executable, str(Path(__file__).resolve()), "--memory-child", str(duration_s)]
    command += ["--lag", str(lag_s if lag_s is not None else 0.0)]
    done = subprocess.run(command, capture_output=True, text=True, env=os.environ.copy())
    if done.returncode != 0:
        raise SystemExit(f"memory child failed ({done.returncode}):\n{done.stderr}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def ik_quality(robot: reachgate.Robot, report: reachgate.Report) -> dict:
    """Residuals on reachable samples, branch rows, largest joint step against vmax·dt.

    The step is over revolute axes and pairs of neighbouring reachable samples; the reported
    one is the step with the largest ratio |Δq| / (vmax·Δt).
    """
    solution = report.solution
    reachable = solution.reach_excess_m == 0
    revolute = np.flatnonzero(robot.revolute)
    step = np.abs(np.diff(solution.q[:, revolute], axis=0))  # (N-1, n_revolute) rad
    allowed = robot.vmax[revolute] * np.diff(report.t_s)[:, None]  # (N-1, n_revolute) rad
    pairs = reachable[1:] & reachable[:-1]
    share = np.where(pairs[:, None], step / allowed, -np.inf)
    k, j = np.unravel_index(np.argmax(share), share.shape)
    return dict(
        reachable=int(reachable.sum()),
        samples=int(reachable.size),
        position_m=float(solution.position_error_m[reachable].max(initial=0.0)),
        orientation_rad=float(solution.orientation_error_rad[reachable].max(initial=0.0)),
        branch_rows=sum(v.check is Check.BRANCH for v in report.violations),
        step_rad=float(step[k, j]),
        allowed_rad=float(allowed[k, j]),
        step_axis=robot.axis_names[revolute[j]],
        step_t_s=float(report.t_s[k]),
        row_kinds=sorted({f"{v.check.value} {v.axis}" for v in report.violations}),
        verdict=report.verdict.value,
    )


def time_loading(rows: int, repeats: int) -> dict:
    """load_trajectory and np.loadtxt on one CSV from write_trajectory (bench_load's path)."""
    path = bench_load.invented_path(rows)
    with tempfile.TemporaryDirectory() as folder:
        file = Path(folder) / "full_precision.csv"
        write_trajectory(file, path, comments=("benchmark file",))
        size_mb = file.stat().st_size / 1e6
        ours_s, loaded = median_wall(lambda: load_trajectory(file), repeats)
        # the comment line and the header come before the data
        numpy_s, table = median_wall(lambda: np.loadtxt(file, delimiter=",", skiprows=2), repeats)
    if loaded.n_samples != rows or table.shape != (rows, 8):
        raise SystemExit(f"loading read {loaded.n_samples} / {table.shape} rows, not {rows}")
    return dict(ours_s=ours_s, numpy_s=numpy_s, size_mb=size_mb)


def cpu_model() -> str:
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown CPU"


def rate(value: float) -> str:
    return f"{value:,.0f} /s"


def gb(value_bytes: float) -> str:
    return f"{value_bytes / BYTES_PER_GB:.2f} GB"


def at_least(number, figure, measured, target, shown, shown_target) -> Row:
    return Row(number, figure, shown, f">= {shown_target}", measured / target, measured >= target)


def at_most(number, figure, measured, target, shown, shown_target) -> Row:
    return Row(number, figure, shown, f"<= {shown_target}", measured / target, measured <= target)


def render(rows: list[Row]) -> str:
    """The rows as a plain-text table."""
    header = ("#", "figure", "measured", "reference / target", "ratio", "met")
    cells = [
        (
            r.number,
            r.figure,
            r.measured,
            r.reference,
            "-" if r.ratio is None else f"{r.ratio:.3g}",
            "-" if r.met is None else ("yes" if r.met else "no"),
        )
        for r in rows
    ]
    widths = [max(len(c[i]) for c in [header, *cells]) for i in range(len(header))]
    right = {4}  # the ratio column

    def line(c) -> str:
        return "  ".join(
            c[i].rjust(widths[i]) if i in right else c[i].ljust(widths[i]) for i in range(len(c))
        ).rstrip()

    rule = "  ".join("-" * w for w in widths)
    return "\n".join([line(header), rule, *map(line, cells)])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller cases, for development")
    parser.add_argument("--repeats", type=int, default=3, help="timed runs after one warm-up")
    parser.add_argument(
        "--loop-samples",
        type=int,
        default=20_000,
        help="toolbox loop on this many contiguous samples from the start (0 = all)",
    )
    parser.add_argument(
        "--lag", type=float, default=0.02, help="loop delay for the lag check, s (0 = off)"
    )
    parser.add_argument("--memory-child", type=float, default=None, help=argparse.SUPPRESS)
    args = parser.parse_args()
    lag_s = args.lag if args.lag > 0 else None
    if args.memory_child is not None:
        memory_child(args.memory_child, lag_s)
        return
    sizes = QUICK if args.quick else FULL
    load_average = ", ".join(f"{v:.2f}" for v in os.getloadavg())
    print(
        f"machine: {os.cpu_count()} CPUs, {cpu_model()}, Python {platform.python_version()}, "
        f"numpy {np.__version__}, load average {load_average} | options: "
        f"{'--quick' if args.quick else 'full'}, --repeats {args.repeats}, "
        f"--loop-samples {args.loop_samples}, --lag {args.lag:g} s; one thread; "
        f"{RATE_HZ:g} Hz cases"
    )
    sys.stdout.flush()

    # 5a first, so that the child runs while this process is still small.
    memory = measure_memory(sizes.long_s, lag_s)

    demo = reachgate.load_robot(DEMO_ROBOT)
    offset = bench_check.offset_wrist_robot()

    demo_walls: dict[float, tuple[int, float]] = {}  # duration s -> (samples, median wall s)
    demo_reports: dict[float, reachgate.Report] = {}
    for duration_s in sorted({sizes.short_s, sizes.long_s, *sizes.scaling_s}):
        path = bench_check.approach_path(times_s(duration_s))
        wall_s, report = median_wall(
            lambda p=path: reachgate.check(demo, p, demo_settings(lag_s)), args.repeats
        )
        demo_walls[duration_s] = (path.n_samples, wall_s)
        if duration_s in (sizes.short_s, sizes.long_s):
            demo_reports[duration_s] = report
        del report

    short_demo_path = bench_check.approach_path(times_s(sizes.short_s))
    # the same case on jittered time stamps (±20 % steps), as real-time logs often are
    jittered_path = bench_check.approach_path(jittered_times_s(sizes.short_s))
    jittered_wall_s, _ = median_wall(
        lambda: reachgate.check(demo, jittered_path, demo_settings(lag_s)), args.repeats
    )
    offset_path = bench_check.joint_space_path(offset, times_s(sizes.short_s))
    offset_wall_s, offset_report = median_wall(
        lambda: reachgate.check(offset, offset_path, CheckSettings(lag_s=lag_s)), args.repeats
    )
    demo_loop = bench_check.loop_comparison(
        demo, short_demo_path, demo_reports[sizes.short_s], args.loop_samples
    )
    offset_loop = bench_check.loop_comparison(offset, offset_path, offset_report, args.loop_samples)
    loading = time_loading(sizes.rows, args.repeats)

    rows: list[Row] = []
    short_n, short_wall = demo_walls[sizes.short_s]
    long_n, long_wall = demo_walls[sizes.long_s]
    demo_short_rate = short_n / short_wall
    offset_rate = offset_path.n_samples / offset_wall_s
    for duration_s, (n, wall) in (
        (sizes.short_s, (short_n, short_wall)),
        (sizes.long_s, (long_n, long_wall)),
    ):
        rows.append(
            at_least(
                "1",
                f"check, demo arm (closed form, rail follow), {duration_s:g} s, {n:,} samples",
                n / wall,
                CLOSED_FORM_RATE_TARGET,
                rate(n / wall),
                rate(CLOSED_FORM_RATE_TARGET),
            )
        )
    jittered_rate = jittered_path.n_samples / jittered_wall_s
    rows.append(
        at_least(
            "1",
            f"  the {sizes.short_s:g} s case on ±{JITTER:.0%} jittered time steps",
            jittered_rate,
            CLOSED_FORM_RATE_TARGET,
            rate(jittered_rate),
            rate(CLOSED_FORM_RATE_TARGET),
        )
    )
    rows.append(
        at_least(
            "2",
            f"check, offset-wrist arm (numeric IK), {sizes.short_s:g} s, "
            f"{offset_path.n_samples:,} samples",
            offset_rate,
            NUMERIC_RATE_TARGET,
            rate(offset_rate),
            rate(NUMERIC_RATE_TARGET),
        )
    )
    for label, ours_rate, loop, target in (
        ("demo arm", demo_short_rate, demo_loop, CLOSED_FORM_LOOP_RATIO_TARGET),
        ("offset-wrist arm", offset_rate, offset_loop, NUMERIC_LOOP_RATIO_TARGET),
    ):
        subset = (
            f"all {loop['loop']:,} samples"
            if loop["loop"] == short_n
            else f"first {loop['loop']:,} samples, rate scaled"
        )
        rows.append(
            Row(
                "3",
                f"{label}: toolbox ik_LM loop rate ({subset}, one run)",
                rate(loop["tb_rate"]),
                f"ours {rate(ours_rate)}",
                None,
                None,
            )
        )
        ratio = ours_rate / loop["tb_rate"]
        rows.append(
            at_least(
                "3",
                f"{label}: our samples/s over the loop's",
                ratio,
                target,
                f"{ratio:.1f}x",
                f"{target:g}x",
            )
        )
        rows.append(
            at_most(
                "3",
                f"{label}: max joint difference, {loop['both']:,} samples both solve "
                f"(loop failed on {loop['tb_failed']})",
                loop["worst_rad"],
                AGREEMENT_TOL_RAD,
                f"{loop['worst_rad']:.2e} rad",
                f"{AGREEMENT_TOL_RAD:.0e} rad",
            )
        )

    load_target_s = LOAD_TARGET_S * sizes.rows / LOAD_TARGET_ROWS
    scaled = "" if sizes.rows == LOAD_TARGET_ROWS else " (scaled by rows)"
    rows.append(
        at_most(
            "4",
            f"load_trajectory, {sizes.rows:,} rows ({loading['size_mb']:.0f} MB)",
            loading["ours_s"],
            load_target_s,
            f"{loading['ours_s']:.2f} s",
            f"{load_target_s:.2f} s{scaled}",
        )
    )
    rows.append(
        Row(
            "4",
            "load_trajectory over np.loadtxt, same file",
            f"{loading['ours_s']:.2f} s",
            f"np.loadtxt {loading['numpy_s']:.2f} s",
            loading["ours_s"] / loading["numpy_s"],
            None,
        )
    )

    peak_after = memory["peak_after"]
    rows.append(
        at_most(
            "5",
            f"peak RSS, child process, check of {memory['samples']:,} samples "
            f"({memory['wall_s']:.1f} s)",
            peak_after / BYTES_PER_GB,
            PEAK_RSS_TARGET_GB,
            gb(peak_after),
            f"{PEAK_RSS_TARGET_GB:g} GB",
        )
    )
    rows.append(
        Row(
            "5",
            "  of it: child's peak before the check (imports, robot, path)",
            gb(memory["peak_before"]),
            f"RSS after imports {gb(memory['rss_imports'])}",
            memory["peak_before"] / peak_after,
            None,
        )
    )
    rise = peak_after - memory["rss_before"]
    rows.append(
        Row(
            "5",
            "  of it: the check's own rise (peak - RSS at its start)",
            gb(rise),
            f"RSS at its start {gb(memory['rss_before'])}",
            rise / peak_after,
            None,
        )
    )
    per_sample = {d: wall / n for d, (n, wall) in demo_walls.items()}
    fastest = min(per_sample.values())
    for duration_s, (n, wall) in sorted(demo_walls.items()):
        rows.append(
            Row(
                "5",
                f"check, demo arm, {n:,} samples: samples/s",
                rate(n / wall),
                f"fastest {1e6 * fastest:.3f} us/sample",
                per_sample[duration_s] / fastest,
                None,
            )
        )
    flat = max(per_sample.values()) / fastest
    rows.append(
        at_most(
            "5",
            "time per sample, slowest over fastest",
            flat,
            FLAT_TIME_RATIO_TARGET,
            f"{flat:.2f}",
            f"{FLAT_TIME_RATIO_TARGET:g}",
        )
    )

    cases = [
        (f"demo {sizes.short_s:g} s", demo, demo_reports[sizes.short_s]),
        (f"demo {sizes.long_s:g} s", demo, demo_reports[sizes.long_s]),
        (f"offset-wrist {sizes.short_s:g} s", offset, offset_report),
    ]
    qualities = []
    for label, robot, report in cases:
        quality = ik_quality(robot, report)
        qualities.append((label, quality))
        reach = f"{quality['reachable']:,}/{quality['samples']:,} reachable"
        rows.append(
            at_most(
                "6",
                f"{label}: max position residual ({reach})",
                quality["position_m"],
                POSITION_RESIDUAL_TOL_M,
                f"{quality['position_m']:.1e} m",
                f"{POSITION_RESIDUAL_TOL_M:.0e} m",
            )
        )
        rows.append(
            at_most(
                "6",
                f"{label}: max orientation residual",
                quality["orientation_rad"],
                ORIENTATION_RESIDUAL_TOL_RAD,
                f"{quality['orientation_rad']:.1e} rad",
                f"{ORIENTATION_RESIDUAL_TOL_RAD:.0e} rad",
            )
        )
        rows.append(
            Row(
                "6",
                f"{label}: branch rows",
                str(quality["branch_rows"]),
                "0",
                None,
                quality["branch_rows"] == 0,
            )
        )
        rows.append(
            at_most(
                "6",
                f"{label}: largest joint step ({quality['step_axis']}, "
                f"t = {quality['step_t_s']:.3f} s)",
                quality["step_rad"],
                quality["allowed_rad"],
                f"{quality['step_rad']:.2e} rad",
                f"vmax*dt {quality['allowed_rad']:.2e} rad",
            )
        )

    print(render(rows))
    print(
        "ratio = measured / reference or target. Our times: median of "
        f"{args.repeats} runs after a warm-up; the toolbox loop (ETS ik_LM tol 1e-14 warm-started "
        "+ jacob0 + Yoshikawa) runs once."
    )
    print(
        f"Memory: a fresh child process (roboticstoolbox loaded: "
        f"{memory['roboticstoolbox_loaded']}); its check took {memory['wall_s']:.1f} s, "
        f"verdict {memory['verdict']}. GB = 10^9 bytes."
    )
    print(
        "Joint steps: revolute axes, neighbouring reachable samples, the step with the largest "
        "|dq| / (vmax*dt); a step above vmax*dt is either a speed violation the report shows or "
        "a configuration flip."
    )
    print(
        "Verdicts (report rows by check and axis): "
        + "; ".join(
            f"{label} {q['verdict']} ({', '.join(q['row_kinds']) or 'no rows'})"
            for label, q in qualities
        )
        + "."
    )
    if args.quick:
        print("--quick: smaller cases than the targets are stated for; see the docstring.")


if __name__ == "__main__":
    main()
