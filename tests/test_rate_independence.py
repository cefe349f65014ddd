"""The verdict does not depend on the sampling rate: the same analytic path sampled at 250 Hz,
1 kHz, 10 kHz and 100 kHz gives the same rows and the same peaks (derivative fit windows by
duration above 1 kHz, checking/derivatives.py)."""

from __future__ import annotations

import numpy as np
import pytest

import reachgate
from reachgate.checking.derivatives import fit_stride

from conftest import DEMO_ROBOT

DURATION_S = 2.0


def analytic_path(rate_hz: float, jitter: float, seed: int) -> reachgate.Trajectory:
    """A 2 s wrist-heavy wobble on the demo arm, sin⁴ envelope (at rest, no accel or jerk at
    either end), sampled at rate_hz with ±jitter relative step jitter."""
    n = round(DURATION_S * rate_hz)
    rng = np.random.default_rng(seed)
    t = np.r_[0.0, np.cumsum(rng.uniform(1 - jitter, 1 + jitter, n))]
    t *= DURATION_S / t[-1]
    s = np.sin(np.pi * t / DURATION_S) ** 4
    w = 2 * np.pi * 1.5
    p = np.column_stack(
        [
            2.9 + 0.02 * s * np.sin(w * t),
            0.03 * s * np.sin(w * t + 0.5),
            1.7 + 0.01 * s * np.cos(w * t),
        ]
    )
    rpy = np.column_stack(
        [
            0.3 * s * np.sin(2 * np.pi * 1.2 * t),
            0.16 * s * np.sin(2 * np.pi * 1.0 * t),
            0.1 * s * np.sin(2 * np.pi * 0.8 * t),
        ]
    )
    return reachgate.Trajectory.from_arrays(t, p, rpy_rad=rpy, name=f"wobble_{rate_hz:g}")


def test_fit_stride_keeps_rates_up_to_1_khz_and_spaces_nodes_1_ms_apart_above():
    assert fit_stride(np.arange(100) / 250.0) == 1
    assert fit_stride(np.arange(100) / 1000.0) == 1
    assert fit_stride(np.arange(100) / 1e4) == 10
    assert fit_stride(np.arange(1000) / 1e5) == 100
    gap = np.r_[np.arange(100) / 1e4, 1000.0 + np.arange(100) / 1e4]  # a log gap: median rules
    assert fit_stride(gap) == 10


def test_the_same_analytic_path_gives_the_same_rows_and_peaks_at_250_hz_to_100_khz():
    """Outside reference: the path is analytic, so every rate samples the same motion; at
    250 Hz the fit (7 samples, degree 4) is within 0.3 % of the analytic jerk of a 1 Hz
    sinusoid (tests/test_derivatives.py), so agreeing with it within 2 % at every rate means
    agreeing with the motion. Before windows by duration, 100 kHz gave thousands of jerk rows
    of noise. Peak ratios of this path stay at least 4 % away from the limit (1.0) and from
    the near band (0.9), so rows cannot appear or vanish by rounding."""
    robot = reachgate.load_robot(DEMO_ROBOT)
    reports = {
        rate: reachgate.check(robot, analytic_path(rate, jitter, seed))
        for rate, jitter, seed in ((250.0, 0.1, 61), (1e3, 0.0, 62), (1e4, 0.1, 63), (1e5, 0.0, 64))
    }
    base = reports[250.0]
    assert len(base.violations) > 10  # accel, jerk and speed rows on several wrist axes

    def key(row):
        return (row.check, row.axis, row.severity)

    for rate, report in reports.items():
        assert [key(v) for v in report.violations] == [key(v) for v in base.violations], rate
        for row, ref in zip(report.violations, base.violations, strict=True):
            assert row.worst == pytest.approx(ref.worst, rel=0.02), (rate, row)
            # interval ends agree within two 250 Hz steps (where the sampled limit crossing is)
            assert abs(row.start_s - ref.start_s) < 0.01 and abs(row.end_s - ref.end_s) < 0.01
        for axis, margins in report.margins.items():
            for kind, margin in margins.items():
                peak, ref_peak = 1.0 - margin, 1.0 - base.margins[axis][kind]
                assert peak == pytest.approx(ref_peak, rel=0.02, abs=1e-9), (rate, axis, kind)
