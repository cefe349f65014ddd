"""Pictures: valid PNG files of the stated pixel size for passing and failing checks, envelopes."""

from __future__ import annotations

import struct

import numpy as np
import pytest
from typer.testing import CliRunner

from reachgate.checking.pipeline import check
from reachgate.cli import app
from reachgate.errors import ReachgateError
from reachgate.kinematics.chain import forward
from reachgate.model.robot import load_robot, robot_from_dict
from reachgate.model.trajectory import Trajectory
from reachgate.model.transforms import matrix_to_quat
from reachgate.motion.envelope import Direction, envelope
from reachgate.render.pictures import (
    DPI,
    ENVELOPE_SIZE_IN,
    REPORT_SIZE_IN,
    decimate,
    plot_envelope,
    plot_report,
)

from conftest import DEMO_CASES, DEMO_ROBOT, REPO

GANTRY = REPO / "robots" / "demo_gantry.toml"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
runner = CliRunner()


def png_size(path) -> tuple[int, int]:
    """Width and height from the IHDR chunk (PNG specification, W3C/ISO 15948: the signature,
    then the IHDR chunk: 4-byte length, b'IHDR', 4-byte width, 4-byte height, big-endian)."""
    data = path.read_bytes()
    assert data[:8] == PNG_SIGNATURE
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


def report_pixels():
    return int(REPORT_SIZE_IN[0] * DPI), int(REPORT_SIZE_IN[1] * DPI)


def sway(robot, amplitude_m: float, f_hz: float):
    """A sway of the TCP along cell x and z about the home pose, 3 s at 500 Hz."""
    t = np.linspace(0.0, 3.0, 1501)
    T = np.repeat(forward(robot, robot.home[None]), t.size, axis=0)
    ramp = np.sin(np.pi * t / 3.0) ** 2
    T[:, 0, 3] += amplitude_m * ramp * np.sin(2 * np.pi * f_hz * t)
    T[:, 2, 3] += 0.5 * amplitude_m * ramp * np.sin(2 * np.pi * 0.7 * f_hz * t)
    return Trajectory.from_arrays(t, T[:, :3, 3], matrix_to_quat(T[:, :3, :3]), name="sway")


@pytest.mark.parametrize("robot_file", [DEMO_ROBOT, GANTRY])
@pytest.mark.parametrize("amplitude_m, passes", [(0.01, True), (0.4, False)])
def test_check_picture_is_a_png_of_the_stated_size(tmp_path, robot_file, amplitude_m, passes):
    robot = load_robot(robot_file)
    report = check(robot, sway(robot, amplitude_m, 1.0))
    assert report.passed is passes
    out = plot_report(report, robot, tmp_path / "check.png")
    assert out.stat().st_size > 10_000
    assert png_size(out) == report_pixels()


def test_check_picture_without_a_singularity_floor(tmp_path):
    # Numeric solver, both floors 0 (off): the panel shows the raw scale-free measure.
    import tomllib

    data = tomllib.loads(GANTRY.read_text())
    data["thresholds"]["manipulability_min"] = 0.0
    data["thresholds"]["conditioning_min"] = 0.0
    robot = robot_from_dict(data, source="gantry without floor")
    report = check(robot, sway(robot, 0.05, 0.5))
    out = plot_report(report, robot, tmp_path / "raw.png")
    assert png_size(out) == report_pixels()


def test_check_command_writes_the_picture_for_passing_and_failing_cases(tmp_path):
    calm = str(DEMO_CASES / "approach_calm.csv")
    good, bad = tmp_path / "pass.png", tmp_path / "fail.png"
    result = runner.invoke(
        app, ["check", str(DEMO_ROBOT), calm, "--rail", "follow", "--plot", str(good)]
    )
    assert result.exit_code == 0, result.output
    result = runner.invoke(app, ["check", str(DEMO_ROBOT), calm, "--plot", str(bad)])
    assert result.exit_code == 1, result.output
    for out in (good, bad):
        assert png_size(out) == report_pixels()


def test_envelope_picture_is_a_png_of_the_stated_size(tmp_path):
    out = tmp_path / "envelope.png"
    result = runner.invoke(
        app,
        ["envelope", str(DEMO_ROBOT), "--axes", "y,yaw", "--freqs", "3", "--plot", str(out)],
    )
    assert result.exit_code == 0, result.output
    assert out.stat().st_size > 10_000
    assert png_size(out) == (int(ENVELOPE_SIZE_IN[0] * DPI), int(ENVELOPE_SIZE_IN[1] * DPI))


def test_envelope_picture_of_translations_only(tmp_path):
    robot = load_robot(DEMO_ROBOT)
    result = envelope(robot, directions=(Direction.Z,), frequencies_hz=np.array([0.5, 5.0]))
    out = plot_envelope(result, tmp_path / "z.png")
    assert png_size(out)[1] == int(ENVELOPE_SIZE_IN[1] * DPI)


def test_picture_must_be_named_png(tmp_path):
    robot = load_robot(DEMO_ROBOT)
    report = check(robot, sway(robot, 0.01, 1.0))
    with pytest.raises(ReachgateError, match="PNG"):
        plot_report(report, robot, tmp_path / "check.svg")


def test_decimation_keeps_every_bin_extreme():
    rng = np.random.default_rng(5101)
    t = np.arange(100_000) * 1e-3
    y = np.cumsum(rng.normal(size=t.size))
    y[1234] = 1e6  # a one-sample spike must survive
    y[50_000:50_010] = np.nan
    t_d, y_d = decimate(t, y, max_samples=1000)
    assert t_d.size <= 1000
    assert np.all(np.diff(t_d) > 0)
    assert np.nanmax(y_d) == 1e6
    assert np.nanmin(y_d) == np.nanmin(y)
