"""Charts of the morning report, as PNG bytes to embed in the page.

Same rules as pictures.py (`check --plot`): greyscale-safe (bars differ by hatch, lines by
style, every hatch named in a legend or an axis label), labelled axes with units, matplotlib
imported lazily through its object interface with the Agg canvas.
"""

from __future__ import annotations

import io
import tempfile
from pathlib import Path

import numpy as np

from reachgate.batch.digest import NOT_RECORDED, ParameterRates
from reachgate.render.pictures import DPI, _new_figure, plot_report

#: One pass-rate panel: inches at DPI.
RATE_PANEL_IN = (5.2, 3.4)
#: The margin histograms: one panel per check, this many per row, inches per panel.
HIST_COLUMNS = 3
HIST_PANEL_IN = (3.8, 2.8)
#: Margins below this are piled into the leftmost bin (and the bin says so): a case far
#: beyond a limit (-400) would otherwise squeeze every other case into one bar.
MARGIN_FLOOR = -1.0
#: Bin width of the margin histograms, fraction of a limit.
MARGIN_BIN = 0.1
_BAR_STYLE = dict(facecolor="white", edgecolor="black", hatch="///", linewidth=1.0)
_MISSING_STYLE = dict(facecolor="white", edgecolor="black", hatch="..", linewidth=1.0)


def _png(figure) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=DPI)
    return buffer.getvalue()


def parameter_label(key: str) -> str:
    """'sigma_w_m_s' -> 'sigma_w, m/s': the unit suffix of a recorded key as an axis unit."""
    for suffix, unit in (("_m_s", "m/s"), ("_hz", "Hz"), ("_s", "s"), ("_m", "m")):
        if key.endswith(suffix):
            return f"{key.removesuffix(suffix)}, {unit}"
    return key


def pass_rate_chart(rates: ParameterRates) -> bytes:
    """Bars of pass rate (%) per value of one parameter, each labelled passed/cases."""
    figure = _new_figure(RATE_PANEL_IN)
    ax = figure.subplots()
    labels = [g.label for g in rates.groups]
    x = np.arange(len(labels))
    heights = [100.0 * g.rate for g in rates.groups]
    for i, group in enumerate(rates.groups):
        style = _MISSING_STYLE if group.label == NOT_RECORDED else _BAR_STYLE
        ax.bar(x[i], heights[i], width=0.6, **style)
        ax.annotate(
            f"{group.passed}/{group.cases}",
            (x[i], heights[i]),
            xytext=(0, 3),
            textcoords="offset points",
            ha="center",
            fontsize=8,
        )
    ax.set_xticks(x, labels, rotation=30 if len(labels) > 5 else 0, fontsize=8)
    ax.set_ylim(0, 112)
    ax.set_ylabel("cases passing, %")
    ax.set_xlabel(parameter_label(rates.key) + (" (equal-width bins)" if rates.binned else ""))
    ax.set_title(f"pass rate by {rates.key}", loc="left", fontsize=10)
    ax.grid(True, axis="y", color="0.85", linewidth=0.5)
    ax.set_axisbelow(True)
    return _png(figure)


def margin_histograms(margins_by_check: dict[str, np.ndarray]) -> bytes:
    """One histogram per check of each case's worst margin for it (fraction of the limit
    left); margins below MARGIN_FLOOR counted in the leftmost bin, the limit drawn at 0."""
    kinds = [k for k, v in margins_by_check.items() if v.size]
    n_rows = max(1, -(-len(kinds) // HIST_COLUMNS))
    n_cols = min(HIST_COLUMNS, max(1, len(kinds)))
    figure = _new_figure((HIST_PANEL_IN[0] * n_cols, HIST_PANEL_IN[1] * n_rows))
    axes = figure.subplots(n_rows, n_cols, squeeze=False).ravel()
    edges = np.arange(MARGIN_FLOOR, 1.0 + MARGIN_BIN / 2, MARGIN_BIN)
    for ax, kind in zip(axes, kinds, strict=False):
        values = margins_by_check[kind]
        below = int(np.count_nonzero(values < MARGIN_FLOOR))
        counts, _ = np.histogram(np.clip(values, MARGIN_FLOOR, 1.0), bins=edges)
        ax.bar(edges[:-1], counts, width=MARGIN_BIN, align="edge", **_BAR_STYLE)
        ax.axvline(0.0, color="black", linewidth=1.2, linestyle="--")
        ax.set_xlim(MARGIN_FLOOR, 1.0)
        ax.set_xlabel("worst margin, fraction of limit left")
        ax.set_ylabel("cases")
        note = f"; {below} below {MARGIN_FLOOR:g} in the left bar" if below else ""
        ax.set_title(f"{kind} ({values.size} cases{note})", loc="left", fontsize=9)
        ax.grid(True, axis="y", color="0.85", linewidth=0.5)
        ax.set_axisbelow(True)
        ax.yaxis.get_major_locator().set_params(integer=True)
    for extra in axes[len(kinds) :]:
        extra.set_visible(False)
    if kinds:
        figure.suptitle("dashed line: the limit (margin 0); left of it, beyond", fontsize=9)
    return _png(figure)


def case_picture(report, robot) -> bytes:
    """The `check --plot` picture of one case, as PNG bytes; for a rig (robot a Rig), the
    clearance picture with the rig's views (each robot's axis panels are left out)."""
    from reachgate.model.rig import Rig

    with tempfile.TemporaryDirectory(prefix="reachgate-") as folder:
        if isinstance(robot, Rig):
            from reachgate.render.rig_picture import plot_rig_clearance

            path = plot_rig_clearance(report, robot, Path(folder) / "case.png")
        else:
            path = plot_report(report, robot, Path(folder) / "case.png")
        return path.read_bytes()
