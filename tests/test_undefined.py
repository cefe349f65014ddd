"""Nothing undefined reads as a pass: a NaN or infinity at any stage of the check stops it
loudly, and the rail filter stays finite for a step of any length."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from typer.testing import CliRunner

import reachgate
import reachgate.checking.pipeline as pipeline
from reachgate.checking.rail import RailPolicy, first_order_lowpass
from reachgate.cli import app
from reachgate.errors import UndefinedValueError

from conftest import DEMO_CASES, DEMO_ROBOT


@pytest.fixture(scope="module")
def robot():
    return reachgate.load_robot(DEMO_ROBOT)


def calm_path(seed: int, duration_s: float = 4.0, rate_hz: float = 250.0):
    """A short slow sway near the demo arm's home (it passes every check)."""
    rng = np.random.default_rng(seed)
    n = int(duration_s * rate_hz)
    t = np.cumsum(np.r_[0.0, rng.uniform(0.9, 1.1, n) / rate_hz])
    s = np.sin(np.pi * t / t[-1]) ** 2  # at rest at both ends
    p = np.column_stack([2.9 + 0.05 * s, 0.02 * s, np.full(t.size, 1.7)])
    rpy = np.zeros((t.size, 3))
    return reachgate.Trajectory.from_arrays(t, p, rpy_rad=rpy, name="calm")


def test_first_order_lowpass_is_finite_and_exact_across_a_step_of_thousands_of_time_constants():
    """Reference: the filter's own recurrence y_k = a_k y_(k-1) + c_k stepped one sample at a
    time (stable for any step, a_k in [0, 1]); analytic check: after 5000 time constants the
    output has settled on the input (first-order step response e^(-t/τ))."""
    tau = 0.2
    rng = np.random.default_rng(91)
    t = np.cumsum(np.r_[0.0, rng.uniform(0.9, 1.1, 400) * 4e-3])
    t[250:] += 1000.0  # one step of 5000 τ
    u = np.sin(2 * np.pi * 0.7 * t) + 0.1 * t
    y = first_order_lowpass(t, u, tau)
    reference = np.empty_like(u)
    reference[0] = u[0]
    for k in range(1, t.size):
        dt = t[k] - t[k - 1]
        a = math.exp(-dt / tau)
        c = u[k] - a * u[k - 1] - (u[k] - u[k - 1]) * (1 - a) * tau / dt
        reference[k] = a * reference[k - 1] + c
    assert np.isfinite(y).all()
    np.testing.assert_allclose(y, reference, rtol=0, atol=1e-10)
    # ramp input over the long step: a first-order lag trails a ramp of slope r by r·τ
    slope = (u[250] - u[249]) / (t[250] - t[249])
    assert y[250] == pytest.approx(u[250] - slope * tau, abs=1e-9)


def test_a_long_pause_with_the_rail_following_is_judged_not_passed(robot):
    """The reported case: approach_wide.csv with a 1000 s pause after sample 1250 used to give
    NaN rail positions and a PASS. The case leaves the arm's reach (DESIGN's demo table), so
    it must fail, with finite rail positions."""
    path = reachgate.load_trajectory(DEMO_CASES / "approach_wide.csv")
    t = path.t_s.copy()
    t[1250:] += 1000.0
    paused = dataclasses.replace(path, t_s=t)
    report = reachgate.check(robot, paused, reachgate.CheckSettings(rail=RailPolicy.FOLLOW))
    assert np.isfinite(report.solution.q[:, 0]).all()
    assert not report.passed
    assert any(v.check is reachgate.Check.REACH for v in report.violations)


def _with_nan_at(array: np.ndarray, index) -> np.ndarray:
    spoilt = np.array(array, dtype=float, copy=True)
    spoilt[index] = np.nan
    return spoilt


def _spoil_solution(field: str, monkeypatch):
    real = pipeline.solve_trajectory

    def solve(*args, **kwargs):
        solution = real(*args, **kwargs)
        if solution.q.shape[0] <= 300:  # the short held tail after the end (rest ends)
            return solution
        if field.startswith("measures."):
            kind = field.split(".", 1)[1]
            measures = dict(solution.measures)
            measures[kind] = _with_nan_at(measures[kind], 300)
            return dataclasses.replace(solution, measures=measures)
        index = (300, 3) if field == "q" else 300
        return dataclasses.replace(
            solution, **{field: _with_nan_at(getattr(solution, field), index)}
        )

    monkeypatch.setattr(pipeline, "solve_trajectory", solve)


def _spoil_rail(monkeypatch):
    real = pipeline.rail_positions
    monkeypatch.setattr(
        pipeline, "rail_positions", lambda *a, **k: _with_nan_at(real(*a, **k), 300)
    )


def _spoil_derivatives(order: str, monkeypatch):
    real = pipeline.time_derivatives

    def derivatives(t, x, **kwargs):
        d = real(t, x, **kwargs)
        values = np.array(getattr(d, order), copy=True)
        values[min(300, values.shape[0] - 1), 2] = np.inf
        return dataclasses.replace(d, **{order: values})

    monkeypatch.setattr(pipeline, "time_derivatives", derivatives)


def _spoil_lag(monkeypatch):
    real = pipeline.lag_errors

    def errors(*args, **kwargs):
        found = real(*args, **kwargs)
        return dataclasses.replace(found, position_m=_with_nan_at(found.position_m, 300))

    monkeypatch.setattr(pipeline, "lag_errors", errors)


@pytest.mark.parametrize(
    "stage",
    [
        "rail",
        "q",
        "reach_excess_m",
        "measures.wrist",
        "velocity",
        "acceleration",
        "jerk",
        "lag",
    ],
)
def test_a_nan_or_infinity_at_any_stage_fails_loudly(robot, stage, monkeypatch):
    """Each stage in turn gets one NaN (or +inf) at a sample that is otherwise fine; the check
    must raise UndefinedValueError naming the case, never return a report (let alone a pass).
    Without the injection the same case passes, so the error comes from the injected value."""
    path = calm_path(92)
    settings = reachgate.CheckSettings(rail=RailPolicy.FOLLOW, lag_s=0.001, lag_tol_m=0.05)
    assert reachgate.check(robot, path, settings).passed
    if stage == "rail":
        _spoil_rail(monkeypatch)
    elif stage in ("velocity", "acceleration", "jerk"):
        _spoil_derivatives(stage, monkeypatch)
    elif stage == "lag":
        _spoil_lag(monkeypatch)
    else:
        _spoil_solution(stage, monkeypatch)
    with pytest.raises(UndefinedValueError, match=r"calm: .*undefined"):
        reachgate.check(robot, path, settings)


def test_the_cli_turns_an_undefined_value_into_exit_2_with_one_line(monkeypatch):
    _spoil_rail(monkeypatch)
    result = CliRunner().invoke(
        app, ["check", str(DEMO_ROBOT), str(DEMO_CASES / "approach_calm.csv"), "--rail", "follow"]
    )
    assert result.exit_code == 2
    assert "undefined" in result.stderr and "Traceback" not in result.stderr
    assert len(result.stderr.strip().splitlines()) == 1
