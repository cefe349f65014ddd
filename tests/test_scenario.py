"""Scenario CSVs of several bodies (DESIGN §8): `drone.x_m`, ..., `pad.qw`, one `t_s`.

Each body follows the one-body rules of DESIGN §4; the expected values here are written by
hand (unit scales, roll-pitch-yaw of a single axis), so these tests need no outside library.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

import reachgate.model.trajectory as trajectory_module
from reachgate.errors import ReachgateError
from reachgate.model.trajectory import (
    PLAIN_BODY,
    Scenario,
    Trajectory,
    load_scenario,
    load_trajectory,
    write_scenario,
)


@pytest.fixture(autouse=True, params=["loadtxt", "arrow"])
def reader(request, monkeypatch):
    """Every test runs with each fast reader, as the one-body loader's tests do."""
    if request.param == "loadtxt":
        monkeypatch.setattr(trajectory_module, "_arrow_values", lambda *args: None)
    else:
        monkeypatch.setattr(trajectory_module, "ARROW_MIN_BYTES", 0)
    return request.param


HEADER = ",".join(
    ["t_s"]
    + [f"{body}.{c}" for body in ("drone", "pad") for c in "x_m y_m z_m qw qx qy qz".split()]
)


def two_body_rows(n: int) -> list[str]:
    return [f"{0.01 * i},1,2,3,1,0,0,0,4,5,{0.1 * i},1,0,0,0" for i in range(n)]


def write(tmp_path, lines, name="landing.csv"):
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def error_of(path) -> str:
    with pytest.raises(ReachgateError) as caught:
        load_scenario(path)
    return str(caught.value)


def test_two_bodies_each_with_its_own_columns_units_and_orientation_form(tmp_path):
    header = "pad.yaw_deg,t_s,drone.qw,drone.qx,drone.qy,drone.qz,drone.x_m,drone.y_m,"
    header += "drone.z_m,pad.x_mm,pad.y_mm,pad.z_mm,pad.roll_deg,pad.pitch_deg,note,pad.speed_m_s"
    lines = [
        "# two bodies",
        header,
        "90,0.0,1,0,0,0,1,2,3,1000,2000,500,0,0,a,8.3",
        "90,0.5,1,0,0,0,1.5,2,3,1000,2500,500,0,0,b,8.3",
    ]
    scenario = load_scenario(write(tmp_path, lines))
    assert set(scenario.bodies) == {"drone", "pad"} and not scenario.is_plain
    assert scenario.name == "landing.csv" and scenario.n_samples == 2
    np.testing.assert_array_equal(scenario.t_s, [0.0, 0.5])
    drone, pad = scenario.body("drone"), scenario.body("pad")
    assert drone.t_s is scenario.t_s and pad.t_s is scenario.t_s
    np.testing.assert_array_equal(drone.scenario_p_m, [[1, 2, 3], [1.5, 2, 3]])
    np.testing.assert_allclose(pad.scenario_p_m, [[1.0, 2.0, 0.5], [1.0, 2.5, 0.5]])
    half = math.sqrt(0.5)  # yaw 90 deg about z: q = (cos 45°, 0, 0, sin 45°)
    np.testing.assert_allclose(pad.scenario_q_wxyz, [[half, 0, 0, half]] * 2, atol=1e-15)
    assert scenario.ignored_columns == ("note", "pad.speed_m_s")


def test_plain_columns_are_one_body_loaded_exactly_as_the_one_body_loader(tmp_path):
    path = write(
        tmp_path, ["t_s,x_m,y_m,z_m,qw,qx,qy,qz,extra", "0,1,2,3,1,0,0,0,7", "1,1,2,4,1,0,0,0,7"]
    )
    scenario, alone = load_scenario(path), load_trajectory(path)
    assert scenario.is_plain and tuple(scenario.bodies) == (PLAIN_BODY,)
    plain = scenario.body("drone", only_one=True)
    np.testing.assert_array_equal(plain.scenario_p_m, alone.scenario_p_m)
    np.testing.assert_array_equal(plain.scenario_q_wxyz, alone.scenario_q_wxyz)
    assert scenario.ignored_columns == ("extra",)
    with pytest.raises(ReachgateError, match=r"no body 'drone'.*only plain columns"):
        scenario.body("drone")


def test_a_body_the_scenario_lacks_is_refused_naming_the_bodies_it_has(tmp_path):
    scenario = load_scenario(write(tmp_path, [HEADER, *two_body_rows(3)]))
    with pytest.raises(ReachgateError, match=r"landing.csv: no body 'vehicle'.*bodies drone, pad"):
        scenario.body("vehicle")


def test_written_scenario_loads_back_bit_for_bit(tmp_path):
    rng = np.random.default_rng(1101)
    t = np.cumsum(rng.uniform(0.003, 0.005, 200))
    bodies = {}
    for body in ("drone", "pad"):
        q = rng.normal(size=(200, 4))
        q /= np.linalg.norm(q, axis=1, keepdims=True)
        bodies[body] = Trajectory.from_arrays(t, rng.normal(size=(200, 3)), q)
    original = Scenario.from_trajectories(bodies, name="made")
    path = tmp_path / "made.csv"
    write_scenario(path, original, comments=("invented",))
    assert path.read_text().splitlines()[1].startswith("t_s,drone.x_m,drone.y_m")
    loaded = load_scenario(path)
    np.testing.assert_array_equal(loaded.t_s, t)
    for body in ("drone", "pad"):
        np.testing.assert_array_equal(loaded.body(body).scenario_p_m, bodies[body].scenario_p_m)
        np.testing.assert_array_equal(
            loaded.body(body).scenario_q_wxyz, bodies[body].scenario_q_wxyz
        )


def test_bodies_sampled_at_different_times_are_refused():
    a = Trajectory.from_arrays([0.0, 1.0], np.zeros((2, 3)), rpy_rad=np.zeros((2, 3)))
    b = Trajectory.from_arrays([0.0, 2.0], np.zeros((2, 3)), rpy_rad=np.zeros((2, 3)))
    with pytest.raises(ReachgateError, match="'pad' is not sampled at the same times"):
        Scenario.from_trajectories({"drone": a, "pad": b})


@pytest.mark.parametrize(
    ("header", "expected"),
    [
        (HEADER.replace(",pad.qz", ""), r"line 1: body pad: missing column qz \(have qw, qx, qy\)"),
        (HEADER.replace("pad.y_m", "pad.y_mm"), r"line 1, column pad.y_mm: position columns mix"),
        (HEADER.replace("pad.z_m", "pad.z_in"), r"line 1, column pad.z_in: unit 'in' is unknown"),
        (HEADER.replace("drone.qx", "drone.qw"), r"column drone.qw: appears twice"),
        (HEADER + ",x_m", r"column x_m: a pose column without a body name"),
        (HEADER.replace("t_s,", "time,"), r"line 1: missing column t_s"),
        (HEADER.replace("pad.x_m", ".x_m"), r"column .x_m: no body name before the dot"),
    ],
)
def test_header_faults_name_the_full_column(tmp_path, header, expected):
    n_fields = header.count(",") + 1
    lines = [header, *(",".join([f"0.{i}"] + ["1"] * (n_fields - 1)) for i in range(3))]
    message = error_of(write(tmp_path, lines))
    assert message.startswith(str(tmp_path / "landing.csv"))
    assert re.search(expected, message), message


def test_value_faults_name_the_line_and_the_bodys_column(tmp_path):
    rows = two_body_rows(6)
    bad_value = rows.copy()
    bad_value[3] = bad_value[3].replace(",4,5,", ",4,nan,")
    assert error_of(write(tmp_path, [HEADER, *bad_value])).endswith(
        "landing.csv line 5, column pad.y_m: 'nan' is not a finite number"
    )
    bad_quaternion = rows.copy()
    bad_quaternion[2] = bad_quaternion[2].replace(",1,2,3,1,0,0,0,", ",1,2,3,1,0.1,0,0,")
    assert "line 4, columns drone.qw,drone.qx,drone.qy,drone.qz: quaternion length" in error_of(
        write(tmp_path, [HEADER, *bad_quaternion])
    )
    repeated = rows.copy()
    repeated[4] = "0.03" + repeated[4][4:]
    assert "line 6, column t_s: time 0.03 s repeats" in error_of(
        write(tmp_path, [HEADER, *repeated])
    )


def test_earliest_fault_over_the_bodies_is_the_one_named(tmp_path):
    rows = two_body_rows(6)
    rows[4] = rows[4].replace(",1,2,3,1,0,0,0,", ",1,2,3,1,0.1,0,0,")  # drone, line 6
    rows[2] = rows[2].replace(",4,5,", ",4,inf,")  # pad, line 4
    assert "line 4, column pad.y_m" in error_of(write(tmp_path, [HEADER, *rows]))


def test_the_one_body_loader_points_a_several_body_file_to_a_rig(tmp_path):
    with pytest.raises(ReachgateError, match="several bodies: drone, pad; check it with a rig"):
        load_trajectory(write(tmp_path, [HEADER, *two_body_rows(3)]))
