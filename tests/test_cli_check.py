"""The `check` and `robot` commands end to end: exit codes, formats, outputs, bad input."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from conftest import DEMO_CASES, DEMO_ROBOT
from conftest import run_cli as run

CALM = str(DEMO_CASES / "approach_calm.csv")
GUSTY = str(DEMO_CASES / "approach_gusty.csv")


def test_calm_demo_passes_with_the_rail_following():
    result = run("check", str(DEMO_ROBOT), CALM, "--rail", "follow")
    assert result.exit_code == 0, result.output
    assert "verdict: PASS" in result.output
    assert "not a safety validation" in result.output
    assert "\x1b[" not in result.output  # no terminal control codes


def test_calm_demo_fails_with_the_rail_held_at_home():
    result = run("check", str(DEMO_ROBOT), CALM, "--format", "json")
    assert result.exit_code == 1
    report = json.loads(result.output)
    assert report["verdict"] == "fail"
    assert any(v["check"] == "reach" and v["axis"] == "tcp" for v in report["violations"])


def test_json_report_has_the_design_keys():
    result = run("check", str(DEMO_ROBOT), GUSTY, "--rail", "follow", "--format", "json")
    report = json.loads(result.output)
    assert set(report) == {
        "tool_version",
        "robot",
        "trajectory",
        "samples",
        "duration_s",
        "verdict",
        "violations",
        "margins",
        "slowdown",
        "settings",
        "inputs",
        "notes",
    }
    assert report["settings"]["ends"] == "rest" and report["settings"]["rail"] == "follow"
    assert report["robot"] == "demo rail arm"
    assert report["trajectory"] == "approach_gusty.csv"
    row = report["violations"][0]
    assert set(row) == {
        "check",
        "axis",
        "severity",
        "start_s",
        "end_s",
        "worst_s",
        "worst",
        "limit",
        "unit",
        "fitting_branches",  # ours, beside DESIGN §6's keys: null on a speed row
    }
    assert row["fitting_branches"] is None
    assert set(report["margins"]["j1"]) >= {"position", "speed", "accel"}


def test_gusty_demo_fails_on_rates_and_gets_slowdown_advice():
    result = run("check", str(DEMO_ROBOT), GUSTY, "--rail", "follow", "--format", "json")
    assert result.exit_code == 1
    report = json.loads(result.output)
    checks = {v["check"] for v in report["violations"] if v["severity"] == "violation"}
    assert checks & {"speed", "accel", "jerk"}
    assert report["slowdown"] is not None and report["slowdown"] > 1.0


def test_csv_format_and_out_file(tmp_path):
    out = tmp_path / "rows.csv"
    result = run(
        "check", str(DEMO_ROBOT), GUSTY, "--rail", "follow", "--format", "csv", "--out", str(out)
    )
    assert result.exit_code == 1
    lines = out.read_text().splitlines()
    assert lines[0] == (
        "check,axis,severity,start_s,end_s,worst_s,worst,limit,unit,fitting_branches"
    )
    assert len(lines) > 1


def test_joints_out_writes_the_solved_trajectory(tmp_path):
    joints = tmp_path / "joints.csv"
    result = run("check", str(DEMO_ROBOT), CALM, "--rail", "follow", "--joints-out", str(joints))
    assert result.exit_code == 0
    lines = [ln for ln in joints.read_text().splitlines() if not ln.startswith("#")]
    assert lines[0] == "t_s,rail_m,j1_deg,j2_deg,j3_deg,j4_deg,j5_deg,j6_deg,reachable"
    assert len(lines) == 1 + 10001


def test_lag_check_reports_tracking_error():
    result = run(
        "check",
        str(DEMO_ROBOT),
        CALM,
        "--rail",
        "follow",
        "--lag",
        "0.2",
        "--lag-tol",
        "5",
        "--format",
        "json",
    )
    report = json.loads(result.output)
    lag_rows = [v for v in report["violations"] if v["check"] == "lag" and v["axis"] == "tcp"]
    assert lag_rows and lag_rows[0]["unit"] == "m" and lag_rows[0]["limit"] == pytest.approx(0.005)


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (["--place", "1,2,3"], "--place"),
        (["--place", "a,b,c,d,e,f"], "--place"),
        (["--lag", "-1"], "--lag"),
        (["--rail-at", "42"], "--rail-at"),
        (["--rail", "follow", "--rail-bandwidth", "0"], "--rail-bandwidth"),
        # absurd values: refused with the bound (they used to run and fail, exit 1)
        (["--lag", "1e300"], "--lag: 1e+300 s is above 10 s"),
        (["--lag", "0.02", "--lag-tol", "1e300"], "--lag-tol: 1e+300 mm is above 1000 mm"),
        (["--lag", "0.02", "--lag-tol-deg", "400"], "--lag-tol-deg: 400 deg is above 180"),
        (["--rail", "follow", "--rail-bandwidth", "1e-300"], "outside 0.001 to 1000 Hz"),
        (["--rail", "follow", "--rail-bandwidth", "1e300"], "outside 0.001 to 1000 Hz"),
    ],
)
def test_bad_options_exit_2_with_one_line(args, fragment):
    result = run("check", str(DEMO_ROBOT), CALM, *args)
    assert result.exit_code == 2
    assert fragment in result.output
    assert "Traceback" not in result.output


def test_missing_trajectory_exits_2(tmp_path):
    result = run("check", str(DEMO_ROBOT), str(tmp_path / "none.csv"))
    assert result.exit_code == 2
    assert "none.csv" in result.output


def test_robot_command_describes_the_arm():
    result = run("robot", str(DEMO_ROBOT))
    assert result.exit_code == 0
    for fragment in ("DH convention: standard", "spherical", "closed-form", "home TCP", "rail"):
        assert fragment in result.output


def test_robot_command_bad_file_exits_2(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('name = "x"\nconvention = "sideways"\n')
    result = run("robot", str(bad))
    assert result.exit_code == 2
    assert "convention" in result.output


def test_starting_the_cli_loads_no_heavy_optional_modules():
    """A check from a shell loop or a scan's reference run starts one process per case, so
    the CLI must not import scipy (scipy.signal about 0.5 s here, scipy.spatial 0.16 s) or
    roboticstoolbox at start-up; the perturb and plot commands import what they need when
    they run."""
    probe = "import sys, reachgate.cli; print(sorted(m for m in HEAVY if m in sys.modules))"
    heavy = "HEAVY = ('scipy', 'roboticstoolbox', 'matplotlib.pyplot', 'dask')"
    done = subprocess.run(
        [sys.executable, "-c", f"{heavy}; {probe}"], capture_output=True, text=True, check=True
    )
    assert done.stdout.strip() == "[]"
