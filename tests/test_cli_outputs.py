"""Outputs never destroy inputs and are written whole (DESIGN §5, README "Output files")."""

from __future__ import annotations

import os
import shutil

import numpy as np
import pytest

from reachgate.errors import ReachgateError
from reachgate.model.trajectory import Trajectory, write_trajectory
from reachgate.render.files import atomic_output, write_text

from conftest import DEMO_CASES, DEMO_ROBOT
from conftest import run_cli as run


@pytest.fixture
def inputs(tmp_path):
    robot = tmp_path / "robot.toml"
    path = tmp_path / "case.csv"
    shutil.copy(DEMO_ROBOT, robot)
    shutil.copy(DEMO_CASES / "approach_calm.csv", path)
    return robot, path


def one_error_line(result) -> str:
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert "Traceback" not in result.output
    return lines[0]


@pytest.mark.parametrize("option", ["--out", "--joints-out", "--plot"])
def test_check_refuses_to_write_over_the_robot_file(inputs, option):
    robot, path = inputs
    before = robot.read_bytes()
    result = run("check", robot, path, option, robot)
    assert result.exit_code == 2
    line = one_error_line(result)
    assert option in line and "robot file" in line and "destroy" in line
    assert robot.read_bytes() == before


def test_check_refuses_the_trajectory_under_another_spelling_or_a_link(inputs, tmp_path):
    robot, path = inputs
    before = path.read_bytes()
    (tmp_path / "sub").mkdir()
    other_spelling = tmp_path / "sub" / ".." / "case.csv"
    link = tmp_path / "link.csv"
    os.symlink(path, link)
    for target in (other_spelling, link):
        result = run("check", robot, path, "--joints-out", target)
        assert result.exit_code == 2
        assert "trajectory" in one_error_line(result)
    hard = tmp_path / "hard.csv"  # a hard link: same inode, different name
    os.link(path, hard)
    result = run("check", robot, path, "--out", hard)
    assert result.exit_code == 2 and "trajectory" in one_error_line(result)
    assert path.read_bytes() == before


def test_check_refuses_two_outputs_naming_one_file(inputs, tmp_path):
    robot, path = inputs
    target = tmp_path / "report.csv"
    result = run("check", robot, path, "--out", target, "--joints-out", target)
    assert result.exit_code == 2
    assert "--out and --joints-out" in one_error_line(result)
    assert not target.exists()


def test_envelope_and_scan_refuse_an_output_over_their_inputs(inputs, tmp_path):
    robot, path = inputs
    before = robot.read_bytes()
    result = run("envelope", robot, "--out", robot)
    assert result.exit_code == 2 and "robot file" in one_error_line(result)
    result = run("scan", robot, path, "--out", path, "--quiet")
    assert result.exit_code == 2 and "case" in one_error_line(result)
    store = tmp_path / "s.sqlite"
    result = run("scan", "--report", "--store", store, "--out", store)
    assert result.exit_code == 2 and "results store" in one_error_line(result)
    assert robot.read_bytes() == before


def test_a_write_error_names_the_file(inputs, tmp_path):
    robot, path = inputs
    target = tmp_path / "no such folder" / "report.txt"
    result = run("check", robot, path, "--out", target)
    assert result.exit_code == 2
    line = one_error_line(result)
    assert str(target) in line and "cannot write" in line


def test_an_interrupted_write_leaves_the_old_file_and_no_temporary(tmp_path):
    target = tmp_path / "report.txt"
    write_text(target, "old report")
    with pytest.raises(KeyboardInterrupt), atomic_output(target) as handle:
        handle.write("half of a new rep")
        raise KeyboardInterrupt
    assert target.read_text() == "old report\n"
    assert [p.name for p in tmp_path.iterdir()] == ["report.txt"]


def test_a_replaced_file_keeps_its_permissions(tmp_path):
    target = tmp_path / "report.txt"
    write_text(target, "first")
    target.chmod(0o640)
    write_text(target, "second")
    assert target.stat().st_mode & 0o777 == 0o640
    assert target.read_text() == "second\n"


def test_a_full_disk_is_one_error_naming_the_file(tmp_path):
    """/dev/full refuses every write with ENOSPC (Linux); the rename is never reached."""
    if not os.path.exists("/dev/full"):
        pytest.skip("no /dev/full on this system")
    with pytest.raises(ReachgateError, match=r"x\.txt: cannot write"):
        with atomic_output(tmp_path / "x.txt") as handle:
            with open("/dev/full", "w") as full:
                full.write("x" * 10)
                full.flush()
            handle.write("never")
    assert list(tmp_path.iterdir()) == []


def glide(tmp_path):
    t = np.linspace(0.0, 2.0, 201)
    p = np.column_stack([2.0 - 0.3 * t, 0.1 * np.sin(t), 1.5 - 0.2 * t])
    nominal = tmp_path / "glide.csv"
    write_trajectory(nominal, Trajectory.from_arrays(t, p, rpy_rad=np.zeros((t.size, 3))))
    return nominal


def test_perturb_refuses_a_folder_of_cases_made_with_another_seed(tmp_path):
    nominal = glide(tmp_path)
    out = tmp_path / "cases"
    first = run("perturb", nominal, "--count", "3", "--seed", "1", "--out", out)
    assert first.exit_code == 0, first.output
    before = (out / "glide_0001.csv").read_bytes()
    result = run("perturb", nominal, "--count", "2", "--seed", "2", "--out", out)
    assert result.exit_code == 2
    line = one_error_line(result)
    assert str(out) in line and "seed 1 there, 2 now" in line and "--replace" in line
    assert (out / "glide_0001.csv").read_bytes() == before
    result = run("perturb", nominal, "--count", "2", "--seed", "1", "--intensity", "severe",
                 "--out", out)  # fmt: skip
    assert result.exit_code == 2 and "intensity moderate there, severe now" in result.stderr
    again = run("perturb", nominal, "--count", "3", "--seed", "1", "--out", out)
    assert again.exit_code == 0  # the same settings: the same files, nothing mixed
    assert (out / "glide_0001.csv").read_bytes() == before


def test_perturb_replace_removes_only_the_cases_it_wrote(tmp_path):
    nominal = glide(tmp_path)
    out = tmp_path / "cases"
    assert run("perturb", nominal, "--count", "3", "--seed", "1", "--out", out).exit_code == 0
    mine = out / "notes.csv"
    mine.write_text("# measured by hand\nt_s,x_m\n")
    result = run("perturb", nominal, "--count", "2", "--seed", "2", "--out", out, "--replace")
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in out.iterdir()) == ["glide_0001.csv", "glide_0002.csv",
                                                     "notes.csv"]  # fmt: skip
    assert "seed = 2" in (out / "glide_0001.csv").read_text()
    assert mine.read_text() == "# measured by hand\nt_s,x_m\n"


def test_perturb_replace_never_removes_its_own_nominal(tmp_path):
    nominal = glide(tmp_path)
    out = tmp_path / "cases"
    assert run("perturb", nominal, "--count", "2", "--seed", "1", "--out", out).exit_code == 0
    case = out / "glide_0001.csv"  # a case of seed 1, perturbed again into its own folder
    before = case.read_bytes()
    result = run("perturb", case, "--count", "1", "--seed", "2", "--out", out, "--replace")
    assert result.exit_code == 2
    assert "is an input of this command" in one_error_line(result)
    assert case.read_bytes() == before
