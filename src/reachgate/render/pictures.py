"""Pictures for `check --plot` and `envelope --plot`: PNG files, readable in print.

No meaning rests on colour alone: quantities differ by line style and marker, violation
intervals are hatched, and every line and hatch is named in a legend. matplotlib is imported
here only, lazily, through its object interface with the Agg canvas (the global backend and
pyplot state of a caller's session are left alone).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from reachgate.checking.intervals import Check, Violation
from reachgate.checking.pipeline import SINGULARITY_NEAR_FACTOR, UNTRUSTED_NEIGHBOURS, Report
from reachgate.errors import ReachgateError
from reachgate.kinematics.chain import arm_manipulability
from reachgate.kinematics.singularity import conditioning
from reachgate.model.robot import Robot
from reachgate.render.files import atomic_output

#: Figure size and resolution of the check picture: 1200 × 900 pixels.
REPORT_SIZE_IN = (12.0, 9.0)
#: Figure size of the envelope picture: 1100 × 500 pixels.
ENVELOPE_SIZE_IN = (11.0, 5.0)
DPI = 100
#: Above this many samples the lines are drawn from per-bin minima and maxima, which keeps
#: every peak while bounding the drawing work.
MAX_DRAWN_SAMPLES = 4000
#: Fractions of a limit are drawn up to this magnitude; larger values are clipped (and said).
FRACTION_CLIP = 3.0
#: Singularity measures relative to their floors are drawn on a log axis from here.
MEASURE_FLOOR_RATIO_MIN = 1e-2

_QUANTITY_STYLES = {
    "position": dict(linestyle="-", linewidth=1.4, color="black"),
    "speed": dict(linestyle="--", linewidth=1.2, color="0.25"),
    "accel": dict(linestyle=":", linewidth=1.6, color="0.1"),
    "jerk": dict(linestyle="-.", linewidth=0.9, color="0.45"),
}
_MEASURE_STYLES = (
    dict(linestyle="-", marker="o"),
    dict(linestyle="--", marker="s"),
    dict(linestyle=":", marker="^"),
    dict(linestyle="-.", marker="D"),
)
_HATCHES = {"violation": "////", "near": "...."}
_PATH_HATCHES = {
    Check.SINGULARITY: "\\\\\\\\",
    Check.REACH: "xxxx",
    Check.BRANCH: "++++",
    Check.LAG: "----",
}


def _require_png(path: Path) -> Path:
    path = Path(path)
    if path.suffix.lower() != ".png":
        raise ReachgateError(f"--plot: {path}: the picture is written as PNG, name it *.png")
    return path


def _new_figure(size_in: tuple[float, float]):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    figure = Figure(figsize=size_in, dpi=DPI, layout="constrained")
    FigureCanvasAgg(figure)
    return figure


def _save(figure, path: Path) -> None:
    # No bbox_inches="tight": the file keeps the stated pixel size.
    with atomic_output(path, binary=True) as handle:
        figure.savefig(handle, format="png", dpi=DPI)


def decimate(t: np.ndarray, y: np.ndarray, max_samples: int = MAX_DRAWN_SAMPLES):
    """Thin a series (N,) t, (N,) y to at most max_samples points, keeping each bin's extremes.

    -> (t (M,), y (M,)); unchanged when N <= max_samples. NaNs (gaps) never hide a peak.
    """
    n = t.shape[0]
    if n <= max_samples:
        return t, y
    bins = max_samples // 2
    edges = np.linspace(0, n, bins + 1).astype(int)
    width = int(np.max(np.diff(edges)))
    index = np.minimum(edges[:-1, None] + np.arange(width)[None, :], edges[1:, None] - 1)
    block = y[index]  # (bins, width)
    gap = np.isnan(block)
    rows = np.arange(bins)
    low = index[rows, np.argmin(np.where(gap, np.inf, block), axis=1)]
    high = index[rows, np.argmax(np.where(gap, -np.inf, block), axis=1)]
    keep = np.unique(np.concatenate([low, high]))
    return t[keep], y[keep]


def _dilate(mask: np.ndarray, samples: int) -> np.ndarray:
    if not mask.any():
        return mask
    return np.convolve(mask.astype(float), np.ones(2 * samples + 1), mode="same") > 0


def _shade(ax, rows: list[Violation], t_s: np.ndarray, hatch_of) -> None:
    """Hatch each row's interval; one-sample rows get one median step of width."""
    step = float(np.median(np.diff(t_s))) if t_s.size > 1 else 1.0
    for row in rows:
        start, end = row.start_s, max(row.end_s, row.start_s + step)
        ax.axvspan(
            start,
            end,
            facecolor="none",
            edgecolor="0.35",
            linewidth=0.0,
            hatch=hatch_of(row),
            zorder=0,
        )


def _fractions(robot: Robot, report: Report) -> dict[str, np.ndarray]:
    """Signed fractions of each limit, (N, n_axes) per quantity; NaN where not trusted."""
    from reachgate.checking.derivatives import time_derivatives

    q = report.solution.q
    rates = time_derivatives(report.t_s, q)
    unreachable = report.solution.reach_excess_m > 0
    untrusted = _dilate(unreachable, UNTRUSTED_NEIGHBOURS)
    mid = 0.5 * (robot.upper + robot.lower)
    half = 0.5 * (robot.upper - robot.lower)
    result = {
        "position": (q - mid) / half,
        "speed": rates.velocity / robot.vmax,
        "accel": rates.acceleration / robot.amax,
        "jerk": rates.jerk / robot.jmax,  # NaN columns where no jerk limit is given
    }
    for key, values in result.items():
        blank = unreachable if key == "position" else untrusted
        values[blank] = np.nan
    return result


def _measures(robot: Robot, report: Report) -> tuple[dict[str, np.ndarray], bool]:
    """Singularity measures relative to their floors, each (N,); -> (measures, relative)."""
    th = robot.thresholds
    measures = dict(report.solution.measures)
    floors = {"wrist": th.wrist_min_rad, "elbow": th.elbow_min_rad, "shoulder": th.shoulder_min_m}
    q = np.where(np.isfinite(report.solution.q), report.solution.q, robot.home)
    if not measures:  # general arm: the scale-free measure the check uses
        measures["conditioning"] = conditioning(robot, q)
        floors["conditioning"] = th.conditioning_min
    if th.manipulability_min > 0:
        measures["manipulability"] = arm_manipulability(robot, q)
        floors["manipulability"] = th.manipulability_min
    relative = all(floors[k] > 0 for k in measures)
    if relative:
        measures = {k: v / floors[k] for k, v in measures.items()}
    unreachable = report.solution.reach_excess_m > 0
    return {k: np.where(unreachable, np.nan, v) for k, v in measures.items()}, relative


def _path_label(check: Check, rows: list[Violation]) -> str:
    """A hatch's legend label: the check's name; for `branch`, also the configuration that
    would keep every joint in range (when one branch fits over every branch row)."""
    if check is not Check.BRANCH:
        return check.value
    fitting = [r.fitting_branches for r in rows if r.check is Check.BRANCH]
    if any(names is None for names in fitting):
        return "branch (another configuration fits)"
    common = [name for name in fitting[0] if all(name in names for names in fitting)]
    if not common:
        return "branch (no single other branch fits throughout)"
    more = f" and {len(common) - 1} more" if len(common) > 1 else ""
    return f"branch ({common[0]}{more} would fit)"


def plot_report(report: Report, robot: Robot, path: str | Path) -> Path:
    """Write the check picture: every axis against its limits over time, and singularities.

    One panel per axis (position normalised so ±1 are the range ends; speed, accel and jerk as
    signed fractions of their limits), hatched where that axis has rows, plus one panel of the
    singularity measures relative to their floors with the path-wide rows hatched.
    REPORT_SIZE_IN at DPI. -> the path written.
    """
    path = _require_png(Path(path))
    from matplotlib.patches import Patch

    t = report.t_s
    fractions = _fractions(robot, report)
    n_panels = robot.n_axes + 1
    n_cols = 2
    n_rows = math.ceil(n_panels / n_cols)
    figure = _new_figure(REPORT_SIZE_IN)
    axes = figure.subplots(n_rows, n_cols, sharex=True, squeeze=False).ravel()
    verdict = "PASS" if report.passed else "FAIL"
    figure.suptitle(f"{report.robot} / {report.trajectory}: {verdict}", fontsize=12)

    quantities = [
        k
        for k in ("position", "speed", "accel", "jerk")
        if k != "jerk" or np.isfinite(robot.jmax).any()
    ]
    for i, axis in enumerate(robot.axes):
        ax = axes[i]
        rows = [r for r in report.violations if r.axis == axis.name]
        _shade(ax, rows, t, lambda r: _HATCHES[r.severity.value])
        columns = np.column_stack([fractions[key][:, i] for key in quantities])
        peak = float(np.max(np.abs(columns), initial=0.0, where=np.isfinite(columns)))
        top = min(max(1.2, 1.05 * peak), FRACTION_CLIP)
        for k, key in enumerate(quantities):
            t_drawn, drawn = decimate(t, columns[:, k])
            ax.plot(t_drawn, np.clip(drawn, -top, top), label=key, **_QUANTITY_STYLES[key])
        for level in (-1.0, 1.0):
            ax.axhline(level, color="black", linewidth=0.6)
        ax.set_ylim(-top * 1.02, top * 1.02)
        clipped = " (clipped)" if peak > FRACTION_CLIP else ""
        ax.set_ylabel("fraction of limit")
        ax.set_title(f"{axis.name}{clipped}", loc="left", fontsize=10)

    ax = axes[robot.n_axes]
    path_rows = [r for r in report.violations if r.check in _PATH_HATCHES]
    _shade(ax, path_rows, t, lambda r: _PATH_HATCHES[r.check])
    measures, relative = _measures(robot, report)
    for k, name in enumerate(measures):
        t_m, values = decimate(t, measures[name])
        every = max(1, t_m.size // 12)
        if relative:
            values = np.maximum(values, MEASURE_FLOOR_RATIO_MIN)
        ax.plot(
            t_m,
            values,
            color="black",
            linewidth=1.0,
            markersize=4,
            markevery=every,
            markerfacecolor="white",
            label=name,
            **_MEASURE_STYLES[k % 4],
        )
    if relative:
        ax.set_yscale("log")
        ax.axhline(1.0, color="black", linewidth=0.8)
        ax.axhline(SINGULARITY_NEAR_FACTOR, color="black", linewidth=0.6, linestyle="--")
        ax.set_ylabel("measure / floor")
        ax.set_title(
            "singularity measures (1 = floor, dashed = near band)", loc="left", fontsize=10
        )
    else:
        ax.set_ylabel("measure (no floor set)")
        ax.set_title("singularity measures", loc="left", fontsize=10)
    ax.legend(loc="upper right", fontsize=8, framealpha=1.0)

    for extra in axes[n_panels:]:
        extra.set_visible(False)
    for ax in axes[:n_panels]:
        ax.grid(True, color="0.85", linewidth=0.5)
    for ax in axes[max(0, n_panels - n_cols) : n_panels]:
        ax.set_xlabel("time, s")
        ax.xaxis.set_tick_params(labelbottom=True)  # shared x hides them above a blank panel
    handles = axes[0].get_legend_handles_labels()[0]
    handles += [
        Patch(facecolor="none", edgecolor="0.35", hatch=_HATCHES["violation"], label="violation"),
        Patch(facecolor="none", edgecolor="0.35", hatch=_HATCHES["near"], label="near"),
    ]
    handles += [
        Patch(facecolor="none", edgecolor="0.35", hatch=h, label=_path_label(c, path_rows))
        for c, h in _PATH_HATCHES.items()
        if any(r.check is c for r in path_rows)
    ]
    figure.legend(
        handles=handles, loc="outside lower center", ncol=len(handles), fontsize=9, frameon=False
    )
    _save(figure, path)
    return path


_DIRECTION_STYLES = {
    "x": dict(linestyle="-", marker="o"),
    "y": dict(linestyle="--", marker="s"),
    "z": dict(linestyle=":", marker="^"),
    "roll": dict(linestyle="-", marker="o"),
    "pitch": dict(linestyle="--", marker="s"),
    "yaw": dict(linestyle=":", marker="^"),
}


def plot_envelope(result, path: str | Path) -> Path:
    """Write the envelope picture: amplitude against frequency, log-log, one line per direction.

    Translations (mm) on the left, rotations (deg) on the right. Hollow markers: the largest
    amplitude tried still passed (the point is a lower bound). Points that fail even the
    smallest amplitude tried have no place on a log axis and are left out (the table has them).
    ENVELOPE_SIZE_IN at DPI. -> the path written.
    """
    path = _require_png(Path(path))
    from matplotlib.lines import Line2D

    groups = [
        (
            "translation along cell axes",
            "amplitude, mm",
            1000.0,
            [d for d in result.directions if not d.direction.is_rotation],
        ),
        (
            "rotation about TCP axes",
            "amplitude, deg",
            180.0 / math.pi,
            [d for d in result.directions if d.direction.is_rotation],
        ),
    ]
    groups = [g for g in groups if g[3]]
    figure = _new_figure(ENVELOPE_SIZE_IN)
    axes = figure.subplots(1, len(groups), squeeze=False)[0]
    figure.suptitle(f"{result.robot}: sinusoid envelope (rail {result.rail.value})", fontsize=12)
    for ax, (title, label, factor, items) in zip(axes, groups, strict=True):
        any_open = False
        for item in items:
            style = _DIRECTION_STYLES[item.direction.value]
            shown = item.amplitudes > 0
            f, a = item.frequencies_hz[shown], item.amplitudes[shown] * factor
            ax.plot(
                f,
                a,
                color="black",
                linewidth=1.2,
                markersize=6,
                label=item.direction.value,
                **style,
            )
            open_points = ~item.bounded[shown]
            any_open |= bool(open_points.any())
            ax.plot(
                f[open_points],
                a[open_points],
                linestyle="none",
                marker=style["marker"],
                markersize=9,
                markerfacecolor="white",
                markeredgecolor="black",
            )
        handles = ax.get_legend_handles_labels()[0]
        if any_open:
            handles.append(
                Line2D(
                    [],
                    [],
                    linestyle="none",
                    marker="o",
                    markersize=9,
                    markerfacecolor="white",
                    markeredgecolor="black",
                    label="passes at the largest amplitude tried",
                )
            )
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel("frequency, Hz")
        ax.set_ylabel(label)
        ax.set_title(title, loc="left", fontsize=10)
        ax.grid(True, which="both", color="0.85", linewidth=0.5)
        ax.legend(handles=handles, loc="lower left", fontsize=9, framealpha=1.0)
    _save(figure, path)
    return path


#: Figure size of the delay picture: 1000 × 750 pixels.
DELAY_SIZE_IN = (10.0, 7.5)


def plot_delay(estimate, path: str | Path) -> Path:
    """Write the delay picture: gain (dB) and phase (deg) of the measured response against
    frequency (log axis), the fitted model as a line, the bandwidth as a dotted line.

    Bins in the fit are filled dots, the others (coherence below the floor, or above the
    fitted band) hollow. DELAY_SIZE_IN at DPI. -> the path written.
    """
    from reachgate.motion.delay import model_phase_rad

    path = _require_png(Path(path))
    f = estimate.frequency_hz
    with np.errstate(divide="ignore", invalid="ignore"):
        gain_db = 20.0 * np.log10(np.abs(estimate.response))
        model_db = 20.0 * np.log10(np.abs(estimate.model_response(f)))
    phase = np.degrees(estimate.measured_phase_rad())
    model_phase = np.degrees(model_phase_rad(f, estimate.delay_s, estimate.time_constant_s))
    figure = _new_figure(DELAY_SIZE_IN)
    gain_ax, phase_ax = figure.subplots(2, 1, sharex=True)
    bandwidth = estimate.bandwidth_hz
    figure.suptitle(
        f"{estimate.measured} against {estimate.commanded}: delay "
        f"{estimate.delay_s * 1000:.1f} ms, "
        + (f"bandwidth {bandwidth:.2f} Hz" if bandwidth is not None else "no lag")
        + f", --lag {estimate.effective_delay_s:.4g} s (effective)",
        fontsize=11,
    )
    used = estimate.used
    for ax, measured, model, label in (
        (gain_ax, gain_db, model_db, "gain, dB"),
        (phase_ax, phase, model_phase, "phase, deg"),
    ):
        ax.plot(f, model, color="black", linewidth=1.4, label="model: delay + first-order lag")
        ax.plot(
            f[used], measured[used], linestyle="none", marker="o", markersize=3,
            color="0.3", label="measured, in the fit",
        )  # fmt: skip
        ax.plot(
            f[~used], measured[~used], linestyle="none", marker="o", markersize=3,
            markerfacecolor="white", markeredgecolor="0.3", label="measured, left out",
        )  # fmt: skip
        if bandwidth is not None:
            ax.axvline(
                bandwidth, color="black", linestyle=":", linewidth=1.0, label="bandwidth (-3 dB)"
            )
        ax.set_xscale("log")
        ax.set_ylabel(label)
        ax.grid(True, which="both", color="0.85", linewidth=0.5)
    lowest = min(float(np.nanmin(model_db[used])), float(np.nanmin(gain_db[used])))
    gain_ax.set_ylim(min(-20.0, lowest - 3.0), 6.0)
    phase_ax.set_ylim(float(np.nanmin(model_phase[used])) * 1.2 - 10.0, 20.0)
    phase_ax.set_xlabel("frequency, Hz")
    phase_ax.set_xlim(f[0], min(f[-1], 2.0 * estimate.band_hz[1]))
    gain_ax.legend(loc="lower left", fontsize=9, framealpha=1.0)
    _save(figure, path)
    return path
