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
from reachgate.model.trajectory import (
    Scenario,
    Trajectory,
    load_scenario,
    load_trajectory,
    write_scenario,
    write_trajectory,
)

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


# -- scenarios of several bodies ---------------------------------------------------------------


def landing_scenario(n: int = 200, seed: int = 1411) -> Scenario:
    """Two bodies at common uneven times: a drone descending onto a pad that drifts."""
    drone = jittered_path(n, seed)
    t = drone.t_s
    rpy = np.column_stack([np.zeros(n), 0.05 * np.sin(t), 0.3 * t])
    pad = Trajectory.from_arrays(t, np.column_stack([0.2 * t, 1.0 + 0 * t, 0.5 + 0 * t]),
                                 rpy_rad=rpy)  # fmt: skip
    return Scenario.from_trajectories({"drone": drone, "pad": pad})


def scenario_table(scenario: Scenario) -> pa.Table:
    """The columns write_scenario writes, with a text column kept out."""
    columns = {"t_s": scenario.t_s}
    for body, path in scenario.bodies.items():
        values = np.column_stack([path.scenario_p_m, path.scenario_q_wxyz])
        for k, stem in enumerate(("x_m", "y_m", "z_m", "qw", "qx", "qy", "qz")):
            columns[f"{body}.{stem}"] = values[:, k]
    columns["operator"] = ["a"] * scenario.n_samples
    return pa.table(columns)


@pytest.mark.parametrize("suffix", [".parquet", ".feather"])
def test_a_several_body_scenario_reads_the_same_arrays_as_its_csv(tmp_path, suffix):
    source = landing_scenario()
    csv_path = tmp_path / "landing.csv"
    write_scenario(csv_path, source)
    from_csv = load_scenario(csv_path)
    columnar = load_scenario(write(scenario_table(source), tmp_path / f"landing{suffix}"))
    assert list(columnar.bodies) == list(from_csv.bodies) == ["drone", "pad"]
    assert np.array_equal(columnar.t_s, from_csv.t_s)
    for body in ("drone", "pad"):
        for name in ("t_s", "scenario_p_m", "scenario_q_wxyz"):
            a, b = getattr(columnar.bodies[body], name), getattr(from_csv.bodies[body], name)
            assert np.array_equal(a, b), (body, name)
        assert columnar.bodies[body].name == f"landing{suffix} ({body})"
    assert columnar.ignored_columns == ("operator",)
    plain = load_scenario(write(as_table(jittered_path()), tmp_path / f"plain{suffix}"))
    assert plain.is_plain and np.array_equal(plain.t_s, jittered_path().t_s)


def _with_value(table: pa.Table, column: str, row: int, value) -> pa.Table:
    values = table.column(column).to_pylist()
    values[row] = value
    return table.set_column(table.column_names.index(column), column, pa.array(values))


@pytest.mark.parametrize(
    ("column", "row", "value", "fault"),
    [
        ("pad.y_m", 4, float("nan"), "column pad.y_m: nan is not a finite number"),
        ("drone.qx", 2, 0.5, "columns drone.qw,drone.qx,drone.qy,drone.qz: quaternion length"),
        ("t_s", 5, None, "column t_s: time"),  # the time of the row before: repeats
        ("drone.z_m", 3, 1e300, "column drone.z_m: 1e+300 m is beyond the plausible ±1000 m"),
    ],
)
def test_several_body_faults_are_the_csv_faults_named_by_row(tmp_path, column, row, value, fault):
    """The same bad value in the CSV and in the Parquet file: the same message, the CSV's line
    (1 header line, so row k is line k + 1) given as the row (the CSV quotes a field's text)."""
    table = scenario_table(landing_scenario(12, seed=1412))
    if value is None:
        value = table.column("t_s")[row - 1].as_py()
    table = _with_value(table, column, row, value)
    parquet = write(table, tmp_path / "bad.parquet")
    csv_path = tmp_path / "bad.csv"
    scenario = {k: table.column(k).to_numpy() for k in table.column_names if k != "operator"}
    text = ",".join(scenario) + "\n"
    rows = np.column_stack(list(scenario.values())).tolist()
    text += "".join(",".join(repr(v) for v in r) + "\n" for r in rows)
    csv_path.write_text(text)
    with pytest.raises(ReachgateError) as from_csv:
        load_scenario(csv_path)
    with pytest.raises(ReachgateError) as from_parquet:
        load_scenario(parquet)
    assert f"bad.parquet row {row + 1}, {fault}" in str(from_parquet.value)
    assert str(from_parquet.value).replace("bad.parquet row", "bad.csv line") == (
        str(from_csv.value).replace(f"line {row + 2}", f"line {row + 1}").replace("'", "")
    )


def test_several_body_header_faults_read_as_in_csv(tmp_path):
    table = scenario_table(landing_scenario(5, seed=1413)).drop_columns(["pad.qz"])
    with pytest.raises(ReachgateError, match=r"missing\.feather: body pad: missing column qz"):
        load_scenario(write(table, tmp_path / "missing.feather"))
    table = scenario_table(landing_scenario(5, seed=1414))
    table = table.append_column("x_m", table.column("t_s"))
    with pytest.raises(ReachgateError, match=r"plain\.parquet, column x_m: a pose column without"):
        load_scenario(write(table, tmp_path / "plain.parquet"))


def test_check_of_a_rig_reads_a_parquet_scenario_as_its_csv(tmp_path):
    """check RIG SCENARIO on the demo rig's calm landing (every 8th sample, for speed), once
    from CSV and once from Parquet: the same exit code, verdict, rows and margins."""
    calm = load_scenario(DEMO_CASES / "rig" / "landing_calm.csv")
    short = Scenario.from_trajectories(
        {body: Trajectory.from_arrays(path.t_s[::8], path.scenario_p_m[::8],
                                      path.scenario_q_wxyz[::8])
         for body, path in calm.bodies.items()}
    )  # fmt: skip
    write_scenario(tmp_path / "calm.csv", short)
    parquet = write(scenario_table(short), tmp_path / "calm.parquet")
    rig = DEMO_ROBOT.parent.parent / "rigs" / "demo_landing_rig.toml"
    reports = []
    for path in (tmp_path / "calm.csv", parquet):
        result = runner.invoke(app, ["check", str(rig), str(path), "--format", "json"])
        assert result.exit_code in (0, 1), result.output
        reports.append((result.exit_code, json.loads(result.stdout)))
    (code_csv, from_csv), (code_parquet, from_parquet) = reports
    assert code_csv == code_parquet
    for key in ("verdict", "violations", "margins"):
        assert from_parquet[key] == from_csv[key], key
