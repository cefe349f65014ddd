"""Interval extraction: rows per run, near rows, and chunked streams equal to one pass."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from reachgate.checking.intervals import Check, IntervalStream, Severity, intervals, sort_rows


def rows_of(t, excess, band, chunks=None):
    stream = IntervalStream(band, check=Check.SPEED, axis="j1", unit="rad/s")
    bounds = [0, *(chunks or []), t.size]
    for a, b in itertools.pairwise(bounds):
        stream.feed(t[a:b], excess[a:b], excess[a:b] + 1.0, 1.0)
    return sort_rows(stream.finish())


def test_one_row_per_crossing_with_its_worst_sample():
    t = np.arange(10.0)
    excess = np.array([-1, 0.5, 2.0, 0.1, -1, -1, 0.3, -1, -1, -1])
    rows = intervals(
        t,
        excess,
        0.0,
        check=Check.SPEED,
        axis="j1",
        worst_value=excess + 1,
        limit_value=1.0,
        unit="rad/s",
    )
    assert [(r.start_s, r.end_s, r.worst_s, r.worst) for r in rows] == [
        (1.0, 3.0, 2.0, 3.0),
        (6.0, 6.0, 6.0, 1.3),
    ]
    assert all(r.severity is Severity.VIOLATION and r.limit == 1.0 for r in rows)


def test_near_rows_only_for_runs_that_never_cross():
    t = np.arange(8.0)
    excess = np.array([-0.05, 0.2, -0.05, -1, -0.08, -0.02, -1, -1])
    rows = intervals(
        t,
        excess,
        0.1,
        check=Check.SPEED,
        axis="j1",
        worst_value=excess,
        limit_value=0.0,
        unit="rad/s",
    )
    near = [r for r in rows if r.severity is Severity.NEAR]
    assert [(r.start_s, r.end_s, r.worst_s) for r in near] == [(4.0, 5.0, 5.0)]


@pytest.mark.parametrize("seed", [31, 32, 33, 34])
def test_chunked_stream_gives_the_rows_of_one_pass(seed):
    rng = np.random.default_rng(seed)
    n = 3000
    t = np.cumsum(rng.uniform(0.5, 1.5, n))
    excess = np.convolve(rng.normal(0, 1, n + 20), np.ones(21) / 5, mode="valid")[:n] - 0.5
    whole = rows_of(t, excess, 0.4)
    cuts = sorted(rng.choice(np.arange(1, n), size=25, replace=False).tolist())
    assert rows_of(t, excess, 0.4, cuts) == whole
    assert rows_of(t, excess, 0.4, list(range(1, n))) == whole  # one sample per chunk
    assert len(whole) > 5
