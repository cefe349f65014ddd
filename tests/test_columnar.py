"""Parquet and Arrow IPC (Feather) trajectories: the CSV's columns, values and rules."""

from __future__ import annotations

import json

import numpy as np
import pyarrow as pa
import pyarrow.feather as feather
import pyarrow.parquet as pq
import pytest
from typer.testing import CliRunner

from reachgate.cli import app
from reachgate.errors import ReachgateError
from reachgate.model.trajectory import Trajectory, load_trajectory, write_trajectory

from conftest import DEMO_CASES, DEMO_ROBOT

runner = CliRunner()


def jittered_path(n: int = 300, seed: int = 1407) -> Trajectory:
    rng = np.random.default_rng(seed)
    t = np.cumsum(rng.uniform(0.8, 1.2, n)) * 0.004
    p = np.column_stack([2.0 + 0.1 * np.sin(t), 0.3 * t, 1.4 - 0.05 * t])
    rpy = np.column_stack([0.02 * np.sin(3 * t), 0.1 * t, 0.2 * np.cos(t)])
    return Trajectory.from_arrays(t, p, rpy_rad=rpy)


def as_table(path: Trajectory) -> pa.Table:
    q = path.scenario_q_wxyz
    p = path.scenario_p_m
    return pa.table(
        {
            "t_s": path.t_s, "x_m": p[:, 0], "y_m": p[:, 1], "z_m": p[:, 2],
            "qw": q[:, 0], "qx": q[:, 1], "qy": q[:, 2], "qz": q[:, 3],
            "note": ["a"] * path.n_samples,
        }
    )  # fmt: skip


def write(table: pa.Table, path):
    if path.suffix == ".parquet":
        pq.write_table(table, path)
    else:
        feather.write_feather(table, path)
    return path


@pytest.mark.parametrize("suffix", [".parquet", ".feather", ".arrow"])
def test_a_columnar_file_loads_the_same_arrays_as_the_csv(tmp_path, suffix):
    source = jittered_path()
    csv_path = tmp_path / "case.csv"
    write_trajectory(csv_path, source)
    columnar = load_trajectory(write(as_table(source), tmp_path / f"case{suffix}"))
    from_csv = load_trajectory(csv_path)
    for name in ("t_s", "scenario_p_m", "scenario_q_wxyz"):
        assert np.array_equal(getattr(columnar, name), getattr(from_csv, name))
    assert columnar.ignored_columns == ("note",)
    assert columnar.name == f"case{suffix}"


def test_units_and_orientation_forms_map_as_in_csv(tmp_path):
    source = jittered_path(50, seed=1408)
    rpy_deg = np.degrees(np.column_stack([0.02 * np.sin(3 * source.t_s), 0.1 * source.t_s,
                                          0.2 * np.cos(source.t_s)]))  # fmt: skip
    table = pa.table(
        {"yaw_deg": rpy_deg[:, 2], "t_s": source.t_s, "x_mm": source.scenario_p_m[:, 0] * 1000,
         "y_mm": source.scenario_p_m[:, 1] * 1000, "z_mm": source.scenario_p_m[:, 2] * 1000,
         "roll_deg": rpy_deg[:, 0], "pitch_deg": rpy_deg[:, 1]}
    )  # fmt: skip
    loaded = load_trajectory(write(table, tmp_path / "mm.parquet"))
    assert np.allclose(loaded.scenario_p_m, source.scenario_p_m, atol=1e-12)
    dots = np.abs(np.einsum("ij,ij->i", loaded.scenario_q_wxyz, source.scenario_q_wxyz))
    assert np.allclose(dots, 1.0, atol=1e-12)


def faulty(tmp_path, column: str, values, name="bad.parquet"):
    table = as_table(jittered_path(20, seed=1409))
    index = table.column_names.index(column)
    return write(table.set_column(index, column, pa.array(values)), tmp_path / name)


@pytest.mark.parametrize(
    ("column", "values", "message"),
    [
        ("x_m", [1.0] * 6 + [None] + [1.0] * 13, "row 7, column x_m: empty value"),
        ("y_m", [0.0] * 4 + [float("nan")] + [0.0] * 15, "row 5, column y_m: nan is not a finite"),
        ("t_s", [0.0] * 20, "row 2, column t_s: time 0.0 s repeats"),
        ("qw", [0.0] * 20, "row 1, columns qw,qx,qy,qz: quaternion length"),
        ("z_m", ["1.0"] * 20, "column z_m: holds string, not numbers"),
    ],
)
def test_faults_are_named_by_row_and_column(tmp_path, column, values, message):
    path = faulty(tmp_path, column, values)
    with pytest.raises(ReachgateError, match=message.replace("(", r"\(")):
        load_trajectory(path)


def test_a_missing_column_and_a_file_of_another_kind_are_refused(tmp_path):
    table = as_table(jittered_path(20, seed=1410)).drop_columns(["qz"])
    with pytest.raises(ReachgateError, match="missing column qz"):
        load_trajectory(write(table, tmp_path / "three.feather"))
    fake = tmp_path / "fake.parquet"
    fake.write_text("t_s,x_m\n0,1\n")
    with pytest.raises(ReachgateError, match=r"fake\.parquet: not a readable Parquet file"):
        load_trajectory(fake)


def test_check_and_scan_read_parquet_as_they_read_csv(tmp_path):
    calm = load_trajectory(DEMO_CASES / "approach_calm.csv")
    parquet = write(as_table(calm).drop_columns(["note"]), tmp_path / "calm.parquet")
    args = ["--rail", "follow", "--format", "json"]
    from_parquet = runner.invoke(app, ["check", str(DEMO_ROBOT), str(parquet), *args])
    from_csv = runner.invoke(app, ["check", str(DEMO_ROBOT), str(DEMO_CASES / "approach_calm.csv"),
                                   *args])  # fmt: skip
    assert from_parquet.exit_code == from_csv.exit_code == 0
    a, b = json.loads(from_parquet.stdout), json.loads(from_csv.stdout)
    assert a["violations"] == b["violations"] and a["margins"] == b["margins"]
    bad = faulty(tmp_path, "x_m", [1.0] * 6 + [None] + [1.0] * 13)
    refused = runner.invoke(app, ["check", str(DEMO_ROBOT), str(bad)])
    assert refused.exit_code == 2 and "row 7, column x_m" in refused.stderr
    store = tmp_path / "s.sqlite"
    scan = runner.invoke(app, ["scan", str(DEMO_ROBOT), str(tmp_path), "--store", str(store),
                               "--workers", "1", "--quiet", "--rail", "follow",
                               "--format", "json"])  # fmt: skip
    cases = {c["case"]: c["verdict"] for c in json.loads(scan.stdout)["results"]}
    assert cases == {"bad.parquet": "error", "calm.parquet": "pass"}
