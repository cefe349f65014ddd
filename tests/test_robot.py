"""Robot files: every key validated, one clear message naming file, key and value."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from reachgate.errors import ReachgateError
from reachgate.model.robot import Convention, JointKind, load_robot

from conftest import DEMO_ROBOT

GOOD = DEMO_ROBOT.read_text()


def write(tmp_path, text: str, name: str = "arm.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


def fails_with(tmp_path, text: str, *fragments: str) -> str:
    path = write(tmp_path, text)
    with pytest.raises(ReachgateError) as info:
        load_robot(path)
    message = str(info.value)
    assert str(path) in message
    for fragment in fragments:
        assert fragment in message, message
    assert "\n" not in message
    return message


def test_demo_robot_loads_in_si_units():
    robot = load_robot(DEMO_ROBOT)
    assert robot.name == "demo rail arm"
    assert robot.convention is Convention.STANDARD
    assert robot.axis_names == ("rail", "j1", "j2", "j3", "j4", "j5", "j6")
    assert robot.rail is not None and robot.rail.kind is JointKind.PRISMATIC
    assert robot.vmax[1] == pytest.approx(math.radians(110.0))
    assert robot.upper[0] == pytest.approx(9.0)
    assert robot.home[3] == pytest.approx(math.radians(40.0))
    assert robot.jmax[0] == pytest.approx(20.0)
    assert robot.carriage_T_base[2, 3] == pytest.approx(0.45)


def test_missing_file_is_named(tmp_path):
    with pytest.raises(ReachgateError, match="no such file"):
        load_robot(tmp_path / "nothing.toml")


def test_empty_file_is_refused(tmp_path):
    fails_with(tmp_path, "   \n", "empty")


def test_binary_garbage_is_refused(tmp_path):
    path = tmp_path / "arm.toml"
    path.write_bytes(bytes(range(256)) * 4)
    with pytest.raises(ReachgateError, match=r"not a text file|not valid TOML"):
        load_robot(path)


def test_invalid_toml_is_refused(tmp_path):
    fails_with(tmp_path, "name = [unclosed\n", "not valid TOML")


def test_missing_key_is_named(tmp_path):
    fails_with(tmp_path, GOOD.replace("a_m = 1.05\n", "", 1), "joints[2].a_m", "missing")


def test_wrong_type_is_named(tmp_path):
    fails_with(
        tmp_path,
        GOOD.replace("vmax_deg_s = 110.0", 'vmax_deg_s = "fast"', 1),
        "joints[1].vmax_deg_s",
        "must be a number",
        "'fast'",
    )


def test_range_min_above_max_is_refused(tmp_path):
    fails_with(
        tmp_path,
        GOOD.replace("range_deg = [-140.0, 20.0]", "range_deg = [20.0, -140.0]"),
        "joints[2].range_deg",
        "minimum 20 must be below maximum -140",
    )


@pytest.mark.parametrize("value", ["0.0", "-5.0"])
def test_non_positive_limit_is_refused(tmp_path, value):
    fails_with(
        tmp_path,
        GOOD.replace("amax_m_s2 = 2.0", f"amax_m_s2 = {value}"),
        "rail.amax_m_s2",
        "must be positive",
    )


def test_home_outside_range_is_refused(tmp_path):
    fails_with(
        tmp_path,
        GOOD.replace("home_deg = -40.0", "home_deg = 45.0"),
        "joints[2].home_deg",
        "outside the range",
    )


def test_unknown_convention_is_refused(tmp_path):
    fails_with(
        tmp_path,
        GOOD.replace('convention = "standard"', 'convention = "craigish"'),
        "key convention",
        "'craigish'",
    )


def test_no_joints_is_refused(tmp_path):
    text = GOOD[: GOOD.index("[[joints]]")] + GOOD[GOOD.index("[tool]") :]
    fails_with(tmp_path, text, "joints", "at least one")


def test_unknown_key_is_refused(tmp_path):
    fails_with(
        tmp_path,
        GOOD.replace("d_m = 0.68", "d_m = 0.68\nd_mm = 680"),
        "joints[1].d_mm",
        "unknown key",
    )


def test_unknown_joint_type_is_refused(tmp_path):
    fails_with(
        tmp_path, GOOD.replace('name = "j1"', 'name = "j1"\ntype = "spherical"'), "joints[1].type"
    )


def test_duplicate_joint_name_is_refused(tmp_path):
    fails_with(tmp_path, GOOD.replace('name = "j2"', 'name = "j1"'), "joints[2].name", "twice")


def test_negative_threshold_is_refused(tmp_path):
    fails_with(
        tmp_path,
        GOOD.replace("wrist_min_deg = 5.0", "wrist_min_deg = -1.0"),
        "thresholds.wrist_min_deg",
    )


@pytest.mark.parametrize(
    ("value", "fragment"), [("-0.01", "must not be negative"), ("1.0", "must be below 1")]
)
def test_conditioning_floor_outside_its_range_is_refused(tmp_path, value, fragment):
    """The general-arm floor is a fraction of the measure's largest value, 1."""
    text = GOOD.replace("[thresholds]", f"[thresholds]\nconditioning_min = {value}")
    fails_with(tmp_path, text, "thresholds.conditioning_min", fragment)


def test_conditioning_floor_is_read(tmp_path):
    text = GOOD.replace("[thresholds]", "[thresholds]\nconditioning_min = 0.02")
    assert load_robot(write(tmp_path, text)).thresholds.conditioning_min == 0.02


def test_bad_vector_length_is_refused(tmp_path):
    fails_with(
        tmp_path,
        GOOD.replace("xyz_m = [0.0, 0.0, 0.45]", "xyz_m = [0.0, 0.45]"),
        "mount.xyz_m",
        "3 numbers",
    )


def test_modified_convention_converts_to_an_equivalent_standard_chain():
    """A Craig table and its regrouped standard table give the same FK (exact algebra)."""
    from reachgate.kinematics.chain import forward
    from reachgate.model.robot import robot_from_dict

    rng = np.random.default_rng(11)
    a, alpha, d = rng.uniform(-0.5, 0.5, 4), rng.uniform(-np.pi, np.pi, 4), rng.uniform(0, 0.5, 4)

    def joint(i, a_i, alpha_i):
        return dict(
            name=f"j{i}",
            a_m=float(a_i),
            alpha_deg=math.degrees(alpha_i),
            d_m=float(d[i]),
            range_deg=[-360.0, 360.0],
            vmax_deg_s=1.0,
            amax_deg_s2=1.0,
        )

    modified = robot_from_dict(
        dict(name="m", convention="modified", joints=[joint(i, a[i], alpha[i]) for i in range(4)])
    )
    standard = robot_from_dict(
        dict(
            name="s",
            joints=[
                joint(i, a[i + 1] if i < 3 else 0.0, alpha[i + 1] if i < 3 else 0.0)
                for i in range(4)
            ],
        )
    )
    q = rng.uniform(-np.pi, np.pi, (50, 4))
    prefix = modified.chain.base_T_chain
    np.testing.assert_allclose(forward(modified, q), prefix @ forward(standard, q), atol=1e-12)


def test_error_messages_have_no_traceback_text(tmp_path):
    message = fails_with(tmp_path, GOOD.replace("home_m = 2.0", "home_m = 12.0"), "rail.home_m")
    assert not re.search(r"Traceback|File \"", message)
