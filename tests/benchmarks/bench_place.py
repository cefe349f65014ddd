"""Speed of `reachgate place` against a brute-force grid of the same quantities.

Not a test (pytest collects test_*.py only). Run:

    python tests/benchmarks/bench_place.py [--workers 2] [--single-grid 17] [--batch-grid 33]
                                           [--cases 50] [--seed 0] [--rig-grid 9]
                                           [--skip-single] [--skip-batch] [--skip-rig]

1. The demo's wide case (trajectories/approach_wide.csv, rail follow) searched over x, y and
   yaw (x=-1:1, y=-2:2, yaw=-45:45) by `reachgate.place`, beside a grid of the same ranges
   with --single-grid points per quantity, every point a full check of the case.
2. A batch of --cases gust cases written by `reachgate perturb` from the calm approach
   (light Dryden turbulence, seed 5), searched over x and y (both -1:1, rail follow),
   beside a --batch-grid × --batch-grid grid whose every point is scored over every case
   in full. The grid's answer is found exactly but with less work than brute force: a
   point stops at the first case that scores below the grid's best so far (it cannot be the
   best any more; cases are tried in the order they last bound), so the brute-force count
   (points × cases) is printed beside the checks actually run for it.
3. The demo rig's low pass (rigs/demo_landing_rig.toml, trajectories/rig/landing_low_pass.csv,
   the rig file's rails) searched over x and z (x=-0.5:0.5, z=-0.1:0.3), every placement
   scored by the rig check (every robot and every clearance pair), beside a --rig-grid ×
   --rig-grid grid of full rig checks.

"The same answer": the search's best score (checked in full) is at least the grid's best
less the largest change of the score between the grid's best point and its neighbours (one
grid step). Targets (issue): the single case within 30 s, the batch within 5 minutes on two
cores, and at least 10× fewer case checks than the grid.
Both run with the same worker processes; times are wall times, start-up included.
"""

from __future__ import annotations

import argparse
import itertools
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
RIG = REPO / "rigs" / "demo_landing_rig.toml"
LOW_PASS = REPO / "trajectories" / "rig" / "landing_low_pass.csv"
RIG_VARY = "x=-0.5:0.5,z=-0.1:0.3"
WIDE = REPO / "trajectories" / "approach_wide.csv"
NOMINAL = REPO / "trajectories" / "approach_calm.csv"
SINGLE_VARY = "x=-1:1,y=-2:2,yaw=-45:45"
BATCH_VARY = "x=-1:1,y=-1:1"
GUST_SEED = 5
GUST_INTENSITY = "light"

_HELD: dict = {}


def _settings():
    import reachgate

    return reachgate.CheckSettings(rail=reachgate.RailPolicy.FOLLOW)


def _hold(case_paths: list[str], model_path: str = str(ROBOT)) -> None:
    """Worker initialiser: the robot (or rig) and the cases, loaded once per process."""
    import reachgate
    from reachgate.checking.rig_check import rig_pairs
    from reachgate.search.score import arm_span_m

    model = reachgate.load_rig(model_path)
    if model.alone:
        _HELD["robot"] = model.robots[0].robot
        _HELD["cases"] = [reachgate.load_trajectory(p) for p in case_paths]
        _HELD["span"] = arm_span_m(_HELD["robot"])
    else:
        _HELD["robot"], _HELD["pairs"] = model, rig_pairs(model)
        _HELD["cases"] = [reachgate.load_scenario(p) for p in case_paths]
        _HELD["span"] = {p.name: arm_span_m(p.robot) for p in model.robots}


def _score(settings, case: int) -> float:
    """A case's score at a placement, checked in full as the search's final checks are."""
    from reachgate.checking.pipeline import check
    from reachgate.checking.rig_check import check_rig
    from reachgate.search.score import report_binding

    model, path = _HELD["robot"], _HELD["cases"][case]
    if "pairs" in _HELD:
        report = check_rig(model, path, settings, verify_slowdown=False, plan=_HELD["pairs"])
    else:
        report = check(model, path, settings, verify_slowdown=False)
    return report_binding(report, _HELD["span"]).score


def _grid_chunk(args) -> list[tuple[int, float, int, bool]]:
    """Score grid points (index, values); each point stops at the first case below the best
    score of this chunk so far. -> (index, score or bound, checks run, complete)."""
    from reachgate.search.vary import parse_vary, settings_at

    points, vary_text, prune = args
    vary = parse_vary(vary_text)
    order = list(range(len(_HELD["cases"])))
    best = -np.inf
    out = []
    for index, values in points:
        settings = settings_at(_settings(), vary, values)
        worst, checks, complete = np.inf, 0, True
        for k, case in enumerate(order):
            score = _score(settings, case)
            checks += 1
            if score < worst:
                worst = score
                order.insert(0, order.pop(k))  # the binding case first next time
            if prune and worst < best:
                complete = False
                break
        best = max(best, worst)
        out.append((index, float(worst), checks, complete))
    return out


def _grid(pool, workers, vary_text, points_per_quantity, prune):
    """Grid best: (best score, best index, scores array, checks run, seconds)."""
    from reachgate.search.vary import parse_vary

    vary = parse_vary(vary_text)
    axes = [np.linspace(v.low, v.high, points_per_quantity) for v in vary]
    points = list(enumerate(itertools.product(*axes)))
    chunks = [(points[i :: 4 * workers], vary_text, prune) for i in range(4 * workers)]
    started = time.perf_counter()
    results = [r for part in pool.map(_grid_chunk, chunks) for r in part]
    seconds = time.perf_counter() - started
    scores = np.full(len(points), np.nan)
    complete = np.zeros(len(points), bool)
    for index, score, _, done in results:
        scores[index], complete[index] = score, done
    checks = sum(r[2] for r in results)
    best_index = int(np.nanargmax(np.where(complete, scores, -np.inf)))
    shape = (points_per_quantity,) * len(vary)
    return scores.reshape(shape), complete.reshape(shape), best_index, checks, seconds, axes


def _one_step(pool, vary_text, axes, scores, complete, best_index, n_cases):
    """Largest |score change| from the grid's best point to its grid neighbours (scored on
    every case where the grid stopped early). -> (change, extra checks)."""
    from reachgate.search.vary import parse_vary, settings_at

    vary = parse_vary(vary_text)
    at = np.unravel_index(best_index, scores.shape)
    extra = 0
    changes = []
    for offset in itertools.product((-1, 0, 1), repeat=len(at)):
        near = tuple(a + o for a, o in zip(at, offset, strict=True))
        if near == at or any(not 0 <= n < len(axes[0]) for n in near):
            continue
        if complete[near]:
            changes.append(abs(scores[near] - scores[at]))
            continue
        values = [axes[d][near[d]] for d in range(len(at))]
        settings = settings_at(_settings(), vary, values)
        score = min(pool.map(_score, [settings] * n_cases, range(n_cases)))
        extra += n_cases
        changes.append(abs(score - scores[at]))
    return max(changes), extra


def _search(case_paths, vary_text, workers, seed, model_path=str(ROBOT)):
    import reachgate

    robot = reachgate.load_rig(model_path)  # a robot file: a rig of one, searched as the robot
    started = time.perf_counter()
    result = reachgate.place(robot, case_paths, vary_text, _settings(), seed=seed, workers=workers)
    return result, time.perf_counter() - started


def _gust_cases(folder: Path, count: int) -> list[str]:
    subprocess.run(
        [sys.executable, "-m", "reachgate", "perturb", str(NOMINAL), "--count", str(count),
         "--seed", str(GUST_SEED), "--intensity", GUST_INTENSITY, "--out", str(folder)],
        check=True, capture_output=True,
    )  # fmt: skip
    return sorted(str(p) for p in folder.glob("*.csv"))


def _compare(
    title, case_paths, vary_text, grid_points, workers, seed, prune, model_path=str(ROBOT)
) -> None:
    result, search_s = _search(case_paths, vary_text, workers, seed, model_path)
    hold = (case_paths, model_path)
    with ProcessPoolExecutor(workers, initializer=_hold, initargs=hold) as pool:
        scores, complete, best_index, grid_checks, grid_s, axes = _grid(
            pool, workers, vary_text, grid_points, prune
        )
        step, extra = _one_step(
            pool, vary_text, axes, scores, complete, best_index, len(case_paths)
        )
    grid_best = float(scores.flat[best_index])
    at = np.unravel_index(best_index, scores.shape)
    grid_values = ", ".join(f"{axes[d][at[d]]:.3f}" for d in range(len(at)))
    brute = scores.size * len(case_paths)
    same = result.best.score >= grid_best - step
    print(f"\n{title}: {len(case_paths)} case(s), --vary {vary_text}, {workers} workers")
    print(f"{'':22s}{'wall s':>9s}{'case checks':>14s}{'best score':>12s}  best placement")
    print(
        f"{'search (place)':22s}{search_s:9.1f}{result.case_checks:14d}"
        f"{result.best.score:12.4f}  --place {result.best.place} "
        f"({result.full_checks} full, {result.thinned_checks} thinned; steps "
        f"{sorted(set(result.steps))}; {len(result.binding_cases)} binding case(s))"
    )
    pruned = f", {grid_checks} run with pruning" if grid_checks != brute else ""
    print(
        f"{f'grid {grid_points}^{len(axes)}':22s}{grid_s:9.1f}{brute:14d}"
        f"{grid_best:12.4f}  at {grid_values} (full checks{pruned})"
    )
    print(
        f"one grid step changes the score by up to {step:.4f} ({extra} more checks); "
        f"same answer (search >= grid - step): {'yes' if same else 'NO'}; "
        f"grid/search case checks: {brute / result.case_checks:.1f}x; "
        f"the best {'passes' if result.passed else 'fails'} every case"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--workers", type=int, default=min(2, os.cpu_count() or 1))
    parser.add_argument("--single-grid", type=int, default=17)
    parser.add_argument("--batch-grid", type=int, default=33)
    parser.add_argument("--cases", type=int, default=50)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--skip-single", action="store_true")
    parser.add_argument("--skip-batch", action="store_true")
    parser.add_argument("--rig-grid", type=int, default=9)
    parser.add_argument("--skip-rig", action="store_true")
    args = parser.parse_args()
    os.environ.setdefault("OMP_NUM_THREADS", "1")
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    if not args.skip_single:
        _compare(
            "wide demo case", [str(WIDE)], SINGLE_VARY, args.single_grid, args.workers,
            args.seed, prune=False,
        )  # fmt: skip
    if not args.skip_batch:
        with tempfile.TemporaryDirectory() as folder:
            cases = _gust_cases(Path(folder), args.cases)
            _compare(
                f"{len(cases)} gust cases ({GUST_INTENSITY}, perturb seed {GUST_SEED})",
                cases, BATCH_VARY, args.batch_grid, args.workers, args.seed, prune=True,
            )  # fmt: skip
    if not args.skip_rig:
        _compare(
            "demo rig, low pass", [str(LOW_PASS)], RIG_VARY, args.rig_grid, args.workers,
            args.seed, prune=False, model_path=str(RIG),
        )  # fmt: skip


if __name__ == "__main__":
    main()
