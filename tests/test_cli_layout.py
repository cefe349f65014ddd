"""Output that fits: tables within the terminal's width (COLUMNS), prose wrapped between words,
no phrase cut, no '-0.00', and reports that say what shaped them (DESIGN §6)."""

from __future__ import annotations

import csv
import hashlib
import io
import json

import pytest
from typer.testing import CliRunner

from reachgate.cli import app
from reachgate.render.terminal import fixed, wrap_items

from conftest import DEMO_CASES, DEMO_ROBOT

runner = CliRunner()
CALM = DEMO_CASES / "approach_calm.csv"
GUSTY = DEMO_CASES / "approach_gusty.csv"


def run(*args, columns: int = 80):
    return runner.invoke(app, [str(a) for a in args], env={"COLUMNS": str(columns)})


def widest(text: str) -> int:
    return max(len(line) for line in text.splitlines())


@pytest.fixture(scope="module")
def scan_store(tmp_path_factory):
    store = tmp_path_factory.mktemp("scan") / "s.sqlite"
    result = run("scan", DEMO_ROBOT, CALM, GUSTY, "--store", store, "--workers", "1", "--quiet")
    assert result.exit_code == 1, result.output
    return store


@pytest.mark.parametrize("columns", [80, 120])
def test_the_check_table_fits_the_width_and_keeps_phrases_whole(columns):
    result = run("check", DEMO_ROBOT, GUSTY, "--rail", "follow", columns=columns)
    assert result.exit_code == 1
    assert widest(result.stdout) <= columns
    assert "branch shoulder +, elbow +, wrist +" in result.stdout  # one phrase, one line
    assert all(line == line.rstrip() for line in result.stdout.splitlines())
    assert "…" not in result.stdout  # nothing cut short


def test_the_check_table_uses_a_wider_terminal():
    narrow = run("check", DEMO_ROBOT, CALM).stdout
    wide = run("check", DEMO_ROBOT, CALM, columns=160).stdout
    assert widest(wide) > 80 and len(wide.splitlines()) < len(narrow.splitlines())


def test_scan_robot_and_envelope_fit_80_columns(scan_store):
    scan = run("scan", "--report", "--store", scan_store)
    assert widest(scan.stdout) <= 80, scan.stdout
    robot = run("robot", DEMO_ROBOT)
    assert widest(robot.stdout) <= 80
    envelope = run("envelope", DEMO_ROBOT, "--freqs", "2", "--freq-range", "0.5,4")
    assert envelope.exit_code == 0
    assert widest(envelope.stdout) <= 80
    for text in (robot.stdout, envelope.stdout):
        assert "-0.00" not in text and "…" not in text


def test_a_joint_out_of_range_says_whether_another_branch_keeps_it_in():
    result = run("check", DEMO_ROBOT, CALM)
    assert widest(result.stdout) <= 80
    explanation = " ".join(result.stdout.split("branch: ", 1)[1].split())
    # j2 reaches 58.19 deg against its 20 deg end
    assert "(shoulder +, elbow +, wrist +) takes j2 up to 38.19 deg beyond its range" in explanation
    assert "none of the other seven branches of the closed-form solution" in explanation


def test_the_scan_csv_names_the_check_of_the_worst_margin(scan_store):
    result = run("scan", "--report", "--store", scan_store, "--format", "csv")
    rows = list(csv.DictReader(io.StringIO(result.stdout)))
    assert "worst_margin_limit" not in rows[0]
    assert {row["worst_margin_check"] for row in rows} <= {"position", "speed", "accel", "jerk"}


def test_the_json_report_records_settings_and_input_hashes():
    result = run("check", DEMO_ROBOT, CALM, "--rail", "follow", "--place", "0.1,0,0,0,0,5",
                 "--lag", "0.02", "--format", "json")  # fmt: skip
    report = json.loads(result.stdout)
    assert report["settings"]["rail"] == "follow"
    assert report["settings"]["place_xyz_m"] == [0.1, 0.0, 0.0]
    assert report["settings"]["place_rpy_deg"][2] == pytest.approx(5.0)
    assert report["settings"]["lag_s"] == 0.02
    assert report["inputs"] == {
        "robot_sha256": hashlib.sha256(DEMO_ROBOT.read_bytes()).hexdigest(),
        "trajectory_sha256": hashlib.sha256(CALM.read_bytes()).hexdigest(),
    }


def test_items_break_only_between_items_and_zero_is_never_negative():
    text = wrap_items(["aaaa bbbb", "cccc dddd", "eeee"], 20)
    assert text.splitlines() == ["aaaa bbbb;", "cccc dddd; eeee"]
    assert wrap_items(["aaaa bbbb", "cccc"], 20) == "aaaa bbbb; cccc"
    assert fixed(-0.0) == "0.00" and fixed(-0.004) == "0.00" and fixed(-0.006) == "-0.01"
