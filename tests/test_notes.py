"""Notes: what a report warns about besides its rows (checking/notes.py). Each case below is
built so that the note's condition holds by construction (analytic inputs)."""

from __future__ import annotations

import tomllib

import numpy as np
import pytest
from typer.testing import CliRunner

import reachgate
import reachgate.render.check_report
from reachgate.cli import app

from conftest import DEMO_ROBOT


@pytest.fixture(scope="module")
def robot():
    return reachgate.load_robot(DEMO_ROBOT)


def still_path(t_s, name="still"):
    """The TCP held near the demo arm's home pose at the given times."""
    t = np.asarray(t_s, dtype=float)
    p = np.column_stack([np.full(t.size, 2.9), np.zeros(t.size), np.full(t.size, 1.7)])
    return reachgate.Trajectory.from_arrays(t, p, rpy_rad=np.zeros((t.size, 3)), name=name)


def notes_of(robot, path):
    return reachgate.check(robot, path, reachgate.CheckSettings(ends=reachgate.Ends.FREE)).notes


def test_a_gap_in_the_log_is_noted(robot):
    t = np.arange(500) * 4e-3
    t[300:] += 60.0  # one step of 60 s among 4 ms steps
    (note,) = [n for n in notes_of(robot, still_path(t)) if n.startswith("gap")]
    assert "60.004 s after t = 1.196 s, 15001 times the median step (0.004 s)" in note


def test_whole_number_steps_under_t_s_look_like_milliseconds(robot):
    notes = notes_of(robot, still_path(np.arange(500) * 4.0))  # 4 "s" steps: 250 Hz in ms
    assert any("milliseconds" in n for n in notes)
    assert not any(n.startswith("coarse") for n in notes)


def test_coarse_sampling_is_noted(robot):
    """One sample every 10 s cannot show a rig's motion between samples."""
    notes = notes_of(robot, still_path(np.arange(20) * 10.0 + 0.5))
    assert any(n.startswith("coarse sampling: median step 10 s") for n in notes)
    assert not notes_of(robot, still_path(np.arange(500) * 4e-3))  # 250 Hz: nothing to say


@pytest.mark.parametrize(("n", "null"), [(2, {"accel", "jerk"}), (3, {"jerk"}), (4, set())])
def test_too_few_samples_give_null_margins_and_a_note(robot, n, null):
    """A fit of degree n - 1 through n samples has no second derivative for n = 2 and no
    third for n = 3: those margins are null, never 1 (which would read as 'unused')."""
    report = reachgate.check(
        robot, still_path(np.arange(n) * 4e-3), reachgate.CheckSettings(ends=reachgate.Ends.FREE)
    )
    for axis, margins in report.margins.items():
        for kind in ("accel", "jerk"):
            if kind in margins:
                assert (margins[kind] is None) == (kind in null), (axis, kind)
    assert any("too few" in note for note in report.notes) == bool(null)
    if null:
        assert "not measured" in reachgate.render.check_report.render_table(report)


def test_a_robot_without_a_tool_is_noted(robot):
    with open(DEMO_ROBOT, "rb") as handle:
        data = tomllib.load(handle)
    data.pop("tool")
    bare = reachgate.robot_from_dict(data, source="bare.toml")
    notes = notes_of(bare, still_path(np.arange(50) * 4e-3))
    assert any("no [tool]" in note for note in notes)
    assert not any(
        "no [tool]" in note for note in notes_of(robot, still_path(np.arange(50) * 4e-3))
    )


def test_numpy_warnings_never_reach_the_terminal(tmp_path):
    """A path far out of reach drives the solvers through arccos/sqrt of out-of-range values;
    the report says 'reach', the terminal gets no RuntimeWarning."""
    path = tmp_path / "far.csv"
    t = np.arange(200) * 4e-3
    rows = np.column_stack([t, np.full(t.size, 30.0), np.zeros(t.size), np.full(t.size, 9.0),
                            np.ones(t.size), np.zeros((t.size, 3))])  # fmt: skip
    path.write_text(
        "t_s,x_m,y_m,z_m,qw,qx,qy,qz\n" + "\n".join(",".join(map(str, r.tolist())) for r in rows)
    )
    result = CliRunner().invoke(app, ["check", str(DEMO_ROBOT), str(path), "--rail", "follow"])
    assert result.exit_code == 1, result.output
    assert "Warning" not in result.stderr and "Warning" not in result.stdout
