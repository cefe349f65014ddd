"""Trajectory CSV loading and writing (DESIGN §4).

Outside reference for orientations: scipy.spatial.transform.Rotation, whose
from_euler("ZYX", [yaw, pitch, roll]) is R = Rz(yaw)·Ry(pitch)·Rx(roll), our RPY convention.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

import reachgate.model.trajectory as trajectory_module
from reachgate.errors import ReachgateError
from reachgate.model.trajectory import (
    WRITTEN_COLUMNS,
    Trajectory,
    load_trajectory,
    rpy_to_quat,
    write_trajectory,
)
from reachgate.model.transforms import UNIT_QUATERNION_TOL, matrix_to_quat, rpy_to_matrix

HEADER = "t_s,x_m,y_m,z_m,qw,qx,qy,qz"


@pytest.fixture(autouse=True, params=["loadtxt", "arrow"])
def reader(request, monkeypatch):
    """Every test here runs with each fast reader: np.loadtxt, and pyarrow's CSV reader
    (which large files take); both must accept and refuse exactly what the scan does."""
    if request.param == "loadtxt":
        monkeypatch.setattr(trajectory_module, "_arrow_values", lambda *args: None)
    else:
        monkeypatch.setattr(trajectory_module, "ARROW_MIN_BYTES", 0)
    return request.param


ROW = "{t},0.1,0.2,0.3,1,0,0,0"


def rows(n: int, start_line: int = 0) -> list[str]:
    return [ROW.format(t=0.01 * (i + start_line)) for i in range(n)]


def csv(tmp_path, lines, name="approach.csv"):
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def load_error(path) -> str:
    with pytest.raises(ReachgateError) as caught:
        load_trajectory(path)
    return str(caught.value)


def random_trajectory(seed: int, n: int = 500) -> Trajectory:
    rng = np.random.default_rng(seed)
    t = 3.0 + np.cumsum(rng.uniform(0.8e-3, 1.2e-3, n))
    p = rng.normal(scale=2.0, size=(n, 3))
    q = rng.normal(size=(n, 4))
    return Trajectory.from_arrays(t, p, q / np.linalg.norm(q, axis=1, keepdims=True))


def same_rotation(q_a, q_b, atol=1e-12):
    """Quaternions q and -q are one rotation: compare |<q_a, q_b>| with 1."""
    dots = np.abs(np.sum(np.asarray(q_a) * np.asarray(q_b), axis=-1))
    np.testing.assert_allclose(dots, 1.0, atol=atol)


# --- good files ---------------------------------------------------------------------------


def test_plain_file_loads_times_positions_quaternions_and_file_name(tmp_path):
    path = csv(tmp_path, ["# landing approach", HEADER, *rows(3)])
    trajectory = load_trajectory(path)
    np.testing.assert_array_equal(trajectory.t_s, [0.0, 0.01, 0.02])
    np.testing.assert_array_equal(trajectory.scenario_p_m, [[0.1, 0.2, 0.3]] * 3)
    np.testing.assert_array_equal(trajectory.scenario_q_wxyz, [[1.0, 0, 0, 0]] * 3)
    assert trajectory.name == "approach.csv"
    assert trajectory.ignored_columns == ()
    assert trajectory.n_samples == 3 and trajectory.duration_s == pytest.approx(0.02)


def test_millimetre_columns_load_as_the_same_metres(tmp_path):
    metres = csv(tmp_path, [HEADER, "0,1.5,-0.25,2,1,0,0,0", "0.1,1.5,-0.25,2,1,0,0,0"], "m.csv")
    mm = csv(
        tmp_path,
        [
            "t_s,x_mm,y_mm,z_mm,qw,qx,qy,qz",
            "0,1500,-250,2000,1,0,0,0",
            "0.1,1500,-250,2000,1,0,0,0",
        ],
        "mm.csv",
    )
    np.testing.assert_allclose(
        load_trajectory(mm).scenario_p_m, load_trajectory(metres).scenario_p_m, rtol=1e-15
    )


def test_rpy_in_degrees_and_radians_match_scipy_zyx_euler(tmp_path):
    rng = np.random.default_rng(11)
    n = 50
    rpy_rad = np.column_stack(
        [rng.uniform(-np.pi, np.pi, n), rng.uniform(-1.5, 1.5, n), rng.uniform(-np.pi, np.pi, n)]
    )
    t = np.arange(n) * 0.004
    deg_lines = ["t_s,x_m,y_m,z_m,roll_deg,pitch_deg,yaw_deg"] + [
        f"{ti!r},0,0,0,{r!r},{p!r},{y!r}"
        for ti, (r, p, y) in zip(t.tolist(), np.degrees(rpy_rad).tolist(), strict=True)
    ]
    rad_lines = ["t_s,x_m,y_m,z_m,roll_rad,pitch_rad,yaw_rad"] + [
        f"{ti!r},0,0,0,{r!r},{p!r},{y!r}"
        for ti, (r, p, y) in zip(t.tolist(), rpy_rad.tolist(), strict=True)
    ]
    q_deg = load_trajectory(csv(tmp_path, deg_lines, "deg.csv")).scenario_q_wxyz
    q_rad = load_trajectory(csv(tmp_path, rad_lines, "rad.csv")).scenario_q_wxyz
    # Outside reference: scipy, intrinsic Z-Y-X with angles [yaw, pitch, roll].
    q_scipy = Rotation.from_euler("ZYX", rpy_rad[:, ::-1]).as_quat(scalar_first=True)
    same_rotation(q_rad, q_scipy)
    same_rotation(q_deg, q_scipy)
    assert (q_rad[:, 0] >= 0).all()


def test_rpy_file_and_quaternion_file_give_the_same_orientation(tmp_path):
    rpy_deg = np.array([[10.0, -20.0, 30.0], [170.0, 45.0, -90.0]])
    q = Rotation.from_euler("ZYX", rpy_deg[:, ::-1], degrees=True).as_quat(scalar_first=True)
    rpy_path = csv(
        tmp_path,
        ["t_s,x_m,y_m,z_m,roll_deg,pitch_deg,yaw_deg"]
        + [f"{i},0,0,0,{r},{p},{y}" for i, (r, p, y) in enumerate(rpy_deg)],
        "rpy.csv",
    )
    q_path = csv(
        tmp_path,
        [HEADER]
        + [f"{i},0,0,0,{','.join(repr(v) for v in qi)}" for i, qi in enumerate(q.tolist())],
        "q.csv",
    )
    same_rotation(
        load_trajectory(rpy_path).scenario_q_wxyz, load_trajectory(q_path).scenario_q_wxyz
    )


def test_rpy_to_quat_matches_the_matrix_route_and_scipy():
    rng = np.random.default_rng(12)
    rpy = rng.uniform(-4.0, 4.0, size=(2000, 3))
    q = rpy_to_quat(rpy)
    np.testing.assert_allclose(q, matrix_to_quat(rpy_to_matrix(rpy)), atol=1e-12)
    same_rotation(q, Rotation.from_euler("ZYX", rpy[:, ::-1]).as_quat(scalar_first=True))


def test_columns_in_any_order_with_spaces_around_names_and_values(tmp_path):
    path = csv(
        tmp_path,
        [" qz , y_m,t_s ,qx,x_m,qw,z_m,qy", " 0 , 2 , 0 , 0 , 1 , 1 , 3 , 0", "0,2,0.5,0,1,1,3,0"],
    )
    trajectory = load_trajectory(path)
    np.testing.assert_array_equal(trajectory.t_s, [0.0, 0.5])
    np.testing.assert_array_equal(trajectory.scenario_p_m, [[1.0, 2.0, 3.0]] * 2)
    np.testing.assert_array_equal(trajectory.scenario_q_wxyz, [[1.0, 0, 0, 0]] * 2)


def test_extra_columns_numeric_or_text_are_listed_and_not_checked(tmp_path):
    path = csv(
        tmp_path,
        [
            "t_s,phase,x_m,y_m,z_m,qw,qx,qy,qz,gust_m_s",
            "0,descent,0,0,1,1,0,0,0,nan",
            "0.1,flare,0,0,0.9,1,0,0,0,",
        ],
    )
    trajectory = load_trajectory(path)
    assert trajectory.ignored_columns == ("phase", "gust_m_s")
    np.testing.assert_array_equal(trajectory.scenario_p_m[:, 2], [1.0, 0.9])


def test_comments_blank_lines_crlf_and_byte_order_mark_are_accepted(tmp_path):
    text = "\ufeff# made by hand\r\n\r\n" + HEADER + "\r\n0,1,2,3,1,0,0,0\r\n# mid comment\r\n"
    text += "   \r\n  # indented comment\r\n0.2,1,2,3,1,0,0,0\r\n"
    path = tmp_path / "approach.csv"
    path.write_bytes(text.encode("utf-8"))
    trajectory = load_trajectory(path)
    np.testing.assert_array_equal(trajectory.t_s, [0.0, 0.2])


def test_line_scan_and_fast_path_give_identical_values(tmp_path):
    source = random_trajectory(13, n=300)
    fast = tmp_path / "fast.csv"
    write_trajectory(fast, source)
    lines = fast.read_text().splitlines()
    lines.insert(150, "# a comment in the data block sends the file through the line scan")
    slow = csv(tmp_path, lines, "slow.csv")
    a, b = load_trajectory(fast), load_trajectory(slow)
    for field in ("t_s", "scenario_p_m", "scenario_q_wxyz"):
        np.testing.assert_array_equal(getattr(a, field), getattr(b, field))


def test_text_labels_in_a_kept_out_column_still_take_the_fast_path_with_every_field_counted(
    tmp_path, monkeypatch
):
    header = HEADER + ",phase"
    good = [f"{0.01 * k:g},0.1,0.2,0.3,1,0,0,0,{'descent' if k < 3 else 'flare'}" for k in range(6)]
    path = csv(tmp_path, [header, *good])
    scanned = []
    original = trajectory_module._scan_values
    monkeypatch.setattr(
        trajectory_module, "_scan_values", lambda *a: scanned.append(a) or original(*a)
    )
    loaded = load_trajectory(path)
    assert not scanned  # one loadtxt call read the file
    assert loaded.ignored_columns == ("phase",)
    np.testing.assert_array_equal(loaded.t_s, 0.01 * np.arange(6))
    # a row that lost its y_m field is still refused, at its line (field counts stand)
    short = csv(tmp_path, [header, *good[:3], "0.03,0.1,0.3,1,0,0,0,flare", *good[4:]], "short.csv")
    message = load_error(short)
    assert message.startswith(f"{short} line 5:") and "short row" in message, message


def test_uneven_time_steps_are_kept_as_given(tmp_path):
    t = [0.0, 0.001, 0.0031, 0.0035, 0.01]
    path = csv(tmp_path, [HEADER] + [ROW.format(t=ti) for ti in t])
    np.testing.assert_array_equal(load_trajectory(path).t_s, t)


def test_quaternion_near_unit_is_normalised_and_unit_one_is_kept_bit_for_bit(tmp_path):
    q_near = np.array([1.0 + 0.9 * UNIT_QUATERNION_TOL, 0.0, 0.0, 0.0])
    q_unit = np.array([0.5, 0.5, 0.5, 0.5])
    path = csv(
        tmp_path,
        [
            HEADER,
            f"0,0,0,0,{','.join(map(repr, q_near.tolist()))}",
            f"1,0,0,0,{','.join(map(repr, q_unit.tolist()))}",
        ],
    )
    q = load_trajectory(path).scenario_q_wxyz
    np.testing.assert_allclose(np.linalg.norm(q[0]), 1.0, rtol=1e-15)
    np.testing.assert_array_equal(q[1], q_unit)


# --- writing ------------------------------------------------------------------------------


def test_write_then_load_gives_identical_arrays(tmp_path):
    source = random_trajectory(14, n=2000)
    # Awkward magnitudes: tiny, the largest a position may have (samples.POSITION_BOUND),
    # negative zero, values that need all 17 digits.
    p = source.scenario_p_m.copy()
    p[0] = [1e-300, -0.0, 987.65432109876543]
    p[1] = [np.nextafter(1.0, 2.0), 2.0**-1074, -np.nextafter(1000.0, 0.0)]
    source = Trajectory.from_arrays(source.t_s, p, source.scenario_q_wxyz)
    path = tmp_path / "round.csv"
    write_trajectory(path, source, comments=("case 7", "seed = 3\nintensity = light"))
    back = load_trajectory(path)
    for field in ("t_s", "scenario_p_m", "scenario_q_wxyz"):
        assert np.array_equal(getattr(back, field), getattr(source, field)), field
    assert np.signbit(back.scenario_p_m[0, 1])
    lines = path.read_text().splitlines()
    assert lines[:4] == ["# case 7", "# seed = 3", "# intensity = light", ",".join(WRITTEN_COLUMNS)]
    assert lines[4].split(",")[0] == repr(float(source.t_s[0]))


def test_write_to_a_missing_folder_is_one_clear_error(tmp_path):
    target = tmp_path / "no_such_folder" / "out.csv"
    with pytest.raises(ReachgateError, match=r"out\.csv: cannot write"):
        write_trajectory(target, random_trajectory(15, n=5))


# --- bad files: one message naming file, line, column and fault ----------------------------


def test_missing_file(tmp_path):
    message = load_error(tmp_path / "approach.csv")
    assert "approach.csv" in message and "not found" in message


def test_folder_instead_of_file(tmp_path):
    assert "is a folder" in load_error(tmp_path)


def test_empty_file(tmp_path):
    path = tmp_path / "approach.csv"
    path.write_bytes(b"")
    message = load_error(path)
    assert "approach.csv" in message and "empty" in message


def test_only_comments(tmp_path):
    message = load_error(csv(tmp_path, ["# nothing", "", "# here"]))
    assert "approach.csv" in message and "no header" in message


def test_only_a_header(tmp_path):
    message = load_error(csv(tmp_path, ["# c", HEADER]))
    assert "approach.csv line 2" in message and "no data rows" in message


def test_single_sample(tmp_path):
    message = load_error(csv(tmp_path, [HEADER, *rows(1)]))
    assert "approach.csv line 2" in message and "at least 2" in message


def test_binary_garbage(tmp_path):
    path = tmp_path / "approach.csv"
    path.write_bytes(bytes(range(256)) * 4)
    message = load_error(path)
    assert "approach.csv line 1" in message and "binary" in message


def test_binary_after_a_good_start(tmp_path):
    path = tmp_path / "approach.csv"
    path.write_bytes(("\n".join([HEADER, *rows(3)]) + "\n").encode() + b"\x00\x01\x02\n")
    message = load_error(path)
    assert "approach.csv line 5" in message and "binary" in message


def test_not_utf8_text(tmp_path):
    path = tmp_path / "approach.csv"
    text = "\n".join([HEADER, *rows(2), "# caf\xe9 written as latin-1", *rows(2, 2)]) + "\n"
    path.write_bytes(text.encode("latin-1"))
    message = load_error(path)
    assert "approach.csv line 4" in message and "not UTF-8" in message and "0xe9" in message


def test_not_utf8_in_the_header(tmp_path):
    path = tmp_path / "approach.csv"
    path.write_bytes(b"\xff\xfet\x00_\x00s\x00\n")
    message = load_error(path)
    assert "approach.csv line 1" in message and ("not UTF-8" in message or "binary" in message)


@pytest.mark.parametrize(
    ("header", "column", "fault"),
    [
        ("x_m,y_m,z_m,qw,qx,qy,qz", None, "missing column t_s"),
        ("t_s,x_m,z_m,qw,qx,qy,qz", None, "missing column y_m or y_mm"),
        ("t_s,x_m,y_m,z_m,qw,qx,qy", None, "missing column qz"),
        ("t_s,x_m,y_m,z_m", None, "no orientation columns"),
        ("t_s,x_m,y_m,z_m,roll_deg,pitch_deg", None, "missing column yaw_deg or yaw_rad"),
        ("t_ms,x_m,y_m,z_m,qw,qx,qy,qz", "t_ms", "unit 'ms' is unknown; allowed: t_s"),
        ("t_s,x_in,y_in,z_in,qw,qx,qy,qz", "x_in", "unit 'in' is unknown; allowed: x_m, x_mm"),
        ("t_s,x_m,y_in,z_m,qw,qx,qy,qz", "y_in", "unit 'in' is unknown; allowed: y_m, y_mm"),
        (
            "t_s,x_m,y_m,z_m,roll_deg,pitch_deg,yaw_grad",
            "yaw_grad",
            "unit 'grad' is unknown; allowed: yaw_deg, yaw_rad",
        ),
        ("t_s,x,y_m,z_m,qw,qx,qy,qz", "x", "no unit"),
        ("t_s,x_m,y_m,z_m,qw,qx,qx,qz", "qx", "appears twice in the header (columns 6 and 7)"),
        ("t_s,x_m,y_m,z_m,,qw,qx,qy,qz", None, "column 5 of the header has no name"),
        ("t_s,x_m,x_mm,y_m,z_m,qw,qx,qy,qz", "x_mm", "x_m and x_mm both give x"),
        ("t_s,x_m,y_mm,z_m,qw,qx,qy,qz", "y_mm", "position columns mix units"),
        (
            "t_s,x_m,y_m,z_m,roll_deg,pitch_rad,yaw_deg",
            "pitch_rad",
            "orientation columns mix units",
        ),
        (
            "t_s,x_m,y_m,z_m,qw,qx,qy,qz,roll_deg,pitch_deg,yaw_deg",
            "roll_deg",
            "both orientation forms",
        ),
    ],
)
def test_bad_header_names_file_line_column_and_fault(tmp_path, header, column, fault):
    path = csv(tmp_path, ["# two comment lines", "# before the header", header])
    message = load_error(path)
    assert message.startswith(f"{path} line 3")  # the path as given, ending in the file name
    if column is not None:
        assert f"column {column}:" in message
    assert fault in message, message


@pytest.mark.parametrize(
    ("bad_row", "where", "fault"),
    [
        ("0.03,0.1,0.2,0.3,1,abc,0,0", "column qx", "'abc' is not a number"),
        ("0.03,0.1,0.2,0.3,1,1_0,0,0", "column qx", "'1_0' is not a number"),
        ("0.03,0.1,,0.3,1,0,0,0", "column y_m", "empty value"),
        ("0.03,nan,0.2,0.3,1,0,0,0", "column x_m", "'nan' is not a finite number"),
        ("0.03,0.1,0.2,-inf,1,0,0,0", "column z_m", "'-inf' is not a finite number"),
        ("0.03,0.1,0.2,0.3,1,0,0,1e999", "column qz", "'1e999' is not a finite number"),
        ("0.03,0.1,0.2,0.3,1,0,0", "", "short row: 7 fields, the header has 8 (qz missing)"),
        ("0.03,0.1,0.2,0.3,1,0,0,0,9", "", "long row: 9 fields, the header has 8"),
        ("0.015,0.1,0.2,0.3,1,0,0,0", "column t_s", "time 0.015 s is before"),
        ("0.02,0.1,0.2,0.3,1,0,0,0", "column t_s", "time 0.02 s repeats"),
        ("0.03,0.1,0.2,0.3,0.9,0,0,0", "columns qw,qx,qy,qz", "quaternion length 0.9 is more"),
    ],
)
def test_bad_data_row_names_file_line_column_and_fault(tmp_path, bad_row, where, fault):
    # Lines: 1 comment, 2 header, 3-5 good rows (t = 0, 0.01, 0.02), 6 the bad row, 7-8 good.
    lines = ["# approach", HEADER, *rows(3), bad_row, *rows(2, start_line=10)]
    path = csv(tmp_path, lines)
    message = load_error(path)
    location = f"{path} line 6" + (f", {where}:" if where else ":")
    assert message.startswith(location), message
    assert fault in message, message


def test_fault_deep_in_a_long_file_is_found_at_its_line(tmp_path):
    good = rows(5000)
    good[3999] = good[3999].replace(",0.2,", ",0.2x,")  # line 4001 after the header line
    path = csv(tmp_path, [HEADER, *good])
    assert load_error(path) == f"{path} line 4001, column y_m: '0.2x' is not a number"


def test_quaternion_just_beyond_the_tolerance_is_refused(tmp_path):
    qw = 1.0 + 2.0 * UNIT_QUATERNION_TOL
    message = load_error(csv(tmp_path, [HEADER, ROW.format(t=0), f"1,0,0,0,{qw!r},0,0,0"]))
    assert "approach.csv line 3, columns qw,qx,qy,qz: quaternion length" in message


def test_first_fault_in_file_order_is_reported(tmp_path):
    lines = [HEADER, *rows(3), "0.005,0.1,0.2,0.3,1,0,0,0", "0.05,0.1,0.2,0.3,1,0,0"]
    assert "line 5, column t_s" in load_error(csv(tmp_path, lines))


# The plausible bounds of a robot cell (model/samples.py); rows 3-5 good, the bad row at line 6.
@pytest.mark.parametrize(
    ("header", "bad_row", "where", "fault"),
    [
        (HEADER, "0.03,1e300,0.2,0.3,1,0,0,0", "column x_m",
         "1e+300 m is beyond the plausible ±1000 m for a robot cell"),
        (HEADER, "0.03,0.1,-1000.5,0.3,1,0,0,0", "column y_m", "-1000.5 m is beyond"),
        ("t_s,x_mm,y_mm,z_mm,qw,qx,qy,qz", "0.03,100,2e9,300,1,0,0,0", "column y_mm",
         "2000000000 mm is beyond the plausible ±1e+06 mm (1000 m)"),
        (HEADER, "1e12,0.1,0.2,0.3,1,0,0,0", "column t_s",
         "1e+12 s is beyond the plausible ±1e+06 s"),
        (HEADER, "0.020000000000001,0.1,0.2,0.3,1,0,0,0", "column t_s",
         "time step 9.99e-16 s (from 0.02 s to 0.020000000000001 s) is below the plausible 1e-06"),
        (HEADER, "0.03,0.1,0.2,0.3,1e300,1e300,0,0", "columns qw,qx,qy,qz",
         "quaternion length inf is more than 1e-06 from 1"),
        ("t_s,x_m,y_m,z_m,roll_deg,pitch_deg,yaw_deg", "0.03,0.1,0.2,0.3,0,0,4e5", "column yaw_deg",
         "400000 deg is beyond the plausible ±360000 deg (6283.19 rad)"),
    ],
)  # fmt: skip
def test_values_beyond_the_plausible_bounds_are_refused_with_the_bound_and_why(
    tmp_path, header, bad_row, where, fault
):
    orientation = "0,0,0" if "roll" in header else "1,0,0,0"
    good = [f"{t},0.1,0.2,0.3,{orientation}" for t in (0.0, 0.01, 0.02, 0.1, 0.11)]
    path = csv(tmp_path, ["# approach", header, *good[:3], bad_row, *good[3:]])
    message = load_error(path)
    assert message.startswith(f"{path} line 6, {where}: "), message
    assert fault in message, message


def test_values_at_the_plausible_bounds_are_taken(tmp_path):
    """The bounds themselves are inside, in every unit: ±1000 m (±1e6 mm), ±1e6 s, a 1 µs
    step, ±360000 deg."""
    lines = [
        HEADER,
        "-1e6,1000,-1000,0,1,0,0,0",
        "-999999.999999,0,0,0,1,0,0,0",
        "1e6,0,0,0,1,0,0,0",
    ]
    trajectory = load_trajectory(csv(tmp_path, lines))
    assert trajectory.scenario_p_m[0].tolist() == [1000.0, -1000.0, 0.0]
    assert trajectory.t_s.tolist() == [-1e6, -999999.999999, 1e6]
    header = "t_s,x_mm,y_mm,z_mm,roll_deg,pitch_deg,yaw_deg"
    lines = [header, "0,1e6,0,-1e6,0,-360000,360000", "1,0,0,0,0,0,0"]
    trajectory = load_trajectory(csv(tmp_path, lines, name="units.csv"))
    assert trajectory.scenario_p_m[0].tolist() == [1000.0, 0.0, -1000.0]


# --- from_arrays --------------------------------------------------------------------------


def test_from_arrays_refuses_bad_samples_naming_sample_and_quantity():
    t = np.array([0.0, 0.1, 0.1])
    p = np.zeros((3, 3))
    q = np.tile([1.0, 0, 0, 0], (3, 1))
    with pytest.raises(ReachgateError, match=r"case: sample 2, t_s: time 0\.1 s repeats"):
        Trajectory.from_arrays(t, p, q, name="case")
    p[1, 2] = np.nan
    with pytest.raises(ReachgateError, match=r"sample 1, z: nan is not a finite number"):
        Trajectory.from_arrays([0.0, 1.0, 2.0], p, q)
    with pytest.raises(ReachgateError, match=r"quaternions must have shape \(3, 4\)"):
        Trajectory.from_arrays([0.0, 1.0, 2.0], np.zeros((3, 3)), np.zeros((3, 3)))
    with pytest.raises(ReachgateError, match="once"):
        Trajectory.from_arrays([0.0, 1.0], np.zeros((2, 3)))
    with pytest.raises(ReachgateError, match=r"sample 1, y: 2000 m is beyond the plausible"):
        Trajectory.from_arrays([0.0, 1.0], [[0, 0, 0], [0, 2e3, 0]], rpy_rad=np.zeros((2, 3)))
    with pytest.raises(ReachgateError, match=r"sample 0, yaw: 100000 rad is beyond"):
        Trajectory.from_arrays([0.0, 1.0], np.zeros((2, 3)), rpy_rad=[[0, 0, 1e5], [0, 0, 0]])


def test_from_arrays_with_rpy_matches_scipy():
    rpy = np.array([[0.1, 0.2, 0.3], [-2.0, 1.0, 3.0]])
    trajectory = Trajectory.from_arrays([0.0, 1.0], np.zeros((2, 3)), rpy_rad=rpy)
    same_rotation(
        trajectory.scenario_q_wxyz,
        Rotation.from_euler("ZYX", rpy[:, ::-1]).as_quat(scalar_first=True),
    )


def test_large_files_take_the_arrow_reader_with_the_same_values(tmp_path, monkeypatch, reader):
    source = random_trajectory(31, n=2000)
    path = tmp_path / "large.csv"
    write_trajectory(path, source)
    expected = load_trajectory(path)
    if reader == "arrow":  # with np.loadtxt and the scan out of the way, arrow alone reads it
        monkeypatch.setattr(trajectory_module.np, "loadtxt", None)
        monkeypatch.setattr(trajectory_module, "_scan_values", None)
    loaded = load_trajectory(path)
    for field in ("t_s", "scenario_p_m", "scenario_q_wxyz"):
        np.testing.assert_array_equal(getattr(loaded, field), getattr(expected, field))
        np.testing.assert_array_equal(getattr(loaded, field), getattr(source, field))
