"""envelope with a rig file (DESIGN §8): the named robot's envelope, a clear refusal otherwise."""

from __future__ import annotations

import pytest
from typer.testing import CliRunner

from reachgate.cli import _robot_of_rig, app
from reachgate.errors import ReachgateError
from reachgate.model.rig import load_rig

from conftest import DEMO_ROBOT, REPO

RIG = REPO / "rigs" / "demo_landing_rig.toml"


def test_envelope_takes_the_named_robot_of_a_rig_and_refuses_an_unnamed_one():
    assert _robot_of_rig(RIG, "table").name == load_rig(RIG).robot("table").robot.name
    assert _robot_of_rig(DEMO_ROBOT, None).name == "demo rail arm"
    with pytest.raises(ReachgateError, match="pick one with --robot"):
        _robot_of_rig(RIG, None)
    with pytest.raises(ReachgateError, match="no robot 'tabel' in the rig"):
        _robot_of_rig(RIG, "tabel")
    with pytest.raises(ReachgateError, match="is a robot file, not a rig"):
        _robot_of_rig(DEMO_ROBOT, "carrier")
    result = CliRunner().invoke(app, ["envelope", str(RIG), "--axes", "z", "--freqs", "3"])
    assert result.exit_code == 2 and "a rig of robots carrier, table" in result.output
