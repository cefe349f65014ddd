"""The advice names only fixes that can work for the rows present, in plain counted words;
the slow-down factor is null only when no speed, accel, jerk or lag row is there."""

from __future__ import annotations

import dataclasses
from functools import cache

import pytest

import reachgate
from reachgate.checking.rail import RailPolicy
from reachgate.checking.slowdown import stretch_rows
from reachgate.render.check_report import advice, render_table

from conftest import DEMO_CASES, DEMO_ROBOT


@cache
def demo_report(case: str, rail: str = "follow", lag_s: float | None = None):
    robot = reachgate.load_robot(DEMO_ROBOT)
    path = reachgate.load_trajectory(DEMO_CASES / f"{case}.csv")
    return reachgate.check(robot, path, reachgate.CheckSettings(rail=RailPolicy(rail), lag_s=lag_s))


def test_rate_rows_alone_get_a_slower_case_and_nothing_that_leaves_the_tcp_motion_alone():
    report = demo_report("approach_gusty")
    kinds = {v.check.value for v in report.violations if v.severity.value == "violation"}
    assert kinds <= {"speed", "accel", "jerk"}  # the demo table's premise
    text = advice(report)
    assert f"stretch time by at least {report.slowdown:.3f}x" in text
    assert "placement" not in text and "rail" not in text


def test_lag_rows_get_a_slower_case_a_shorter_delay_or_a_prediction_never_a_new_placement():
    """A loop delay's error |p(t) - p(t - lag)| depends on the TCP's motion alone, so moving
    the placement or giving the rail more of the motion cannot lower it (rigid placement)."""
    report = demo_report("approach_calm", lag_s=0.05)
    kinds = {v.check.value for v in report.violations if v.severity.value == "violation"}
    assert kinds == {"lag"}
    text = advice(report)
    assert "slower case" in text and "shorter loop delay" in text and "prediction" in text
    assert "placement" not in text and "rail" not in text
    assert "clear the lag rows" in text


def test_rows_no_stretch_clears_get_placement_rail_or_path_advice():
    report = demo_report("approach_wide", rail="fixed")
    text = advice(report)
    assert "does not clear the" in text and "reach" in text
    assert "--rail follow" in text and "--place" in text


def test_counts_read_as_words_one_row_is_a_row():
    report = demo_report("approach_gusty")
    first = next(v for v in report.violations if v.severity.value == "violation")
    one = dataclasses.replace(report, violations=(first,))
    table = render_table(one)
    assert "(1 violation row, 0 near rows)" in table
    assert "1 violation rows" not in table
    assert f"clear the {first.check.value} row." in advice(one)


@pytest.mark.parametrize(
    ("case", "rail", "lag_s"),
    [
        ("approach_calm", "follow", None),
        ("approach_calm", "follow", 0.05),
        ("approach_gusty", "follow", None),
        ("approach_wide", "fixed", None),
        ("approach_steep", "follow", None),
    ],
)
def test_the_factor_is_null_only_when_no_rate_or_lag_row_is_present(case, rail, lag_s):
    report = demo_report(case, rail, lag_s)
    failing = [v for v in report.violations if v.severity.value == "violation"]
    if not failing:
        assert report.slowdown == 1.0
    elif stretch_rows(report.violations):
        assert report.slowdown is not None and report.slowdown > 1.0
    else:
        assert report.slowdown is None
