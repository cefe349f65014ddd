"""Shared fixtures: paths to the demo data and a writer for small robot files."""

from __future__ import annotations

from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
DEMO_ROBOT = REPO / "robots" / "demo_rail_arm.toml"
DEMO_CASES = REPO / "trajectories"


@pytest.fixture
def demo_robot_path() -> Path:
    return DEMO_ROBOT


@pytest.fixture
def demo_cases() -> Path:
    return DEMO_CASES
