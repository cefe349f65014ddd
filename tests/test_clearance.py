"""Clearance of a rig (DESIGN §9): pairs, rows, margins, and collisions between samples."""

from __future__ import annotations

import math

import numpy as np
import pytest

from reachgate.checking import clearance as clearance_module
from reachgate.checking.clearance import (
    ClearanceSettings,
    PlacedRobot,
    _pair_distance,
    _pair_distances,
    _pose_at,
    _Scene,
    check_clearance,
    margin_of,
    plan_pairs,
    shape_names,
)
from reachgate.checking.intervals import Check, Severity, intervals
from reachgate.errors import ReachgateError
from reachgate.model.geometry import Box, Obstacle, Plane
from reachgate.model.robot import robot_from_dict
from reachgate.model.transforms import transform_from_xyz_rpy

POST_AT_M = 0.8  # the post's axis, from the sweeper's axis
ROD_RADIUS_M = 0.01
POST_RADIUS_M = 0.03


def single_joint(name: str, height_m: float, radius_m: float, payload=None) -> dict:
    data = {
        "name": name,
        "joints": [{"name": "j1", "a_m": 0.0, "alpha_deg": 0.0, "d_m": height_m,
                    "link_radius_m": radius_m, "range_deg": [-3600.0, 3600.0],
                    "vmax_deg_s": 3000.0, "amax_deg_s2": 30000.0, "home_deg": 90.0}],
    }  # fmt: skip
    if payload is not None:
        data["payload"] = [payload]
    return data


def sweep_rig():
    """A column turning a thin horizontal rod (1 m, at 1 m height) past a fixed vertical post
    standing 0.8 m from its axis."""
    rod = {"name": "rod", "capsule": {"from_m": [0, 0, 0], "to_m": [1.0, 0, 0],
                                      "radius_m": ROD_RADIUS_M}}  # fmt: skip
    sweeper = robot_from_dict(single_joint("sweeper", 1.0, 0.05, rod), "sweeper.toml")
    post = robot_from_dict(single_joint("post", 2.0, POST_RADIUS_M), "post.toml")
    at = transform_from_xyz_rpy([POST_AT_M, 0.0, 0.0], [0.0, 0.0, 0.0])
    return (PlacedRobot("sweeper", sweeper), PlacedRobot("post", post, at))


def rod_to_post_m(angle_rad: np.ndarray) -> np.ndarray:
    """Analytic distance from the rod at angle φ to the post: the post's axis point at rod
    height against the rod's segment, less both radii."""
    along = np.clip(POST_AT_M * np.cos(angle_rad), 0.0, 1.0)
    gap = np.hypot(POST_AT_M - along * np.cos(angle_rad), along * np.sin(angle_rad))
    return gap - ROD_RADIUS_M - POST_RADIUS_M


@pytest.mark.parametrize(
    ("chunk", "levels"), [(None, None), (3, (1,))], ids=["default", "step-across-chunks"]
)
def test_a_thin_payload_sweeping_through_a_link_between_samples_is_caught(
    monkeypatch, chunk, levels
):
    """At 25 Hz the rod turns 0.9 rad per step and crosses the post inside one step while
    every sampled distance is clear (above near_m). Truth: the analytic joint path resampled
    densely (200,001 points) with the analytic distance. The Schwarzer–Saha–Latombe bound
    flags the step and bisection finds a pose closer than min_m inside it; also when that
    step joins two chunks of work."""
    if chunk is not None:
        monkeypatch.setattr(clearance_module, "CHUNK_SAMPLES", chunk)
        monkeypatch.setattr(clearance_module, "BLOCK_LEVELS", levels)
    robots = sweep_rig()
    settings = ClearanceSettings(min_m=0.05, near_m=0.15)
    plan = plan_pairs(robots, (), settings)
    assert ("sweeper.rod", "post.link1") in plan.checked
    rate = 0.9 / 0.04  # rad/s
    t_cross = 0.08 + 0.37 * 0.04  # the rod points at the post 37 % into the third step
    t_s = np.arange(6) * 0.04
    angle = rate * (t_s - t_cross)
    assert rod_to_post_m(angle).min() > settings.near_m  # every sample is clear
    dense_t = np.linspace(t_s[0], t_s[-1], 200_001)
    dense = rod_to_post_m(rate * (dense_t - t_cross))
    truth_s = dense_t[np.argmin(dense)]
    assert dense.min() < 0  # the truth: they collide between samples
    q = {"sweeper": angle[:, None], "post": np.zeros((6, 1))}
    result = check_clearance(t_s, robots, q, (), plan, settings)
    rows = [r for r in result.rows if r.axis == "sweeper.rod/post.link1"]
    assert len(rows) == 1
    row = rows[0]
    assert row.severity is Severity.VIOLATION and row.check is Check.CLEARANCE
    assert (row.start_s, row.end_s) == (pytest.approx(0.08), pytest.approx(0.12))
    assert row.start_s <= truth_s <= row.end_s
    assert dense.min() - 1e-12 <= row.worst < settings.min_m  # a real pose, closer than min_m
    t_found = (row.worst_s - t_cross) * rate
    assert rod_to_post_m(np.array([t_found]))[0] == pytest.approx(row.worst, abs=1e-9)
    assert any("between the samples" in note for note in result.notes)


def test_a_slow_sweep_that_stays_clear_between_samples_gives_no_row():
    """The same rod stopping 0.3 rad short of the post: the bound flags nothing it cannot
    clear, so no row (no false alarm from the between-sample check)."""
    robots = sweep_rig()
    settings = ClearanceSettings(min_m=0.05, near_m=0.15)
    plan = plan_pairs(robots, (), settings)
    t_s = np.arange(26) * 0.04
    angle = -0.3 - 2.0 * (1.0 - t_s / t_s[-1])  # approaches to -0.3 rad
    assert rod_to_post_m(angle).min() > settings.near_m
    q = {"sweeper": angle[:, None], "post": np.zeros((26, 1))}
    result = check_clearance(t_s, robots, q, (), plan, settings)
    assert result.rows == ()
    expected = margin_of(float(rod_to_post_m(angle).min()), settings.min_m)
    assert result.margins["sweeper.rod/post.link1"] == pytest.approx(expected, abs=1e-9)


def test_rows_start_and_end_at_the_analytic_crossings():
    """Sampled at 1 kHz, the rod turns slowly into the post and out: violation and near rows
    start and end within one sample of the analytic crossings of min_m and near_m, and the
    worst is the analytic least distance at its time."""
    robots = sweep_rig()
    settings = ClearanceSettings(min_m=0.05, near_m=0.15)
    plan = plan_pairs(robots, (), settings)
    t_s = np.arange(0, 4.0, 0.001)
    # through the post at t = 1 s; then up to 0.12 rad short of it and back (near only)
    angle = np.where(
        t_s < 2.0, 0.4 * np.cos(0.5 * np.pi * t_s), -0.26 - 0.14 * np.cos(np.pi * (t_s - 2.0))
    )
    q = {"sweeper": angle[:, None], "post": np.zeros((t_s.size, 1))}
    result = check_clearance(t_s, robots, q, (), plan, settings)
    truth = rod_to_post_m(angle)
    expected = intervals(
        t_s, settings.min_m - truth, settings.near_m - settings.min_m, check=Check.CLEARANCE,
        axis="sweeper.rod/post.link1", worst_value=truth, limit_value=settings.min_m, unit="m",
    )  # fmt: skip
    rows = [r for r in result.rows if r.axis == "sweeper.rod/post.link1"]
    assert len(rows) == len(expected) == 2
    assert {r.severity for r in rows} == {Severity.VIOLATION, Severity.NEAR}
    for ours, reference in zip(sorted(rows, key=lambda r: (r.start_s, r.severity.value)),
                               sorted(expected, key=lambda r: (r.start_s, r.severity.value)),
                               strict=True):  # fmt: skip
        assert ours.severity is reference.severity
        assert ours.start_s == pytest.approx(reference.start_s, abs=1e-3)
        assert ours.end_s == pytest.approx(reference.end_s, abs=1e-3)
        assert ours.worst == pytest.approx(reference.worst, abs=1e-12)
    series = result.closest_m["sweeper.rod/post.link1"]
    near = truth <= settings.near_m
    np.testing.assert_allclose(series[near], truth[near], atol=1e-12)


def two_arm_rig():
    """Two invented six-axis arms with geometry facing each other, a floor and a mast."""
    joints = [
        (0.30, -90.0, 0.68, 0.0, 0.15), (1.05, 0.0, 0.0, -90.0, 0.12),
        (0.20, -90.0, 0.0, 0.0, 0.10), (0.0, 90.0, 1.10, 0.0, 0.09),
        (0.0, -90.0, 0.0, 0.0, None), (0.0, 0.0, 0.22, 0.0, 0.06),
    ]  # fmt: skip
    rows = []
    for i, (a, alpha, d, theta, radius) in enumerate(joints):
        row = {"name": f"j{i + 1}", "a_m": a, "alpha_deg": alpha, "d_m": d,
               "offset_deg": theta, "range_deg": [-350.0, 350.0], "vmax_deg_s": 100.0,
               "amax_deg_s2": 300.0}  # fmt: skip
        if radius is not None:
            row["link_radius_m"] = radius
        rows.append(row)
    data = {
        "name": "arm", "mount": {"xyz_m": [0, 0, 0.45], "radius_m": 0.25}, "joints": rows,
        "rail": {"range_m": [0.0, 6.0], "vmax_m_s": 1.0, "amax_m_s2": 2.0, "home_m": 1.0},
        "payload": [
            {"name": "mock-up", "box": {"center_m": [0, 0, 0.3], "size_m": [0.5, 0.4, 0.15]}},
            {"name": "guard", "sphere": {"center_m": [0.3, 0, 0.3], "radius_m": 0.06}},
        ],
    }  # fmt: skip
    data["joints"][1]["home_deg"] = -40.0
    data["joints"][2]["home_deg"] = 40.0
    data["joints"][4]["home_deg"] = 60.0
    arm = robot_from_dict(data, "arm.toml")
    facing = transform_from_xyz_rpy([4.0, 2.6, 0.0], np.radians([0.0, 0.0, 180.0]))
    robots = (PlacedRobot("carrier", arm), PlacedRobot("table", arm, facing))
    obstacles = (
        Obstacle("floor", Plane((0.0, 0.0, 0.0), (0.0, 0.0, 1.0))),
        Obstacle("mast", Box((2.0, 4.0, 1.0), (0.4, 0.4, 2.0), (0.0, 0.0, 0.3))),
    )
    return robots, obstacles


def test_pairs_follow_design_rules_with_reasons():
    """DESIGN §9: other robot and obstacles always; own shapes two or more rows apart; less
    contact, ignore, and pairs closer than min_m at home, each with its reason."""
    robots, obstacles = two_arm_rig()
    names = shape_names(robots, obstacles)
    assert names[:3] == ("carrier.base", "carrier.link1", "carrier.link2")
    assert names[-2:] == ("floor", "mast")
    contact = frozenset({frozenset({"carrier.mock-up", "table.mock-up"})})
    ignore = frozenset({frozenset({"carrier.guard", "mast"})})
    settings = ClearanceSettings(0.05, 0.15, contact=contact, ignore=ignore)
    plan = plan_pairs(robots, obstacles, settings)
    checked = set(plan.checked)
    reasons = {(x.a, x.b): x.reason for x in plan.left_out}
    assert reasons[("carrier.mock-up", "table.mock-up")] == "contact"
    assert reasons[("carrier.guard", "mast")] == "ignore"
    assert reasons[("carrier.base", "floor")].startswith("closer than min_m at home")
    assert ("carrier.link1", "carrier.link2") not in checked | set(reasons)  # adjacent rows
    assert ("carrier.link1", "carrier.link3") in checked
    assert ("carrier.link4", "carrier.mock-up") in checked  # rows 4 and 7
    assert ("carrier.link6", "carrier.mock-up") not in checked | set(reasons)  # rows 6 and 7
    assert ("carrier.link1", "table.link1") in checked
    assert ("floor", "mast") not in checked | set(reasons)  # obstacles never against obstacles
    assert not checked & set(reasons)
    with pytest.raises(ReachgateError, match=r"unknown shape 'table\.wing'"):
        plan_pairs(robots, obstacles, ClearanceSettings(
            contact=frozenset({frozenset({"table.wing", "floor"})})))  # fmt: skip


@pytest.mark.parametrize(
    ("chunk", "levels"), [(None, None), (640, (64, 16, 2))], ids=["default", "small-chunks"]
)
def test_broad_phase_and_blocks_give_the_rows_of_an_exhaustive_evaluation(
    monkeypatch, chunk, levels
):
    """Two arms moving on random smooth paths at 500 Hz: the rows, margins and near series
    equal those of evaluating every checked pair at every sample (no block skipped), so the
    broad phase only skips what is farther than near_m. Half-space and box pairs included;
    with small chunks too, so rows run across the chunks of work."""
    if chunk is not None:
        monkeypatch.setattr(clearance_module, "CHUNK_SAMPLES", chunk)
        monkeypatch.setattr(clearance_module, "BLOCK_LEVELS", levels)
    robots, obstacles = two_arm_rig()
    settings = ClearanceSettings(0.05, 0.30)
    plan = plan_pairs(robots, obstacles, settings)
    rng = np.random.default_rng(1301)
    t_s = np.arange(0.0, 8.0, 0.002)
    q = {}
    for placed in robots:
        home = placed.robot.home
        phase = rng.uniform(0, 2 * np.pi, home.size)
        freq = rng.uniform(0.05, 0.3, home.size)
        q[placed.name] = home + 0.6 * np.sin(2 * np.pi * freq * t_s[:, None] + phase)
    result = check_clearance(t_s, robots, q, obstacles, plan, settings)
    scene = _Scene(robots, obstacles)
    poses = [scene.pose(r, q[p.name]) for r, p in enumerate(robots)]
    expected_rows, came_near = [], 0
    for a_name, b_name in plan.checked:
        a, b = scene.by_name[a_name], scene.by_name[b_name]
        d = _pair_distance(scene.primitives(a, poses), scene.primitives(b, poses))
        axis = f"{a_name}/{b_name}"
        expected_rows += intervals(
            t_s, settings.min_m - d, settings.near_m - settings.min_m, check=Check.CLEARANCE,
            axis=axis, worst_value=d, limit_value=settings.min_m, unit="m",
        )  # fmt: skip
        if d.min() <= settings.near_m:
            came_near += 1
            series = result.closest_m[axis]
            near = d <= settings.near_m
            np.testing.assert_allclose(series[near], d[near], atol=1e-12)
            assert result.margins[axis] == pytest.approx(margin_of(d.min(), settings.min_m))
        else:
            assert result.margins[axis] <= margin_of(d.min(), settings.min_m) + 1e-12
    assert came_near >= 3  # the case exercises the narrow phase, not only skipped blocks
    sampled = [r for r in result.rows if "between the samples" not in str(r)]
    key = lambda r: (r.axis, r.start_s, r.severity.value)  # noqa: E731
    assert sorted(map(key, sampled)) == sorted(map(key, expected_rows))


@pytest.mark.parametrize("batch", [65_536, 50, 1], ids=["one-call", "split", "one-job-each"])
def test_pairs_measured_together_equal_pairs_measured_alone_bit_for_bit(monkeypatch, batch):
    """_pair_distances, which measures every primitive pair of one kind over all pairs in one
    call (up to BATCH_SAMPLES samples), gives exactly the values of _pair_distance pair by pair
    at each pair's own positions: segments, boxes of two sizes, a box obstacle and a plane;
    one robot posed at a single sample (its primitives broadcast)."""
    monkeypatch.setattr(clearance_module, "BATCH_SAMPLES", batch)
    robots, obstacles = two_arm_rig()
    plan = plan_pairs(robots, obstacles, ClearanceSettings(0.05, 0.30))
    scene = _Scene(robots, obstacles)
    rng = np.random.default_rng(1317)
    count = 40
    safe_q = [p.robot.home + rng.uniform(-0.8, 0.8, (count, p.robot.n_axes)) for p in robots]
    wanted = [rng.random(count) < 0.6, np.arange(count) == 7]
    poses, rank = _pose_at(scene, safe_q, wanted)
    requests = []
    for a_name, b_name in plan.checked:
        a, b = scene.by_name[a_name], scene.by_name[b_name]
        usable = np.ones(count, bool)
        for shape in (a, b):
            if shape.robot is not None:
                usable &= wanted[shape.robot]
        positions = np.flatnonzero(usable)[: rng.integers(1, 8)]
        if positions.size:
            requests.append(((a, b), positions))
    kinds = {type(p).__name__ for ab, _ in requests for s in ab for p in scene.primitives(s, poses)}
    assert kinds == {"Segment", "OrientedBox", "HalfSpace"}

    class Pair:
        def __init__(self, a, b):
            self.a, self.b = a, b

    together = _pair_distances(scene, [(Pair(*ab), at) for ab, at in requests], poses, rank)
    for ((a, b), positions), value in zip(requests, together, strict=True):
        where = [None if s.robot is None else rank[s.robot][positions] for s in (a, b)]
        alone = _pair_distance(scene.primitives(a, poses), scene.primitives(b, poses), *where)
        np.testing.assert_array_equal(value, alone)


def test_untrusted_samples_are_left_out_and_said():
    """Unreachable samples (trusted False) or NaN axis values are not posed as real poses: no
    row comes from them and a note counts them."""
    robots = sweep_rig()
    settings = ClearanceSettings(min_m=0.05, near_m=0.15)
    plan = plan_pairs(robots, (), settings)
    t_s = np.arange(100) * 0.01
    angle = np.full(100, 1.0)
    angle[40:45] = 0.0  # would touch the post, but these samples are unreachable
    angle[60] = np.nan
    trusted = {"sweeper": np.ones(100, bool)}
    trusted["sweeper"][40:45] = False
    q = {"sweeper": angle[:, None], "post": np.zeros((100, 1))}
    result = check_clearance(t_s, robots, q, (), plan, settings, trusted=trusted)
    assert result.rows == ()
    assert any("6 samples without a real pose" in note for note in result.notes)


def test_margin_is_one_less_min_over_distance_and_stays_finite_at_contact():
    """DESIGN §9: 1 - min_m / d; below min_m / 2 its tangent keeps touching and overlap
    finite and ordered."""
    assert margin_of(0.2, 0.05) == pytest.approx(0.75)
    assert margin_of(0.05, 0.05) == pytest.approx(0.0)
    assert margin_of(0.025, 0.05) == pytest.approx(-1.0)
    assert margin_of(0.0, 0.05) == pytest.approx(-3.0)
    assert margin_of(-0.01, 0.05) < margin_of(0.0, 0.05) < margin_of(0.01, 0.05)
    assert math.isfinite(margin_of(-1.0, 0.05))


def test_settings_refuse_a_near_band_below_min():
    with pytest.raises(ReachgateError, match="near_m"):
        ClearanceSettings(min_m=0.1, near_m=0.05)
    with pytest.raises(ReachgateError, match="min_m"):
        ClearanceSettings(min_m=0.0, near_m=0.05)


def test_a_shape_name_used_twice_or_a_foreign_pair_is_refused():
    """Two robots under one rig name would make every report name ambiguous; a plan made for
    another rig names shapes this one lacks. Both stop with one clear message."""
    robots, obstacles = two_arm_rig()
    twins = (robots[0], PlacedRobot("carrier", robots[1].robot, robots[1].rig_T_cell))
    with pytest.raises(ReachgateError, match=r"used twice: carrier\.base"):
        plan_pairs(twins, obstacles, ClearanceSettings())
    settings = ClearanceSettings()
    plan = plan_pairs(robots, obstacles, settings)
    q = {p.name: p.robot.home[None, :] for p in robots}
    with pytest.raises(ReachgateError, match="not of this rig"):
        check_clearance(np.zeros(1), robots[:1], q, obstacles, plan, settings)
