"""Refusals that point at the real fault: one stderr line, the file named, exit code 2."""

from __future__ import annotations

import subprocess
import sys

import pytest

from conftest import DEMO_CASES, DEMO_ROBOT, refused
from conftest import run_cli as run

CALM = DEMO_CASES / "approach_calm.csv"


def calm_lines() -> list[str]:
    return CALM.read_text().splitlines()


def header_index(lines: list[str]) -> int:
    return next(i for i, line in enumerate(lines) if not line.startswith("#"))


def write_case(tmp_path, name: str, text: str | bytes):
    path = tmp_path / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text)
    return path


@pytest.mark.parametrize(("separator", "named"), [(";", "semicolon ';'"), ("\t", "tab")])
def test_a_csv_with_another_separator_is_named(tmp_path, separator, named):
    text = "\n".join(line.replace(",", separator) for line in calm_lines()) + "\n"
    case = write_case(tmp_path, "case.csv", text)
    line = refused(run("check", DEMO_ROBOT, case), "case.csv", f"separated by {named}", "commas")
    assert "unknown" not in line


def test_cr_only_line_ends_are_named(tmp_path):
    case = write_case(tmp_path, "case.csv", "\r".join(calm_lines()) + "\r")
    refused(run("check", DEMO_ROBOT, case), "case.csv", "carriage return (CR) alone")


def test_a_quoted_header_is_read_as_rfc_4180_allows(tmp_path):
    """RFC 4180 §2.5-2.7: any field may be enclosed in double quotes."""
    lines = calm_lines()
    k = header_index(lines)
    lines[k] = ",".join(f'"{name}"' for name in lines[k].split(","))
    case = write_case(tmp_path, "case.csv", "\n".join(lines) + "\n")
    quoted = run("check", DEMO_ROBOT, case, "--rail", "follow", "--format", "csv")
    plain = run("check", DEMO_ROBOT, CALM, "--rail", "follow", "--format", "csv")
    assert quoted.exit_code == plain.exit_code == 0, quoted.output
    assert quoted.stdout == plain.stdout


def test_a_robot_file_with_a_byte_order_mark_is_read(tmp_path):
    robot = write_case(tmp_path, "robot.toml", b"\xef\xbb\xbf" + DEMO_ROBOT.read_bytes())
    result = run("robot", robot)
    assert result.exit_code == 0, result.output
    assert "demo rail arm" in result.stdout


def test_latin_1_files_get_a_line_and_column_and_encoding_advice(tmp_path):
    raw = DEMO_ROBOT.read_bytes().replace(b'name = "demo', b'name = "d\xe9mo', 1)
    robot = write_case(tmp_path, "robot.toml", raw)
    line_no = raw[: raw.index(b"\xe9")].count(b"\n") + 1
    refused(run("robot", robot), "robot.toml", f"line {line_no}, column 10", "0xe9", "UTF-8")
    lines = calm_lines()
    k = header_index(lines)
    text = "\n".join([*lines[:k], "# caf\xe9 au lait", *lines[k:]]) + "\n"
    case = write_case(tmp_path, "case.csv", text.encode("latin-1"))
    refused(run("check", DEMO_ROBOT, case), "case.csv", f"line {k + 1}, column 6", "Latin-1")


def test_an_unknown_key_beside_a_missing_one_is_named_with_the_accepted_keys(tmp_path):
    text = DEMO_ROBOT.read_text().replace("range_deg = [-140.0, 20.0]", "range_mm = [-140, 20]")
    robot = write_case(tmp_path, "robot.toml", text)
    line = refused(run("robot", robot), "robot.toml", "joints[2].range_deg: missing",
                   "unknown key range_mm")  # fmt: skip
    assert "accepted here:" in line and "vmax_deg_s" in line and "home_deg" in line


def test_a_misspelt_key_lists_the_accepted_keys(tmp_path):
    text = DEMO_ROBOT.read_text().replace("[mount]\n", "[mount]\nxyz_mm = [0, 0, 0]\n")
    robot = write_case(tmp_path, "robot.toml", text)
    refused(run("robot", robot), "mount.xyz_mm", "unknown key", "accepted here: xyz_m, rpy_deg")


def test_swapped_arguments_are_said_to_look_swapped():
    refused(run("check", CALM, DEMO_ROBOT), "approach_calm.csv", "arguments swapped")


@pytest.mark.parametrize(
    ("args", "phrase"),
    [
        (["check", "only-one.toml"], "Missing argument"),
        (["check", "a.toml", "b.csv", "--bogus"], "No such option: --bogus"),
        (["check", "a.toml", "b.csv", "--format", "xml"], "'xml' is not one of"),
        (["chek"], "No such command 'chek'"),
    ],
)
def test_usage_errors_are_one_line(args, phrase):
    line = refused(run(*args), phrase, "--help")
    assert not line.startswith("Usage")


@pytest.mark.parametrize(
    ("old", "new", "named"),
    [
        ("a_m = 0.30", "a_m = 1e300", "joints[1].a_m: 1e+300 m is not plausible"),
        ("vmax_deg_s = 110.0", "vmax_deg_s = 1e-9", "at least 0.01 deg/s"),
        ("range_m = [0.0, 9.0]", "range_m = [0.0, 1e6]", "rail.range_m: 1e+06 m"),
        ("amax_m_s2 = 2.0", "amax_m_s2 = 1e9", "at most 1000 m/s^2"),
        (
            "shoulder_min_m = 0.05",
            "shoulder_min_m = 0.05\nposition_margin_mm = 1e300",
            "thresholds.position_margin_mm: 1e+300 mm is not plausible",
        ),
    ],
)
def test_absurd_robot_values_are_refused_with_the_bound_and_why(tmp_path, old, new, named):
    robot = write_case(tmp_path, "robot.toml", DEMO_ROBOT.read_text().replace(old, new, 1))
    refused(run("robot", robot), "robot.toml", named, "check the value and its unit")


@pytest.mark.parametrize(
    ("place", "named"),
    [
        ("1e300,0,0,0,0,0", "--place: x 1e+300 m is beyond the plausible ±1000 m"),
        ("0,0,-1000.001,0,0,0", "--place: z -1000.001 m is beyond"),
        ("0,0,0,0,0,4e5", "--place: yaw 400000 deg is beyond the plausible ±360000 deg"),
    ],
)
def test_an_absurd_placement_is_refused_with_the_bound_and_why(place, named):
    refused(run("check", DEMO_ROBOT, CALM, "--place", place), named, "for a robot cell (")


def test_unicode_digits_are_refused_naming_line_and_column(tmp_path):
    lines = calm_lines()
    k = header_index(lines) + 3
    fields = lines[k].split(",")
    fields[1] = "\u0661"  # ARABIC-INDIC DIGIT ONE: float() would take it
    lines[k] = ",".join(fields)
    case = write_case(tmp_path, "case.csv", "\n".join(lines) + "\n")
    refused(run("check", DEMO_ROBOT, case), f"case.csv line {k + 1}, column x_m", "ASCII digits")


def case_with(tmp_path, column: int, value: str):
    """The calm case with one value of its fourth sample replaced: (path, its line number)."""
    lines = calm_lines()
    k = header_index(lines) + 3
    fields = lines[k].split(",")
    fields[column] = value
    lines[k] = ",".join(fields)
    return write_case(tmp_path, "case.csv", "\n".join(lines) + "\n"), k + 1


@pytest.mark.parametrize(
    ("column", "value", "named"),
    [
        (1, "1e300", "column x_m: 1e+300 m is beyond the plausible ±1000 m"),
        (0, "1e12", "column t_s: 1e+12 s is beyond the plausible ±1e+06 s"),
    ],
)
def test_absurd_trajectory_values_are_refused_with_warnings_as_errors(
    tmp_path, column, value, named
):
    """A subprocess run with -W error (any warning, numpy's included, would end it with a
    traceback): one line naming file, line and column, the bound and why; exit 2."""
    case, line = case_with(tmp_path, column, value)
    done = subprocess.run(
        [sys.executable, "-W", "error", "-m", "reachgate", "check", str(DEMO_ROBOT), str(case)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 2, done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in done.stderr
    assert f"case.csv line {line}, {named}" in lines[0]
    assert "for a robot cell (" in lines[0] and "check the value and its unit" in lines[0]


def test_no_numpy_warning_reaches_the_terminal(tmp_path):
    """A sample 999 m away (inside the plausible bound, far out of reach): the check answers
    (reach rows), and stderr stays empty, in check and in a scan's worker process.
    Subprocesses with -W error, so that any warning would end them."""
    case, _ = case_with(tmp_path, 1, "999")
    done = subprocess.run(
        [sys.executable, "-W", "error", "-m", "reachgate", "check", str(DEMO_ROBOT), str(case)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 1, done.stderr
    assert done.stderr == ""
    assert "reach" in done.stdout
    store = tmp_path / "s.sqlite"
    command = ["scan", str(DEMO_ROBOT), str(case), "--workers", "1", "--quiet", "--store"]
    scanned = subprocess.run(  # a spawned worker process checks the case, as in every scan
        [sys.executable, "-W", "error", "-m", "reachgate", *command, str(store)],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert scanned.returncode == 1, scanned.stderr
    assert scanned.stderr == ""
