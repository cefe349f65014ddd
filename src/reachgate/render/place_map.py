"""The `place --map` picture: the score over two varied quantities around the best placement.

Greyscale-safe, as every picture of ours: the score is shaded from dark (beyond a limit) to
light (room left), the passing region (score above 0) is outlined with a thick solid line
and the rest hatched, the best and the starting placements are marked with different
shapes, and every element is named in a legend.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from reachgate.errors import ReachgateError
from reachgate.render.pictures import _new_figure, _save
from reachgate.search.placement import PlacementResult

#: Figure size: 900 × 750 pixels.
MAP_SIZE_IN = (9.0, 7.5)
#: Scores are shaded within this range; lower and higher values take the end shades (said
#: in the colour bar's label).
SHADE_RANGE = (-1.0, 1.0)
_EDGE = dict(colors="black", linewidths=2.5)
_EDGE_LINE = dict(color="black", linewidth=2.5)
#: Best and start differ in shape and fill, each edged in the other shade so that it shows
#: on dark and light ground alike.
_MARKERS = {
    "best": dict(marker="*", markersize=18, color="white", markeredgecolor="black",
                 markeredgewidth=1.5),
    "start": dict(marker="s", markersize=10, color="black", markeredgecolor="white",
                  markeredgewidth=1.5),
}  # fmt: skip


def plot_score_map(result: PlacementResult, path: str | Path) -> Path:
    """Draw result.score_map into a PNG file; -> the path."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    path = Path(path)
    if path.suffix.lower() != ".png":
        raise ReachgateError(f"--map: {path}: the picture is written as PNG, name it *.png")
    grid = result.score_map
    if grid is None:
        raise ReachgateError("--map: the search computed no score map")
    i = result.vary.index(grid.x)
    j = result.vary.index(grid.y)
    figure = _new_figure(MAP_SIZE_IN)
    ax = figure.add_subplot(1, 1, 1)
    shown = np.clip(grid.scores, *SHADE_RANGE)
    levels = np.linspace(SHADE_RANGE[0], SHADE_RANGE[1], 21)
    filled = ax.contourf(grid.x_values, grid.y_values, shown, levels=levels, cmap="Greys_r")
    bar = figure.colorbar(filled, ax=ax)
    bar.set_label(
        f"score: worst margin, fraction of its limit (clipped to {SHADE_RANGE[0]:g}..."
        f"{SHADE_RANGE[1]:g})"
    )
    handles = []
    if (grid.scores > 0).any() and (grid.scores <= 0).any():
        ax.contour(grid.x_values, grid.y_values, grid.scores, levels=[0.0], **_EDGE)
        handles.append(Line2D([], [], label="score 0: edge of the passing region", **_EDGE_LINE))
    if (grid.scores <= 0).any():
        ax.contourf(
            grid.x_values, grid.y_values, grid.scores, levels=[-np.inf, 0.0], colors="none",
            hatches=["//"],
        )  # fmt: skip
        handles.append(Patch(facecolor="white", edgecolor="black", hatch="//", label="fails"))
    for name, candidate in (("best", result.best), ("start", result.start)):
        style = _MARKERS[name]
        values = candidate.values
        ax.plot(values[i], values[j], linestyle="none", clip_on=False, **style)
        label = f"{name} placement (score {candidate.score:+.3f})"
        handles.append(Line2D([], [], linestyle="none", label=label, **style))
    ax.set_xlim(grid.x.low, grid.x.high)
    ax.set_ylim(grid.y.low, grid.y.high)
    ax.set_xlabel(grid.x.label)
    ax.set_ylabel(grid.y.label)
    held = [
        f"{v.name} {x:g} {v.unit}"
        for k, (v, x) in enumerate(zip(result.vary, result.best.values, strict=True))
        if k not in (i, j)
    ]
    steps = sorted(set(grid.steps))
    step_text = ", ".join("full" if k == 1 else f"1 sample in {k}" for k in steps)
    ax.set_title(
        f"{result.robot}: score over {grid.x.name} and {grid.y.name}"
        + (f", {', '.join(held)} (best)" if held else "")
        + f"\nscored on {len(grid.cases)} binding case(s) of {len(result.cases)}"
        + f" at {step_text} ({grid.x_values.size} x {grid.y_values.size} points)"
    )
    ax.legend(handles=handles, loc="upper right", framealpha=0.9)
    _save(figure, path)
    return path
