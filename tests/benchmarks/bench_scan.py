"""Speed of `reachgate scan` against running `reachgate check` once per case.

Not a test (pytest collects test_*.py only). Run:

    python tests/benchmarks/bench_scan.py [--cases 1000] [--reference 20] [--workers N] [--dask]

Writes a batch of landing-approach cases (60 s at 250 Hz, ±10 % time jitter, a gust burst
whose size is drawn per case so that some pass and some fail) into a temporary folder, then:
1. scan: `reachgate.scan(...)` over the whole batch with local workers, rail follow, a fresh
   store; wall time from the call to the summary, worker start-up included;
2. reference: `reachgate check ROBOT CASE --rail follow --format json` as one process per
   case, on the first --reference cases, as many at a time as scan has workers (what a shell
   loop with `xargs -P N` does); its rate is scaled to the whole batch.
The reference verdicts are compared with the scan's for the same cases.
3. with --dask: the same scan on a Dask LocalCluster of as many one-thread worker processes,
   into a fresh store (`--cluster` path), beside the local workers' time.
Targets (issues): the 1000 cases in under 60 s on 2 cores; Dask at most 1.2x local.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[2]
ROBOT = REPO / "robots" / "demo_rail_arm.toml"
DURATION_S = 60.0
RATE_HZ = 250.0
#: Largest gust scale drawn; about a third of the cases pass at the demo arm's limits.
GUST_MAX = 0.3


def approach_case(seed: int):
    """One approach along the rail with a gust burst of random size. -> Trajectory."""
    from reachgate.model.trajectory import Trajectory

    rng = np.random.default_rng(seed)
    n = int(DURATION_S * RATE_HZ)
    t = np.cumsum(np.r_[0.0, rng.uniform(0.9, 1.1, n) / RATE_HZ])
    s = np.clip(t / t[-1], 0.0, 1.0)
    s = 10 * s**3 - 15 * s**4 + 6 * s**5
    # the sway fades in and out over 2 s (minimum jerk): the case starts and ends at rest,
    # as reachgate checks by default (--ends rest)
    ramp = np.clip(np.minimum(t, t[-1] - t) / 2.0, 0.0, 1.0)
    fade = 10 * ramp**3 - 15 * ramp**4 + 6 * ramp**5
    gust = rng.uniform(0.0, GUST_MAX)
    burst = gust * np.exp(-0.5 * ((t - rng.uniform(15, 45)) / 2.0) ** 2)
    p = np.column_stack(
        [
            2.9 + 4.6 * s,
            fade * 0.05 * np.sin(2 * np.pi * 0.3 * t),
            2.1 - 0.8 * s + fade * 0.02 * np.sin(2 * np.pi * 0.7 * t) + 0.03 * burst,
        ]
    )
    rpy = np.column_stack(
        [
            fade * np.radians(3.0) * np.sin(2 * np.pi * 0.5 * t)
            + np.radians(8.0) * burst * np.sin(2 * np.pi * 2.5 * t),
            fade * np.radians(3.0) * np.sin(2 * np.pi * 0.4 * t + 1.0)
            + np.radians(5.0) * burst * np.sin(2 * np.pi * 1.8 * t),
            fade * np.radians(10.0) * np.sin(2 * np.pi * 0.05 * t),
        ]
    )
    return Trajectory.from_arrays(t, p, rpy_rad=rpy, name=f"approach_{seed:04d}.csv")


def write_case(args: tuple[Path, int]) -> None:
    from reachgate.model.trajectory import write_trajectory

    folder, seed = args
    write_trajectory(folder / f"approach_{seed:04d}.csv", approach_case(seed), ("bench case",))


def reference(cases: list[Path], parallel: int) -> tuple[float, dict[str, str]]:
    """Run `reachgate check` once per case, `parallel` processes at a time. -> (s, verdicts)."""
    command = [sys.executable, "-m", "reachgate", "check", str(ROBOT)]
    verdicts: dict[str, str] = {}
    started = time.perf_counter()
    pending = list(cases)
    running: list[tuple[Path, subprocess.Popen]] = []
    while pending or running:
        while pending and len(running) < parallel:
            case = pending.pop(0)
            proc = subprocess.Popen(
                [*command, str(case), "--rail", "follow", "--format", "json"],
                stdout=subprocess.PIPE,
                text=True,
            )
            running.append((case, proc))
        case, proc = running.pop(0)
        out, _ = proc.communicate()
        verdicts[case.name] = json.loads(out)["verdict"]
    return time.perf_counter() - started, verdicts


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=1000)
    parser.add_argument("--reference", type=int, default=20)
    parser.add_argument("--workers", type=int, default=os.cpu_count())
    parser.add_argument("--dask", action="store_true", help="also scan on a local Dask cluster")
    args = parser.parse_args()

    from reachgate import CheckSettings, RailPolicy
    from reachgate.batch.scan import scan

    with tempfile.TemporaryDirectory(prefix="reachgate_bench_") as tmp:
        folder = Path(tmp) / "cases"
        folder.mkdir()
        started = time.perf_counter()
        with ProcessPoolExecutor(args.workers) as pool:
            list(pool.map(write_case, [(folder, k) for k in range(args.cases)], chunksize=8))
        size_mb = sum(f.stat().st_size for f in folder.iterdir()) / 1e6
        print(
            f"batch: {args.cases} cases of {DURATION_S:g} s at {RATE_HZ:g} Hz "
            f"({int(DURATION_S * RATE_HZ) + 1} samples, {size_mb:.0f} MB), "
            f"written in {time.perf_counter() - started:.1f} s"
        )

        settings = CheckSettings(rail=RailPolicy.FOLLOW)
        started = time.perf_counter()
        summary = scan(
            ROBOT, [folder], settings, store_path=Path(tmp) / "bench.sqlite", workers=args.workers
        )
        scan_s = time.perf_counter() - started
        tally = summary.tally()
        busy_s = sum(c.elapsed_s for c in summary.cases)
        print(
            f"scan: {len(summary.cases)} cases in {scan_s:.1f} s with {args.workers} workers = "
            f"{len(summary.cases) / scan_s:.1f} cases/s ({tally['pass']} pass, "
            f"{tally['fail']} fail, {tally['error']} error; "
            f"mean time in a worker {1000 * busy_s / len(summary.cases):.0f} ms per case)"
        )

        if args.dask:
            from dask.distributed import LocalCluster

            with LocalCluster(
                n_workers=args.workers, threads_per_worker=1, processes=True,
                dashboard_address=None, env={"OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1"},
            ) as cluster:  # fmt: skip
                started = time.perf_counter()
                on_dask = scan(
                    ROBOT, [folder], settings, store_path=Path(tmp) / "dask.sqlite",
                    cluster=cluster.scheduler_address,
                )  # fmt: skip
                dask_s = time.perf_counter() - started
            same = [c.verdict for c in on_dask.cases] == [c.verdict for c in summary.cases]
            print(
                f"dask: {len(on_dask.cases)} cases in {dask_s:.1f} s on a LocalCluster of "
                f"{args.workers} one-thread workers; dask / local = {dask_s / scan_s:.2f} "
                f"(target <= 1.2); same verdicts: {same}"
            )

        subset = sorted(folder.iterdir())[: args.reference]
        ref_s, verdicts = reference(subset, args.workers)
        per_case = ref_s / len(subset)
        scaled_s = per_case * args.cases
        print(
            f"reference: `reachgate check` per case, {args.workers} at a time: {len(subset)} cases "
            f"in {ref_s:.1f} s = {1 / per_case:.2f} cases/s; scaled to {args.cases} cases: "
            f"{scaled_s:.0f} s"
        )
        print(f"ratio: scan is {scaled_s / scan_s:.1f}x faster than one process per case")
        by_name = {c.name.split("/")[-1]: c.verdict.value for c in summary.cases}
        agree = sum(by_name[name] == v for name, v in verdicts.items())
        print(f"verdicts of the reference subset equal the scan's: {agree}/{len(verdicts)}")
        per_1000_s = 1000 * scan_s / args.cases
        target = "met" if per_1000_s < 60.0 else "missed"
        scaled = "" if args.cases == 1000 else f", scaled from {args.cases} cases"
        print(f"target 1000 cases < 60 s: {target} ({per_1000_s:.1f} s{scaled})")
        load = ", ".join(f"{v:.2f}" for v in os.getloadavg())
        print(f"machine: {os.cpu_count()} CPUs, load average after the run {load}")


if __name__ == "__main__":
    main()
