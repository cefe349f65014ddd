"""The check of a whole rig (DESIGN §8, §9): every robot's own checks plus clearance, one
verdict, one slow-down, one report; the demo rig's cases; a robot file alone unchanged.

Outside references: the placement of each robot's cell frame is checked against transforms
worked out by hand (a yaw of 90° about z and a translation); the slow-down against its
definition (DESIGN §6: the stretched case clears every rate row), run again on the stretch.
"""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest

import reachgate
from reachgate.checking.intervals import RATE_CHECKS, Check, Severity
from reachgate.checking.pipeline import CheckSettings, Placement, check, stretched
from reachgate.checking.rail import RailPolicy
from reachgate.checking.rig_check import RailChoice, check_rig, robot_settings
from reachgate.model.rig import load_rig
from reachgate.model.trajectory import Scenario, load_scenario, load_trajectory

from conftest import DEMO_CASES, DEMO_ROBOT, REPO
from conftest import run_cli as run

RIG = REPO / "rigs" / "demo_landing_rig.toml"
CASES = DEMO_CASES / "rig"


@pytest.fixture(scope="module")
def rig():
    return load_rig(RIG)


@pytest.fixture(scope="module")
def short_calm():
    """The calm demo case at every 8th sample (fast; same motion)."""
    scenario = load_scenario(CASES / "landing_calm.csv")
    bodies = {
        name: replace(b, t_s=b.t_s[::8], scenario_p_m=b.scenario_p_m[::8],
                      scenario_q_wxyz=b.scenario_q_wxyz[::8])
        for name, b in scenario.bodies.items()
    }  # fmt: skip
    return Scenario.from_trajectories(bodies, name="short calm")


@pytest.fixture(scope="module")
def demo_reports():
    """JSON reports and exit codes of the three demo rig cases, from the command line."""
    results = {}
    for case in ("landing_calm", "landing_gusty", "landing_low_pass"):
        # default --ends rest: the demo scenarios start and end at rest
        result = run("check", RIG, CASES / f"{case}.csv", "--format", "json")
        results[case] = (result.exit_code, json.loads(result.output))
    return results


def failing(report: dict) -> set[tuple[str, str]]:
    return {(v["check"], v["axis"]) for v in report["violations"] if v["severity"] == "violation"}


def test_calm_landing_passes_with_the_touchdown_a_declared_contact(demo_reports):
    code, report = demo_reports["landing_calm"]
    assert code == 0 and report["verdict"] == "pass" and report["slowdown"] == 1.0
    assert "carrier.j4" in report["margins"] and "table.j5" in report["margins"]
    assert "carrier.rotor guard/table.link4" in report["margins"]
    assert "carrier.mock-up/table.pad" not in report["margins"]  # contact: not checked
    assert "clearance not checked for carrier.mock-up/table.pad: contact" in report["notes"]
    assert report["settings"]["robots"]["carrier"]["rail"] == "follow"  # the rig file's
    assert report["settings"]["robots"]["table"]["rail"] is None  # no rail


def test_gusty_landing_fails_on_the_rotor_guard_against_the_pad_arms_forearm(demo_reports):
    code, report = demo_reports["landing_gusty"]
    assert code == 1 and report["verdict"] == "fail"
    assert ("clearance", "carrier.rotor guard/table.link4") in failing(report)
    assert {check for check, _ in failing(report)} == {"clearance"}
    assert report["slowdown"] is None  # a stretch moves nothing apart


def test_low_pass_fails_on_the_mock_up_too_close_to_the_floor(demo_reports):
    code, report = demo_reports["landing_low_pass"]
    assert code == 1
    assert failing(report) == {("clearance", "carrier.rotor guard/floor")}
    row = next(v for v in report["violations"] if v["axis"] == "carrier.rotor guard/floor")
    assert 0 < row["worst"] < row["limit"] == 0.05 and row["unit"] == "m"


def test_a_failing_rig_case_prints_its_table_with_advice_for_the_rail_it_follows():
    """The table of a failing rig case: its advice reads each robot's own rail (a follow rail
    from the rig file: a higher bandwidth), and no traceback."""
    result = run("check", RIG, CASES / "landing_low_pass.csv")
    assert result.exit_code == 1, result.output
    advice = " ".join(result.output.split("advice:")[1].split("cautions:")[0].split())
    assert "move the placement (--place)" in advice
    assert "a higher --rail-bandwidth" in advice


def test_a_narrow_table_breaks_a_clearance_pair_between_its_shapes_not_inside_a_name(
    monkeypatch,
):
    """At 80 columns the axis cell of a clearance row wraps at the pair's '/' (and at spaces),
    so every shape's name stays whole on one line."""
    monkeypatch.setenv("COLUMNS", "80")
    result = run("check", RIG, CASES / "landing_gusty.csv")
    assert result.exit_code == 1, result.output
    lines = result.output.splitlines()
    assert max(len(line) for line in lines) <= 80
    table = result.output.split("unit\n", 1)[1].split("\n\n", 1)[0]
    words = {word for line in table.splitlines() for word in line.split()}
    assert {"carrier.mock-up", "table.link4", "carrier.link4"} <= words
    assert not any(word.startswith("able.") or word.endswith(".li") for word in words)


def test_rig_json_has_the_design_keys_and_only_finite_numbers(demo_reports):
    _, report = demo_reports["landing_gusty"]
    assert set(report) == {
        "tool_version", "robot", "trajectory", "samples", "duration_s", "verdict",
        "violations", "margins", "slowdown", "settings", "notes", "inputs",
    }  # fmt: skip
    assert set(report["inputs"]["robot_sha256"]) == {"carrier", "table"}
    assert report["robot"] == "demo landing rig" and report["trajectory"] == "landing_gusty.csv"

    def numbers(value):
        if isinstance(value, dict):
            for v in value.values():
                yield from numbers(v)
        elif isinstance(value, list):
            for v in value:
                yield from numbers(v)
        elif isinstance(value, float):
            yield value

    assert all(math.isfinite(x) for x in numbers(report))


def test_each_robot_gets_the_scenario_in_its_own_cell_frame(rig):
    """By hand: the table's base is at (7.5, 1.8, 0) turned -90° about z, so its cell sees the
    rig through Rz(+90°)·T(-7.5, -1.8, 0): a scenario placed at x = +0.1 m lands at
    Rz(90°)·(-7.4, -1.8) = (1.8, -7.4) with yaw +90°. The carrier's cell is 0.45 m below the
    rig frame (its rail in a trench): the same placement is (0.1, 0, 0.45), no turn."""
    settings = CheckSettings(placement=Placement((0.1, 0.0, 0.0)))
    table = robot_settings(rig.robot("table"), settings, None).placement
    np.testing.assert_allclose(table.xyz_m, (1.8, -7.4, 0.0), atol=1e-12)
    np.testing.assert_allclose(table.rpy_rad, (0.0, 0.0, math.pi / 2), atol=1e-12)
    carrier = robot_settings(rig.robot("carrier"), settings, None).placement
    np.testing.assert_allclose(carrier.xyz_m, (0.1, 0.0, 0.45), atol=1e-12)
    np.testing.assert_allclose(carrier.rpy_rad, (0.0, 0.0, 0.0), atol=1e-12)


def test_each_robots_rows_are_its_own_check_with_axes_named_after_it(rig, short_calm):
    report = check_rig(rig, short_calm, rails=RailChoice(RailPolicy.FIXED))
    for name, body in (("carrier", "drone"), ("table", "pad")):
        placed = rig.robot(name)
        alone = check(placed.robot, short_calm.body(body), report.robot_settings[name])
        mine = [r for r in report.violations if r.check is not Check.CLEARANCE and
                r.axis.startswith(f"{name}.")]  # fmt: skip
        assert mine == [replace(r, axis=f"{name}.{r.axis}") for r in alone.violations]
        assert report.margins[f"{name}.j1"] == alone.margins["j1"]
    # the rail held at its home (the command line's choice) is far behind the drone: fails
    assert not report.passed and any(r.axis == "carrier.tcp" for r in report.violations)


def test_rail_choice_applies_to_every_robot_with_a_rail_else_the_rig_files(rig):
    settings = CheckSettings()
    given = robot_settings(rig.robot("carrier"), settings, RailChoice(RailPolicy.FIXED, 3.0))
    assert (given.rail, given.rail_at_m) == (RailPolicy.FIXED, 3.0)
    default = robot_settings(rig.robot("carrier"), settings, None)
    assert (default.rail, default.rail_bandwidth_hz) == (RailPolicy.FOLLOW, 0.5)
    table = robot_settings(rig.robot("table"), settings, RailChoice(RailPolicy.FOLLOW))
    assert table.rail is RailPolicy.FIXED and table.rail_at_m is None  # it has no rail


def test_slowdown_is_the_stretch_that_clears_every_robots_rate_rows(rig, short_calm):
    """DESIGN §6: slowdown is the smallest stretch that clears every rate row; checked by
    running the stretched rig case again."""
    rushed = Scenario.from_trajectories(
        {name: stretched(b, 0.1) for name, b in short_calm.bodies.items()}, name="rushed"
    )
    report = check_rig(rig, rushed)
    rate_rows = [r for r in report.violations if r.check in RATE_CHECKS]
    assert {r.axis.split(".")[0] for r in rate_rows if r.severity is Severity.VIOLATION} == {
        "carrier", "table"
    }  # fmt: skip
    needed = [r.slowdown for r in report.robots.values()]
    assert report.slowdown == max(needed) > 1.0
    again = check_rig(
        rig,
        Scenario.from_trajectories(
            {name: stretched(b, report.slowdown) for name, b in rushed.bodies.items()},
            name="stretched",
        ),
    )
    assert not [
        r for r in again.violations if r.check in RATE_CHECKS and r.severity is Severity.VIOLATION
    ]


def test_robot_file_alone_gives_the_one_robot_report_unchanged():
    calm = DEMO_CASES / "approach_calm.csv"
    result = run("check", DEMO_ROBOT, calm, "--rail", "follow", "--format", "json")
    expected = check(
        reachgate.load_robot(DEMO_ROBOT),
        load_trajectory(calm),
        CheckSettings(rail=RailPolicy.FOLLOW),
    )
    assert result.exit_code == 0
    document = json.loads(result.output)
    assert set(document.pop("inputs")) == {"robot_sha256", "trajectory_sha256"}
    assert document == json.loads(expected.to_json())
    library = reachgate.check(load_rig(DEMO_ROBOT), load_scenario(calm), rails=RailChoice(
        RailPolicy.FOLLOW))  # fmt: skip
    assert library.to_json() == expected.to_json()


def test_a_body_the_scenario_lacks_is_refused_with_exit_2(tmp_path):
    lines = (CASES / "landing_calm.csv").read_text().splitlines()
    header = next(i for i, line in enumerate(lines) if not line.startswith("#"))
    lines[header] = lines[header].replace("pad.", "roof.")
    case = tmp_path / "renamed.csv"
    case.write_text("\n".join(lines[: header + 5]) + "\n")
    result = run("check", RIG, case)
    assert result.exit_code == 2
    assert "robot 'table' follows body 'pad'" in result.output
    assert "no body 'pad' in the scenario (it has bodies drone, roof)" in result.output


def test_rig_joints_out_has_every_robots_axes(tmp_path, short_calm):
    case = tmp_path / "short.csv"
    reachgate.model.trajectory.write_scenario(case, short_calm)
    joints = tmp_path / "joints.csv"
    result = run("check", RIG, case, "--joints-out", joints)
    assert result.exit_code in (0, 1), result.output
    lines = joints.read_text().splitlines()
    header = lines[2].split(",")
    assert header[:3] == ["t_s", "carrier.rail_m", "carrier.j1_deg"]
    assert header[-2:] == ["table.j6_deg", "table.reachable"] and len(header) == 1 + 8 + 7
    first = lines[3].split(",")
    assert len(first) == len(header) and first[header.index("carrier.reachable")] == "1"


def test_rig_plot_writes_the_clearance_picture_and_one_per_robot(tmp_path, short_calm):
    case = tmp_path / "short.csv"
    reachgate.model.trajectory.write_scenario(case, short_calm)
    picture = tmp_path / "check.png"
    result = run("check", RIG, case, "--plot", picture)
    assert result.exit_code in (0, 1), result.output
    for written in (picture, tmp_path / "check-carrier.png", tmp_path / "check-table.png"):
        assert written.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_lag_rows_alone_get_a_rig_slowdown_that_clears_them(rig, short_calm):
    """DESIGN §6/§11: a stretch lowers the delay's tracking error, so a rig case whose only
    stretchable rows are lag rows still gets a factor, and the stretched case has none left."""
    settings = CheckSettings(lag_s=0.2, lag_tol_m=0.05)
    report = check_rig(rig, short_calm, settings)
    lag_rows = [r for r in report.violations
                if r.check is Check.LAG and r.severity is Severity.VIOLATION]  # fmt: skip
    assert lag_rows
    assert report.slowdown is not None and report.slowdown > 1.0
    again = check_rig(
        rig,
        Scenario.from_trajectories(
            {name: stretched(b, report.slowdown) for name, b in short_calm.bodies.items()},
            name="stretched",
        ),
        settings,
    )
    assert not [r for r in again.violations
                if r.check is Check.LAG and r.severity is Severity.VIOLATION]  # fmt: skip
