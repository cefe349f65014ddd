"""A rig's own loop delay and tracking bandwidth, estimated from a run log (DESIGN §11).

Model: the rig follows its command through H(s) = exp(-s·τ) / (1 + s·T), a pure delay τ in
series with a first-order lag of time constant T. The tracking bandwidth is the lag's -3 dB
frequency f_c = 1 / (2π·T).

How (all on whole arrays):

1. Both logs are resampled onto one even grid over the time they both cover, by linear
   interpolation; the step is the larger of the two logs' median steps (no finer than either
   log's own sampling). Linear interpolation has no phase shift, so it leaves the delay alone.
2. Each channel (x, y, z and the rotation vector for pose logs; each axis for axis logs) is
   divided by its commanded standard deviation, so metres and radians weigh alike; channels
   whose command barely moves are left out.
3. Cross-spectra by Welch's method (scipy.signal.csd and welch: Hann windows, half overlap,
   linear detrend per segment), summed over channels: H = ΣP_uy / ΣP_uu (the H1 estimate,
   unbiased by noise on the measured side) and the coherence γ² = |ΣP_uy|² / (ΣP_uu·ΣP_yy).
4. τ and T are fitted to the bins where γ² >= COHERENCE_MIN, below FIT_MAX_FRACTION of the
   sampling rate, by weighted least squares on the relative error H / H_model − 1 with
   weights γ² / (1 − γ²), the inverse of that error's variance (Bendat & Piersol, Random
   Data, the random error of a frequency-response estimate). The phase makes the cost
   many-valleyed in τ, so a grid over (τ, T) finds the valley and scipy.optimize.least_squares
   settles in it.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from reachgate.errors import ReachgateError
from reachgate.model.columnar import column_names, is_columnar
from reachgate.model.csv_text import read_header
from reachgate.model.joint_log import JointLog, load_joint_log
from reachgate.model.trajectory import Trajectory, load_trajectory
from reachgate.model.transforms import quat_to_matrix, rotation_log
from reachgate.version import __version__

#: Bins with a coherence below this are left out of the fit (common practice: 0.8 is a usual
#: floor for trusting a measured frequency response).
COHERENCE_MIN = 0.8
#: The weight γ²/(1 − γ²) is capped here (γ² = 0.999), so a few nearly noise-free bins do not
#: outweigh all others.
COHERENCE_WEIGHT_CAP = 0.999
#: Bins above this fraction of the sampling rate are left out: near the Nyquist frequency the
#: resampling and any anti-alias filtering of the logs shape the response.
FIT_MAX_FRACTION = 0.25
#: At least this many Welch segments (half overlap gives about twice as many averages).
MIN_SEGMENTS = 8
#: The shortest usable log, in samples of the common grid.
MIN_SAMPLES = 512
#: The fit needs at least this many coherent bins.
MIN_BINS = 8
#: Channels whose commanded standard deviation is below this (m or rad) are left out: they
#: carry no motion to compare.
STILL_CHANNEL = 1e-6
#: Delays are searched within ± this much, and within a quarter of a Welch segment.
MAX_DELAY_S = 1.0
#: Time constants of the grid search, s (0, then log-spaced); the polish is continuous.
LAG_GRID_S = np.concatenate([[0.0], np.geomspace(1e-4, 2.0, 90)])
#: Delay grid step as a fraction of the period of the highest fitted frequency.
DELAY_GRID_FRACTION = 1.0 / 16.0
#: Rows of the printed gain and phase table (nearest bins to log-spaced frequencies).
TABLE_ROWS = 16


@dataclass(frozen=True, eq=False)
class Channels:
    """One log as channels: t_s (N,) s; values (N, n) in SI; names (n,); kind 'pose'|'axes'."""

    t_s: np.ndarray
    values: np.ndarray
    names: tuple[str, ...]
    kind: str
    label: str


@dataclass(frozen=True, eq=False)
class DelayEstimate:
    """Delay, lag and bandwidth of a rig, with the measured response they were fitted to.

    Arrays (K,) over the Welch bins from the first above 0 Hz: frequency_hz, response (complex
    H1, NaN where the command has no power), coherence, used (in the fit).
    """

    delay_s: float
    time_constant_s: float
    fit_residual: float
    grid_step_s: float
    commanded_step_s: float
    measured_step_s: float
    duration_s: float
    segment_s: float
    channels: tuple[str, ...]
    kind: str
    commanded: str
    measured: str
    frequency_hz: np.ndarray = field(repr=False)
    response: np.ndarray = field(repr=False)
    coherence: np.ndarray = field(repr=False)
    used: np.ndarray = field(repr=False)
    notes: tuple[str, ...] = ()

    @property
    def bandwidth_hz(self) -> float | None:
        """The lag's -3 dB frequency 1/(2πT); None when no lag was found (T = 0)."""
        return 1.0 / (2.0 * math.pi * self.time_constant_s) if self.time_constant_s > 0 else None

    @property
    def effective_delay_s(self) -> float:
        """τ + T: the delay the rig shows on motion well below its bandwidth, where the lag's
        phase −atan(2πfT) ≈ −2πfT adds T to the pure delay. The value to give `--lag`."""
        return self.delay_s + self.time_constant_s

    @property
    def band_hz(self) -> tuple[float, float]:
        f = self.frequency_hz[self.used]
        return float(f.min()), float(f.max())

    def model_response(self, frequency_hz: np.ndarray) -> np.ndarray:
        """exp(-jωτ)/(1 + jωT) at the given frequencies (complex)."""
        return model_response(frequency_hz, self.delay_s, self.time_constant_s)

    def measured_phase_rad(self) -> np.ndarray:
        """Unwrapped phase of the measured response: the model's phase plus the (small, wrapped)
        angle of measured/model, so no unwrapping across noisy bins can slip a turn."""
        model = self.model_response(self.frequency_hz)
        return model_phase_rad(self.frequency_hz, self.delay_s, self.time_constant_s) + np.angle(
            self.response / model
        )

    def as_dict(self) -> dict:
        def number(value):
            return float(value) if value is not None and math.isfinite(value) else None

        gain = np.abs(self.response)
        phase_deg = np.degrees(self.measured_phase_rad())
        model = self.model_response(self.frequency_hz)
        model_phase = model_phase_rad(self.frequency_hz, self.delay_s, self.time_constant_s)
        lo, hi = self.band_hz
        return {
            "tool_version": __version__,
            "commanded": self.commanded,
            "measured": self.measured,
            "kind": self.kind,
            "channels": list(self.channels),
            "model": "pure delay in series with a first-order lag: exp(-s*delay)/(1 + s*T)",
            "delay_s": self.delay_s,
            "time_constant_s": self.time_constant_s,
            "bandwidth_hz": self.bandwidth_hz,
            "effective_delay_s": self.effective_delay_s,
            "lag_to_use_s": self.effective_delay_s,
            "lag_to_use": "effective delay (delay + time constant)",
            "fit_residual": self.fit_residual,
            "fit_band_hz": [lo, hi],
            "fit_bins": int(self.used.sum()),
            "coherence_min": COHERENCE_MIN,
            "resampling": {
                "method": "linear interpolation onto an even grid",
                "grid_step_s": self.grid_step_s,
                "commanded_median_step_s": self.commanded_step_s,
                "measured_median_step_s": self.measured_step_s,
                "duration_s": self.duration_s,
                "segment_s": self.segment_s,
            },
            "response": [
                {
                    "frequency_hz": float(f),
                    "gain": number(g),
                    "phase_deg": number(p),
                    "model_gain": float(abs(m)),
                    "model_phase_deg": float(np.degrees(model_phase[k])),
                    "coherence": float(c),
                    "used": bool(u),
                }
                for k, (f, g, p, m, c, u) in enumerate(
                    zip(
                        self.frequency_hz,
                        gain,
                        phase_deg,
                        model,
                        self.coherence,
                        self.used,
                        strict=True,
                    )
                )
            ],
            "notes": list(self.notes),
        }

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.as_dict(), indent=indent)


def model_response(frequency_hz, delay_s: float, time_constant_s: float) -> np.ndarray:
    """exp(-jωτ) / (1 + jωT), ω = 2πf, at frequencies (K,) -> complex (K,)."""
    omega = 2.0 * math.pi * np.asarray(frequency_hz, dtype=float)
    return np.exp(-1j * omega * delay_s) / (1.0 + 1j * omega * time_constant_s)


def model_phase_rad(frequency_hz, delay_s: float, time_constant_s: float) -> np.ndarray:
    """The model's continuous phase −ωτ − atan(ωT), rad, at frequencies (K,)."""
    omega = 2.0 * math.pi * np.asarray(frequency_hz, dtype=float)
    return -omega * delay_s - np.arctan(omega * time_constant_s)


# --- reading the logs ----------------------------------------------------------------------


def _is_pose_log(path: Path) -> bool:
    """A pose log (DESIGN §4) has position columns x_m or x_mm; else it is an axis log."""
    if is_columnar(path):
        header = list(column_names(path, str(path)))
    else:
        _, header = read_header(path, str(path))
    return "x_m" in header or "x_mm" in header


def _pose_channels(path: Trajectory, reference_R: np.ndarray, label: str) -> Channels:
    """x, y, z (m) and the rotation vector of reference_Rᵀ·R (rad): (N, 6)."""
    R = quat_to_matrix(path.scenario_q_wxyz)
    rotation = rotation_log(np.swapaxes(reference_R, -1, -2) @ R)
    return Channels(
        t_s=path.t_s,
        values=np.column_stack([path.scenario_p_m, rotation]),
        names=("x", "y", "z", "rx", "ry", "rz"),
        kind="pose",
        label=label,
    )


def _axis_channels(log: JointLog, label: str) -> Channels:
    return Channels(t_s=log.t_s, values=log.values, names=log.names, kind="axes", label=label)


def load_logs(commanded: str | Path, measured: str | Path) -> tuple[Channels, Channels]:
    """Read a commanded and a measured log, both pose logs or both axis logs, as channels in
    the same order. Orientation channels are rotation vectors relative to the first commanded
    orientation (both logs), valid while the orientation stays within π of it."""
    commanded, measured = Path(commanded), Path(measured)
    kinds = [_is_pose_log(p) for p in (commanded, measured)]
    if kinds[0] != kinds[1]:
        pose, axes = (commanded, measured) if kinds[0] else (measured, commanded)
        raise ReachgateError(
            f"{axes}: an axis log (columns <axis>_deg/_m), but {pose} is a pose log; "
            "give both as poses or both as axis values"
        )
    if kinds[0]:
        cmd, meas = load_trajectory(commanded), load_trajectory(measured)
        reference_R = quat_to_matrix(cmd.scenario_q_wxyz[:1])[0]
        return (
            _pose_channels(cmd, reference_R, commanded.name),
            _pose_channels(meas, reference_R, measured.name),
        )
    cmd, meas = load_joint_log(commanded), load_joint_log(measured)
    missing = [n for n in cmd.names if n not in meas.names]
    if missing:
        raise ReachgateError(
            f"{measured}: no column for axis {', '.join(missing)} of {commanded.name}"
        )
    order = [meas.names.index(n) for n in cmd.names]
    meas = JointLog(t_s=meas.t_s, values=meas.values[:, order], names=cmd.names)
    return _axis_channels(cmd, commanded.name), _axis_channels(meas, measured.name)


# --- the estimate ----------------------------------------------------------------------------


def _even_grid(commanded: Channels, measured: Channels) -> tuple[np.ndarray, float, float, float]:
    """(grid (M,), step, commanded median step, measured median step) over the common span."""
    step_c = float(np.median(np.diff(commanded.t_s)))
    step_m = float(np.median(np.diff(measured.t_s)))
    step = max(step_c, step_m)
    start = max(commanded.t_s[0], measured.t_s[0])
    end = min(commanded.t_s[-1], measured.t_s[-1])
    if end <= start:
        raise ReachgateError(
            f"{measured.label}: its times ({measured.t_s[0]:g}..{measured.t_s[-1]:g} s) do not "
            f"overlap those of {commanded.label} ({commanded.t_s[0]:g}..{commanded.t_s[-1]:g} s)"
        )
    count = math.floor((end - start) / step) + 1
    if count < MIN_SAMPLES:
        raise ReachgateError(
            f"{measured.label}: the logs share {end - start:.3g} s, {count} steps of "
            f"{step:.3g} s; the estimate needs at least {MIN_SAMPLES}"
        )
    return start + step * np.arange(count), step, step_c, step_m


def _resampled(channels: Channels, grid: np.ndarray, keep: np.ndarray) -> np.ndarray:
    """Channels linearly interpolated onto the grid: (M, n_kept)."""
    return np.column_stack(
        [np.interp(grid, channels.t_s, channels.values[:, k]) for k in np.flatnonzero(keep)]
    )


def _cross_spectra(u: np.ndarray, y: np.ndarray, fs: float, nperseg: int):
    """Summed over channels: (f (K,), P_uy, P_uu, P_yy), Welch with Hann, half overlap."""
    from scipy import signal

    options = dict(fs=fs, nperseg=nperseg, detrend="linear", axis=0)
    f, p_uy = signal.csd(u, y, **options)
    _, p_uu = signal.welch(u, **options)
    _, p_yy = signal.welch(y, **options)
    return f, p_uy.sum(axis=1), p_uu.sum(axis=1), p_yy.sum(axis=1)


def _relative_error(h, f, delay_s, time_constant_s):
    """H / H_model − 1 for parameter arrays broadcast against f."""
    omega = 2.0 * math.pi * f
    return h * np.exp(1j * omega * delay_s) * (1.0 + 1j * omega * time_constant_s) - 1.0


def _fit(f: np.ndarray, h: np.ndarray, weight: np.ndarray, bin_hz: float, max_delay_s: float):
    """(τ, T, weighted RMS relative error) minimising Σ w·|H/H_model − 1|².

    f (K,) are Welch bins, whole multiples of bin_hz; h (K,) complex; weight (K,).
    """
    from scipy.optimize import least_squares

    omega = 2.0 * math.pi * f
    # Σ w|a e^{jωτ} − 1|² = Σ w(|a|² + 1) − 2 Re Σ w a e^{jωτ}, a = H (1 + jωT). On bins
    # f = k·bin_hz the last sum over every τ = n / (L·bin_hz) is one inverse FFT of length L.
    a = h[:, None] * (1.0 + 1j * omega[:, None] * LAG_GRID_S[None, :])  # (K, G)
    index = np.rint(f / bin_hz).astype(int)
    length = 1 << math.ceil(math.log2(index.max() / DELAY_GRID_FRACTION))
    spread = np.zeros((length, LAG_GRID_S.size), dtype=complex)
    spread[index] = weight[:, None] * a
    cross = length * np.fft.ifft(spread, axis=0)  # (L, G): τ_n = n / (L·bin_hz), n mod L
    delays = np.fft.fftfreq(length, d=bin_hz)  # n / (L·bin_hz), the upper half as negative
    inside = np.abs(delays) <= max_delay_s
    delays, cross = delays[inside], cross[inside]
    step = 1.0 / (length * bin_hz)
    cost = (weight[:, None] * (np.abs(a) ** 2 + 1.0)).sum(axis=0)[None, :] - 2.0 * cross.real
    d, g = np.unravel_index(int(np.argmin(cost)), cost.shape)
    root_w = np.sqrt(weight)

    def residuals(params):
        e = _relative_error(h, f, params[0], params[1]) * root_w
        return np.concatenate([e.real, e.imag])

    start = np.array([delays[d], max(LAG_GRID_S[g], 1e-6)])
    solution = least_squares(
        residuals,
        start,
        bounds=([delays[d] - 2 * step, 0.0], [delays[d] + 2 * step, np.inf]),
        x_scale=[step, max(start[1], step)],
    )
    tau, lag = (float(v) for v in solution.x)
    rms = math.sqrt(float(np.sum(solution.fun**2)) / float(weight.sum()))
    return tau, lag, rms


def estimate_delay(commanded: Channels, measured: Channels) -> DelayEstimate:
    """Fit the delay-plus-lag model to how `measured` follows `commanded` (module docstring)."""
    grid, step, step_c, step_m = _even_grid(commanded, measured)
    spread = commanded.values.std(axis=0)
    keep = spread >= STILL_CHANNEL
    if not keep.any():
        raise ReachgateError(f"{commanded.label}: the command does not move; nothing to compare")
    scale = spread[keep]
    u = _resampled(commanded, grid, keep) / scale
    y = _resampled(measured, grid, keep) / scale
    fs = 1.0 / step
    nperseg = 1 << math.floor(math.log2(grid.size / MIN_SEGMENTS))
    f, p_uy, p_uu, p_yy = _cross_spectra(u, y, fs, nperseg)
    f, p_uy, p_uu, p_yy = f[1:], p_uy[1:], p_uu[1:], p_yy[1:]  # no 0 Hz bin (detrended)
    powered = (p_uu > 0) & (p_yy > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.where(powered, p_uy / np.where(powered, p_uu, 1.0), np.nan + 0j)
        coherence = np.where(powered, np.abs(p_uy) ** 2 / (p_uu * p_yy), 0.0)
    used = powered & (coherence >= COHERENCE_MIN) & (f <= FIT_MAX_FRACTION * fs)
    if used.sum() < MIN_BINS:
        raise ReachgateError(
            f"{measured.label}: only {int(used.sum())} frequency bins where the measured motion "
            f"follows the command (coherence >= {COHERENCE_MIN}); the fit needs {MIN_BINS}: "
            "is it the log of the same run, and does the command move enough?"
        )
    gamma2 = np.minimum(coherence[used], COHERENCE_WEIGHT_CAP)
    weight = gamma2 / (1.0 - gamma2)
    max_delay = min(MAX_DELAY_S, nperseg * step / 4.0)
    tau, lag, rms = _fit(f[used], h[used], weight, fs / nperseg, max_delay)
    notes = []
    if len(scale) < len(spread):
        still = [n for n, k in zip(commanded.names, keep, strict=True) if not k]
        notes.append(f"channels left out (the command does not move them): {', '.join(still)}")
    f_hi = float(f[used].max())
    if lag > 0 and 1.0 / (2 * math.pi * lag) > f_hi:
        notes.append(
            f"the bandwidth lies above the highest coherent frequency ({f_hi:.3g} Hz): it is "
            "extrapolated; a command with faster motion would pin it down"
        )
    if lag == 0:
        notes.append("no lag measurable: the response fits a pure delay")
    if tau < 0:
        notes.append(
            "the measured log leads the command: the two logs' clocks differ; align them first"
        )
    return DelayEstimate(
        delay_s=tau,
        time_constant_s=lag,
        fit_residual=rms,
        grid_step_s=step,
        commanded_step_s=step_c,
        measured_step_s=step_m,
        duration_s=float(grid[-1] - grid[0]),
        segment_s=nperseg * step,
        channels=tuple(n for n, k in zip(commanded.names, keep, strict=True) if k),
        kind=commanded.kind,
        commanded=commanded.label,
        measured=measured.label,
        frequency_hz=f,
        response=h,
        coherence=coherence,
        used=used,
        notes=tuple(notes),
    )


def estimate_delay_from_files(commanded: str | Path, measured: str | Path) -> DelayEstimate:
    """load_logs then estimate_delay: the `delay` command's one library call."""
    return estimate_delay(*load_logs(commanded, measured))
