"""Where the scenario fits (DESIGN §10): the placement with the largest worst margin.

The search, for one case or a batch, maximises the score (search/score.py) over the ranges:

1. Global search: scipy's differential_evolution (seeded; the starting placement is one
   member of the first population when it lies inside the ranges), then a Nelder–Mead
   polish of the best point.
2. Cheap early checks: the search checks each case at a thinned time step, every 16th
   sample at first (fewer for short cases). After each round the best point is checked on
   the full binding cases (and once on every other case); a case whose thinned score there
   differs from its full score by more than COARSE_TOLERANCE gets the coarsest finer step
   that keeps it, and the search resumes from its population. So smooth paths are searched
   thinned, and gusty ones only as finely as their answer needs.
3. Binding cases: a batch is searched on the cases that bind it, first the worst at the
   starting placement; after each round the best point is scored on every other case, a
   case that binds harder joins and the search resumes (constraint generation for a
   max-min problem) until no other case binds.
4. Finalists: the polished point and the best of the last population, rounded to the
   printed precision, are checked in full on every case; the best of them is the answer
   (the starting placement too, when it lies inside the ranges and scores higher).
"""

from __future__ import annotations

import json
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from reachgate.checking.pipeline import CheckSettings
from reachgate.errors import ReachgateError
from reachgate.model.robot import Robot
from reachgate.model.trajectory import Trajectory, load_trajectory
from reachgate.search.evaluate import Evaluator, Outcome
from reachgate.search.score import Binding, worst_of
from reachgate.search.vary import (
    Variation,
    check_variations,
    parse_vary,
    place_argument,
    rounded,
    settings_at,
    short_number,
    starting_values,
)
from reachgate.version import __version__

#: Thinned steps tried for the search, coarsest first.
COARSE_STEPS = (16, 8, 4, 2)
#: A thinned case is used only while it keeps at least this many samples.
MIN_THINNED_SAMPLES = 64
#: A step is kept when the thinned case's score differs from the full case's by at most this
#: (a fraction of a limit), at the starting placement and at the middle of the ranges.
COARSE_TOLERANCE = 0.02
#: A case joins the binding cases when the best placement scores it this much below them.
BINDING_TOLERANCE = 0.005
#: At most this many rounds of adding a binding case and searching again.
MAX_ROUNDS = 8
#: Population of differential evolution per varied quantity (scipy's `popsize`).
POPULATION_PER_QUANTITY = 8
#: Generations of differential evolution at most, per round.
MAX_GENERATIONS = 40
#: Differential evolution stops when the population's scores spread less than this
#: (a fraction of a limit) plus 1 % of their mean.
SCORE_SPREAD_TOLERANCE = 0.002
#: Scored points of the Nelder–Mead polish at most, per round.
POLISH_POINTS = 40
#: Placements checked in full at the end: the polished one and the best of the population.
FINALISTS = 4
#: Grid points per quantity of the score map.
MAP_POINTS = 25


@dataclass(frozen=True)
class Candidate:
    """One placement checked in full on every case.

    values: the varied quantities (user units, in --vary order); binding: the worst margin
    over every case; passed: every case's check passed and the score is above 0.
    """

    values: tuple[float, ...]
    settings: CheckSettings
    binding: Binding
    passed: bool

    @property
    def score(self) -> float:
        return self.binding.score

    @property
    def place(self) -> str:
        return place_argument(self.settings.placement)

    def as_dict(self, vary: Sequence[Variation]) -> dict:
        return {
            "place": self.place,
            "values": {v.name: x for v, x in zip(vary, self.values, strict=True)},
            "rail_at_m": self.settings.rail_at_m,
            "rail_bandwidth_hz": self.settings.rail_bandwidth_hz,
            "passes": self.passed,
            **self.binding.as_dict(),
        }


@dataclass(frozen=True)
class ScoreMap:
    """The score over two varied quantities, the others held at the best placement's values.

    x, y: the two variations; x_values (nx,), y_values (ny,) user units; scores (ny, nx);
    cases: the labels of the cases scored (the binding cases); steps: their time steps.
    """

    x: Variation
    y: Variation
    x_values: np.ndarray
    y_values: np.ndarray
    scores: np.ndarray
    cases: tuple[str, ...]
    steps: tuple[int, ...]


@dataclass(frozen=True, eq=False)
class PlacementResult:
    """The outcome of a placement search (see the module docstring).

    best, start: the found and the starting placement, each checked in full on every case.
    steps: the time step each case was searched at; binding_cases: the cases the search
    scored (a batch's binding cases); full_checks / thinned_checks: the case checks of the
    search and of its final checks (the map's are not counted).
    """

    robot: str
    cases: tuple[str, ...]
    vary: tuple[Variation, ...]
    best: Candidate
    start: Candidate
    seed: int
    steps: tuple[int, ...]
    binding_cases: tuple[str, ...]
    full_checks: int
    thinned_checks: int
    placements_scored: int
    rounds: int
    score_map: ScoreMap | None = field(default=None, repr=False)

    @property
    def passed(self) -> bool:
        return self.best.passed

    @property
    def case_checks(self) -> int:
        return self.full_checks + self.thinned_checks

    def as_dict(self) -> dict:
        return {
            "tool_version": __version__,
            "robot": self.robot,
            "cases": list(self.cases),
            "vary": {v.name: [v.low, v.high] for v in self.vary},
            "verdict": "pass" if self.passed else "fail",
            "best": self.best.as_dict(self.vary),
            "start": self.start.as_dict(self.vary),
            "settings": self.best.settings.as_dict(),
            "search": {
                "seed": self.seed,
                "steps": dict(zip(self.cases, self.steps, strict=True)),
                "binding_cases": list(self.binding_cases),
                "rounds": self.rounds,
                "placements_scored": self.placements_scored,
                "case_checks": self.case_checks,
                "full_checks": self.full_checks,
                "thinned_checks": self.thinned_checks,
            },
        }

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.as_dict(), indent=indent)


@dataclass(frozen=True)
class PlaceProgress:
    """Where a search is: its stage, case checks so far, the best score so far (or None)."""

    stage: str
    case_checks: int
    best_score: float | None


def _candidate(vary, values, settings, outcomes: Sequence[Outcome]) -> Candidate:
    binding = worst_of(o.binding for o in outcomes)
    passed = binding.score > 0 and all(o.passed for o in outcomes)
    return Candidate(tuple(float(v) for v in values), settings, binding, passed)


def _coarsest_step(trajectory: Trajectory) -> int:
    """The coarsest of COARSE_STEPS that keeps MIN_THINNED_SAMPLES samples (else 1)."""
    fits = [k for k in COARSE_STEPS if trajectory.n_samples >= k * MIN_THINNED_SAMPLES]
    return fits[0] if fits else 1


def _finer(step: int) -> int:
    """The next finer step after `step` (1 after the finest thinned one)."""
    finer = [k for k in COARSE_STEPS if k < step]
    return finer[0] if finer else 1


def place(
    robot: Robot,
    cases: Sequence[Trajectory | str | Path],
    vary: Sequence[Variation] | str,
    settings: CheckSettings | None = None,
    *,
    labels: Sequence[str] | None = None,
    seed: int = 0,
    workers: int = 1,
    cluster: str | None = None,
    map_quantities: tuple[int, int] | None = None,
    map_points: int = MAP_POINTS,
    progress: Callable[[PlaceProgress], None] | None = None,
) -> PlacementResult:
    """Find the placement (and rail position or bandwidth, where varied) with the largest
    worst margin over every case; see the module docstring for how.

    cases: trajectories or their files; labels: their names in the result (default: their
    names). vary: the quantities and their ranges, as Variations or the --vary text
    ("x=-1:1,yaw=-45:45"); settings: the starting placement and
    the other check options. seed: makes the search repeatable. workers: local processes
    (1: this process); cluster: the address of a running Dask scheduler instead.
    map_quantities: indices into vary of two quantities whose score map to compute around the
    best, on map_points × map_points placements. Raises ReachgateError on bad input.
    """
    from scipy.optimize import differential_evolution, minimize

    settings = settings or CheckSettings()
    vary = parse_vary(vary) if isinstance(vary, str) else tuple(vary)
    cases = [c if isinstance(c, Trajectory) else load_trajectory(c) for c in cases]
    if not cases:
        raise ReachgateError("place: give at least one case")
    labels = [c.name for c in cases] if labels is None else list(labels)
    check_variations(robot, settings, vary)
    if map_quantities is not None and len(set(map_quantities)) != 2:
        raise ReachgateError("--map: needs two different varied quantities")
    if map_points < 2:
        raise ReachgateError(f"--map-points: at least 2, got {map_points}")
    lows = np.array([v.low for v in vary])
    highs = np.array([v.high for v in vary])
    start_values = starting_values(robot, settings, vary)
    start_inside = bool(np.all((start_values >= lows) & (start_values <= highs)))
    rng = np.random.default_rng(seed)
    placements_scored = 0
    best_so_far: float | None = None

    def report(stage: str, evaluator: Evaluator) -> None:
        if progress is not None:
            progress(PlaceProgress(stage, evaluator.case_checks, best_so_far))

    with Evaluator(robot, cases, labels, workers=workers, cluster=cluster) as evaluator:
        every_case = list(range(len(cases)))
        full_steps = [1] * len(cases)
        report("checking the start", evaluator)
        at_start = evaluator.scores([settings], every_case, full_steps)[0]
        start = _candidate(vary, start_values, settings, at_start)
        steps = [_coarsest_step(case) for case in cases]
        active = [min(every_case, key=lambda c: at_start[c].binding.score)]

        def scores_at(values: np.ndarray) -> np.ndarray:
            """Scores of placements (S, n_vary) on the binding cases at their steps."""
            nonlocal placements_scored
            placements_scored += len(values)
            outcomes = evaluator.scores(
                [settings_at(settings, vary, x) for x in values], active, steps
            )
            return np.array([min(o.binding.score for o in row) for row in outcomes])

        def objective(x_columns: np.ndarray) -> np.ndarray:
            return -scores_at(np.atleast_2d(x_columns.T))

        stage = ""

        def generation(intermediate_result) -> None:
            nonlocal best_so_far
            best_so_far = -float(intermediate_result.fun)
            report(stage, evaluator)

        population = None
        rounds = 0
        validated: set[int] = set()
        while rounds < MAX_ROUNDS:
            rounds += 1
            stage = f"searching (round {rounds})"
            x0 = start_values if start_inside and population is None else None
            found = differential_evolution(
                objective,
                list(zip(lows, highs, strict=True)),
                popsize=POPULATION_PER_QUANTITY,
                maxiter=MAX_GENERATIONS,
                atol=SCORE_SPREAD_TOLERANCE,
                tol=0.01,
                rng=rng,
                polish=False,
                init="latinhypercube" if population is None else population,
                x0=x0,
                vectorized=True,
                updating="deferred",
                callback=generation,
            )
            population = found.population
            polished = minimize(
                lambda x: float(objective(x[:, None])[0]),
                found.x,
                method="Nelder-Mead",
                bounds=list(zip(lows, highs, strict=True)),
                options={"maxfev": POLISH_POINTS, "xatol": 1e-3, "fatol": 1e-4},
            )
            best_x = polished.x if polished.fun <= found.fun else found.x
            best_so_far = -float(min(polished.fun, found.fun))
            # the best on the full cases: does each keep its thinned score, does another bind?
            changed = _settle_steps(evaluator, settings_at(settings, vary, best_x), steps,
                                    active, validated)  # fmt: skip
            at_best = evaluator.scores([settings_at(settings, vary, best_x)], every_case, steps)[0]
            others = [c for c in every_case if c not in active]
            if others:
                worst = min(others, key=lambda c: at_best[c].binding.score)
                if at_best[worst].binding.score < best_so_far - BINDING_TOLERANCE:
                    active.append(worst)
                    changed = True
            if not changed:
                break
            population = np.vstack([best_x, population])

        report("checking the finalists in full", evaluator)
        finalists = _finalists(vary, best_x, found.population, found.population_energies)
        finalist_settings = [settings_at(settings, vary, x) for x in finalists]
        full = evaluator.scores(finalist_settings, every_case, full_steps)
        candidates = [
            _candidate(vary, x, s, row)
            for x, s, row in zip(finalists, finalist_settings, full, strict=True)
        ]
        if start_inside:
            candidates.append(start)
        best = max(candidates, key=lambda c: (c.passed, c.score))

        full_checks, thinned_checks = evaluator.full_checks, evaluator.thinned_checks
        score_map = None
        if map_quantities is not None:
            report("scoring the map", evaluator)
            score_map = _score_map(
                evaluator, settings, vary, best, map_quantities, map_points, active, steps
            )
        return PlacementResult(
            robot=robot.name,
            cases=tuple(labels),
            vary=vary,
            best=best,
            start=start,
            seed=seed,
            steps=tuple(steps),
            binding_cases=tuple(labels[c] for c in active),
            full_checks=full_checks,
            thinned_checks=thinned_checks,
            placements_scored=placements_scored,
            rounds=rounds,
            score_map=score_map,
        )


def _settle_steps(evaluator, at_best, steps: list[int], active, validated: set[int]) -> bool:
    """Check the best placement in full on every binding case and every case not yet
    validated; where a case's thinned score there is more than COARSE_TOLERANCE off, give it
    the coarsest finer step that keeps it (1 at worst). -> whether a binding case's changed."""
    todo = [c for c in range(len(steps)) if steps[c] > 1 and (c in active or c not in validated)]
    if not todo:
        return False
    full = dict(zip(todo, evaluator.scores([at_best], todo, [1] * len(steps))[0], strict=True))
    changed = False
    while todo:
        thin = evaluator.scores([at_best], todo, steps)[0]
        off = []
        for c, outcome in zip(todo, thin, strict=True):
            if abs(outcome.binding.score - full[c].binding.score) <= COARSE_TOLERANCE:
                validated.add(c)
            else:
                steps[c] = _finer(steps[c])
                changed |= c in active
                if steps[c] > 1:
                    off.append(c)
                else:
                    validated.add(c)
        todo = off
    return changed


def _finalists(vary, best_x, population, energies) -> list[np.ndarray]:
    """The best point and the best of the population, rounded to the printed precision,
    without repeats: FINALISTS at most."""
    finalists: list[np.ndarray] = []
    for x in [best_x, *population[np.argsort(energies)]]:
        x = rounded(vary, x)
        if not any(np.array_equal(x, y) for y in finalists):
            finalists.append(x)
        if len(finalists) == FINALISTS:
            break
    return finalists


def _score_map(evaluator, settings, vary, best, quantities, points, active, steps) -> ScoreMap:
    """The score on a points × points grid over two quantities' ranges, the rest at best."""
    i, j = quantities
    xs = np.linspace(vary[i].low, vary[i].high, points)
    ys = np.linspace(vary[j].low, vary[j].high, points)
    placements = []
    for y in ys:
        for x in xs:
            values = np.array(best.values)
            values[i], values[j] = x, y
            placements.append(settings_at(settings, vary, values))
    outcomes = evaluator.scores(placements, active, steps)
    scores = np.array([min(o.binding.score for o in row) for row in outcomes])
    return ScoreMap(
        x=vary[i],
        y=vary[j],
        x_values=xs,
        y_values=ys,
        scores=scores.reshape(ys.size, xs.size),
        cases=tuple(evaluator.labels[c] for c in active),
        steps=tuple(steps[c] for c in active),
    )


def describe_values(vary: Sequence[Variation], values: Sequence[float]) -> str:
    """ "x=0.25 m, yaw=-20 deg" for a result's varied values."""
    return ", ".join(
        f"{v.name}={short_number(x, 3)} {v.unit}" for v, x in zip(vary, values, strict=True)
    )
