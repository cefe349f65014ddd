"""The Dryden turbulence model of MIL-F-8785C at low altitude (h <= 1000 ft).

Scale lengths and intensities from the altitude, the spectra of the gust velocities u, v, w
and of the gust angular rates p, q, r, and their white-noise shaping filters. The standard
states its formulas in ft and kt; these are converted at the boundary (``FT_M``, ``KT_M_S``)
and every value that leaves this module is SI.

Spectrum convention: functions of the temporal circular frequency ω in rad/s (the spatial
frequency Ω = ω / V through the frozen-field assumption), one-sided, so that
∫_0^∞ Φ(ω) dω = σ². A shaping filter H(s) has |H(jω)|² = Φ(ω) when driven by continuous
white noise of two-sided intensity π (E[n(t) n(t')] = π δ(t - t')).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.signal import ss2tf

from reachgate.errors import ReachgateError

FT_M = 0.3048  # metres per international foot (exact by definition)
KT_M_S = 1852.0 / 3600.0  # m/s per knot (international nautical mile, exact)
LOW_ALTITUDE_MAX_M = 1000.0 * FT_M  # MIL-F-8785C low-altitude model: h below 1000 ft
W20_KT = {"light": 15.0, "moderate": 30.0, "severe": 45.0}  # MIL-F-8785C wind at 20 ft, kt

# Defaults (ours, chosen for the demo scenario: a small drone mock-up approaching a roof pad).
DEFAULT_AIRSPEED_M_S = 10.0
DEFAULT_ALTITUDE_M = 10.0
DEFAULT_WINGSPAN_M = 0.5  # span b of the rate filters; a small drone's span (ours)
WHITE_NOISE_INTENSITY = math.pi  # two-sided intensity giving |H(jω)|² = one-sided Φ(ω)


# --- MIL-F-8785C low-altitude parameters ------------------------------------------------


def _altitude_term(altitude_m):
    return 0.177 + 0.000823 * (np.asarray(altitude_m, dtype=float) / FT_M)


def low_altitude_scale_lengths_m(altitude_m):
    """MIL-F-8785C low-altitude scale lengths (Lu, Lv, Lw) in m for altitude h in m.

    Lu = Lv = h / (0.177 + 0.000823 h)^1.2 and Lw = h, with h in ft inside the formula.
    Accepts floats or arrays of any shape.
    """
    h_ft = np.asarray(altitude_m, dtype=float) / FT_M
    lu_ft = h_ft / _altitude_term(altitude_m) ** 1.2
    return lu_ft * FT_M, lu_ft * FT_M, h_ft * FT_M


def low_altitude_sigma_ratio(altitude_m):
    """MIL-F-8785C low altitude: σu/σw = σv/σw = 1 / (0.177 + 0.000823 h)^0.4, h in ft inside."""
    return 1.0 / _altitude_term(altitude_m) ** 0.4


@dataclass(frozen=True)
class DrydenSettings:
    """Parameters of one Dryden field, SI: intensities σ in m/s, scale lengths L in m."""

    altitude_m: float
    airspeed_m_s: float
    wingspan_m: float
    sigma_u_m_s: float
    sigma_v_m_s: float
    sigma_w_m_s: float
    scale_u_m: float
    scale_v_m: float
    scale_w_m: float
    intensity: str | None  # "light" | "moderate" | "severe", or None when σw was given


def dryden_settings(
    altitude_m: float = DEFAULT_ALTITUDE_M,
    airspeed_m_s: float = DEFAULT_AIRSPEED_M_S,
    *,
    intensity: str | None = "moderate",
    sigma_m_s: float | None = None,
    wingspan_m: float = DEFAULT_WINGSPAN_M,
) -> DrydenSettings:
    """Dryden settings from the altitude, airspeed and either a named intensity or σw.

    intensity sets σw = 0.1 · W20 (MIL-F-8785C); sigma_m_s gives σw in m/s directly. Either
    way σu = σv = σw · low_altitude_sigma_ratio(h). Raises ReachgateError naming the option.
    """
    require_positive("airspeed", airspeed_m_s, "m/s")
    require_positive("wingspan", wingspan_m, "m")
    require_positive("altitude", altitude_m, "m")
    if altitude_m > LOW_ALTITUDE_MAX_M:
        raise ReachgateError(
            f"altitude must be at most {LOW_ALTITUDE_MAX_M:g} m (1000 ft, the low-altitude "
            f"Dryden model), got {altitude_m!r}"
        )
    if (intensity is None) == (sigma_m_s is None):
        raise ReachgateError("give the gust strength once: intensity or sigma, not both or none")
    if intensity is not None:
        if intensity not in W20_KT:
            raise ReachgateError(f"intensity must be one of {', '.join(W20_KT)}, got {intensity!r}")
        sigma_w = 0.1 * W20_KT[intensity] * KT_M_S
    else:
        if not (isinstance(sigma_m_s, int | float) and math.isfinite(sigma_m_s) and sigma_m_s >= 0):
            raise ReachgateError(f"sigma must be a finite number >= 0 m/s, got {sigma_m_s!r}")
        sigma_w = float(sigma_m_s)
    ratio = float(low_altitude_sigma_ratio(altitude_m))
    lu, lv, lw = (float(v) for v in low_altitude_scale_lengths_m(altitude_m))
    return DrydenSettings(
        float(altitude_m), float(airspeed_m_s), float(wingspan_m),
        sigma_w * ratio, sigma_w * ratio, sigma_w, lu, lv, lw, intensity,
    )  # fmt: skip


def require_positive(option: str, value, unit: str) -> None:
    """Raise ReachgateError naming the option unless value is a finite number > 0."""
    if not (isinstance(value, int | float) and math.isfinite(value) and value > 0):
        raise ReachgateError(f"{option} must be a positive number of {unit}, got {value!r}")


# --- spectra and shaping filters -------------------------------------------------------


def dryden_psd(omega_rad_s: np.ndarray, settings: DrydenSettings) -> np.ndarray:
    """MIL-F-8785C Dryden spectra Φu, Φv, Φw, one-sided in ω (rad/s). ``(N,)`` -> ``(N, 3)``.

    Φu = σu² (2 Lu / πV) / (1 + (Lu ω/V)²); Φv,w = σ² (L / πV) (1 + 3 (Lω/V)²) / (1 + (Lω/V)²)².
    Units (m/s)² per rad/s.
    """
    v = settings.airspeed_m_s
    length = np.array([settings.scale_u_m, settings.scale_v_m, settings.scale_w_m])
    sig2 = np.array([settings.sigma_u_m_s, settings.sigma_v_m_s, settings.sigma_w_m_s]) ** 2
    x = np.asarray(omega_rad_s, dtype=float)[:, None] * length / v
    shape = (1.0 + 3.0 * x**2) / (1.0 + x**2) ** 2  # v and w
    shape[:, 0] = 2.0 / (1.0 + x[:, 0] ** 2)  # u
    return sig2 * length / (math.pi * v) * shape


def _rate_time_constants_s(settings: DrydenSettings) -> tuple[float, float, float]:
    """Time constants of the p, q, r filters: 4b/πV, 4b/πV, 3b/πV (MIL-F-8785C)."""
    b, v = settings.wingspan_m, settings.airspeed_m_s
    return 4 * b / (math.pi * v), 4 * b / (math.pi * v), 3 * b / (math.pi * v)


def dryden_rate_psd(omega_rad_s: np.ndarray, settings: DrydenSettings) -> np.ndarray:
    """MIL-F-8785C gust-rate spectra Φp, Φq, Φr, one-sided in ω. ``(N,)`` -> ``(N, 3)``, rad²/s.

    Φp = (σw² / V) · 0.8 (π/4b)^(1/3) / Lw^(2/3) / (1 + (4bω/πV)²);
    Φq = (ω/V)² / (1 + (4bω/πV)²) · Φw;  Φr = (ω/V)² / (1 + (3bω/πV)²) · Φv.
    """
    s = settings
    w = np.asarray(omega_rad_s, dtype=float)
    tp, tq, tr = _rate_time_constants_s(s)
    v, b = s.airspeed_m_s, s.wingspan_m
    gust = dryden_psd(w, s)
    phi_p = s.sigma_w_m_s**2 * 0.8 / v * (math.pi / (4 * b)) ** (1 / 3) / s.scale_w_m ** (2 / 3)
    phi_p = phi_p / (1.0 + (tp * w) ** 2)
    phi_q = (w / v) ** 2 / (1.0 + (tq * w) ** 2) * gust[:, 2]
    phi_r = (w / v) ** 2 / (1.0 + (tr * w) ** 2) * gust[:, 1]
    return np.stack([phi_p, phi_q, phi_r], axis=-1)


def _first_order(gain: float, tau_s: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """gain / (1 + tau s) as (a, b, c)."""
    return np.array([[-1.0 / tau_s]]), np.array([gain / tau_s]), np.array([[1.0]])


def _lateral(gain: float, tau_s: float, rate_tau_s: float, rate_sign: float, v: float):
    """gain (1 + √3 tau s) / (1 + tau s)², then the rate filter ±(s/V) / (1 + rate_tau s).

    States [z, dz/dt, f]: (1 + tau s)² z = gain·n, gust = z + √3 tau dz/dt, f the rate lag.
    """
    t2, tr = tau_s**2, rate_tau_s
    gust = np.array([1.0, math.sqrt(3.0) * tau_s, 0.0])
    a = np.array([[0.0, 1.0, 0.0], [-1.0 / t2, -2.0 / tau_s, 0.0], [0.0, 0.0, -1.0 / tr]])
    a[2, :2] += gust[:2] / tr
    rate = rate_sign * (gust - np.array([0.0, 0.0, 1.0])) / (v * tr)
    return a, np.array([0.0, gain / t2, 0.0]), np.stack([gust, rate])


def shaping_parts(s: DrydenSettings) -> dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """State-space shaping filters (a, b, c) of the four independent channels: "u"; "vr" (v
    and r); "wq" (w and q); "p". Driven by white noise of intensity π, output rows c give the
    gust velocities (m/s) and rates (rad/s) with the MIL-F-8785C spectra.

    Signs: q = +(s/V)/(1 + 4bs/πV) · w and r = -(s/V)/(1 + 3bs/πV) · v (the standard's upper
    signs); signs do not change any spectrum.
    """
    v = s.airspeed_m_s
    tp, tq, tr = _rate_time_constants_s(s)
    gain_u = s.sigma_u_m_s * math.sqrt(2 * s.scale_u_m / (math.pi * v))
    gain_v = s.sigma_v_m_s * math.sqrt(s.scale_v_m / (math.pi * v))
    gain_w = s.sigma_w_m_s * math.sqrt(s.scale_w_m / (math.pi * v))
    gain_p = (s.sigma_w_m_s * math.sqrt(0.8 / v) * (math.pi / (4 * s.wingspan_m)) ** (1 / 6)
              / s.scale_w_m ** (1 / 3))  # fmt: skip
    return {
        "u": _first_order(gain_u, s.scale_u_m / v),
        "vr": _lateral(gain_v, s.scale_v_m / v, tr, -1.0, v),
        "wq": _lateral(gain_w, s.scale_w_m / v, tq, +1.0, v),
        "p": _first_order(gain_p, tp),
    }


def shaping_filters(settings: DrydenSettings) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Transfer functions (num, den), coefficients in s highest power first, from white noise
    of intensity π to each gust signal "u", "v", "w" (m/s) and "p", "q", "r" (rad/s).

    These are the realisations the simulation runs (q and r include the v, w filters).
    """
    out = {}
    for name, (a, b, c) in shaping_parts(settings).items():
        for row, signal in enumerate(name):
            num, den = ss2tf(a, b[:, None], c[row : row + 1], 0.0)
            out[signal] = (np.trim_zeros(num[0], "f"), den)
    return {key: out[key] for key in "uvwpqr"}
