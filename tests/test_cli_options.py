"""Options are never ignored silently: refused when they cannot apply, honoured where given."""

from __future__ import annotations

import json

import numpy as np
import pytest

from reachgate.checking.rail import RailPolicy, rail_positions
from reachgate.errors import ReachgateError
from reachgate.model.robot import load_robot

from conftest import DEMO_CASES, DEMO_ROBOT, refused
from conftest import run_cli as run

CALM = DEMO_CASES / "approach_calm.csv"


@pytest.mark.parametrize("at", ["12", "3"])
def test_rail_at_with_follow_is_refused_as_a_pair(at):
    refused(run("check", DEMO_ROBOT, CALM, "--rail", "follow", "--rail-at", at),
            f"--rail-at {at}", "--rail follow", "one or the other")  # fmt: skip


def test_rail_at_off_the_rail_is_refused_whatever_the_policy():
    """The demo rail runs 0..9 m."""
    refused(run("check", DEMO_ROBOT, CALM, "--rail-at", "12"), "12 m is outside", "[0, 9]")
    robot = load_robot(DEMO_ROBOT)
    for policy in RailPolicy:
        with pytest.raises(ReachgateError, match="outside the rail range"):
            rail_positions(robot, np.array([0.0, 1.0]), np.zeros((2, 3)), np.eye(4), policy, 12.0)


def test_lag_tol_without_lag_is_refused_in_check_and_scan(tmp_path):
    refused(run("check", DEMO_ROBOT, CALM, "--lag-tol", "2"), "--lag-tol", "--lag S")
    store = tmp_path / "s.sqlite"
    refused(run("scan", DEMO_ROBOT, CALM, "--lag-tol", "2", "--store", store, "--quiet"),
            "--lag-tol")  # fmt: skip
    assert not store.exists()


def test_lag_tol_with_lag_is_the_limit_of_the_lag_rows():
    result = run("check", DEMO_ROBOT, CALM, "--rail", "follow", "--lag", "0.02",
                 "--lag-tol", "0.5", "--format", "json")  # fmt: skip
    assert result.exit_code in (0, 1), result.output
    rows = [v for v in json.loads(result.stdout)["violations"] if v["axis"] == "tcp"]
    assert rows and all(v["check"] == "lag" and v["limit"] == 0.0005 for v in rows)


def envelope_json(*options) -> dict:
    result = run("envelope", DEMO_ROBOT, "--freqs", "2", "--freq-range", "0.5,4",
                 "--format", "json", *options)  # fmt: skip
    assert result.exit_code == 0, result.output
    return json.loads(result.stdout)


def test_envelope_place_turns_the_directions_into_the_scenario_axes():
    """A scenario frame yawed 90 deg in the cell: its x is the cell's y (analytic), so the
    envelope along scenario x around the home pose is the one along cell y without --place,
    to the bisection's tolerance."""
    placed = envelope_json("--axes", "x", "--place", "0,0,0,0,0,90")
    plain = envelope_json("--axes", "y")
    a = [p["amplitude"] for p in placed["directions"][0]["points"]]
    b = [p["amplitude"] for p in plain["directions"][0]["points"]]
    assert np.allclose(a, b, rtol=2 * placed["rel_tol"])
    assert placed["settings"]["place_rpy_deg"] == [0.0, 0.0, 90.0]
    unplaced_x = envelope_json("--axes", "x")["directions"][0]["points"]
    assert not np.allclose(a, [p["amplitude"] for p in unplaced_x], rtol=0.1)


def test_envelope_takes_rail_at_and_rail_bandwidth():
    held = envelope_json("--axes", "z", "--rail-at", "2")  # the demo rail's home
    assert held["settings"]["rail_at_m"] == 2.0
    refused(run("envelope", DEMO_ROBOT, "--rail-at", "12"), "outside the rail range")
    refused(run("envelope", DEMO_ROBOT, "--rail", "follow", "--rail-at", "2"), "one or the other")
    follow = envelope_json("--axes", "x", "--rail", "follow", "--rail-bandwidth", "0.8")
    assert follow["settings"]["rail_bandwidth_hz"] == 0.8
