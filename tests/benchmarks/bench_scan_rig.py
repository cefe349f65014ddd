"""Speed of `reachgate scan RIG` against running `reachgate check RIG` once per case.

Not a test (pytest collects test_*.py only). Run:

    python tests/benchmarks/bench_scan_rig.py [--cases 40] [--reference 6] [--workers N]

Writes --cases gust cases of the demo rig's calm landing (`perturb --body drone`, light and
moderate intensity alternating: 4201 two-body samples each, 100 Hz with jitter) into a
temporary folder, then:
1. scan: `reachgate.batch.scan.scan(RIG, ...)` over the batch with local workers, a fresh
   store; wall time from the call to the summary, worker start-up included;
2. reference: `reachgate check RIG CASE --format json` as one process per case, on the first
   --reference cases, as many at a time as scan has workers (what `xargs -P N` does); its
   rate is scaled to the whole batch.
The reference verdicts and worst rows are compared with the scan's for the same cases.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
RIG = REPO / "rigs" / "demo_landing_rig.toml"
NOMINAL = REPO / "trajectories" / "rig" / "landing_calm.csv"


def write_cases(folder: Path, count: int) -> list[Path]:
    from reachgate.model.trajectory import load_scenario
    from reachgate.motion.disturb import iter_disturbance_cases
    from reachgate.render.cases import write_case_files

    nominal = load_scenario(NOMINAL)
    paths = []
    for intensity, seed in (("light", 21), ("moderate", 22)):
        n = count // 2 + (count % 2 if intensity == "light" else 0)
        cases = iter_disturbance_cases(nominal, n, seed, intensity=intensity, body="drone")
        paths += write_case_files(cases, folder / intensity, "calm")
    return paths


def check_one(case: Path) -> dict:
    result = subprocess.run(
        [sys.executable, "-m", "reachgate", "check", str(RIG), str(case), "--format", "json"],
        capture_output=True, text=True, check=False,
    )  # fmt: skip
    return json.loads(result.stdout)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=40)
    parser.add_argument("--reference", type=int, default=6)
    parser.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    args = parser.parse_args()
    from reachgate.batch.scan import scan

    with tempfile.TemporaryDirectory(prefix="reachgate-bench-") as tmp:
        folder = Path(tmp)
        started = time.perf_counter()
        paths = write_cases(folder / "cases", args.cases)
        print(f"wrote {len(paths)} rig cases in {time.perf_counter() - started:.1f} s")

        started = time.perf_counter()
        summary = scan(RIG, paths, store_path=folder / "s.sqlite", workers=args.workers)
        scan_s = time.perf_counter() - started
        tally = summary.tally()
        print(
            f"scan RIG, {args.workers} local workers: {len(paths)} cases in {scan_s:.1f} s "
            f"({len(paths) / scan_s:.2f} cases/s); {tally}"
        )

        sample = paths[: args.reference]
        started = time.perf_counter()
        with ThreadPoolExecutor(args.workers) as pool:
            reports = list(pool.map(check_one, sample))
        reference_s = time.perf_counter() - started
        rate = len(sample) / reference_s
        print(
            f"reference, `check RIG` one process per case, {args.workers} at a time: "
            f"{len(sample)} cases in {reference_s:.1f} s ({rate:.2f} cases/s)"
        )
        print(f"scan / reference rate: {len(paths) / scan_s / rate:.1f}x")

        stored = {Path(c.path).resolve(): c for c in summary.cases}
        same = 0
        for path, report in zip(sample, reports, strict=True):
            case = stored[path.resolve()]
            rows = [(v.check.value, v.axis, v.worst) for v in case.violations]
            theirs = [(v["check"], v["axis"], v["worst"]) for v in report["violations"]]
            same += case.verdict.value == report["verdict"] and rows == theirs
        print(f"verdicts and rows equal to check RIG on {same} of {len(sample)} cases")


if __name__ == "__main__":
    main()
