"""Clearance between the shapes of a rig, at every sample and between samples (DESIGN §9).

Inputs are robots placed in the rig frame with their solved axis values (N, n_axes) (rail
first) and fixed obstacles. Output: `clearance` rows (axis "a/b", worst = the smallest distance
in m, limit = min_m), per-pair margins and, for pairs that come near, the distance per sample.

How it works, over blocks of samples and never per sample in Python:

1. Broad phase. Samples are cut into blocks (BLOCK_LEVELS, coarse to fine). Each pair's exact
   distance is taken at the first sample of a block; a bound on how far any point of either
   shape can move within the block (each axis's range over the block times the motion bounds
   of kinematics.bodies) gives a lower bound over the whole block, between samples included.
   Blocks whose bound stays above near_m are dropped for that pair, the others split finer.
2. Narrow phase. The finest blocks left are evaluated at every sample (checking.distances).
3. Between samples. For each step the adaptive bound of Schwarzer, Saha and Latombe (2005):
   with distances d0, d1 at the two samples and a bound L on how far the two shapes can move
   towards each other over the step, the distance along the step (joint values interpolated
   linearly) never drops below min(d0, d1, (d0 + d1 - L) / 2). A step whose bound drops below
   min_m while both samples are clear is bisected on interpolated joint values; a pose closer
   than min_m gives a row spanning the step, and a step the bisection cannot settle gives a
   row spanning the step with the bound as its worst. Each such row has a note.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from itertools import combinations

import numpy as np

from reachgate.checking.distances import (
    box_box,
    box_halfspace,
    segment_box,
    segment_halfspace,
    segment_segment,
)
from reachgate.checking.intervals import Check, IntervalStream, Severity, Violation
from reachgate.errors import ReachgateError
from reachgate.kinematics.bodies import (
    HalfSpace,
    OrientedBox,
    Primitive,
    Segment,
    motion_bounds,
    obstacle_primitive,
    pose_parts,
)
from reachgate.model.geometry import Obstacle
from reachgate.model.robot import Robot

#: Block sizes of the broad phase, coarse to fine (each divides the one before): a pair's
#: distance is taken exactly at each block's first sample and bounded over the block by the
#: motion bounds; blocks that cannot be dropped are split into the next size. Tuned on
#: tests/benchmarks/bench_clearance.py (coarse blocks make few exact evaluations, fine ones
#: leave few samples to evaluate one by one).
BLOCK_LEVELS = (512, 64, 8)
#: Samples per chunk of work (a multiple of the coarsest block): bounds the memory of the
#: posed shapes on long runs.
CHUNK_SAMPLES = 65_536
#: Most samples measured in one call of a distance kernel by _pair_distances (bounds the
#: memory of the gathered copies; many pairs go into one call, whose numpy overhead is then
#: paid once and not per pair).
BATCH_SAMPLES = 65_536
#: Bisection depth for a step the between-sample bound cannot clear: each halving halves the
#: motion bound, so 2^-24 of the step's motion is left unresolved at most.
MAX_BISECTIONS = 24
#: Below half of min_m the margin 1 - min_m/d continues along its tangent (4 d / min_m - 3),
#: so that touching (-3) and overlapping pairs keep finite, ordered margins.
MARGIN_TANGENT_FRACTION = 0.5


@dataclass(frozen=True)
class PlacedRobot:
    """A robot in a rig: its rig name (prefix of its shapes), the robot, its cell in the rig.

    rig_T_cell: (4, 4) the robot file's cell frame in the rig frame.
    """

    name: str
    robot: Robot
    rig_T_cell: np.ndarray = field(default_factory=lambda: np.eye(4))


@dataclass(frozen=True)
class ClearanceSettings:
    """min_m: closer is a violation; near_m: closer is near; contact/ignore: pairs not checked."""

    min_m: float = 0.05
    near_m: float = 0.15
    contact: frozenset[frozenset[str]] = frozenset()
    ignore: frozenset[frozenset[str]] = frozenset()

    def __post_init__(self) -> None:
        if not (math.isfinite(self.min_m) and self.min_m > 0):
            raise ReachgateError(f"clearance min_m must be positive, got {self.min_m!r}")
        if not (math.isfinite(self.near_m) and self.near_m >= self.min_m):
            raise ReachgateError(
                f"clearance near_m must be at least min_m ({self.min_m:g}), got {self.near_m!r}"
            )


@dataclass(frozen=True)
class LeftOut:
    """A pair of shapes that is not checked, and why."""

    a: str
    b: str
    reason: str


@dataclass(frozen=True)
class PairPlan:
    """Pairs checked ("a", "b" in shape order) and pairs left out with their reasons."""

    checked: tuple[tuple[str, str], ...]
    left_out: tuple[LeftOut, ...]


@dataclass(frozen=True)
class ClearanceResult:
    """Rows, margins ("a/b" -> 1 - min_m / smallest distance, None if never measured), the
    distance per sample (N,) of each pair that comes within near_m at some sample, and notes.

    A closest_m series is NaN where the pair was not evaluated (the broad phase proved it
    farther than near_m there, or the sample is untrusted); it holds every evaluated sample
    of the chunks of CHUNK_SAMPLES in which the pair came within near_m."""

    rows: tuple[Violation, ...]
    margins: dict[str, float | None]
    closest_m: dict[str, np.ndarray]
    notes: tuple[str, ...]


# --- shapes and pairs --------------------------------------------------------------------


@dataclass(frozen=True)
class _Shape:
    name: str
    robot: int | None  # index into robots, None for an obstacle
    part: int  # index into the robot's parts (or the obstacle list)
    row: int


def _shapes(robots: tuple[PlacedRobot, ...], obstacles: tuple[Obstacle, ...]) -> list[_Shape]:
    shapes = [
        _Shape(f"{placed.name}.{part.name}", r, j, part.row)
        for r, placed in enumerate(robots)
        for j, part in enumerate(placed.robot.parts)
    ]
    shapes += [_Shape(obstacle.name, None, j, 0) for j, obstacle in enumerate(obstacles)]
    return shapes


def shape_names(robots, obstacles) -> tuple[str, ...]:
    """Every shape's report name: "robot.base", "robot.link3", "robot.<payload>", obstacles."""
    return tuple(shape.name for shape in _shapes(tuple(robots), tuple(obstacles)))


def pair_name(a: str, b: str) -> str:
    return f"{a}/{b}"


class _Scene:
    """Shapes, their primitives per robot, and the motion bounds."""

    def __init__(self, robots, obstacles) -> None:
        self.robots = tuple(robots)
        self.obstacles = tuple(obstacles)
        self.shapes = _shapes(self.robots, self.obstacles)
        self.by_name = {shape.name: shape for shape in self.shapes}
        if len(self.by_name) != len(self.shapes):
            names = [shape.name for shape in self.shapes]
            twice = sorted({name for name in names if names.count(name) > 1})
            raise ReachgateError(f"clearance: shape names used twice: {', '.join(twice)}")
        self.bounds = [motion_bounds(placed.robot) for placed in self.robots]
        self.fixed = [(obstacle_primitive(o),) for o in self.obstacles]

    def pose(self, r: int, q: np.ndarray) -> list[tuple[Primitive, ...]]:
        placed = self.robots[r]
        posed = pose_parts(placed.robot, placed.rig_T_cell, q)
        return [posed[part.name] for part in placed.robot.parts]

    def primitives(self, shape: _Shape, poses) -> tuple[Primitive, ...]:
        if shape.robot is None:
            return self.fixed[shape.part]
        return poses[shape.robot][shape.part]


def _check_names(scene: _Scene, settings: ClearanceSettings) -> None:
    for label, pairs in (("contact", settings.contact), ("ignore", settings.ignore)):
        for pair in pairs:
            for name in pair:
                if name not in scene.by_name:
                    known = ", ".join(scene.by_name) or "none"
                    raise ReachgateError(
                        f"clearance {label} pair names an unknown shape {name!r} (shapes: {known})"
                    )


def plan_pairs(robots, obstacles, settings: ClearanceSettings) -> PairPlan:
    """The pairs DESIGN §9 checks, and those it leaves out with the reason.

    Checked: every shape of one robot against every shape of another, every robot shape
    against every obstacle, and a robot's own shapes two or more rows apart; less the contact
    and ignore pairs and the pairs closer than min_m at home (every axis, rails included, at
    its home value).
    """
    scene = _Scene(robots, obstacles)
    _check_names(scene, settings)
    candidates = []
    for a, b in combinations(scene.shapes, 2):
        if a.robot is None and b.robot is None:
            continue
        if a.robot is not None and a.robot == b.robot and abs(a.row - b.row) < 2:
            continue
        candidates.append((a, b))
    home = [scene.pose(r, p.robot.home[None, :]) for r, p in enumerate(scene.robots)]
    checked, left_out = [], []
    for a, b in candidates:
        key = frozenset((a.name, b.name))
        if key in settings.contact:
            left_out.append(LeftOut(a.name, b.name, "contact"))
            continue
        if key in settings.ignore:
            left_out.append(LeftOut(a.name, b.name, "ignore"))
            continue
        d_home = float(_pair_distance(scene.primitives(a, home), scene.primitives(b, home))[0])
        if d_home < settings.min_m:
            reason = f"closer than min_m at home ({d_home:.3f} m)"
            left_out.append(LeftOut(a.name, b.name, reason))
            continue
        checked.append((a.name, b.name))
    return PairPlan(tuple(checked), tuple(left_out))


# --- distances between shapes ------------------------------------------------------------


def _take(primitive: Primitive, index) -> Primitive:
    """The primitive at some of its samples (fixed obstacles are returned as they are)."""
    if index is None or isinstance(primitive, HalfSpace) or primitive_size(primitive) == 1:
        return primitive
    if isinstance(primitive, Segment):
        return Segment(primitive.p0_m[:, index], primitive.p1_m[:, index], primitive.radius_m)
    return OrientedBox(primitive.center_m[:, index], primitive.axes[:, :, index], primitive.half_m)


def primitive_size(primitive: Primitive) -> int:
    if isinstance(primitive, Segment):
        return primitive.p0_m.shape[1]
    if isinstance(primitive, OrientedBox):
        return primitive.center_m.shape[1]
    return 1


def _in_order(a: Primitive, b: Primitive) -> tuple[Primitive, Primitive, bool]:
    """The two primitives in the order the distance kernels take them (segment first, then
    box, then half-space), and whether they were swapped."""
    if isinstance(b, Segment) and not isinstance(a, Segment):
        return b, a, True
    if isinstance(b, OrientedBox) and isinstance(a, HalfSpace):
        return b, a, True
    return a, b, False


def _primitive_distance(a: Primitive, b: Primitive) -> np.ndarray:
    """Signed distance between two primitives (radii taken off), broadcast over samples."""
    a, b, _ = _in_order(a, b)
    return _kernel(type(a), type(b), _fields(a), _fields(b))


def _fields(primitive: Primitive) -> tuple:
    """The arrays a kernel reads: Segment (p0, p1, radius), OrientedBox (centre, axes, half
    sizes), HalfSpace (point, normal)."""
    if isinstance(primitive, Segment):
        return primitive.p0_m, primitive.p1_m, primitive.radius_m
    if isinstance(primitive, OrientedBox):
        return primitive.center_m, primitive.axes, primitive.half_m
    return primitive.point_m, primitive.normal


def _kernel(kind_a: type, kind_b: type, a: tuple, b: tuple) -> np.ndarray:
    """Distance of two primitives given as _fields, kinds in _in_order; radii and half sizes
    may be numbers or one per sample."""
    if kind_a is Segment:
        if kind_b is Segment:
            return segment_segment(a[0], a[1], b[0], b[1]) - (a[2] + b[2])
        if kind_b is OrientedBox:
            return segment_box(a[0], a[1], b[0], b[1], b[2]) - a[2]
        return segment_halfspace(a[0], a[1], b[0], b[1]) - a[2]
    if kind_a is OrientedBox:
        if kind_b is OrientedBox:
            return box_box(a[0], a[1], a[2], b[0], b[1], b[2])
        if kind_b is HalfSpace:
            return box_halfspace(a[0], a[1], a[2], b[0], b[1])
    raise ReachgateError("two half-spaces are never a checked pair")  # plan_pairs excludes it


def _gathered(primitive: Primitive, index, m: int) -> tuple:
    """_fields at the samples `index` (None: the primitive's own samples), every field one
    value per sample: (..., m) arrays."""
    fields = _fields(_take(primitive, index))
    if isinstance(primitive, Segment):
        fields = (*fields[:2], np.full(m, fields[2]))
    elif isinstance(primitive, OrientedBox):
        fields = (*fields[:2], np.repeat(np.asarray(fields[2], dtype=float)[:, None], m, axis=1))
    return tuple(f if f.shape[-1] == m else np.broadcast_to(f, (*f.shape[:-1], m)) for f in fields)


def _pair_distances(scene: _Scene, requests, poses, rank) -> list[np.ndarray]:
    """Least distance over each pair's primitives at its chunk positions, for many pairs.

    requests: (state, positions (M,)) with M > 0; poses, rank: from _pose_at. The same values
    as _distance_at pair by pair: every primitive pair of one kind, over every request, is
    measured in one kernel call of up to BATCH_SAMPLES samples, so the cost of the numpy
    calls is paid per kind and not per pair. -> (M,) per request.
    """
    groups: dict[tuple[type, type], list] = {}
    posed = [int(r[-1]) + 1 for r in rank]  # samples posed per robot

    def index(shape: _Shape, positions: np.ndarray):
        # positions are sorted and posed: all of them are every posed sample in order
        if shape.robot is None or positions.size == posed[shape.robot]:
            return None
        return rank[shape.robot][positions]

    for r, (state, positions) in enumerate(requests):
        where = [index(state.a, positions), index(state.b, positions)]
        for pa in scene.primitives(state.a, poses):
            for pb in scene.primitives(state.b, poses):
                a, b, swapped = _in_order(pa, pb)
                index_a, index_b = where[::-1] if swapped else where
                job = (r, a, index_a, b, index_b, positions.size)
                groups.setdefault((type(a), type(b)), []).append(job)
    out: list[np.ndarray | None] = [None] * len(requests)
    for kind, jobs in groups.items():
        start = 0
        while start < len(jobs):
            stop, total = start, 0
            while stop < len(jobs) and (stop == start or total + jobs[stop][5] <= BATCH_SAMPLES):
                total += jobs[stop][5]
                stop += 1
            batch = jobs[start:stop]
            sides = [
                [_gathered(job[1 + 2 * side], job[2 + 2 * side], job[5]) for job in batch]
                for side in (0, 1)
            ]
            fields = [
                tuple(np.concatenate(parts, axis=-1) for parts in zip(*side, strict=True))
                for side in sides
            ]
            values = _kernel(*kind, *fields)
            at = 0
            for r, *_, m in batch:
                value = values[at : at + m]
                out[r] = value if out[r] is None else np.minimum(out[r], value)
                at += m
            start = stop
    return out


def _pair_distance(prims_a, prims_b, index_a=None, index_b=None) -> np.ndarray:
    """Least distance over the two shapes' primitives: (M,)."""
    best = None
    for pa in prims_a:
        for pb in prims_b:
            d = _primitive_distance(_take(pa, index_a), _take(pb, index_b))
            best = d if best is None else np.minimum(best, d)
    return np.atleast_1d(best)


def margin_of(distance_m: float, min_m: float) -> float:
    """1 - min_m / d (DESIGN §9), continued along its tangent below a fraction of min_m."""
    knee = MARGIN_TANGENT_FRACTION * min_m
    if distance_m >= knee:
        return 1.0 - min_m / distance_m
    return (1.0 - min_m / knee) + min_m / knee**2 * (distance_m - knee)


# --- the check ---------------------------------------------------------------------------


@dataclass
class _PairState:
    """What one checked pair has gathered so far over the chunks."""

    a: _Shape
    b: _Shape
    stream: IntervalStream
    smallest_m: float = math.inf  # least evaluated distance
    skipped_bound_m: float = math.inf  # least lower bound of a skipped block
    near_index: list = field(default_factory=list)
    near_value: list = field(default_factory=list)
    steps: list = field(default_factory=list)  # (sample index, d0, d1, motion bound) to bisect

    @property
    def name(self) -> str:
        return pair_name(self.a.name, self.b.name)


def _block_ranges(values: np.ndarray, total: int) -> dict[int, tuple[np.ndarray, np.ndarray]]:
    """Largest and least value of every column over the blocks of each size in BLOCK_LEVELS.

    values: (M, k); total: M rounded up to the coarsest block (the last sample repeats past
    the end). Each block includes the next block's first sample, so that any two
    configurations on a block's samples and steps differ by at most high - low per axis.
    Returns {size: (high, low)}, each (total // size, k); coarse sizes from the finest.
    """
    columns = np.ascontiguousarray(values.T)
    edge = np.repeat(columns[:, -1:], total + 1 - columns.shape[1], axis=1)
    padded = np.concatenate([columns, edge], axis=1)
    finest = BLOCK_LEVELS[-1]
    body = padded[:, :total].reshape(columns.shape[0], total // finest, finest)
    following = padded[:, finest : total + 1 : finest]
    high = np.maximum(_fold(np.maximum, body), following)
    low = np.minimum(_fold(np.minimum, body), following)
    out = {finest: (high.T, low.T)}
    for size in BLOCK_LEVELS[:-1]:
        shape = (columns.shape[0], total // size, size // finest)
        out[size] = (
            _fold(np.maximum, high.reshape(shape)).T,
            _fold(np.minimum, low.reshape(shape)).T,
        )
    return out


def _fold(operation, values: np.ndarray) -> np.ndarray:
    """operation (np.maximum or np.minimum) folded over the short last axis of values: one
    whole-array call per entry of that axis (numpy reduces a short last axis row by row)."""
    out = values[..., 0]
    for i in range(1, values.shape[-1]):
        out = operation(out, values[..., i])
    return out


def check_clearance(
    t_s: np.ndarray,
    robots,
    q_by_robot: dict[str, np.ndarray],
    obstacles,
    plan: PairPlan,
    settings: ClearanceSettings,
    trusted: dict[str, np.ndarray] | None = None,
) -> ClearanceResult:
    """Clearance rows, margins and near-pair distances for a rig over N samples.

    t_s: (N,) times; robots: PlacedRobot values; q_by_robot: rig name -> (N, n_axes) solved
    axis values (rail first); obstacles: Obstacle values; plan: from plan_pairs; trusted: rig
    name -> (N,) bool, False where the axis values are not a real pose (unreachable samples).
    Untrusted or non-finite samples are left out, and so are the steps next to them.
    """
    scene = _Scene(robots, obstacles)
    _check_names(scene, settings)
    t_s = np.asarray(t_s, dtype=float)
    n = t_s.size
    qs, good = [], np.ones(n, bool)
    for placed in scene.robots:
        if placed.name not in q_by_robot:
            raise ReachgateError(f"clearance: no axis values for robot {placed.name!r}")
        q = np.asarray(q_by_robot[placed.name], dtype=float)
        if q.shape != (n, placed.robot.n_axes):
            raise ReachgateError(
                f"clearance: axis values of {placed.name!r} have shape {q.shape}, "
                f"expected ({n}, {placed.robot.n_axes})"
            )
        ok = np.all(np.isfinite(q), axis=1)
        if trusted is not None and placed.name in trusted:
            ok &= np.asarray(trusted[placed.name], dtype=bool)
        good &= ok
        qs.append(q)
    for r, q in enumerate(qs):  # prismatic joints may travel beyond their range on a path
        if good.any() and not all(j.is_revolute for j in scene.robots[r].robot.joints):
            travel = (q[good].min(axis=0), q[good].max(axis=0))
            scene.bounds[r] = motion_bounds(scene.robots[r].robot, travel)
    states = []
    for a_name, b_name in plan.checked:
        if a_name not in scene.by_name or b_name not in scene.by_name:
            raise ReachgateError(f"clearance: the pair {a_name}/{b_name} is not of this rig")
        a, b = scene.by_name[a_name], scene.by_name[b_name]
        stream = IntervalStream(
            settings.near_m - settings.min_m,
            check=Check.CLEARANCE,
            axis=pair_name(a.name, b.name),
            unit="m",
        )
        states.append(_PairState(a, b, stream))
    for first in range(0, n, CHUNK_SAMPLES):
        _chunk(scene, settings, t_s, qs, good, states, first, min(first + CHUNK_SAMPLES, n))
    between_rows, between_notes = _between_samples(scene, settings, t_s, qs, states)
    rows: list[Violation] = []
    for state in states:
        rows.extend(state.stream.finish())
    rows.extend(between_rows)
    margins = {}
    closest = {}
    for state in states:
        smallest = min(state.smallest_m, state.skipped_bound_m)
        margins[state.name] = (
            None if not math.isfinite(smallest) else margin_of(smallest, settings.min_m)
        )
        if state.near_index:  # the pair came within near_m at some sample
            series = np.full(n, np.nan)
            series[np.concatenate(state.near_index)] = np.concatenate(state.near_value)
            closest[state.name] = series
    notes = list(between_notes)
    for placed in scene.robots:
        if placed.robot.geometry_missing:
            notes.append(
                f"{placed.name}: no geometry for {', '.join(placed.robot.geometry_missing)}; "
                "clearance does not check those parts"
            )
    if not good.all():
        notes.append(
            f"clearance: {int((~good).sum())} samples without a real pose (unreachable) are "
            "left out of the clearance check, with the steps next to them"
        )
    rows.sort(key=lambda v: (v.severity is not Severity.VIOLATION, v.start_s, v.axis))
    return ClearanceResult(tuple(rows), margins, closest, tuple(notes))


def _pose_at(scene, safe_q, wanted):
    """Pose every robot at the chunk positions some pair wants: (poses, rank of positions)."""
    poses = [scene.pose(r, safe_q[r][mask]) for r, mask in enumerate(wanted)]
    return poses, [np.cumsum(mask) - 1 for mask in wanted]


def _chunk(scene, settings, t_s, qs, good_all, states, first, stop) -> None:
    """Rows, margins and between-sample candidates of samples [first, stop) of every pair.

    Broad phase by levels (BLOCK_LEVELS): at each level a pair's remaining blocks are split,
    its exact distance taken at each block's first sample, and a block is dropped when that
    distance less both shapes' motion bounds over the block stays above near_m.
    """
    end = min(stop + 1, t_s.size)  # one sample more: the step into the next chunk
    count = end - first
    good = good_all[first:end]
    safe_q = []
    for r, placed in enumerate(scene.robots):
        q = qs[r][first:end]
        safe_q.append(np.where(good[:, None], q, placed.robot.home))  # untrusted: at home
    coarsest = BLOCK_LEVELS[0]
    total = -(-count // coarsest) * coarsest
    blocks = [np.arange(total // coarsest) for _ in states]  # per pair, block indices
    ranges = [_block_ranges(q, total) for q in safe_q]
    untrusted = _block_ranges((~good).astype(float)[:, None], total)
    for size in BLOCK_LEVELS:
        motion = [
            (ranges[r][size][0] - ranges[r][size][1]) @ scene.bounds[r] for r in range(len(safe_q))
        ]  # (n_blocks, n_parts) per robot
        bad = untrusted[size][0][:, 0] > 0
        wanted = [np.zeros(count, bool) for _ in scene.robots]
        for state, kept in zip(states, blocks, strict=True):
            for shape in (state.a, state.b):
                if shape.robot is not None:
                    wanted[shape.robot][kept * size] = True
        poses, rank = _pose_at(scene, safe_q, wanted)
        live = [i for i, kept in enumerate(blocks) if kept.size]
        measured = _pair_distances(
            scene, [(states[i], blocks[i] * size) for i in live], poses, rank
        )
        for i, lower in zip(live, measured, strict=True):
            state, kept = states[i], blocks[i]
            for shape in (state.a, state.b):
                if shape.robot is not None:
                    lower = lower - motion[shape.robot][kept, shape.part]
            need = ~(lower > settings.near_m) | bad[kept]
            if (~need).any():
                state.skipped_bound_m = min(state.skipped_bound_m, float(lower[~need].min()))
            kept = kept[need]
            finer = BLOCK_LEVELS[BLOCK_LEVELS.index(size) + 1] if size != BLOCK_LEVELS[-1] else 0
            if finer:
                split = size // finer
                kept = (kept[:, None] * split + np.arange(split)).ravel()
                kept = kept[kept * finer < count]
            blocks[i] = kept
    # the samples of every remaining finest block, its end (the next block's start) included
    finest = BLOCK_LEVELS[-1]
    masks = []
    for kept in blocks:
        mask = np.zeros(count, bool)
        index = (kept[:, None] * finest + np.arange(finest + 1)).ravel()
        mask[index[index < count]] = True
        masks.append(mask)
    wanted = [np.zeros(count, bool) for _ in scene.robots]
    for state, mask in zip(states, masks, strict=True):
        for shape in (state.a, state.b):
            if shape.robot is not None:
                wanted[shape.robot] |= mask
    poses, rank = _pose_at(scene, safe_q, wanted)
    t_chunk = t_s[first:stop]
    indices = [np.flatnonzero(mask) for mask in masks]
    live = [i for i, index in enumerate(indices) if index.size]
    requests = [(states[i], indices[i]) for i in live]
    measured = dict(zip(live, _pair_distances(scene, requests, poses, rank), strict=True))
    for i, (state, index) in enumerate(zip(states, indices, strict=True)):
        if index.size == 0:
            state.stream.feed(t_chunk[:1], [-np.inf], [np.inf], settings.min_m)
            continue
        d = np.where(good[index], measured.pop(i), np.nan)
        in_chunk = index < stop - first
        _record(state, settings, t_chunk, index[in_chunk], d[in_chunk], first)
        _flag_steps(scene, settings, state, safe_q, index, d, first)


def _record(state, settings, t_chunk, index, d, first) -> None:
    """Feed the chunk's rows and keep the smallest distance and the near samples."""
    finite = np.isfinite(d)
    if finite.any():
        state.smallest_m = min(state.smallest_m, float(d[finite].min()))
    close = finite & (d <= settings.near_m)
    if not close.any():
        state.stream.feed(t_chunk[:1], [-np.inf], [np.inf], settings.min_m)
        return
    # keep every evaluated sample of this chunk for the pair's plot series
    state.near_index.append(first + index[finite])
    state.near_value.append(d[finite])
    distance = np.full(t_chunk.size, np.inf)
    distance[index[finite]] = d[finite]
    state.stream.feed(t_chunk, settings.min_m - distance, distance, settings.min_m)


def _flag_steps(scene, settings, state, safe_q, index, d, first) -> None:
    """Steps inside evaluated blocks whose SSL bound drops below min_m, both samples clear."""
    consecutive = np.flatnonzero(np.diff(index) == 1)
    if consecutive.size == 0:
        return
    k = index[consecutive]
    d0, d1 = d[consecutive], d[consecutive + 1]
    clear = (d0 >= settings.min_m) & (d1 >= settings.min_m)  # NaN (untrusted) is never clear
    if not clear.any():
        return
    reach = np.zeros(k.size)
    for shape in (state.a, state.b):
        if shape.robot is not None:
            q = safe_q[shape.robot]
            reach += np.abs(q[k + 1] - q[k]) @ scene.bounds[shape.robot][:, shape.part]
    bound = np.minimum(np.minimum(d0, d1), 0.5 * (d0 + d1 - reach))
    flagged = clear & (bound < settings.min_m)
    if flagged.any():
        state.steps.append(
            np.column_stack([first + k[flagged], d0[flagged], d1[flagged], reach[flagged]])
        )


def _between_samples(scene, settings, t_s, qs, states):
    """Settle the flagged steps by bisection on interpolated axis values (SSL 2005)."""
    rows, notes = [], []
    for state in states:
        if not state.steps:
            continue
        steps = np.concatenate(state.steps)
        k = steps[:, 0].astype(int)
        # open intervals [s0, s1] of each step, with distances at both ends and motion bound
        s0, s1 = np.zeros(k.size), np.ones(k.size)
        d0, d1, reach = steps[:, 1], steps[:, 2], steps[:, 3]
        owner = np.arange(k.size)
        found = np.full(k.size, np.inf)
        found_s = np.zeros(k.size)
        for _ in range(MAX_BISECTIONS):
            if owner.size == 0:
                break
            mid = 0.5 * (s0 + s1)
            step_k = k[owner]
            poses = []
            for r, q in enumerate(qs):
                q_mid = q[step_k] + mid[:, None] * (q[step_k + 1] - q[step_k])
                poses.append(scene.pose(r, q_mid))
            d_mid = _pair_distance(
                scene.primitives(state.a, poses), scene.primitives(state.b, poses)
            )
            closer = d_mid < found[owner]
            np.minimum.at(found, owner, d_mid)
            found_s[owner[closer]] = mid[closer]
            hit = d_mid < settings.min_m
            half = 0.5 * (s1 - s0) * reach[owner]
            left_bound = np.minimum(np.minimum(d0, d_mid), 0.5 * (d0 + d_mid - half))
            right_bound = np.minimum(np.minimum(d_mid, d1), 0.5 * (d_mid + d1 - half))
            left = ~hit & (left_bound < settings.min_m)
            right = ~hit & (right_bound < settings.min_m)
            # a step with a hit is settled: drop its other open intervals
            settled = np.zeros(k.size, bool)
            settled[owner[hit]] = True
            left &= ~settled[owner]
            right &= ~settled[owner]
            owner, s0, s1, d0, d1 = (
                np.concatenate([owner[left], owner[right]]),
                np.concatenate([s0[left], mid[right]]),
                np.concatenate([mid[left], s1[right]]),
                np.concatenate([d0[left], d_mid[right]]),
                np.concatenate([d_mid[left], d1[right]]),
            )
        unresolved = np.zeros(k.size, bool)
        unresolved[owner] = True
        unresolved &= ~(found < settings.min_m)
        bound_left = np.full(k.size, np.inf)
        if owner.size:
            span = (s1 - s0) * reach[owner]
            np.minimum.at(bound_left, owner, np.minimum(np.minimum(d0, d1), 0.5 * (d0 + d1 - span)))
        hit = found < settings.min_m
        report = np.flatnonzero(hit | unresolved)
        if report.size == 0:
            continue
        # one row per run of consecutive reported steps (each step's samples were clear)
        breaks = np.flatnonzero(np.diff(k[report]) != 1) + 1
        for run in np.split(report, breaks):
            start, stop = float(t_s[k[run[0]]]), float(t_s[k[run[-1]] + 1])
            value = np.where(hit[run], found[run], bound_left[run])
            i = run[int(np.argmin(value))]
            step_start, step_stop = float(t_s[k[i]]), float(t_s[k[i] + 1])
            if hit[i]:
                worst_s = step_start + found_s[i] * (step_stop - step_start)
                how = "found by bisection"
            else:
                worst_s = 0.5 * (step_start + step_stop)
                how = f"a lower bound: {MAX_BISECTIONS} bisections did not settle it"
            worst = float(value.min())
            rows.append(
                Violation(Check.CLEARANCE, state.name, Severity.VIOLATION, start, stop,
                          worst_s, worst, settings.min_m, "m")
            )  # fmt: skip
            notes.append(
                f"clearance {state.name}: between the samples from {start:.4f} s to {stop:.4f} s "
                f"the pair comes to {worst:.4f} m ({how}); every sample there was clear"
            )
            state.smallest_m = min(state.smallest_m, worst)
    return rows, notes
