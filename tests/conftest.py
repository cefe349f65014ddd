"""Shared fixtures: paths to the demo data, and an invented arm that needs numeric IK."""

from __future__ import annotations

import os

# One BLAS thread per test process, set before numpy loads: the tests use tiny matrices, and
# on a busy two-core machine BLAS threads spinning against each other made scipy's expm over
# 20,000 small matrices 7 times slower (measured: 257 s against 37 s under load).
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

from pathlib import Path

import pytest

import reachgate
from reachgate.model.robot import robot_from_dict

REPO = Path(__file__).resolve().parents[1]
DEMO_ROBOT = REPO / "robots" / "demo_rail_arm.toml"
DEMO_CASES = REPO / "trajectories"


@pytest.fixture
def demo_robot_path() -> Path:
    return DEMO_ROBOT


@pytest.fixture
def demo_cases() -> Path:
    return DEMO_CASES


def offset_wrist_arm(
    j1_deg: float = 180.0, j4_deg: float = 350.0, a4_m: float = 0.04, d5_m: float = 0.06
) -> reachgate.Robot:
    """The demo arm's geometry with its wrist axes no longer meeting: a4 = 0.04 m, d5 = 0.06 m
    (no closed form: numeric IK). j1_deg, j4_deg: the symmetric ranges of joints 1 and 4.
    a4_m = d5_m = 0 gives the spherical wrist back (closed form)."""

    def joint(name, a, alpha, d, offset=0.0, lo=-180.0, hi=180.0, home=0.0):
        limits = dict(range_deg=[lo, hi], vmax_deg_s=150.0, amax_deg_s2=500.0, home_deg=home)
        return dict(name=name, a_m=a, alpha_deg=alpha, d_m=d, offset_deg=offset, **limits)

    joints = [
        joint("j1", 0.30, -90.0, 0.68, lo=-j1_deg, hi=j1_deg),
        joint("j2", 1.05, 0.0, 0.0, offset=-90.0, lo=-140, hi=20, home=-40),
        joint("j3", 0.20, -90.0, 0.0, lo=-120, hi=160, home=40),
        joint("j4", a4_m, 90.0, 1.10, lo=-j4_deg, hi=j4_deg),
        joint("j5", 0.0, -90.0, d5_m, lo=-125, hi=125, home=60),
        joint("j6", 0.0, 0.0, 0.22, lo=-360, hi=360),
    ]
    return robot_from_dict(
        dict(
            name="offset wrist",
            convention="standard",
            mount=dict(xyz_m=[0.0, 0.0, 0.45]),
            tool=dict(xyz_m=[0.0, 0.0, 0.25], rpy_deg=[-180.0, -30.0, 0.0]),
            joints=joints,
        ),
        source="tests",
    )


def without_geometry(text: str) -> str:
    """A robot file's text with its geometry keys (DESIGN §8) taken out: mount radius_m, link
    radii and [[payload]] tables."""
    kept, in_payload = [], False
    for line in text.splitlines(keepends=True):
        stripped = line.strip()
        if stripped.startswith("["):
            in_payload = stripped.startswith("[[payload]]")
        if in_payload or stripped.startswith(("radius_m", "link_radius_m")):
            continue
        kept.append(line)
    return "".join(kept)


def run_cli(*args):
    """The reachgate command line, in this process, on args turned to text (typer's runner)."""
    from typer.testing import CliRunner

    from reachgate.cli import app

    return CliRunner().invoke(app, [str(a) for a in args])


def refused(result, *expected: str) -> str:
    """The one stderr line of an exit-2 refusal, checked to hold every expected phrase."""
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert "Traceback" not in result.output
    for phrase in expected:
        assert phrase in lines[0], lines[0]
    return lines[0]
