"""Disturbance cases from a nominal path: Dryden turbulence (MIL-F-8785C) and a washout model.

Turbulence (published model): the MIL-F-8785C Dryden form at low altitude (h <= 1000 ft),
scale lengths and intensities from the altitude, spectra and white-noise shaping filters for
the gust velocities u, v, w and the gust angular rates p, q, r. The standard states its
formulas in ft and kt; these are converted at the boundary (``FT_M``, ``KT_M_S``) and every
value that leaves this module is SI.

Spectrum convention: functions of the temporal circular frequency ω in rad/s (the spatial
frequency Ω = ω / V through the frozen-field assumption), one-sided, so that
∫_0^∞ Φ(ω) dω = σ². A shaping filter H(s) has |H(jω)|² = Φ(ω) when driven by continuous
white noise of two-sided intensity π (E[n(t) n(t')] = π δ(t - t')).

Displacement (our model, not part of the standard): the vehicle moves with the gust velocity,
held back by a first-order station-keeping washout, dx/dt = v_gust - x / washout_s, and its
attitude moves with the gust rates the same way, dθ/dt = ω_gust - θ / washout_s. Gust axes
u, v, w are scenario x, y, z; rates p, q, r turn about scenario x, y, z; the small rotation
vector θ is applied as a rotation composed onto the nominal orientation, scenario side:
R_case = Exp(θ) · R_nominal. The altitude and airspeed are fixed per case.

Discretisation: filters and washout form one linear stochastic system per gust channel,
discretised exactly for every time step of the nominal path (Van Loan's method), so uneven
sampling is honoured without a resampling grid. The step recursion is run as a parallel
prefix scan over whole arrays. Each case starts on the nominal pose (washout states zero)
inside already-developed turbulence (filter states drawn from their stationary law).
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.linalg import expm, solve_continuous_lyapunov
from scipy.signal import ss2tf

from reachgate.errors import ReachgateError
from reachgate.trajectory import Trajectory, write_trajectory

FT_M = 0.3048  # metres per international foot (exact by definition)
KT_M_S = 1852.0 / 3600.0  # m/s per knot (international nautical mile, exact)
LOW_ALTITUDE_MAX_M = 1000.0 * FT_M  # MIL-F-8785C low-altitude model: h below 1000 ft
W20_KT = {"light": 15.0, "moderate": 30.0, "severe": 45.0}  # MIL-F-8785C wind at 20 ft, kt

# Defaults (ours, chosen for the demo scenario: a small drone mock-up approaching a roof pad).
DEFAULT_AIRSPEED_M_S = 10.0
DEFAULT_ALTITUDE_M = 10.0
DEFAULT_WASHOUT_S = 0.5
DEFAULT_WINGSPAN_M = 0.5  # span b of the rate filters; a small drone's span (ours)

WHITE_NOISE_INTENSITY = math.pi  # two-sided intensity giving |H(jω)|² = one-sided Φ(ω)
# Steps equal to within this are discretised once: a 1 ns change of a step moves nothing
# measurable, and evenly sampled paths (whose float steps differ in the last bits) then
# need one matrix exponential instead of one per sample.
STEP_QUANTUM_S = 1e-9


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
    _require_positive("airspeed", airspeed_m_s, "m/s")
    _require_positive("wingspan", wingspan_m, "m")
    _require_positive("altitude", altitude_m, "m")
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


def _require_positive(option: str, value, unit: str) -> None:
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


@dataclass(frozen=True)
class _Channel:
    """One linear stochastic system: dx = a x dt + b dn, outputs gust = c x, washout states."""

    a: np.ndarray  # (n, n)
    b: np.ndarray  # (n,) noise gain
    c: np.ndarray  # (k, n) gust outputs (velocity m/s or rate rad/s)
    n_filter: int  # the first n_filter states are the shaping filter; the rest the washout
    outputs: tuple[str, ...]  # names of the k gust outputs, e.g. ("v", "r")


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


def _channels(s: DrydenSettings, washout_s: float) -> dict[str, _Channel]:
    """The four independent channels: u; v with r; w with q; p (MIL-F-8785C filters).

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
    parts = {
        "u": _first_order(gain_u, s.scale_u_m / v),
        "vr": _lateral(gain_v, s.scale_v_m / v, tr, -1.0, v),
        "wq": _lateral(gain_w, s.scale_w_m / v, tq, +1.0, v),
        "p": _first_order(gain_p, tp),
    }
    channels = {}
    for name, (a_f, b_f, c_f) in parts.items():
        m, k = a_f.shape[0], c_f.shape[0]
        a = np.zeros((m + k, m + k))
        a[:m, :m], a[m:, :m], a[m:, m:] = a_f, c_f, -np.eye(k) / washout_s
        b = np.concatenate([b_f, np.zeros(k)])
        channels[name] = _Channel(a, b, np.hstack([c_f, np.zeros((k, k))]), m, tuple(name))
    return channels


def shaping_filters(settings: DrydenSettings) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Transfer functions (num, den), coefficients in s highest power first, from white noise
    of intensity π to each gust signal "u", "v", "w" (m/s) and "p", "q", "r" (rad/s).

    These are the realisations the simulation runs (q and r include the v, w filters).
    """
    out = {}
    for ch in _channels(settings, washout_s=1.0).values():
        m = ch.n_filter
        for row, signal in enumerate(ch.outputs):
            num, den = ss2tf(ch.a[:m, :m], ch.b[:m, None], ch.c[row : row + 1, :m], 0.0)
            out[signal] = (np.trim_zeros(num[0], "f"), den)
    return {key: out[key] for key in "uvwpqr"}


# --- exact discretisation and simulation ----------------------------------------------


def _psd_sqrt(q: np.ndarray) -> np.ndarray:
    """A factor L with L Lᵀ = q for symmetric positive semidefinite q ``(..., n, n)``.

    Eigen-factor (robust where Cholesky fails on nearly singular short-step covariances), with
    each eigenvector's sign fixed so its largest entry is positive: a scaled q gives a scaled L.
    """
    lam, vec = np.linalg.eigh(0.5 * (q + np.swapaxes(q, -1, -2)))
    pivot = np.take_along_axis(vec, np.argmax(np.abs(vec), axis=-2)[..., None, :], axis=-2)
    vec = vec * np.where(pivot < 0, -1.0, 1.0)
    return vec * np.sqrt(np.clip(lam, 0.0, None))[..., None, :]


def _discretise(ch: _Channel, dt_s: np.ndarray):
    """Exact maps for steps dt ``(M,)`` s: transitions ``(M, n, n)``, noise factors ``(M, n, n)``.

    Van Loan: expm([[-A, Qc], [0, Aᵀ]] dt) = [[., F12], [0, F22]], Ad = F22ᵀ, Qd = F22ᵀ F12.
    """
    n = ch.a.shape[0]
    qc = WHITE_NOISE_INTENSITY * np.outer(ch.b, ch.b)
    block = np.zeros((2 * n, 2 * n))
    block[:n, :n], block[:n, n:], block[n:, n:] = -ch.a, qc, ch.a.T
    f = expm(block[None] * dt_s[:, None, None])
    ad = np.swapaxes(f[:, n:, n:], -1, -2)
    return ad, _psd_sqrt(ad @ f[:, :n, n:])


def _propagate(ad: np.ndarray, w: np.ndarray, x0: np.ndarray) -> np.ndarray:
    """States of x[k+1] = ad[k] x[k] + w[k] from x0 ``(n,)``: ad ``(N-1, n, n)``, w ``(N-1, n)``
    -> ``(N, n)``. Inclusive prefix scan of the affine step maps, log2(N) whole-array passes.
    """
    a, a_next = ad.copy(), np.empty_like(ad)
    b = w[:, :, None].copy()
    offset = 1
    while offset < len(a):
        b[offset:] += a[offset:] @ b[:-offset]
        np.matmul(a[offset:], a[:-offset], out=a_next[offset:])
        a_next[:offset] = a[:offset]
        a, a_next = a_next, a
        offset *= 2
    return np.vstack([x0, a @ x0 + b[:, :, 0]])


@dataclass(frozen=True)
class GustResponse:
    """Gusts and the washout response on a time base of N samples, axes scenario x, y, z.

    gust_m_s (N, 3) u, v, w; rate_rad_s (N, 3) p, q, r; displacement_m (N, 3) and
    angle_rad (N, 3): the washout-integrated gusts and rates (our model).
    """

    gust_m_s: np.ndarray
    rate_rad_s: np.ndarray
    displacement_m: np.ndarray
    angle_rad: np.ndarray


class _Prepared:
    """Step maps for one time base and settings, shared by every case drawn on it."""

    def __init__(self, t_s: np.ndarray, s: DrydenSettings, washout_s: float):
        dt = np.diff(np.asarray(t_s, dtype=float))
        steps, self.index = np.unique(np.round(dt / STEP_QUANTUM_S), return_inverse=True)
        self.channels = _channels(s, washout_s)
        self.maps = {}
        for name, ch in self.channels.items():
            m = ch.n_filter
            qc = WHITE_NOISE_INTENSITY * np.outer(ch.b[:m], ch.b[:m])
            p0 = solve_continuous_lyapunov(ch.a[:m, :m], -qc)  # stationary filter states
            ad, ld = _discretise(ch, steps * STEP_QUANTUM_S)
            self.maps[name] = (ad[self.index], ld[self.index], _psd_sqrt(p0))

    def draw(self, rng: np.random.Generator) -> GustResponse:
        """One realisation; the draws come in a fixed order, so a seed fixes every bit."""
        out = {}
        for name, ch in self.channels.items():
            ad, ld, l0 = self.maps[name]
            n, m = ch.a.shape[0], ch.n_filter
            x0 = np.zeros(n)
            x0[:m] = l0 @ rng.standard_normal(m)
            w = (ld @ rng.standard_normal((len(ad), n, 1)))[:, :, 0]
            x = _propagate(ad, w, x0)
            out[name] = (x @ ch.c.T, x[:, m:])
        (u, dx), (vr, dvr), (wq, dwq), (p, dp) = out["u"], out["vr"], out["wq"], out["p"]
        return GustResponse(
            gust_m_s=np.column_stack([u[:, 0], vr[:, 0], wq[:, 0]]),
            rate_rad_s=np.column_stack([p[:, 0], wq[:, 1], vr[:, 1]]),
            displacement_m=np.column_stack([dx[:, 0], dvr[:, 0], dwq[:, 0]]),
            angle_rad=np.column_stack([dp[:, 0], dwq[:, 1], dvr[:, 1]]),
        )


def dryden_response(
    t_s: np.ndarray, settings: DrydenSettings, washout_s: float, seed: int
) -> GustResponse:
    """Gusts and washout response at the times t_s ``(N,)`` (strictly increasing, s).

    The random stream is numpy.random.Generator(PCG64(seed)): same seed, same bits.
    """
    _require_positive("washout", washout_s, "s")
    rng = np.random.Generator(np.random.PCG64(seed))
    return _Prepared(t_s, settings, washout_s).draw(rng)


# --- disturbance cases ------------------------------------------------------------------


def _rotvec_to_quat(rotvec: np.ndarray) -> np.ndarray:
    """Unit quaternions (scalar-first) of rotation vectors ``(N, 3)`` rad -> ``(N, 4)``."""
    angle = np.linalg.norm(rotvec, axis=-1)
    half_sinc = 0.5 * np.sinc(angle / (2 * math.pi))  # sin(angle/2)/angle, exact at 0
    return np.column_stack([np.cos(0.5 * angle), rotvec * half_sinc[:, None]])


def _quat_multiply(q1: np.ndarray, q2: np.ndarray) -> np.ndarray:
    """Hamilton products q1 ⊗ q2 of scalar-first quaternions ``(N, 4)``."""
    w1, v1, w2, v2 = q1[:, :1], q1[:, 1:], q2[:, :1], q2[:, 1:]
    return np.hstack([w1 * w2 - np.sum(v1 * v2, axis=1, keepdims=True),
                      w1 * v2 + w2 * v1 + np.cross(v1, v2)])  # fmt: skip


def _is_whole(value) -> bool:
    return isinstance(value, numbers.Integral) and not isinstance(value, bool)


def _tool_version() -> str:
    import reachgate

    version = getattr(reachgate, "__version__", None)
    if version is None:
        from importlib.metadata import version as package_version

        version = package_version("reachgate")
    return str(version)


@dataclass(frozen=True)
class DisturbanceCase:
    """One disturbance case: the perturbed path, the seed of its own random stream, and the
    settings that made it (``settings`` dict; ``header_lines`` renders them for the file)."""

    trajectory: Trajectory
    case_seed: int
    settings: dict

    @property
    def header_lines(self) -> tuple[str, ...]:
        return tuple(f"{key} = {value}" for key, value in self.settings.items())


def make_disturbance_cases(
    nominal: Trajectory,
    count: int,
    seed: int,
    *,
    intensity: str | None = "moderate",
    sigma_m_s: float | None = None,
    airspeed_m_s: float = DEFAULT_AIRSPEED_M_S,
    altitude_m: float = DEFAULT_ALTITUDE_M,
    washout_s: float = DEFAULT_WASHOUT_S,
    wingspan_m: float = DEFAULT_WINGSPAN_M,
) -> list[DisturbanceCase]:
    """count disturbance cases of the nominal path, numbered 1..count.

    Case i draws from Generator(PCG64(case_seed)) where case_seed comes from
    SeedSequence(seed, spawn_key=(i,)): cases are independent, and case i is the same whatever
    count is. intensity ("light" | "moderate" | "severe") or sigma_m_s (σw in m/s, then pass
    intensity=None) sets the gust strength. Raises ReachgateError naming the bad option.
    """
    if not _is_whole(count) or count < 1:
        raise ReachgateError(f"count must be a whole number >= 1, got {count!r}")
    if not _is_whole(seed) or seed < 0:
        raise ReachgateError(f"seed must be a whole number >= 0, got {seed!r}")
    _require_positive("washout", washout_s, "s")
    s = dryden_settings(
        altitude_m, airspeed_m_s, intensity=intensity, sigma_m_s=sigma_m_s, wingspan_m=wingspan_m
    )
    prepared = _Prepared(nominal.t_s, s, washout_s)
    common = {
        "made_by": f"reachgate {_tool_version()} perturb",
        "model": "Dryden, MIL-F-8785C low altitude; washout displacement (reachgate's own)",
        "nominal": nominal.name,
        "seed": seed,
        "count": count,
        "intensity": s.intensity if s.intensity is not None else "none (sigma given)",
        "sigma_u_m_s": s.sigma_u_m_s, "sigma_v_m_s": s.sigma_v_m_s, "sigma_w_m_s": s.sigma_w_m_s,
        "scale_u_m": s.scale_u_m, "scale_v_m": s.scale_v_m, "scale_w_m": s.scale_w_m,
        "airspeed_m_s": s.airspeed_m_s, "altitude_m": s.altitude_m,
        "washout_s": float(washout_s), "wingspan_m": s.wingspan_m,
        "gust_axes": "u v w along scenario x y z; p q r about scenario x y z",
    }  # fmt: skip
    q_nominal = nominal.scenario_q_wxyz
    cases = []
    for index in range(1, count + 1):
        state = np.random.SeedSequence(seed, spawn_key=(index,)).generate_state(2, np.uint32)
        case_seed = int(state[0]) << 32 | int(state[1])
        response = prepared.draw(np.random.Generator(np.random.PCG64(case_seed)))
        trajectory = Trajectory.from_arrays(
            nominal.t_s,
            nominal.scenario_p_m + response.displacement_m,
            _quat_multiply(_rotvec_to_quat(response.angle_rad), q_nominal),
            name=f"{nominal.name} case {index}",
        )
        settings = {**common, "case": index, "case_seed": case_seed}
        cases.append(DisturbanceCase(trajectory, case_seed, settings))
    return cases


def write_disturbance_cases(
    cases: list[DisturbanceCase], out_dir: str | Path, stem: str
) -> list[Path]:
    """Write cases as ``out_dir/stem_0001.csv`` ... (numbered by case), header comments first."""
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    width = max(4, len(str(max((c.settings["case"] for c in cases), default=1))))
    paths = []
    for case in cases:
        path = out_dir / f"{stem}_{case.settings['case']:0{width}d}.csv"
        write_trajectory(path, case.trajectory, comments=case.header_lines)
        paths.append(path)
    return paths
