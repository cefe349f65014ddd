"""`check` and `scan` read a case to the same bits.

`check` reads small files with np.loadtxt, `scan`'s workers (and `check` for files of 16 MB or
more) with pyarrow's CSV reader. Both parse decimal text to the correctly rounded double
(outside reference: Python's float(), which is correctly rounded by its specification), so a
case gives the same arrays, and so the same report, whichever reader took it. Files in every
number format a simulation log is likely to use, every column choice of DESIGN §4."""

from __future__ import annotations

import numpy as np
import pytest

import reachgate.model.trajectory as trajectory_module

FORMATS = ("{!r}", "{:.6f}", "{:.17g}", "{:.3e}", "{:.12f}", "{:.25e}")


def _write_case(path, k: int, rng) -> None:
    n = 400
    cols = {"t_s": np.cumsum(rng.uniform(0.0009, 0.0011, n))}
    unit = ("m", "mm")[k % 2]
    for axis, p in zip("xyz", rng.normal(size=(3, n)) * 10.0 ** rng.integers(-3, 3), strict=True):
        cols[f"{axis}_{unit}"] = p
    if k % 3 == 0:
        q = rng.normal(size=(n, 4))
        q /= np.linalg.norm(q, axis=1, keepdims=True)
        cols.update(zip(("qw", "qx", "qy", "qz"), q.T, strict=True))
    else:
        angle_unit = ("deg", "rad")[k % 3 - 1]
        for name in ("roll", "pitch", "yaw"):
            cols[f"{name}_{angle_unit}"] = rng.uniform(-1, 1, n) * (
                60 if angle_unit == "deg" else 1
            )
    if k % 4 == 0:
        cols["gust_m_s"] = rng.normal(size=n)
    names = list(cols)
    order = rng.permutation(len(names))
    fmt = FORMATS[k % len(FORMATS)]
    exact = {"t_s", "qw", "qx", "qy", "qz"}  # kept exact: steps and unit length stay valid
    lines = [",".join(names[i] for i in order)]
    for r in range(n):
        lines.append(
            ",".join(
                repr(float(cols[names[i]][r]))
                if names[i] in exact
                else fmt.format(float(cols[names[i]][r]))
                for i in order
            )
        )
    path.write_text("\n".join(lines) + "\n")


def _read_with(path, arrow: bool, monkeypatch):
    monkeypatch.setattr(trajectory_module, "ARROW_MIN_BYTES", 0 if arrow else 1 << 62)
    if not arrow:
        monkeypatch.delitem(__import__("sys").modules, "pyarrow.csv", raising=False)
    t = trajectory_module.load_trajectory(path)
    return t.t_s, t.scenario_p_m, t.scenario_q_wxyz


@pytest.mark.parametrize("k", range(12))
def test_both_readers_give_the_same_bits(tmp_path, monkeypatch, k):
    pytest.importorskip("pyarrow.csv")
    path = tmp_path / f"case{k}.csv"
    _write_case(path, k, np.random.default_rng(8100 + k))
    with monkeypatch.context() as m:
        by_loadtxt = _read_with(path, arrow=False, monkeypatch=m)
    with monkeypatch.context() as m:
        by_arrow = _read_with(path, arrow=True, monkeypatch=m)
    for a, b in zip(by_loadtxt, by_arrow, strict=True):
        assert a.tobytes() == b.tobytes()
