"""Samples out of reach: solved in batches, never written as NaN, never offered for replay.

The analytic reference throughout: the TCP of any configuration lies within
R = Σ(|a_i| + |d_i|) + |tool offset| of the chain's base origin (triangle inequality on the
DH chain, each link moving the frame by d_i along one unit axis and a_i along another), so a
target farther than R from that point is out of reach, by at least its distance less R.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

import reachgate
from reachgate.kinematics.chain import forward
from reachgate.model.transforms import matrix_to_quat
from reachgate.render.check_report import render_table, write_joints

from conftest import DEMO_CASES, DEMO_ROBOT, offset_wrist_arm

RATE_HZ = 1000.0
PUSH_M = 6.0


def _reach_bound(robot: reachgate.Robot) -> tuple[np.ndarray, float]:
    """(chain base origin in the cell (3,), R) for an arm without rail (see module docstring)."""
    chain = robot.chain
    origin = (robot.cell_T_rail @ robot.carriage_T_base @ chain.base_T_chain)[:3, 3]
    radius = float(np.sum(np.abs(chain.a_m) + np.abs(chain.d_m)))
    return origin, radius + float(np.linalg.norm(robot.flange_T_tool[:3, 3]))


def _joint_sines(robot: reachgate.Robot, t: np.ndarray, seed: int) -> np.ndarray:
    """Cell TCP poses (N, 4, 4) of slow joint sines about home (reachable by construction)."""
    rng = np.random.default_rng(seed)
    q = robot.home + np.radians(10.0) * np.sin(
        2 * np.pi * rng.uniform(0.1, 0.4, robot.n_axes) * t[:, None]
        + rng.uniform(0, 2 * np.pi, robot.n_axes)
    )
    return forward(robot, q - (q[0] - robot.home))


def _pushed_case(robot, duration_s: float, stretch: tuple[float, float] | None, seed: int):
    """Joint sines with the TCP pushed PUSH_M along the cell's x inside `stretch` (None: all
    of it). -> (trajectory, (N,) mask of the pushed samples)."""
    t = np.arange(int(duration_s * RATE_HZ) + 1) / RATE_HZ
    T = _joint_sines(robot, t, seed)
    pushed = np.ones(t.size, bool) if stretch is None else (t >= stretch[0]) & (t < stretch[1])
    p = T[:, :3, 3].copy()
    p[pushed, 0] += PUSH_M
    origin, radius = _reach_bound(robot)
    assert (np.linalg.norm(p[pushed] - origin, axis=1) > radius + 0.5).all()  # out of reach
    path = reachgate.Trajectory.from_arrays(t, p, matrix_to_quat(T[:, :3, :3]), name="pushed")
    return path, pushed


def test_a_stretch_out_of_reach_is_solved_in_batches_at_a_bounded_cost(monkeypatch):
    """Analytic (module docstring): a 4 s, 1 kHz path on the offset-wrist arm (numeric IK)
    whose middle 1.2 s lies beyond R is flagged out of reach on exactly those samples, each by
    at least its distance beyond R. The solver spends on it at most 5x the Jacobian
    evaluations of the same path in reach, and solves no sample on its own beyond the
    coarse pass (it used to retry each one alone: 1,235 single solves against 51)."""
    import reachgate.kinematics.numeric as numeric

    robot = offset_wrist_arm()
    counts = {"samples": 0, "single": 0}
    evaluate, single = numeric.chain_pose_jacobian, numeric._refine_single

    def counted_evaluate(chain, q):
        counts["samples"] += q.shape[0]
        return evaluate(chain, q)

    def counted_single(*args):
        counts["single"] += 1
        return single(*args)

    monkeypatch.setattr(numeric, "chain_pose_jacobian", counted_evaluate)
    monkeypatch.setattr(numeric, "_refine_single", counted_single)
    reachable, _ = _pushed_case(robot, 4.0, (0.0, 0.0), seed=5101)
    pushed_path, pushed = _pushed_case(robot, 4.0, (1.4, 2.6), seed=5101)

    window = reachgate.CheckSettings(ends=reachgate.Ends.FREE)  # joint sines: a cut-out window
    in_reach = reachgate.check(robot, reachable, window)
    work_in_reach = dict(counts)
    counts.update(samples=0, single=0)
    report = reachgate.check(robot, pushed_path, window)

    assert in_reach.passed and not (in_reach.solution.reach_excess_m > 0).any()
    np.testing.assert_array_equal(report.solution.reach_excess_m > 0, pushed)
    origin, radius = _reach_bound(robot)
    beyond = np.linalg.norm(pushed_path.scenario_p_m[pushed] - origin, axis=1) - radius
    assert (report.solution.reach_excess_m[pushed] >= beyond).all()
    assert counts["samples"] <= 5 * work_in_reach["samples"]
    assert counts["single"] <= work_in_reach["single"] + 10


def _numbers(node):
    """Every number in a parsed JSON document."""
    if isinstance(node, dict):
        for value in node.values():
            yield from _numbers(value)
    elif isinstance(node, list):
        for value in node:
            yield from _numbers(value)
    elif isinstance(node, (int, float)) and not isinstance(node, bool):
        yield node


def _reject_constant(name):
    raise AssertionError(f"JSON holds {name}")


@pytest.mark.parametrize("case", ["demo far away", "numeric all pushed", "numeric stretch"])
def test_json_of_unreachable_cases_holds_finite_numbers_or_null(case):
    """Analytic: targets beyond R (module docstring) or 30 m from the demo arm cannot be
    reached, so no joint value exists there. The JSON holds only finite numbers or null
    (DESIGN §6; parsed with NaN/Infinity rejected); where no sample was in reach every margin
    is null and the table says 'not measured', never 1.00."""
    if case == "demo far away":
        robot = reachgate.load_robot(DEMO_ROBOT)
        path = reachgate.load_trajectory(DEMO_CASES / "approach_calm.csv")
        settings = reachgate.CheckSettings(placement=reachgate.Placement((30.0, 0.0, 0.0)))
        report = reachgate.check(robot, path, settings)
        none_in_reach = True
    else:
        robot = offset_wrist_arm()
        stretch = None if case == "numeric all pushed" else (0.2, 0.5)
        path, _ = _pushed_case(robot, 0.8, stretch, seed=5102)
        report = reachgate.check(robot, path)
        none_in_reach = stretch is None
    assert not report.passed
    document = json.loads(report.to_json(), parse_constant=_reject_constant)
    assert all(math.isfinite(x) for x in _numbers(document))
    values = [v for axis in document["margins"].values() for v in axis.values()]
    if none_in_reach:
        assert values and all(v is None for v in values)
        assert "not measured" in render_table(report) and " 1.00 " not in render_table(report)
    else:
        assert all(v is not None for v in values)


def test_joints_out_leaves_samples_out_of_reach_empty_and_marked(tmp_path):
    """Analytic: the samples pushed beyond R (module docstring) have no joint values; their
    axis fields are empty with reachable = 0, the header says so, and every other row's joint
    values replay the target TCP pose through the forward kinematics to 1e-9 m."""
    robot = offset_wrist_arm()
    path, pushed = _pushed_case(robot, 0.6, (0.2, 0.4), seed=5103)
    report = reachgate.check(robot, path)
    out = tmp_path / "joints.csv"
    write_joints(report, out, robot.axes)
    text = out.read_text()
    comments = [ln for ln in text.splitlines() if ln.startswith("#")]
    assert any("out of reach" in ln and "empty" in ln for ln in comments)
    lines = [ln for ln in text.splitlines() if not ln.startswith("#")]
    header, rows = lines[0].split(","), [ln.split(",") for ln in lines[1:]]
    assert header == ["t_s", *(f"{a.name}_deg" for a in robot.axes), "reachable"]
    assert len(rows) == path.n_samples
    reachable = np.array([row[-1] == "1" for row in rows])
    np.testing.assert_array_equal(reachable, ~pushed)
    for i in np.flatnonzero(pushed):
        assert rows[i][1:] == [""] * robot.n_axes + ["0"]
    kept = [row[1:-1] for row, ok in zip(rows, reachable, strict=True) if ok]
    q = np.radians(np.array(kept, dtype=float))
    T = forward(robot, q)
    np.testing.assert_allclose(T[:, :3, 3], path.scenario_p_m[reachable], atol=1e-9)


def test_a_nan_that_reaches_the_report_stops_the_json_with_its_key():
    """DESIGN §6: the JSON never holds NaN or Infinity. A NaN put into a finished report's
    margins (as a fault upstream would) stops the writing with one message naming the key,
    instead of a NaN in the file or a traceback."""
    from dataclasses import replace

    robot = offset_wrist_arm()
    path, _ = _pushed_case(robot, 0.3, (0.0, 0.0), seed=5104)
    report = reachgate.check(robot, path)
    json.loads(report.to_json(), parse_constant=_reject_constant)
    margins = {axis: dict(values) for axis, values in report.margins.items()}
    margins["j3"]["speed"] = float("nan")
    with pytest.raises(reachgate.ReachgateError, match=r"report\.margins\.j3\.speed"):
        replace(report, margins=margins).to_json()
