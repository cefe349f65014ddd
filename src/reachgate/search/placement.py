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

A rig is searched the same way on its scenarios: each placement is checked by the rig check
(every robot's own checks and the clearance of every pair), so clearance margins enter the
score; the placement is that of the scenario frame in the rig frame (search/vary.py).
"""

from __future__ import annotations

import json
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from reachgate.checking.pipeline import CheckSettings
from reachgate.checking.rig_check import RailChoice, rig_rails
from reachgate.errors import ReachgateError
from reachgate.model.rig import Rig
from reachgate.model.robot import Robot
from reachgate.model.trajectory import (
    PLAIN_BODY,
    Scenario,
    Trajectory,
    load_scenario,
    load_trajectory,
)
from reachgate.search.evaluate import Evaluator, Outcome
from reachgate.search.score import Binding, worst_of
from reachgate.search.vary import (
    Variation,
    check_variations,
    parse_vary,
    place_argument,
    rails_at,
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
    over every case; passed: every case's check passed and the score is above 0; rails: a
    rig's robots' rails (name, policy), None for a robot (its rail is in settings).
    """

    values: tuple[float, ...]
    settings: CheckSettings
    binding: Binding
    passed: bool
    rails: tuple[tuple[str, RailChoice], ...] | None = None

    @property
    def score(self) -> float:
        return self.binding.score

    @property
    def place(self) -> str:
        return place_argument(self.settings.placement)

    def as_dict(self, vary: Sequence[Variation]) -> dict:
        if self.rails is None:
            rails = {
                "rail_at_m": self.settings.rail_at_m,
                "rail_bandwidth_hz": self.settings.rail_bandwidth_hz,
            }
        else:
            rails = {
                "rails": {
                    name: {
                        "rail": choice.policy.value,
                        "rail_at_m": choice.at_m,
                        "rail_bandwidth_hz": choice.bandwidth_hz,
                    }
                    for name, choice in self.rails
                }
            }
        return {
            "place": self.place,
            "values": {v.name: x for v, x in zip(vary, self.values, strict=True)},
            **rails,
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

    robot: the robot's (or the rig's) name; rig: True for a rig file (not a robot alone);
    file_rails: a rig's rails as its file gives them (name, policy), what `check RIG` uses
    without rail options.
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
    rig: bool = False
    file_rails: tuple[tuple[str, RailChoice], ...] | None = None

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
            "rig": self.rig,
            "cases": list(self.cases),
            "vary": {v.name: [v.low, v.high] for v in self.vary},
            "verdict": "pass" if self.passed else "fail",
            "best": self.best.as_dict(self.vary),
            "start": self.start.as_dict(self.vary),
            "settings": self._settings(),
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

    def _settings(self) -> dict:
        """The best placement's check settings; a rig's rails are in best.rails instead."""
        settings = self.best.settings.as_dict()
        if self.rig:
            for key in ("rail", "rail_at_m", "rail_bandwidth_hz"):
                settings.pop(key)
        return settings

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.as_dict(), indent=indent)


@dataclass(frozen=True)
class PlaceProgress:
    """Where a search is: its stage, case checks so far, the best score so far (or None)."""

    stage: str
    case_checks: int
    best_score: float | None


#: One placement as the evaluator takes it: the settings and a rig's rails (None: a robot).
Point = tuple[CheckSettings, tuple[tuple[str, RailChoice], ...] | None]


def _candidate(values, point: Point, outcomes: Sequence[Outcome]) -> Candidate:
    binding = worst_of(o.binding for o in outcomes)
    passed = binding.score > 0 and all(o.passed for o in outcomes)
    return Candidate(tuple(float(v) for v in values), point[0], binding, passed, point[1])


def _coarsest_step(trajectory: Trajectory | Scenario) -> int:
    """The coarsest of COARSE_STEPS that keeps MIN_THINNED_SAMPLES samples (else 1)."""
    fits = [k for k in COARSE_STEPS if trajectory.n_samples >= k * MIN_THINNED_SAMPLES]
    return fits[0] if fits else 1


def _finer(step: int) -> int:
    """The next finer step after `step` (1 after the finest thinned one)."""
    finer = [k for k in COARSE_STEPS if k < step]
    return finer[0] if finer else 1


def _rig_cases(rig: Rig, cases) -> list[Scenario]:
    """A rig's cases as scenarios (files read as scenarios; a trajectory is one plain body),
    each holding every body the rig's robots follow (else ReachgateError naming it)."""
    scenarios = []
    for case in cases:
        if isinstance(case, Trajectory):
            case = Scenario.from_trajectories({PLAIN_BODY: case}, name=case.name)
        elif not isinstance(case, Scenario):
            case = load_scenario(case)
        rig.bodies(case)
        scenarios.append(case)
    return scenarios


def place(
    robot: Robot | Rig,
    cases: Sequence[Trajectory | Scenario | str | Path],
    vary: Sequence[Variation] | str,
    settings: CheckSettings | None = None,
    *,
    rails: RailChoice | None = None,
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

    robot: a robot, or a rig (its placement: the scenario frame in the rig frame; its rail
    quantities name their robot, "carrier.rail_at"). cases: trajectories, a rig's scenarios,
    or their files; labels: their names in the result (default: their names). vary: the
    quantities and their ranges, as Variations or the --vary text ("x=-1:1,yaw=-45:45");
    settings: the starting placement and the other check options (a robot's rail too);
    rails: a rig's rails, one choice for every robot with a rail (default: the rig file's),
    as for the rig check. seed: makes the search repeatable. workers: local processes
    (1: this process); cluster: the address of a running Dask scheduler instead.
    map_quantities: indices into vary of two quantities whose score map to compute around the
    best, on map_points × map_points placements. Raises ReachgateError on bad input.
    """
    from scipy.optimize import differential_evolution, minimize

    settings = settings or CheckSettings()
    vary = parse_vary(vary) if isinstance(vary, str) else tuple(vary)
    if isinstance(robot, Rig) and robot.alone:
        robot = robot.robots[0].robot
    base_rails = None
    if isinstance(robot, Rig):
        base_rails = rig_rails(robot, rails)
    elif rails is not None:
        settings = replace(settings, rail=rails.policy, rail_at_m=rails.at_m,
                           rail_bandwidth_hz=rails.bandwidth_hz)  # fmt: skip
    check_variations(robot, settings, vary, base_rails)
    if isinstance(robot, Rig):
        cases = _rig_cases(robot, cases)
    else:
        cases = [c if isinstance(c, Trajectory) else load_trajectory(c) for c in cases]
    if not cases:
        raise ReachgateError("place: give at least one case")
    labels = [c.name for c in cases] if labels is None else list(labels)

    def point_at(values) -> Point:
        """The settings (and a rig's rails) at the varied quantities' values."""
        at = settings_at(settings, vary, values)
        return at, None if base_rails is None else rails_at(base_rails, vary, values)

    def scored(points: Sequence[Point], cases_: Sequence[int], steps_: Sequence[int]):
        return evaluator.scores([p[0] for p in points], cases_, steps_, [p[1] for p in points])

    if map_quantities is not None and len(set(map_quantities)) != 2:
        raise ReachgateError("--map: needs two different varied quantities")
    if map_points < 2:
        raise ReachgateError(f"--map-points: at least 2, got {map_points}")
    lows = np.array([v.low for v in vary])
    highs = np.array([v.high for v in vary])
    start_values = starting_values(robot, settings, vary, base_rails)
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
        start_point = point_at(start_values)
        at_start = scored([start_point], every_case, full_steps)[0]
        start = _candidate(start_values, start_point, at_start)
        steps = [_coarsest_step(case) for case in cases]
        active = [min(every_case, key=lambda c: at_start[c].binding.score)]

        def scores_at(values: np.ndarray) -> np.ndarray:
            """Scores of placements (S, n_vary) on the binding cases at their steps."""
            nonlocal placements_scored
            placements_scored += len(values)
            outcomes = scored([point_at(x) for x in values], active, steps)
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
            changed = _settle_steps(scored, point_at(best_x), steps, active, validated)
            at_best = scored([point_at(best_x)], every_case, steps)[0]
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
        finalist_points = [point_at(x) for x in finalists]
        full = scored(finalist_points, every_case, full_steps)
        candidates = [
            _candidate(x, point, row)
            for x, point, row in zip(finalists, finalist_points, full, strict=True)
        ]
        if start_inside:
            candidates.append(start)
        best = max(candidates, key=lambda c: (c.passed, c.score))

        full_checks, thinned_checks = evaluator.full_checks, evaluator.thinned_checks
        score_map = None
        if map_quantities is not None:
            report("scoring the map", evaluator)
            score_map = _score_map(
                scored, point_at, evaluator.labels, vary, best, map_quantities, map_points,
                active, steps,
            )  # fmt: skip
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
            rig=isinstance(robot, Rig),
            file_rails=None if base_rails is None else tuple(rig_rails(robot).items()),
        )


def _settle_steps(scored, at_best: Point, steps: list[int], active, validated: set[int]) -> bool:
    """Check the best placement in full on every binding case and every case not yet
    validated; where a case's thinned score there is more than COARSE_TOLERANCE off, give it
    the coarsest finer step that keeps it (1 at worst). -> whether a binding case's changed."""
    todo = [c for c in range(len(steps)) if steps[c] > 1 and (c in active or c not in validated)]
    if not todo:
        return False
    full = dict(zip(todo, scored([at_best], todo, [1] * len(steps))[0], strict=True))
    changed = False
    while todo:
        thin = scored([at_best], todo, steps)[0]
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


def _score_map(scored, point_at, labels, vary, best, quantities, points, active, steps) -> ScoreMap:
    """The score on a points × points grid over two quantities' ranges, the rest at best."""
    i, j = quantities
    xs = np.linspace(vary[i].low, vary[i].high, points)
    ys = np.linspace(vary[j].low, vary[j].high, points)
    placements = []
    for y in ys:
        for x in xs:
            values = np.array(best.values)
            values[i], values[j] = x, y
            placements.append(point_at(values))
    outcomes = scored(placements, active, steps)
    scores = np.array([min(o.binding.score for o in row) for row in outcomes])
    return ScoreMap(
        x=vary[i],
        y=vary[j],
        x_values=xs,
        y_values=ys,
        scores=scores.reshape(ys.size, xs.size),
        cases=tuple(labels[c] for c in active),
        steps=tuple(steps[c] for c in active),
    )


def describe_values(vary: Sequence[Variation], values: Sequence[float]) -> str:
    """ "x=0.25 m, yaw=-20 deg" for a result's varied values."""
    return ", ".join(
        f"{v.name}={short_number(x, 3)} {v.unit}" for v, x in zip(vary, values, strict=True)
    )
