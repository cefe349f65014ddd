"""The placement search on a rig (DESIGN §8-10): the scenario frame placed in the rig frame,
every robot's checks and the clearance of every pair in the score.

Outside reference (analytic): a shape the TCP carries moves rigidly with its scenario body,
so against a horizontal floor plane its distance at placement z is its distance at z = 0
plus z. The z at which that distance equals the rig's min_m is the bound a passing placement
must lie above: on a sphere over the floor, (lowest centre height) - radius + z = min_m; on
the demo rig, the rotor guard's 41.3 mm over the floor in the low pass (see `check`).
"""

from __future__ import annotations

import json
import math
import re
from dataclasses import replace
from types import SimpleNamespace

import numpy as np
import pytest
from typer.testing import CliRunner

import reachgate
from reachgate.checking.pipeline import Ends
from reachgate.checking.rail import RailPolicy
from reachgate.checking.rig_check import RailChoice, check_rig, rig_rails
from reachgate.cli import app
from reachgate.model.trajectory import Scenario, load_scenario, write_scenario
from reachgate.render.place_report import _option_text
from reachgate.search.placement import Candidate, place
from reachgate.search.score import arm_span_m, report_binding
from reachgate.search.vary import check_variations, parse_vary, rails_at

from conftest import DEMO_CASES, REPO

runner = CliRunner()
DEMO_RIG = REPO / "rigs" / "demo_landing_rig.toml"
FREE = reachgate.CheckSettings(ends=Ends.FREE)  # the short cases are windows of longer runs

# -- a sphere over the floor -----------------------------------------------------------------

BALL_RADIUS_M = 0.1
MIN_M = 0.05
LOWEST_TCP_M = 0.25  # the path's lowest TCP height, scenario frame (the ball's centre)
BALL_ARM = """
name = "ball arm"
convention = "standard"
[mount]
xyz_m = [0.0, 0.0, 0.0]
[[joints]]
name = "j1"
a_m = 0.0
alpha_deg = -90.0
d_m = 0.5
range_deg = [-170.0, 170.0]
vmax_deg_s = 180.0
amax_deg_s2 = 1000.0
[[joints]]
name = "j2"
a_m = 1.0
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
d_m = 0.8
range_deg = [-350.0, 350.0]
vmax_deg_s = 180.0
amax_deg_s2 = 1000.0
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
[tool]
xyz_m = [0.0, 0.0, 0.0]
[[payload]]
name = "ball"
sphere = { center_m = [0.0, 0.0, 0.0], radius_m = RADIUS }
""".replace("RADIUS", str(BALL_RADIUS_M))
BALL_RIG = f"""
name = "ball over a floor"
[[robots]]
name = "arm"
file = "arm.toml"
body = "ball"
[[obstacles]]
name = "floor"
plane = {{ point_m = [0.0, 0.0, 0.0], normal = [0.0, 0.0, 1.0] }}
[clearance]
min_m = {MIN_M}
near_m = 0.15
"""
#: The placement z at which the ball's lowest point is min_m over the floor (by hand).
BALL_BOUND_Z_M = MIN_M + BALL_RADIUS_M - LOWEST_TCP_M


@pytest.fixture(scope="module")
def ball_rig(tmp_path_factory):
    folder = tmp_path_factory.mktemp("ball")
    (folder / "arm.toml").write_text(BALL_ARM)
    (folder / "rig.toml").write_text(BALL_RIG)
    return reachgate.load_rig(folder / "rig.toml")


def _dip(duration_s: float = 10.0, rate_hz: float = 10.0) -> Scenario:
    """The ball carried along x from 0.9 to 1.3 m, dipping from 0.45 m to LOWEST_TCP_M at
    the middle sample and back, the TCP pointing down (roll 180 deg)."""
    t = np.arange(0.0, duration_s + 1e-9, 1.0 / rate_hz)
    s = t / duration_s
    z = 0.45 - (0.45 - LOWEST_TCP_M) * np.sin(math.pi * s)
    p = np.column_stack([0.9 + 0.4 * s, np.zeros_like(t), z])
    rpy = np.tile([math.pi, 0.0, 0.0], (t.size, 1))
    path = reachgate.Trajectory.from_arrays(t, p, rpy_rad=rpy, name="dip")
    return Scenario.from_trajectories({"ball": path}, name="dip")


def _at_z(z: float) -> reachgate.CheckSettings:
    return replace(FREE, placement=reachgate.Placement((0.0, 0.0, z)))


def test_the_ball_pairs_margin_is_the_distance_written_by_hand(ball_rig):
    """Sphere over a plane: distance = lowest centre height + z - radius (exact), margin
    1 - min_m / distance (DESIGN §9); it binds the score where it is the least. (Within
    near_m: a pair that stays farther may count by a lower bound of its distance.)"""
    for z in (-0.05, -0.12):
        report = check_rig(ball_rig, _dip(), _at_z(z), verify_slowdown=False)
        distance = LOWEST_TCP_M + z - BALL_RADIUS_M
        assert report.margins["arm.ball/floor"]["clearance"] == pytest.approx(
            1 - MIN_M / distance, abs=1e-9
        )
    sunk = check_rig(ball_rig, _dip(), _at_z(BALL_BOUND_Z_M - 0.02), verify_slowdown=False)
    binding = report_binding(sunk, {"arm": arm_span_m(ball_rig.robots[0].robot)})
    assert (binding.check, binding.axis) == ("clearance", "arm.ball/floor")
    assert binding.score < 0 and not sunk.passed


def test_the_rig_command_prints_ready_options_and_draws_the_map(ball_rig, tmp_path):
    """`place RIG SCENARIO`: the table's ready --place passes `check RIG` (the same rails, the
    rig file's), and --map draws the score over two quantities of a rig."""
    case = tmp_path / "dip.csv"
    write_scenario(case, _dip())
    rig_file = ball_rig.source
    picture = tmp_path / "map.png"
    result = runner.invoke(
        app, ["place", rig_file, str(case), "--vary", "z=-0.3:0.3,y=-0.2:0.2", "--ends", "free",
              "--place", "0,0,-0.2,0,0,0", "--workers", "1", "--map", str(picture),
              "--map-points", "5"],
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    assert result.output.startswith("placement search: rig ball over a floor, 1 case")
    assert picture.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    ready = result.output.split("passes every case: ")[1].splitlines()[0]
    assert ready.startswith("--place ") and "--rail" not in ready
    place_value = ready.removeprefix("--place ").strip('"')
    check = runner.invoke(app, ["check", rig_file, str(case), "--ends", "free", "--place",
                                place_value])  # fmt: skip
    assert check.exit_code == 0, check.output
    start = runner.invoke(app, ["check", rig_file, str(case), "--ends", "free", "--place",
                                "0,0,-0.2,0,0,0"])  # fmt: skip
    assert start.exit_code == 1 and "arm.ball/floor" in start.output


@pytest.mark.parametrize("seed", [31, 32])
def test_the_search_lands_above_the_clearance_bound_written_by_hand(ball_rig, seed):
    start = _at_z(BALL_BOUND_Z_M - 0.1)  # the ball 5 cm into the floor
    result = place(ball_rig, [_dip()], "z=-0.3:0.3", start, seed=seed)
    (best_z,) = result.best.values
    assert result.passed and result.rig
    assert best_z > BALL_BOUND_Z_M
    assert not result.start.passed and result.start.binding.axis == "arm.ball/floor"
    # the score is a minimum that includes the ball's pair
    assert result.best.score <= 1 - MIN_M / (LOWEST_TCP_M + best_z - BALL_RADIUS_M) + 1e-9


def test_below_the_bound_the_ball_binds_and_the_search_says_no_placement_passes(ball_rig):
    result = place(ball_rig, [_dip()], f"z=-0.4:{BALL_BOUND_Z_M - 0.01}", FREE, seed=33)
    assert not result.passed
    assert (result.best.binding.check, result.best.binding.axis) == ("clearance", "arm.ball/floor")
    # the best it can do is the top of the range, where the ball is closest to min_m
    assert result.best.values[0] == pytest.approx(BALL_BOUND_Z_M - 0.01, abs=2e-3)


# -- the demo rig ----------------------------------------------------------------------------

#: The rotor guard's least distance to the floor in the low pass at the rig's own placement,
#: m (`reachgate check rigs/demo_landing_rig.toml trajectories/rig/landing_low_pass.csv`).
ROTOR_GUARD_OVER_FLOOR_M = 0.0414


@pytest.fixture(scope="module")
def low_pass_window(tmp_path_factory):
    """The demo low pass from 16.5 to 18.5 s (the sink past the floor), every 5th sample, as a
    scenario file of its own."""
    scenario = load_scenario(DEMO_CASES / "rig" / "landing_low_pass.csv")
    keep = np.flatnonzero((scenario.t_s >= 16.5) & (scenario.t_s <= 18.5))[::5]
    bodies = {
        name: replace(body, t_s=body.t_s[keep], scenario_p_m=body.scenario_p_m[keep],
                      scenario_q_wxyz=body.scenario_q_wxyz[keep])
        for name, body in scenario.bodies.items()
    }  # fmt: skip
    window = Scenario.from_trajectories(bodies, name="low_pass_window.csv")
    path = tmp_path_factory.mktemp("rig") / "low_pass_window.csv"
    write_scenario(path, window)
    return path


def test_placed_lower_the_low_pass_sinks_into_the_floor_and_clearance_binds(low_pass_window):
    rig = reachgate.load_rig(DEMO_RIG)
    report = check_rig(rig, load_scenario(low_pass_window), _at_z(-0.1), verify_slowdown=False)
    spans = {p.name: arm_span_m(p.robot) for p in rig.robots}
    binding = report_binding(report, spans, "low pass")
    assert binding.score < 0 and binding.check == "clearance"
    assert binding.axis.endswith("/floor")
    assert report.margins[binding.axis]["clearance"] == binding.score


def test_the_search_lifts_the_low_pass_clear_of_the_floor_and_check_agrees(low_pass_window):
    args = ["place", str(DEMO_RIG), str(low_pass_window), "--vary", "z=0:0.2",
            "--ends", "free", "--workers", "1", "--seed", "5"]  # fmt: skip
    result = runner.invoke(app, [*args, "--format", "json"])
    assert result.exit_code == 0, result.output
    out = json.loads(result.output)
    assert out["rig"] and out["verdict"] == "pass" and out["best"]["passes"]
    assert out["start"]["check"] == "clearance" and out["start"]["score"] < 0
    assert out["best"]["values"]["z"] > 0.05 - ROTOR_GUARD_OVER_FLOOR_M
    assert out["best"]["rails"] == {
        "carrier": {"rail": "follow", "rail_at_m": None, "rail_bandwidth_hz": 0.5}
    }
    check = runner.invoke(
        app, ["check", str(DEMO_RIG), str(low_pass_window), "--ends", "free",
              "--place", out["best"]["place"]],
    )  # fmt: skip
    assert check.exit_code == 0, check.output
    at_start = runner.invoke(app, ["check", str(DEMO_RIG), str(low_pass_window), "--ends", "free"])
    assert at_start.exit_code == 1 and "rotor guard/floor" in at_start.output


def test_a_rigs_rail_quantity_names_its_robot(low_pass_window):
    rig = reachgate.load_rig(DEMO_RIG)
    with pytest.raises(reachgate.ReachgateError, match="needs a fixed rail"):
        check_variations(rig, FREE, parse_vary("carrier.rail_at=0:1"))  # the rig file's rails
    for text, message in [
        ("rail_at=0:1", "names its robot (carrier.rail_at)"),
        ("table.bandwidth=0.1:1", "robot 'demo pedestal arm' has no rail"),
        ("carrier.rail_at=0:1", "needs a fixed rail"),
        ("crane.bandwidth=0.1:1", "no robot 'crane'"),
    ]:
        with pytest.raises(reachgate.ReachgateError, match=re.escape(message)):
            place(rig, [low_pass_window], text, FREE)
        cli = runner.invoke(app, ["place", str(DEMO_RIG), str(low_pass_window), "--vary", text])
        assert cli.exit_code == 2 and message in " ".join(cli.output.split()), cli.output


def test_rail_options_on_the_command_line_reach_the_rigs_robots(low_pass_window):
    """--rail fixed applies to every robot with a rail, so carrier.rail_at is taken (and its
    range checked against the carrier's rail) instead of refused for a following rail."""
    args = ["place", str(DEMO_RIG), str(low_pass_window), "--vary", "carrier.rail_at=-5:1"]
    followed = runner.invoke(app, args)
    assert followed.exit_code == 2 and "needs a fixed rail" in followed.output
    fixed = runner.invoke(app, [*args, "--rail", "fixed"])
    assert fixed.exit_code == 2 and "outside the rail range" in fixed.output, fixed.output


def test_a_rigs_rail_bandwidth_varies_for_its_robot_alone(low_pass_window):
    """carrier.bandwidth sets the carrier's follow bandwidth, which its own check then uses;
    the ready options give it with --rail follow (they apply to every robot with a rail)."""
    rig = reachgate.load_rig(DEMO_RIG)
    vary = parse_vary("z=0:0.2,carrier.bandwidth=0.2:2")
    rails = rails_at(rig_rails(rig), vary, (0.1, 1.25))
    assert rails == (("carrier", RailChoice(RailPolicy.FOLLOW, None, 1.25)),)
    report = check_rig(rig, load_scenario(low_pass_window), _at_z(0.1), dict(rails),
                       verify_slowdown=False)  # fmt: skip
    assert report.robot_settings["carrier"].rail_bandwidth_hz == 1.25
    candidate = Candidate((0.1, 1.25), _at_z(0.1), report_binding(report, 3.0), True, rails)
    result = SimpleNamespace(file_rails=tuple(rig_rails(rig).items()), vary=vary, rig=True)
    text = _option_text(result, candidate)
    assert text == '--place "0,0,0.1,0,0,0" --rail follow --rail-bandwidth 1.25'
    same = replace(candidate, rails=tuple(rig_rails(rig).items()))
    assert _option_text(result, same) == '--place "0,0,0.1,0,0,0"'  # the rig file's rails


def test_a_dask_cluster_finds_the_same_placement_as_this_process(ball_rig):
    """A real scheduler and a worker process on 127.0.0.1, started here: the same seed gives
    the same search (every score is the same deterministic check) and the same answer."""
    distributed = pytest.importorskip("dask.distributed")
    start = _at_z(BALL_BOUND_Z_M - 0.1)
    local = place(ball_rig, [_dip()], "z=-0.3:0.3", start, seed=34)
    with distributed.LocalCluster(
        n_workers=1, processes=True, threads_per_worker=1, host="127.0.0.1",
        dashboard_address=":0",
    ) as cluster:  # fmt: skip
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        remote = place(
            ball_rig, [_dip()], "z=-0.3:0.3", start, seed=34, cluster=cluster.scheduler_address
        )
        assert len(cluster.scheduler_info["workers"]) == 1
    assert remote.passed and local.passed
    assert remote.best.values == local.best.values
    assert remote.best.score == local.best.score
    assert remote.case_checks == local.case_checks
    assert remote.as_dict() == local.as_dict()
