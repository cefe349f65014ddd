"""The placement search (`reachgate place`, DESIGN §10) against sets known by hand and by grid.

The test arm has no rail, a shoulder on axis 1 (a1 = 0) at height d1, an upper arm L1 and a
forearm L2 meeting at a spherical wrist, so the wrist centre's reachable set is the shell
between |L1 - L2| and L1 + L2 around the shoulder (the two-link law of cosines; Craig,
*Introduction to Robotics*, ch. 4), narrowed by the elbow's singularity floor to
r² = L1² + L2² ± 2·L1·L2·cos(floor). The TCP line is drawn in the scenario frame with a
constant orientation, so the wrist centre runs along the same line shifted by a constant.
"""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest
from typer.testing import CliRunner

import reachgate
from reachgate.cli import app
from reachgate.model.robot import robot_from_dict
from reachgate.model.trajectory import write_trajectory
from reachgate.search.placement import place
from reachgate.search.score import arm_span_m, report_binding
from reachgate.search.vary import parse_vary, place_argument, settings_at

runner = CliRunner()

D1_M, L1_M, L2_M = 0.5, 1.0, 0.8  # shoulder height, upper arm, forearm
WRIST_TO_TCP_M = 0.2  # d6 + tool offset, along the TCP's z
J1_HALF_RANGE_DEG = 30.0
ELBOW_FLOOR_DEG = 5.0
LINE_Y_M, LINE_LENGTH_M = 0.5, 0.6  # the TCP line, scenario frame: x from 0 to 0.6 at this y
LINE_Z_M = D1_M  # the wrist centre runs at shoulder height

ROBOT_TOML = f"""
name = "line test arm"
convention = "standard"
[mount]
xyz_m = [0.0, 0.0, 0.0]
[thresholds]
elbow_min_deg = {ELBOW_FLOOR_DEG}
[[joints]]
name = "j1"
a_m = 0.0
alpha_deg = -90.0
d_m = {D1_M}
range_deg = [{-J1_HALF_RANGE_DEG}, {J1_HALF_RANGE_DEG}]
vmax_deg_s = 180.0
amax_deg_s2 = 1000.0
home_deg = 0.0
[[joints]]
name = "j2"
a_m = {L1_M}
alpha_deg = 0.0
d_m = 0.0
offset_deg = -90.0
range_deg = [-180.0, 180.0]
vmax_deg_s = 180.0
amax_deg_s2 = 1000.0
home_deg = -40.0
[[joints]]
name = "j3"
a_m = 0.0
alpha_deg = -90.0
d_m = 0.0
range_deg = [-180.0, 180.0]
vmax_deg_s = 180.0
amax_deg_s2 = 1000.0
home_deg = 40.0
[[joints]]
name = "j4"
a_m = 0.0
alpha_deg = 90.0
d_m = {L2_M}
range_deg = [-350.0, 350.0]
vmax_deg_s = 180.0
amax_deg_s2 = 1000.0
home_deg = 0.0
[[joints]]
name = "j5"
a_m = 0.0
alpha_deg = -90.0
d_m = 0.0
range_deg = [-125.0, 125.0]
vmax_deg_s = 180.0
amax_deg_s2 = 1000.0
home_deg = 60.0
[[joints]]
name = "j6"
a_m = 0.0
alpha_deg = 0.0
d_m = 0.1
range_deg = [-360.0, 360.0]
vmax_deg_s = 180.0
amax_deg_s2 = 1000.0
home_deg = 0.0
[tool]
xyz_m = [0.0, 0.0, {WRIST_TO_TCP_M - 0.1}]
"""


def _robot() -> reachgate.Robot:
    import tomllib

    return robot_from_dict(tomllib.loads(ROBOT_TOML), source="line test arm")


def _line(length_m: float = LINE_LENGTH_M, duration_s: float = 60.0, rate_hz: float = 10.0):
    """A straight TCP line along scenario x, smooth from rest to rest (minimum-jerk timing),
    the TCP's z along +y (roll -90 deg), so that the wrist centre is the TCP - 0.2 m in y."""
    t = np.arange(0.0, duration_s + 1e-9, 1.0 / rate_hz)
    s = t / duration_s
    along = length_m * (10 * s**3 - 15 * s**4 + 6 * s**5)
    p = np.column_stack([along, np.full_like(t, LINE_Y_M), np.full_like(t, LINE_Z_M)])
    rpy = np.tile([-math.pi / 2, 0.0, 0.0], (t.size, 1))
    return reachgate.Trajectory.from_arrays(t, p, rpy_rad=rpy, name="line.csv")


def _passing_x_by_hand() -> tuple[float, float]:
    """The placement x-translations at which every point of the line passes.

    Wrist centre w = (X + s, y_w, d1) for s in [0, length], y_w = line y - 0.2 (the TCP's z
    is +y). Joint 1 turns by atan2(y_w, w_x): within ±30 deg needs w_x >= y_w / tan 30°.
    The elbow stays 5 deg from stretched while |w - shoulder| < sqrt(L1² + L2² + 2 L1 L2
    cos 5°); the folded side and the shoulder's floor lie far inside the line here.
    """
    y_w = LINE_Y_M - WRIST_TO_TCP_M
    x_low = y_w / math.tan(math.radians(J1_HALF_RANGE_DEG))
    r_out = math.sqrt(L1_M**2 + L2_M**2 + 2 * L1_M * L2_M * math.cos(math.radians(5.0)))
    x_high = math.sqrt(r_out**2 - y_w**2) - LINE_LENGTH_M
    return x_low, x_high


def _x_check(robot, path, x: float) -> reachgate.Report:
    return reachgate.check(robot, path, reachgate.CheckSettings(reachgate.Placement((x, 0, 0))))


def test_the_hand_derived_set_is_where_the_check_passes():
    """The set written down by hand is the check's own: just inside passes, just out fails."""
    robot, path = _robot(), _line()
    x_low, x_high = _passing_x_by_hand()
    assert _x_check(robot, path, x_low + 0.005).passed
    assert _x_check(robot, path, x_high - 0.005).passed
    assert not _x_check(robot, path, x_low - 0.005).passed
    assert not _x_check(robot, path, x_high + 0.005).passed


@pytest.mark.parametrize("seed", [11, 12, 13])
def test_the_best_x_lies_inside_the_set_known_by_hand(seed):
    robot, path = _robot(), _line()
    x_low, x_high = _passing_x_by_hand()
    result = place(robot, [path], parse_vary("x=-1:3"), seed=seed)
    assert result.passed
    assert result.best.score > 0
    (best_x,) = result.best.values
    assert x_low < best_x < x_high
    assert not result.start.passed  # x = 0 is outside: joint 1 leaves its range
    assert result.start.binding.check == "position" and result.start.binding.axis == "j1"


def test_the_search_is_at_least_as_good_as_a_grid_less_one_step():
    """Brute force over x and y: the search's best is no worse than the grid's best less the
    largest change of the score between the grid's best point and its neighbours."""
    robot, path = _robot(), _line(duration_s=30.0)
    vary = parse_vary("x=0:1.5,y=-0.6:0.6")
    base = reachgate.CheckSettings()
    xs, ys = np.linspace(0.0, 1.5, 9), np.linspace(-0.6, 0.6, 9)
    span = arm_span_m(robot)
    grid = np.array(
        [
            [
                report_binding(
                    reachgate.check(robot, path, settings_at(base, vary, (x, y))), span
                ).score
                for x in xs
            ]
            for y in ys
        ]
    )
    iy, ix = np.unravel_index(np.argmax(grid), grid.shape)
    around = grid[max(iy - 1, 0) : iy + 2, max(ix - 1, 0) : ix + 2]
    one_step = float(np.max(np.abs(around - grid[iy, ix])))
    result = place(robot, [path], vary, seed=21)
    assert result.best.score >= grid[iy, ix] - one_step


def test_a_path_longer_than_the_arm_spans_passes_nowhere(tmp_path):
    robot_file = tmp_path / "arm.toml"
    robot_file.write_text(ROBOT_TOML)
    case = tmp_path / "too_long.csv"
    path = _line(length_m=2 * (L1_M + L2_M) + 0.4, duration_s=20.0)
    write_trajectory(case, path)
    result = runner.invoke(
        app,
        ["place", str(robot_file), str(case), "--vary", "x=-2:2", "--workers", "1",
         "--format", "json", "--seed", "3"],
    )  # fmt: skip
    assert result.exit_code == 1, result.output
    out = json.loads(result.output)
    assert out["verdict"] == "fail"
    assert out["best"]["score"] < 0 and not out["best"]["passes"]
    best = runner.invoke(
        app, ["check", str(robot_file), str(case), "--place", out["best"]["place"]]
    )
    assert best.exit_code == 1 and "reach" in best.output  # even the best leaves the reach
    table = runner.invoke(
        app, ["place", str(robot_file), str(case), "--vary", "x=-2:2", "--workers", "1"]
    )
    assert table.exit_code == 1
    assert "no placement within these bounds passes" in table.output


def test_an_unmeasured_margin_is_no_pass():
    """A null margin (not measured) scores 0: never a pass, never a margin of 1."""
    robot, path = _robot(), _line()
    report = _x_check(robot, path, 0.9)
    assert report.passed
    nulled = dict(report.margins)
    nulled["j3"] = {**nulled["j3"], "accel": None}
    binding = report_binding(replace(report, margins=nulled), 3.0)
    assert binding.score == 0.0 and not binding.measured
    assert (binding.check, binding.axis) == ("accel", "j3")


def test_bad_vary_is_one_line_and_exit_2(tmp_path):
    robot_file = tmp_path / "arm.toml"
    robot_file.write_text(ROBOT_TOML)
    for text, message in [
        ("x=1:-1", "LOW must be below HIGH"),
        ("w=0:1", "expected NAME=LOW:HIGH"),
        ("x=0:1,x=1:2", "named twice"),
        ("rail_at=0:1", "has no rail"),
    ]:
        result = runner.invoke(app, ["place", str(robot_file), str(robot_file), "--vary", text])
        assert result.exit_code == 2, (text, result.output)
        assert message in result.output


def test_place_argument_reads_back_as_the_same_placement():
    vary = parse_vary("x=-1:1,yaw=-45:45")
    settings = settings_at(reachgate.CheckSettings(), vary, (0.25, -27.53))
    text = place_argument(settings.placement)
    assert text == "0.25,0,0,0,0,-27.53"
    assert reachgate.Placement.parse(text) == settings.placement


def test_the_map_is_written_and_refuses_a_non_png(tmp_path):
    robot_file = tmp_path / "arm.toml"
    robot_file.write_text(ROBOT_TOML)
    case = tmp_path / "line.csv"
    write_trajectory(case, _line(duration_s=20.0))
    picture = tmp_path / "map.png"
    args = ["place", str(robot_file), str(case), "--vary", "x=0:1.5,y=-0.6:0.6", "--workers", "1"]
    result = runner.invoke(
        app, [*args, "--map", str(picture), "--map-over", "y,x", "--map-points", "7"]
    )
    assert result.exit_code == 0, result.output
    assert picture.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    refused = runner.invoke(app, [*args, "--map", str(tmp_path / "map.jpg")])
    assert refused.exit_code == 2 and "PNG" in refused.output
    overwrite = runner.invoke(app, [*args, "--out", str(case)])
    assert overwrite.exit_code == 2 and "an input" in overwrite.output
