"""`reachgate delay`: the rig's pure delay and tracking bandwidth from a run log (DESIGN §11).

Outside reference: the logs are made with scipy.signal. A command (white noise through a
second-order shaping filter) and the rig's response (a first-order lag of the command) are
one continuous linear system, discretised exactly for its zero-order-held noise input
(scipy.signal.cont2discrete, method 'zoh') and run with scipy.signal.dlsim; the pure delay is
exact too, the measured samples carrying the time stamps t + τ. Small white noise is added to
the measured side. The estimate must find τ within 2 ms and the bandwidth 1/(2πT) within 15 %.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import signal
from typer.testing import CliRunner

from reachgate.cli import app
from reachgate.errors import ReachgateError
from reachgate.motion.delay import Channels, estimate_delay, estimate_delay_from_files

STEP_S = 1e-3
#: The shaping filter's natural frequency: the command moves well past every bandwidth tried.
SHAPE_HZ = 40.0
#: Measurement noise, relative to the command's standard deviation.
NOISE = 1e-3


def lagged_logs(delay_s, bandwidth_hz, seed, duration_s=20.0, channels=1):
    """(t (N,), command (N, c), measured times (N,), measured (N, c)) made with scipy.signal."""
    lag_s = 1.0 / (2.0 * math.pi * bandwidth_hz)
    ws, zeta = 2.0 * math.pi * SHAPE_HZ, 0.7
    a = np.array([[0.0, 1.0, 0.0], [-(ws**2), -2 * zeta * ws, 0.0], [1 / lag_s, 0.0, -1 / lag_s]])
    b = np.array([[0.0], [ws**2], [0.0]])
    c = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, 1.0]])
    ad, bd, cd, dd, _ = signal.cont2discrete((a, b, c, np.zeros((2, 1))), STEP_S, method="zoh")
    rng = np.random.default_rng(seed)
    n = round(duration_s / STEP_S)
    t = np.arange(n) * STEP_S
    command, measured = np.empty((n, channels)), np.empty((n, channels))
    for k in range(channels):
        _, out, _ = signal.dlsim((ad, bd, cd, dd, STEP_S), rng.standard_normal((n, 1)))
        command[:, k] = out[:, 0]
        measured[:, k] = out[:, 1] + NOISE * out[:, 0].std() * rng.standard_normal(n)
    return t, command, t + delay_s, measured


def _channels(t, values, label):
    names = tuple(f"j{k + 1}" for k in range(values.shape[1]))
    return Channels(t_s=t, values=values, names=names, kind="axes", label=label)


@pytest.mark.parametrize(
    ("delay_s", "bandwidth_hz", "seed"),
    [(0.010, 5.0, 1301), (0.025, 12.0, 1302), (0.040, 20.0, 1303), (0.060, 8.0, 1304),
     (0.0137, 15.0, 1305)],
)  # fmt: skip
def test_delay_and_bandwidth_of_a_delayed_first_order_lag(delay_s, bandwidth_hz, seed):
    """τ within 2 ms, bandwidth within 15 % (13.7 ms: a delay off the sampling grid)."""
    t, u, t_meas, y = lagged_logs(delay_s, bandwidth_hz, seed)
    estimate = estimate_delay(_channels(t, u, "c"), _channels(t_meas, y, "m"))
    assert estimate.delay_s == pytest.approx(delay_s, abs=0.002)
    assert estimate.bandwidth_hz == pytest.approx(bandwidth_hz, rel=0.15)
    assert estimate.effective_delay_s == pytest.approx(
        estimate.delay_s + 1.0 / (2 * math.pi * estimate.bandwidth_hz)
    )
    assert estimate.fit_residual < 0.1


def test_uneven_measured_steps_are_resampled_and_still_give_the_delay():
    """A third of the measured samples dropped at random (steps of 1, 2, 3 ... ms): the logs are
    resampled onto one even grid by linear interpolation before the spectra."""
    t, u, t_meas, y = lagged_logs(0.030, 10.0, seed=1306)
    keep = np.random.default_rng(1307).random(t.size) > 0.33
    keep[[0, -1]] = True
    estimate = estimate_delay(_channels(t, u, "c"), _channels(t_meas[keep], y[keep], "m"))
    assert np.ptp(np.diff(t_meas[keep])) >= 2 * STEP_S  # the steps are really uneven
    assert estimate.delay_s == pytest.approx(0.030, abs=0.002)
    assert estimate.bandwidth_hz == pytest.approx(10.0, rel=0.15)


def test_a_log_unrelated_to_the_command_is_refused():
    """No coherent band, no estimate: an unrelated measured log must not read as a result."""
    t, u, t_meas, _ = lagged_logs(0.02, 10.0, seed=1308)
    _, other, _, _ = lagged_logs(0.02, 10.0, seed=1309)
    with pytest.raises(ReachgateError, match="coherence"):
        estimate_delay(_channels(t, u, "c"), _channels(t_meas, other, "m"))


def _write_pose_log(path, t, xyz_m, roll_deg):
    zeros = np.zeros_like(t)
    table = np.column_stack([t, xyz_m * 1000.0, roll_deg, zeros, zeros])
    header = "t_s,x_mm,y_mm,z_mm,roll_deg,pitch_deg,yaw_deg"
    np.savetxt(path, table, delimiter=",", header=header, comments="", fmt="%.10g")


def test_cli_on_pose_logs_prints_the_lag_to_use_and_writes_json_and_a_picture(tmp_path):
    """Pose logs (§4 columns, mm and deg): x, y and roll follow with 35 ms and 12 Hz; z does
    not move and is left out, and says so."""
    t, u, t_meas, y = lagged_logs(0.035, 12.0, seed=1310, channels=3)
    scale = np.array([0.01, 0.02])  # m
    commanded, measured = tmp_path / "commanded.csv", tmp_path / "measured.csv"
    _write_pose_log(commanded, t, np.column_stack([u[:, :2] * scale, np.ones_like(t)]), u[:, 2])
    _write_pose_log(measured, t_meas, np.column_stack([y[:, :2] * scale, np.ones_like(t)]), y[:, 2])
    picture = tmp_path / "delay.png"
    runner = CliRunner()
    result = runner.invoke(app, ["delay", str(commanded), str(measured), "--format", "json"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.output)
    assert data["delay_s"] == pytest.approx(0.035, abs=0.002)
    assert data["bandwidth_hz"] == pytest.approx(12.0, rel=0.15)
    assert data["lag_to_use_s"] == pytest.approx(data["delay_s"] + data["time_constant_s"])
    assert data["channels"] == ["x", "y", "rx"]
    result = runner.invoke(app, ["delay", str(commanded), str(measured), "--plot", str(picture)])
    assert result.exit_code == 0, result.output
    assert f"--lag {data['lag_to_use_s']:.4g}" in result.output
    assert "left out" in result.output and "z" in result.output
    assert picture.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize(
    ("commanded_text", "measured_text", "fragment"),
    [
        ("t_s,j1_deg\n0,1\n1,2\n",
         "t_s,x_m,y_m,z_m,qw,qx,qy,qz\n0,0,0,0,1,0,0,0\n1,0,0,0,1,0,0,0\n",
         "both as poses or both as axis values"),
        ("t_s,j1_deg,j2_deg\n0,1,1\n1,2,2\n", "t_s,j1_deg\n0,1\n1,2\n", "no column for axis j2"),
        ("t_s,j1_deg\n0,1\n1,2\n", "t_s,j1_deg\n5,1\n6,2\n", "do not overlap"),
        ("t_s,j1_deg\n0,1\n1,2\n", "t_s,j1_deg\n0,1\n0.5,x\n", "line 3, column j1_deg"),
        ("t_s,j1_deg\n0,1\n1,2\n", "t_s,j1_deg\n0,1\n1,4000\n",
         "line 3, column j1_deg: 4000 deg is beyond the plausible ±3600 deg"),
        ("t_s,rail_mm\n0,1\n1e12,2\n", "t_s,rail_mm\n0,1\n1,2\n",
         "c.csv line 3, column t_s: 1e+12 s is beyond the plausible ±1e+06 s"),
        ("t_s,j1_rad\n0,1\n1,2\n", "t_s,j1_rad\n0,1\n0,2\n3,x\n", "line 3, column t_s: time 0"),
        ("t_s,j1_deg\n0,1\n1,2\n", "t_s,j1_deg\n0,1\n1,2\n", "at least 512"),
    ],
)  # fmt: skip
def test_bad_logs_exit_2_with_one_line(tmp_path, commanded_text, measured_text, fragment):
    commanded, measured = tmp_path / "c.csv", tmp_path / "m.csv"
    commanded.write_text(commanded_text)
    measured.write_text(measured_text)
    result = CliRunner().invoke(app, ["delay", str(commanded), str(measured)])
    assert result.exit_code == 2
    assert fragment in result.output
    assert "Traceback" not in result.output
    with pytest.raises(ReachgateError):
        estimate_delay_from_files(commanded, measured)


def test_output_onto_an_input_is_refused_and_the_input_kept(tmp_path):
    t, u, t_meas, y = lagged_logs(0.02, 10.0, seed=1311, duration_s=2.0)
    commanded, measured = tmp_path / "c.csv", tmp_path / "m.csv"
    np.savetxt(commanded, np.column_stack([t, u]), delimiter=",", header="t_s,j1_rad", comments="")
    np.savetxt(
        measured, np.column_stack([t_meas, y]), delimiter=",", header="t_s,j1_rad", comments=""
    )
    before = measured.read_bytes()
    result = CliRunner().invoke(
        app, ["delay", str(commanded), str(measured), "--out", str(measured)]
    )
    assert result.exit_code == 2 and "an input of this command" in result.output
    assert measured.read_bytes() == before


def test_demo_logs_give_back_the_rig_they_were_made_with():
    """trajectories/delay/ (scripts/make_delay_demo.py: a sum of sines through an exact
    delay-and-lag response, uneven 250 Hz command, even 500 Hz measurement): the README's
    worked example must find the script's delay within 2 ms and bandwidth within 15 %."""
    import importlib.util
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    spec = importlib.util.spec_from_file_location("demo", root / "scripts" / "make_delay_demo.py")
    demo = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(demo)
    folder = root / "trajectories" / "delay"
    estimate = estimate_delay_from_files(
        folder / "shake_commanded.csv", folder / "shake_measured.csv"
    )
    assert estimate.kind == "pose" and len(estimate.channels) == 6
    assert estimate.delay_s == pytest.approx(demo.DELAY_S, abs=0.002)
    assert estimate.bandwidth_hz == pytest.approx(demo.BANDWIDTH_HZ, rel=0.15)


@pytest.mark.parametrize("suffix", [".parquet", ".feather"])
def test_columnar_logs_give_the_estimate_of_their_csv(tmp_path, suffix):
    """Axis logs (commanded and measured) and the demo pose logs, each also written as Parquet
    or Arrow IPC with the same columns: the same estimate, bit for bit; a fault is named by
    row and column."""
    from pathlib import Path

    import pyarrow as pa
    import pyarrow.feather as feather
    import pyarrow.parquet as pq

    from reachgate.model.trajectory import load_trajectory

    def columnar(csv_path, values: dict):
        path = csv_path.with_suffix(suffix)
        table = pa.table(values)
        pq.write_table(table, path) if suffix == ".parquet" else feather.write_feather(table, path)
        return path

    t, u, t_meas, y = lagged_logs(0.02, 10.0, seed=1312, duration_s=4.0)
    commanded, measured = tmp_path / "c.csv", tmp_path / "m.csv"
    for path, times, values in ((commanded, t, u), (measured, t_meas, y)):
        np.savetxt(path, np.column_stack([times, values]), delimiter=",", header="t_s,j1_rad",
                   comments="", fmt="%.17g")  # fmt: skip
        columnar(path, {"t_s": times, "j1_rad": values[:, 0]})
    from_csv = estimate_delay_from_files(commanded, measured)
    from_columnar = estimate_delay_from_files(
        commanded.with_suffix(suffix), measured.with_suffix(suffix)
    )
    assert from_columnar.delay_s == from_csv.delay_s
    assert from_columnar.bandwidth_hz == from_csv.bandwidth_hz

    folder = Path(__file__).resolve().parents[1] / "trajectories" / "delay"
    poses = []
    for name in ("shake_commanded.csv", "shake_measured.csv"):
        path = load_trajectory(folder / name)
        p, q = path.scenario_p_m, path.scenario_q_wxyz
        columns = {"t_s": path.t_s, "x_m": p[:, 0], "y_m": p[:, 1], "z_m": p[:, 2]}
        columns.update({c: q[:, k] for k, c in enumerate(("qw", "qx", "qy", "qz"))})
        poses.append(columnar(tmp_path / name, columns))
    estimate = estimate_delay_from_files(*poses)
    reference = estimate_delay_from_files(folder / "shake_commanded.csv",
                                          folder / "shake_measured.csv")  # fmt: skip
    assert estimate.kind == "pose" and estimate.delay_s == reference.delay_s

    bad = columnar(tmp_path / "bad.csv", {"t_s": [0.0, 1.0, 1.0], "j1_rad": [0.0, 0.1, 0.2]})
    with pytest.raises(ReachgateError, match=rf"bad{suffix} row 3, column t_s: time 1.0 s repeats"):
        estimate_delay_from_files(commanded, bad)
