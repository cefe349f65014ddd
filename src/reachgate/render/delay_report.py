"""The `delay` command's output: a colour-free table (ms, Hz, dB, deg) or JSON (SI)."""

from __future__ import annotations

import math

import numpy as np

from reachgate.motion.delay import COHERENCE_MIN, TABLE_ROWS, DelayEstimate, model_phase_rad
from reachgate.render.check_report import plain_console
from reachgate.render.terminal import fixed, plain_table, table_width, tidy, wrap_text
from reachgate.version import __version__

DELAY_CAUTIONS = (
    "The estimate holds for the motion in this log: delay and lag change with load, speed "
    "and controller settings; measure again after any change.",
    "The robot's own limits and safety functions, the site's risk assessment and the "
    "standards for robot cells stay in force.",
)


def table_bins(estimate: DelayEstimate, rows: int = TABLE_ROWS) -> np.ndarray:
    """Indices of the bins nearest to `rows` log-spaced frequencies, first bin to the fit's top."""
    f = estimate.frequency_hz
    targets = np.geomspace(f[0], estimate.band_hz[1], rows)
    return np.unique(np.argmin(np.abs(f[None, :] - targets[:, None]), axis=1))


def _db(gain: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        return 20.0 * np.log10(gain)


def _paragraphs(estimate: DelayEstimate) -> list[tuple[str, str]]:
    """(first-line prefix, text) of each paragraph before the table."""
    ms = 1000.0
    bandwidth = estimate.bandwidth_hz
    lo, hi = estimate.band_hz
    kind = (
        "poses (x, y, z and the rotation vector from the first commanded orientation)"
        if estimate.kind == "pose"
        else "axis values"
    )
    return [
        ("", f"reachgate {__version__}: delay of the rig, {estimate.measured} against "
         f"{estimate.commanded}"),
        ("", f"logs: {kind}; channels used: {', '.join(estimate.channels)}"),
        ("", f"resampled: both logs onto one even {estimate.grid_step_s * ms:.4g} ms grid over "
         f"the {estimate.duration_s:.4g} s they share, by linear interpolation (median steps: "
         f"commanded {estimate.commanded_step_s * ms:.4g} ms, measured "
         f"{estimate.measured_step_s * ms:.4g} ms); Welch segments of "
         f"{estimate.segment_s:.4g} s"),
        ("", "model: a pure delay in series with a first-order lag, exp(-s*delay) / (1 + s*T)"),
        ("  ", f"pure delay          {estimate.delay_s * ms:8.2f} ms"),
        ("  ", f"lag time constant T {estimate.time_constant_s * ms:8.2f} ms"),
        ("  ", "bandwidth (-3 dB)   "
         + (f"{bandwidth:8.2f} Hz" if bandwidth is not None else "none (no lag measured)")),
        ("  ", f"effective delay     {estimate.effective_delay_s * ms:8.2f} ms (delay + T)"),
        ("  ", f"fit residual        {estimate.fit_residual * 100:8.2f} % (weighted RMS of "
         f"|measured/model - 1| over {int(estimate.used.sum())} bins, {lo:.3g}-{hi:.3g} Hz, "
         f"coherence >= {COHERENCE_MIN:g})"),
        ("", f"use: --lag {estimate.effective_delay_s:.4g} (the effective delay: below the "
         "bandwidth the lag adds T to the delay, so the pure delay alone would understate "
         "the tracking error)"),
    ]  # fmt: skip


def render_delay_table(estimate: DelayEstimate, width: int | None = None) -> str:
    """The estimate, then gain and phase against frequency at TABLE_ROWS frequencies, laid
    out to `width` (default: the terminal's, COLUMNS, else 80)."""
    console, buffer = plain_console(width or table_width())
    for first, text in _paragraphs(estimate):
        console.print(wrap_text(text, console.width, first, first + "  "), soft_wrap=True)
    k = table_bins(estimate)
    f = estimate.frequency_hz[k]
    model = estimate.model_response(f)
    phase = np.degrees(estimate.measured_phase_rad()[k])
    model_phase = np.degrees(model_phase_rad(f, estimate.delay_s, estimate.time_constant_s))
    gain_db, model_db = _db(np.abs(estimate.response[k])), _db(np.abs(model))
    table = plain_table()
    for name in ("f Hz", "coherence", "gain dB", "model dB", "phase deg", "model deg", "fitted"):
        table.add_column(name, justify="right")
    for i in range(k.size):
        measured = ["-" if not math.isfinite(v) else fixed(v) for v in (gain_db[i], phase[i])]
        table.add_row(
            f"{f[i]:.3g}",
            f"{estimate.coherence[k[i]]:.3f}",
            measured[0],
            fixed(model_db[i]),
            measured[1],
            fixed(model_phase[i], 1),
            "yes" if estimate.used[k[i]] else "no",
        )
    console.print(table)
    console.print(
        wrap_text(
            "gain and phase of the measured motion over the commanded one (H1: cross-spectrum "
            "over command spectrum, all channels pooled); rows at log-spaced bins",
            console.width,
        ),
        soft_wrap=True,
    )
    for note in estimate.notes:
        console.print(wrap_text(note, console.width, "note: "), soft_wrap=True)
    console.print("cautions:")
    for line in DELAY_CAUTIONS:
        console.print(wrap_text(line, console.width, "  - "), soft_wrap=True)
    return tidy(buffer.getvalue())


def render_delay(estimate: DelayEstimate, fmt: str) -> str:
    """The estimate as 'table' or 'json' text."""
    if fmt == "json":
        return estimate.to_json()
    return render_delay_table(estimate)
