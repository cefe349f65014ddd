"""Disturbance cases from a nominal path: Dryden turbulence (MIL-F-8785C), a vehicle response
and a washout model.

Turbulence (published model): the MIL-F-8785C low-altitude Dryden gust velocities u, v, w
and rates p, q, r from their white-noise shaping filters (module dryden, which states the
spectrum convention). Everything here is SI.

Vehicle response and displacement (our simple model, not part of the standard): the body
does not follow the gust at once. Its gust-driven velocity is the gust velocity through a
critically damped second-order low-pass H(s) = ωn² / (s + ωn)², ωn = 2π response_hz (two
equal first-order stages), and a first-order station-keeping washout holds the displacement
back: dx/dt = v_body - x / washout_s. The attitude follows the gust rates the same way,
dθ/dt = ω_body - θ / washout_s. Gust velocity to displacement thus rolls off as ω⁻³, the
order finite jerk needs: the gust spectra fall as ω⁻², so the case's velocity, acceleration
and jerk spectra fall as ω⁻⁶, ω⁻⁴ and ω⁻², all integrable and independent of the sampling
rate. (With no response, acceleration is white and its sampled std grows as √rate; with one
stage, jerk is.) The jerk is then as rough as the gust velocity: finite, not differentiable.
Gust axes u, v, w are scenario x, y, z; rates p, q, r turn about scenario x, y, z; the small
rotation vector θ is composed onto the nominal orientation, scenario side:
R_case = Exp(θ) · R_nominal. The altitude and airspeed are fixed per case.

Discretisation: filters, response and washout form one linear stochastic system per gust
channel, discretised exactly for every time step of the nominal path (Van Loan, in
exact_steps), so uneven sampling is honoured without a resampling grid; the recursion runs
as a parallel prefix scan. Every state starts from its stationary law. A case is the nominal
plus fade_in_out(t) times the response (ours), so it starts and ends on the nominal pose,
speed, acceleration and jerk: the rig starts a case from the nominal's state and brings it to
the nominal's end (at rest, for a nominal that ends at rest, as `check --ends rest` asks),
and the rail's follow filter starts at rest. (Zero initial response states instead would
switch the gust on at t = 0, a jerk of ωn² times the gust velocity.)
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np
from scipy.linalg import solve_continuous_lyapunov
from scipy.signal import ss2tf

from reachgate.errors import ReachgateError
from reachgate.model.trajectory import PLAIN_BODY, Scenario, Trajectory
from reachgate.motion.dryden import (
    DEFAULT_AIRSPEED_M_S,
    DEFAULT_ALTITUDE_M,
    DEFAULT_WINGSPAN_M,
    WHITE_NOISE_INTENSITY,
    DrydenSettings,
    dryden_settings,
    require_positive,
    shaping_parts,
)
from reachgate.motion.exact_steps import propagate, psd_factor, step_maps
from reachgate.version import __version__

# Vehicle response (ours): a small winged drone's heave lag behind a vertical gust is about
# τ = 2m / (ρ S V CLα) (flight-mechanics formula, from memory) ≈ 0.5 s for m = 1.5 kg,
# S = 0.12 m², V = 10 m/s, CLα = 4 /rad (invented figures), a -3 dB point near 0.3 Hz;
# the two stages at 0.5 Hz put theirs at 0.64 · 0.5 = 0.32 Hz. Measured on the demo arm
# (approach_calm, 20 light cases, check --rail follow): 1.5 Hz fails all 20 on joint jerk.
DEFAULT_RESPONSE_HZ = 0.5
# Station keeping (ours, for the demo): displacement ≈ washout × slow gust velocity. With
# 0.2 s, 18 of 20 light cases of the demo approach pass on the demo arm; with 0.5 s, 1 of 20
# (joint range j2, branch changes and wrist-singularity j4/j6 motion).
DEFAULT_WASHOUT_S = 0.2
# The disturbance fades in over this time from the path's start and out over the same time
# before its end (fade_in_out), so a case has no step in speed at either end. 2 s spans a
# response period and ten washout times; the fade's own derivative terms stay well below the
# gusts' (ours).
FADE_IN_S = 2.0

# Steps equal to within this are discretised once: a 1 ns change of a step moves nothing
# measurable, and evenly sampled paths (whose float steps differ in the last bits) then
# need one matrix exponential instead of one per sample.
STEP_QUANTUM_S = 1e-9


@dataclass(frozen=True)
class _Channel:
    """One linear stochastic system dx = a x dt + b dn; outputs gust = c x.

    States: the shaping filter's n_filter, then per gust output (k of them) the first and the
    second response stage and the washout, in blocks of k: [filter, r1, r2, washout].
    """

    a: np.ndarray  # (n, n)
    b: np.ndarray  # (n,) noise gain
    c: np.ndarray  # (k, n) gust outputs (velocity m/s or rate rad/s)
    n_filter: int
    outputs: tuple[str, ...]  # names of the k gust outputs, e.g. ("v", "r")

    @property
    def washout(self) -> slice:
        """The washout states (displacement m or angle rad), one per gust output."""
        return slice(self.a.shape[0] - len(self.outputs), None)


def _vehicle_block(k: int, response_hz: float, washout_s: float) -> np.ndarray:
    """Dynamics ``(3k, 3k)`` of k response-and-washout chains, states [r1, r2, washout] in
    blocks of k: dr1 = ωn (g - r1), dr2 = ωn (r1 - r2), dx = r2 - x/washout (our model).
    The gust input g enters r1 with gain ωn (see _channels)."""
    wn, eye = 2 * math.pi * response_hz, np.eye(k)
    zero = np.zeros((k, k))
    return np.block([[-wn * eye, zero, zero], [wn * eye, -wn * eye, zero],
                     [zero, eye, -eye / washout_s]])  # fmt: skip


def response_filter(response_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """Transfer function (num, den), highest power of s first, from the gust to the vehicle's
    gust-driven velocity or rate: the two response stages the simulation runs (our model)."""
    require_positive("response_hz", response_hz, "Hz")
    a = _vehicle_block(1, response_hz, washout_s=1.0)[:2, :2]
    b = np.array([[2 * math.pi * response_hz], [0.0]])
    num, den = ss2tf(a, b, np.array([[0.0, 1.0]]), 0.0)
    return np.trim_zeros(num[0], "f"), den


def _channels(s: DrydenSettings, washout_s: float, response_hz: float) -> dict[str, _Channel]:
    """The four independent channels u, vr, wq, p (dryden.shaping_parts), each followed by
    the vehicle response and the washout (our model, see _vehicle_block)."""
    channels = {}
    for name, (a_f, b_f, c_f) in shaping_parts(s).items():
        m, k = a_f.shape[0], c_f.shape[0]
        a = np.zeros((m + 3 * k, m + 3 * k))
        a[:m, :m], a[m:, m:] = a_f, _vehicle_block(k, response_hz, washout_s)
        a[m : m + k, :m] = 2 * math.pi * response_hz * c_f  # the gusts drive the first stage
        b = np.concatenate([b_f, np.zeros(3 * k)])
        c = np.hstack([c_f, np.zeros((k, 3 * k))])
        channels[name] = _Channel(a, b, c, m, tuple(name))
    return channels


DISPLACEMENT_NAMES = ("x", "y", "z", "rx", "ry", "rz")  # displacement m, then angle rad


def displacement_filters(
    settings: DrydenSettings, washout_s: float, response_hz: float
) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Transfer functions (num, den) from white noise of intensity π to the displacements
    "x", "y", "z" (m) and the angles "rx", "ry", "rz" (rad) the simulation runs: shaping
    filter, vehicle response and washout in one realisation per channel."""
    require_positive("washout", washout_s, "s")
    require_positive("response_hz", response_hz, "Hz")
    out = {}
    for ch in _channels(settings, washout_s, response_hz).values():
        rows = np.eye(ch.a.shape[0])[ch.washout]
        for row, signal in zip(rows, ch.outputs, strict=True):
            num, den = ss2tf(ch.a, ch.b[:, None], row[None, :], 0.0)
            out[signal] = (np.trim_zeros(num[0], "f"), den)
    gust_to_name = dict(zip("uvwpqr", DISPLACEMENT_NAMES, strict=True))
    return {gust_to_name[key]: out[key] for key in "uvwpqr"}


# --- exact discretisation and simulation ----------------------------------------------


def _discretise(ch: _Channel, dt_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Exact maps for steps dt ``(M,)`` s: transitions ``(M, n, n)``, noise factors ``(M, n, n)``
    (Van Loan, see exact_steps.step_maps)."""
    return step_maps(ch.a, WHITE_NOISE_INTENSITY * np.outer(ch.b, ch.b), dt_s)


@dataclass(frozen=True)
class GustResponse:
    """Gusts and the vehicle's response on a time base of N samples, axes scenario x, y, z.

    gust_m_s (N, 3) u, v, w; rate_rad_s (N, 3) p, q, r; displacement_m (N, 3) and
    angle_rad (N, 3): the gusts and rates through the vehicle response, washout-integrated
    (our model).
    """

    gust_m_s: np.ndarray
    rate_rad_s: np.ndarray
    displacement_m: np.ndarray
    angle_rad: np.ndarray


#: Time steps drawn at once per channel: bounds the per-step transition and noise matrices
#: (and the prefix scan's copies of them) to this many, whatever the nominal's length.
DRAW_BLOCK_STEPS = 65_536


class _Prepared:
    """Step maps for one time base and settings, shared by every case drawn on it."""

    def __init__(self, t_s: np.ndarray, s: DrydenSettings, washout_s: float, response_hz: float):
        dt = np.diff(np.asarray(t_s, dtype=float))
        steps, self.index = np.unique(np.round(dt / STEP_QUANTUM_S), return_inverse=True)
        self.channels = _channels(s, washout_s, response_hz)
        self.maps = {}
        for name, ch in self.channels.items():
            qc = WHITE_NOISE_INTENSITY * np.outer(ch.b, ch.b)
            p0 = solve_continuous_lyapunov(ch.a, -qc)  # every state starts stationary
            ad, ld = _discretise(ch, steps * STEP_QUANTUM_S)
            self.maps[name] = (ad, ld, psd_factor(p0))  # per distinct step; self.index picks

    def draw(self, rng: np.random.Generator) -> GustResponse:
        """One realisation; the draws come in a fixed order, so a seed fixes every bit."""
        out = {}
        for name, ch in self.channels.items():
            ad, ld, l0 = self.maps[name]
            n = ch.a.shape[0]
            x = l0 @ rng.standard_normal(n)
            outputs, washouts = [(x @ ch.c.T)[None]], [x[ch.washout][None]]
            # Block by block (the draws keep their order, so the stream is the one of a
            # single pass): the per-step matrices never exist for the whole path at once.
            for first in range(0, len(self.index), DRAW_BLOCK_STEPS):
                step = self.index[first : first + DRAW_BLOCK_STEPS]
                w = (ld[step] @ rng.standard_normal((len(step), n, 1)))[:, :, 0]
                states = propagate(ad[step], w, x)[1:]
                outputs.append(states @ ch.c.T)
                washouts.append(states[:, ch.washout])
                x = states[-1]
            out[name] = (np.concatenate(outputs), np.concatenate(washouts))
        (u, dx), (vr, dvr), (wq, dwq), (p, dp) = out["u"], out["vr"], out["wq"], out["p"]
        return GustResponse(
            gust_m_s=np.column_stack([u[:, 0], vr[:, 0], wq[:, 0]]),
            rate_rad_s=np.column_stack([p[:, 0], wq[:, 1], vr[:, 1]]),
            displacement_m=np.column_stack([dx[:, 0], dvr[:, 0], dwq[:, 0]]),
            angle_rad=np.column_stack([dp[:, 0], dwq[:, 1], dvr[:, 1]]),
        )


def dryden_response(
    t_s: np.ndarray,
    settings: DrydenSettings,
    washout_s: float,
    seed: int,
    *,
    response_hz: float = DEFAULT_RESPONSE_HZ,
) -> GustResponse:
    """Gusts, vehicle response and washout at the times t_s ``(N,)`` (strictly increasing, s).

    The random stream is numpy.random.Generator(PCG64(seed)): same seed, same bits.
    """
    require_positive("washout", washout_s, "s")
    require_positive("response_hz", response_hz, "Hz")
    rng = np.random.Generator(np.random.PCG64(seed))
    return _Prepared(t_s, settings, washout_s, response_hz).draw(rng)


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


def fade_in(t_s: np.ndarray, fade_s: float = FADE_IN_S) -> np.ndarray:
    """Weight of the disturbance at times t_s ``(N,)`` s from the path's start, in [0, 1]:
    0 at t = 0 rising to 1 at fade_s by the septic smoothstep 35u⁴ - 84u⁵ + 70u⁶ - 20u⁷,
    whose first three derivatives vanish at both ends (no step in speed, accel or jerk)."""
    u = np.clip(np.asarray(t_s, dtype=float) / fade_s, 0.0, 1.0)
    return u**4 * (35.0 + u * (-84.0 + u * (70.0 - 20.0 * u)))


def fade_in_out(t_s: np.ndarray, fade_s: float = FADE_IN_S) -> np.ndarray:
    """Weight of the disturbance at times t_s ``(N,)`` s: fade_in from the first sample times
    fade_in to the last, so 0 at both ends with its first three derivatives (a case shorter
    than two fades never reaches the full disturbance)."""
    t = np.asarray(t_s, dtype=float)
    return fade_in(t - t[0], fade_s) * fade_in(t[-1] - t, fade_s)


def _is_whole(value) -> bool:
    return isinstance(value, numbers.Integral) and not isinstance(value, bool)


@dataclass(frozen=True)
class DisturbanceCase:
    """One disturbance case: the perturbed path, the seed of its own random stream, and the
    settings that made it (``settings`` dict; ``header_lines`` renders them for the file).

    trajectory: the moved body's path; scenario: for a nominal of several bodies, the whole
    case (the moved body and every other body as in the nominal), else None.
    """

    trajectory: Trajectory
    case_seed: int
    settings: dict
    scenario: Scenario | None = None

    @property
    def header_lines(self) -> tuple[str, ...]:
        return tuple(f"{key} = {value}" for key, value in self.settings.items())


def make_disturbance_cases(nominal: Trajectory, count: int, seed: int, **options) -> list:
    """Every case of iter_disturbance_cases in one list (small batches and tests)."""
    return list(iter_disturbance_cases(nominal, count, seed, **options))


def moved_body(nominal: Trajectory | Scenario, body: str | None) -> tuple[Trajectory, str | None]:
    """The path the gusts move and the body's name (None for a one-body nominal).

    A scenario of several bodies needs `body` (one of its bodies); a one-body nominal (a
    trajectory, or a scenario of plain columns) takes none. Raises ReachgateError saying which.
    """
    if isinstance(nominal, Scenario) and not nominal.is_plain:
        names = ", ".join(nominal.bodies)
        if body is None:
            if len(nominal.bodies) == 1:
                return next(iter(nominal.bodies.values())), next(iter(nominal.bodies))
            raise ReachgateError(
                f"{nominal.name}: a scenario of several bodies ({names}); "
                "name the body the gusts move with --body NAME"
            )
        if body not in nominal.bodies:
            raise ReachgateError(f"--body {body}: {nominal.name} has no such body (it has {names})")
        return nominal.bodies[body], body
    if body is not None:
        raise ReachgateError(
            f"--body {body}: {nominal.name} has one body (plain columns, no body names); "
            "leave out --body, or give a scenario of several bodies (drone.x_m, ...)"
        )
    if isinstance(nominal, Scenario):
        return nominal.bodies[PLAIN_BODY], None
    return nominal, None


def iter_disturbance_cases(
    nominal: Trajectory | Scenario,
    count: int,
    seed: int,
    *,
    intensity: str | None = "moderate",
    sigma_m_s: float | None = None,
    airspeed_m_s: float = DEFAULT_AIRSPEED_M_S,
    altitude_m: float = DEFAULT_ALTITUDE_M,
    washout_s: float = DEFAULT_WASHOUT_S,
    wingspan_m: float = DEFAULT_WINGSPAN_M,
    response_hz: float = DEFAULT_RESPONSE_HZ,
    body: str | None = None,
) -> Iterator[DisturbanceCase]:
    """count disturbance cases of the nominal path, numbered 1..count, made one at a time
    (memory stays that of one case, whatever count is).

    nominal: a trajectory, or a scenario; of several bodies, the gusts move `body` only and
    every other body's poses are carried over unchanged (moved_body says what is refused).
    The moved body draws exactly what a one-body nominal of its path draws with the same seed.

    Case i draws from Generator(PCG64(case_seed)) where case_seed comes from
    SeedSequence(seed, spawn_key=(i,)): cases are independent, and case i is the same whatever
    count is. intensity ("light" | "moderate" | "severe") or sigma_m_s (σw in m/s, then pass
    intensity=None) sets the gust strength; response_hz is the natural frequency of the
    vehicle response (our model). Raises ReachgateError naming the bad option.
    """
    if not _is_whole(count) or count < 1:
        raise ReachgateError(f"count must be a whole number >= 1, got {count!r}")
    if not _is_whole(seed) or seed < 0:
        raise ReachgateError(f"seed must be a whole number >= 0, got {seed!r}")
    require_positive("washout", washout_s, "s")
    require_positive("response_hz", response_hz, "Hz")
    path, body = moved_body(nominal, body)
    s = dryden_settings(
        altitude_m, airspeed_m_s, intensity=intensity, sigma_m_s=sigma_m_s, wingspan_m=wingspan_m
    )
    prepared = _Prepared(path.t_s, s, washout_s, response_hz)
    common = {
        "made_by": f"reachgate {__version__} perturb",
        "model": (
            "Dryden, MIL-F-8785C low altitude; vehicle response and washout displacement "
            "(reachgate's own)"
        ),
        "nominal": nominal.name,
        "seed": seed,
        "intensity": s.intensity if s.intensity is not None else "none (sigma given)",
        "sigma_u_m_s": s.sigma_u_m_s, "sigma_v_m_s": s.sigma_v_m_s, "sigma_w_m_s": s.sigma_w_m_s,
        "scale_u_m": s.scale_u_m, "scale_v_m": s.scale_v_m, "scale_w_m": s.scale_w_m,
        "airspeed_m_s": s.airspeed_m_s, "altitude_m": s.altitude_m,
        "washout_s": float(washout_s), "wingspan_m": s.wingspan_m,
        "response_hz": float(response_hz), "fade_in_s": FADE_IN_S, "fade_out_s": FADE_IN_S,
        "gust_axes": "u v w along scenario x y z; p q r about scenario x y z",
    }  # fmt: skip
    if body is not None:  # only then: one-body case files keep their bytes
        common["body"] = body
    return _cases(nominal, path, body, count, seed, prepared, common)


def _cases(nominal, path, body, count, seed, prepared, common) -> Iterator[DisturbanceCase]:
    """The cases themselves, one at a time (the options were checked by the caller)."""
    q_nominal = path.scenario_q_wxyz
    fade = fade_in_out(path.t_s)[:, None]
    for index in range(1, count + 1):
        state = np.random.SeedSequence(seed, spawn_key=(index,)).generate_state(2, np.uint32)
        case_seed = int(state[0]) << 32 | int(state[1])
        response = prepared.draw(np.random.Generator(np.random.PCG64(case_seed)))
        trajectory = Trajectory.from_arrays(
            path.t_s,
            path.scenario_p_m + fade * response.displacement_m,
            _quat_multiply(_rotvec_to_quat(fade * response.angle_rad), q_nominal),
            name=f"{nominal.name} case {index}",
        )
        scenario = None
        if body is not None:
            bodies = {**nominal.bodies, body: trajectory}
            scenario = Scenario(path.t_s, bodies, name=f"{nominal.name} case {index}")
        settings = {**common, "case": index, "case_seed": case_seed}
        yield DisturbanceCase(trajectory, case_seed, settings, scenario)
