"""Disturbance cases: Dryden (MIL-F-8785C), our vehicle model, exact steps, files and CLI.

Outside sources: MIL-F-8785C (low-altitude scale lengths and intensities, the Dryden spectra
and rate spectra, its worked figure at h = 100 ft), analytic results (the Ornstein-Uhlenbeck
transition of the first-order u filter, the response and washout gains and their variance
integrals, the variance of a sample variance, the sampling theorem), scipy (signal.freqs,
signal.welch, signal.savgol_coeffs, integrate.quad / quad_vec / simpson, linalg.expm,
stats.chi2 / norm).
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy import integrate, linalg, signal, stats
from typer.testing import CliRunner

import reachgate
from reachgate.checking.derivatives import time_derivatives
from reachgate.cli import app
from reachgate.errors import ReachgateError
from reachgate.model.trajectory import Trajectory, load_trajectory, write_trajectory
from reachgate.model.transforms import quat_to_matrix, rotation_log
from reachgate.motion import disturb, dryden, exact_steps
from reachgate.render.cases import write_case_files

FT = 0.3048
KT = 1852.0 / 3600.0

# Statistical checks: a correct generator fails any one test with probability below this
# (Bonferroni-split over the bands compared); the runs are seeded, so the outcome is fixed.
FALSE_ALARM = 1e-3
LINEAR_RTOL = 1e-7  # of the largest offset: doubling sigma doubles it, up to factor rounding
STD_REL_TOL = 0.05  # brief: sample std within 5 % of sigma over a long run


# --- outside formulas, written out here from MIL-F-8785C (ft, kt), not from the module ----


def mil_scale_lengths_ft(h_ft):
    lu = h_ft / (0.177 + 0.000823 * h_ft) ** 1.2
    return lu, lu, h_ft


def mil_sigma_ratio(h_ft):
    return 1.0 / (0.177 + 0.000823 * h_ft) ** 0.4


def mil_spatial_spectra(big_omega, sig, length):
    """MIL-F-8785C Dryden Φu, Φv, Φw(Ω) in spatial frequency Ω (rad per length), one-sided."""
    (su, sv, sw), (lu, lv, lw) = sig, length
    phi_u = su**2 * 2 * lu / math.pi / (1 + (lu * big_omega) ** 2)
    phi_v = (
        sv**2 * lv / math.pi * (1 + 3 * (lv * big_omega) ** 2) / (1 + (lv * big_omega) ** 2) ** 2
    )
    phi_w = (
        sw**2 * lw / math.pi * (1 + 3 * (lw * big_omega) ** 2) / (1 + (lw * big_omega) ** 2) ** 2
    )
    return np.stack([phi_u, phi_v, phi_w], axis=-1)


def mil_temporal_spectra(omega, s):
    """Temporal form Φ(ω) = Φ(Ω = ω/V) / V (frozen field)."""
    sig = (s.sigma_u_m_s, s.sigma_v_m_s, s.sigma_w_m_s)
    length = (s.scale_u_m, s.scale_v_m, s.scale_w_m)
    v = s.airspeed_m_s
    return mil_spatial_spectra(omega / v, sig, length) / v


def mil_rate_spectra(omega, s):
    """MIL-F-8785C Φp, Φq, Φr(ω), one-sided (rate spectra as recalled from the standard)."""
    v, b, lw, sw = s.airspeed_m_s, s.wingspan_m, s.scale_w_m, s.sigma_w_m_s
    gust = mil_temporal_spectra(omega, s)
    phi_p = sw**2 / (v * lw) * 0.8 * (math.pi * lw / (4 * b)) ** (1 / 3)
    phi_p = phi_p / (1 + (4 * b * omega / (math.pi * v)) ** 2)
    phi_q = (omega / v) ** 2 / (1 + (4 * b * omega / (math.pi * v)) ** 2) * gust[:, 2]
    phi_r = (omega / v) ** 2 / (1 + (3 * b * omega / (math.pi * v)) ** 2) * gust[:, 1]
    return np.stack([phi_p, phi_q, phi_r], axis=-1)


# --- low-altitude parameters -------------------------------------------------------------


def test_worked_figure_at_100_ft_matches_mil_f_8785c():
    # MIL-F-8785C worked figure: W20 = 30 kt, h = 100 ft -> Lu = 505.2 ft, σu/σw = 1.716.
    s = dryden.dryden_settings(100 * FT, 20.0, intensity="moderate")
    assert s.scale_u_m / FT == pytest.approx(505.2, abs=0.05)
    assert s.sigma_u_m_s / s.sigma_w_m_s == pytest.approx(1.716, abs=5e-4)
    assert s.scale_w_m / FT == pytest.approx(100.0, rel=1e-12)
    assert s.sigma_w_m_s / KT == pytest.approx(3.0, rel=1e-12)  # σw = 0.1 W20


@pytest.mark.parametrize("h_ft", [5.0, 20.0, 100.0, 300.0, 999.0])
def test_scale_lengths_and_sigma_ratio_follow_mil_f_8785c_formulas(h_ft):
    # MIL-F-8785C low altitude: Lu = Lv = h/(0.177 + 0.000823 h)^1.2, Lw = h, ratio ^0.4.
    lu, lv, lw = dryden.low_altitude_scale_lengths_m(h_ft * FT)
    ref = mil_scale_lengths_ft(h_ft)
    np.testing.assert_allclose(np.array([lu, lv, lw]) / FT, ref, rtol=1e-12)
    assert dryden.low_altitude_sigma_ratio(h_ft * FT) == pytest.approx(mil_sigma_ratio(h_ft))


@pytest.mark.parametrize(("intensity", "w20_kt"), [("light", 15), ("moderate", 30), ("severe", 45)])
def test_named_intensities_set_sigma_w_to_a_tenth_of_w20(intensity, w20_kt):
    # MIL-F-8785C: σw = 0.1 W20; W20 = 15, 30, 45 kt for light, moderate, severe.
    s = dryden.dryden_settings(50.0, 15.0, intensity=intensity)
    assert s.sigma_w_m_s == pytest.approx(0.1 * w20_kt * KT, rel=1e-12)
    assert (
        s.sigma_v_m_s
        == s.sigma_u_m_s
        == pytest.approx(s.sigma_w_m_s * mil_sigma_ratio(50.0 / FT), rel=1e-12)
    )


# --- spectra and filters -----------------------------------------------------------------


SETTINGS = dryden.dryden_settings(100 * FT, 20.0, intensity="moderate", wingspan_m=1.0)


def test_spectra_match_mil_f_8785c_and_integrate_to_sigma_squared():
    # MIL-F-8785C Dryden spectra; one-sided in ω: ∫0^∞ Φ dω = σ² (scipy quad).
    omega = np.logspace(-4, 3, 60)
    np.testing.assert_allclose(
        dryden.dryden_psd(omega, SETTINGS), mil_temporal_spectra(omega, SETTINGS), rtol=1e-12
    )
    sig = [SETTINGS.sigma_u_m_s, SETTINGS.sigma_v_m_s, SETTINGS.sigma_w_m_s]
    for axis in range(3):
        area, _ = integrate.quad(
            lambda w, a=axis: dryden.dryden_psd(np.array([w]), SETTINGS)[0, a], 0, np.inf,
            limit=400,
        )  # fmt: skip
        assert area == pytest.approx(sig[axis] ** 2, rel=1e-6)


def test_shaping_filters_reproduce_the_mil_f_8785c_spectra():
    # |H(jω)|² of each white-noise shaping filter (scipy.signal.freqs) = MIL-F-8785C spectrum.
    omega = np.logspace(-4, 3, 80)
    reference = np.column_stack(
        [mil_temporal_spectra(omega, SETTINGS), mil_rate_spectra(omega, SETTINGS)]
    )
    filters = dryden.shaping_filters(SETTINGS)
    for col, name in enumerate("uvwpqr"):
        _, h = signal.freqs(*filters[name], worN=omega)
        np.testing.assert_allclose(np.abs(h) ** 2, reference[:, col], rtol=1e-9, err_msg=name)
    np.testing.assert_allclose(
        dryden.dryden_rate_psd(omega, SETTINGS), reference[:, 3:], rtol=1e-12
    )


def response_gain_sq(omega, response_hz):
    """|H(jω)|² of the critically damped second-order low-pass ωn² / (s + ωn)² (analytic)."""
    wn = 2 * math.pi * response_hz
    return wn**4 / (omega**2 + wn**2) ** 2


def washout_gain_sq(omega, washout_s):
    """|1 / (jω + 1/τ)|² of the washout integrator dx/dt = v - x/τ (analytic)."""
    return 1.0 / (omega**2 + washout_s**-2)


@pytest.mark.parametrize("response_hz", [0.3, 1.5])
def test_response_filter_is_the_critically_damped_second_order_low_pass(response_hz):
    # Analytic: |ωn²/(jω + ωn)²|² = ωn⁴/(ω² + ωn²)²; unit gain at 0, 1/2 and -180° at ωn,
    # half power at ωn·sqrt(√2 - 1) (scipy.signal.freqs of the realisation the model runs).
    omega = np.logspace(-2, 3, 80)
    num, den = disturb.response_filter(response_hz)
    _, h = signal.freqs(num, den, worN=omega)
    np.testing.assert_allclose(np.abs(h) ** 2, response_gain_sq(omega, response_hz), rtol=1e-9)
    wn = 2 * math.pi * response_hz
    _, h = signal.freqs(num, den, worN=[1e-9 * wn, wn, wn * math.sqrt(math.sqrt(2) - 1)])
    np.testing.assert_allclose(np.abs(h), [1.0, 0.5, math.sqrt(0.5)], rtol=1e-9)
    assert np.angle(h[1]) == pytest.approx(-math.pi / 2, abs=1e-9)  # each stage -45°


def test_displacement_filters_are_the_gust_spectra_through_response_and_washout():
    # MIL-F-8785C spectra times the analytic response and washout gains (scipy.signal.freqs).
    # Far above the corners |H|² falls as ω⁻⁸ (gust filters ω⁻², response ω⁻⁴, washout ω⁻²),
    # so the jerk spectrum ω⁶|H|² falls as ω⁻² and the jerk variance is finite.
    omega = np.logspace(-3, 3, 80)
    washout_s, response_hz = 0.3, 0.8
    filters = disturb.displacement_filters(SETTINGS, washout_s, response_hz)
    reference = np.column_stack(
        [mil_temporal_spectra(omega, SETTINGS), mil_rate_spectra(omega, SETTINGS)]
    )
    reference *= (response_gain_sq(omega, response_hz) * washout_gain_sq(omega, washout_s))[:, None]
    for col, name in enumerate(disturb.DISPLACEMENT_NAMES):
        num, den = filters[name]
        _, h = signal.freqs(num, den, worN=omega)
        np.testing.assert_allclose(np.abs(h) ** 2, reference[:, col], rtol=1e-7, err_msg=name)
        _, h = signal.freqs(num, den, worN=[300.0, 1000.0])  # far above every corner
        slope = math.log(abs(h[1] / h[0]) ** 2) / math.log(1000.0 / 300.0)
        assert slope == pytest.approx(-8.0, abs=0.05), name


# --- exact discretisation ----------------------------------------------------------------


def test_van_loan_step_maps_equal_the_integrals_they_stand_for():
    # Ad = expm(A dt) and Qd = ∫0^dt e^{As} Qc e^{Aᵀs} ds, by scipy expm and quad_vec.
    channel = disturb._channels(SETTINGS, washout_s=0.7, response_hz=1.5)["wq"]
    qc = dryden.WHITE_NOISE_INTENSITY * np.outer(channel.b, channel.b)
    dt = np.array([0.05, 0.9])
    ad, ld = disturb._discretise(channel, dt)
    for k, step in enumerate(dt):
        np.testing.assert_allclose(ad[k], linalg.expm(channel.a * step), rtol=1e-10, atol=1e-14)
        qd, _ = integrate.quad_vec(
            lambda s: linalg.expm(channel.a * s) @ qc @ linalg.expm(channel.a.T * s), 0, step,
            epsabs=1e-14, epsrel=1e-11,
        )  # fmt: skip
        np.testing.assert_allclose(ld[k] @ ld[k].T, qd, rtol=1e-7, atol=1e-12 * np.abs(qd).max())


def test_prefix_scan_equals_the_step_by_step_recursion():
    rng = np.random.default_rng(101)
    n, steps = 4, 777  # not a power of two
    ad = 0.3 * rng.standard_normal((steps, n, n)) + 0.6 * np.eye(n)
    w = rng.standard_normal((steps, n))
    x0 = rng.standard_normal(n)
    expected = [x0]
    for k in range(steps):  # slow reference
        expected.append(ad[k] @ expected[-1] + w[k])
    np.testing.assert_allclose(exact_steps.propagate(ad, w, x0), np.array(expected), rtol=1e-9,
                               atol=1e-9)  # fmt: skip


def test_uneven_steps_give_the_exact_ornstein_uhlenbeck_transition_of_the_u_gust():
    # Analytic: the u filter is first order, so over a step dt exactly
    # u[k+1] = e^{-dt/T} u[k] + σu sqrt(1 - e^{-2 dt/T}) ε, T = Lu/V, ε ~ N(0, 1) iid.
    rng = np.random.default_rng(102)
    tau_u = SETTINGS.scale_u_m / SETTINGS.airspeed_m_s
    dt = 0.1 * tau_u * rng.uniform(0.8, 1.2, 20_000)  # ±20 % jitter
    t = np.concatenate([[0.0], np.cumsum(dt)])
    u = disturb.dryden_response(t, SETTINGS, washout_s=1.0, seed=202).gust_m_s[:, 0]
    decay = np.exp(-dt / tau_u)
    eps = (u[1:] - decay * u[:-1]) / (SETTINGS.sigma_u_m_s * np.sqrt(1 - decay**2))
    short = dt < np.median(dt)
    for part in (short, ~short):  # using the mean step would put these ~10 % apart
        assert np.var(eps[part]) == pytest.approx(1.0, abs=0.05)  # σ of the estimate ≈ 0.014
    assert abs(np.corrcoef(eps, u[:-1])[0, 1]) < 0.02  # innovations uncorrelated with the past


# --- long runs: standard deviations and Welch spectra --------------------------------------

GUST_DT_S = 0.25  # a power of two: np.arange(N) * dt has exactly equal steps
GUST_SAMPLES = 2**17  # 32768 s ≈ 4300 Lu and 21500 Lw of flight at 20 m/s
RATE_DT_S = 0.02
RATE_SAMPLES = 2**16
WASHOUT_S = 0.5
RESPONSE_HZ = 0.5
WELCH_SEGMENT = {"gust": 2048, "rate": 1024}


@pytest.fixture(scope="module")
def gust_run():
    t = np.arange(GUST_SAMPLES) * GUST_DT_S
    return disturb.dryden_response(t, SETTINGS, WASHOUT_S, seed=303, response_hz=RESPONSE_HZ)


@pytest.fixture(scope="module")
def rate_run():
    t = np.arange(RATE_SAMPLES) * RATE_DT_S
    return disturb.dryden_response(t, SETTINGS, WASHOUT_S, seed=304, response_hz=RESPONSE_HZ)


def test_gust_standard_deviations_are_within_5_percent_of_sigma(gust_run):
    # MIL-F-8785C intensities σu, σv, σw; over ~4300 Lu the estimate's own spread is ~1.1 %.
    sig = [SETTINGS.sigma_u_m_s, SETTINGS.sigma_v_m_s, SETTINGS.sigma_w_m_s]
    np.testing.assert_allclose(gust_run.gust_m_s.std(axis=0), sig, rtol=STD_REL_TOL)


def sampled_psd_hz(spectrum, f_hz, fs_hz, images=2000):
    """One-sided PSD per Hz of the continuous process sampled at fs (sampling theorem):
    P(f) = 2π Σ_k Φ(2π |f + k fs|) summed over aliased images."""
    k = np.arange(-images, images + 1)
    omega = 2 * math.pi * np.abs(f_hz[:, None] + k[None, :] * fs_hz)
    return 2 * math.pi * spectrum(omega.ravel()).reshape(*omega.shape, -1).sum(axis=1)


def band_dof(n_segments, bins, window):
    """Chi-square degrees of freedom for mean(P_welch / P_true) over `bins` adjacent bins.

    Each bin of a Welch estimate from K non-overlapping segments is P·χ²(2K)/(2K). Adjacent
    Hann bins are correlated by ρ_j = |Σ w² e^{-2πi j n/L}|² / (Σ w²)²; the band mean then has
    variance (1/2K)(1/M²) Σ_ij ρ_|i-j|, matched to χ²(ν)/ν (Satterthwaite) for its limits.
    """
    w2 = window**2
    lags = np.arange(bins)
    rho = np.abs(np.exp(-2j * math.pi * np.outer(lags, np.arange(w2.size)) / w2.size) @ w2) ** 2
    rho /= w2.sum() ** 2
    corr_sum = sum(rho[abs(i - j)] for i in range(bins) for j in range(bins))
    return 2 * n_segments * bins**2 / corr_sum


def assert_welch_within_chi_square_band(x, dt_s, nperseg, spectrum, n_tests, first_bin):
    fs = 1.0 / dt_s
    window = signal.get_window("hann", nperseg)
    f, p = signal.welch(x, fs=fs, window=window, nperseg=nperseg, noverlap=0, detrend=False,
                        axis=0)  # fmt: skip
    model = sampled_psd_hz(spectrum, f, fs)
    n_segments = x.shape[0] // nperseg
    edges = np.unique(np.geomspace(first_bin, nperseg // 2, 13).astype(int))
    alpha = FALSE_ALARM / (n_tests * (len(edges) - 1) * x.shape[1])
    for lo, hi in itertools.pairwise(edges):
        nu = band_dof(n_segments, hi - lo, window)
        low, high = stats.chi2.ppf([alpha / 2, 1 - alpha / 2], nu) / nu
        ratio = (p[lo:hi] / model[lo:hi]).mean(axis=0)
        assert np.all((ratio > low) & (ratio < high)), (f[lo], f[hi - 1], ratio, low, high)


def test_gust_welch_psd_lies_in_the_chi_square_band_of_the_dryden_spectra(gust_run):
    # MIL-F-8785C Φu, Φv, Φw against scipy.signal.welch, aliasing included (sampling theorem).
    assert_welch_within_chi_square_band(
        gust_run.gust_m_s, GUST_DT_S, WELCH_SEGMENT["gust"],
        lambda w: mil_temporal_spectra(w, SETTINGS), n_tests=2, first_bin=2,
    )  # fmt: skip


def test_rate_welch_psd_lies_in_the_chi_square_band_of_the_rate_spectra(rate_run):
    # MIL-F-8785C Φp, Φq, Φr against scipy.signal.welch. Bins below 4 are left out: Φq, Φr
    # rise as ω² there, where the Hann window's leakage biases the estimate upward.
    assert_welch_within_chi_square_band(
        rate_run.rate_rad_s, RATE_DT_S, WELCH_SEGMENT["rate"],
        lambda w: mil_rate_spectra(w, SETTINGS), n_tests=2, first_bin=4,
    )  # fmt: skip


def washout_std(spectrum, axis):
    """Analytic std of x with dx/dt = H·g - x/τ: var = ∫0^∞ Φ(ω) |H|² / (ω² + τ⁻²) dω."""
    value, _ = integrate.quad(
        lambda w: spectrum(np.array([w]))[0, axis] * response_gain_sq(w, RESPONSE_HZ)
        * washout_gain_sq(w, WASHOUT_S), 0, np.inf, limit=400,
    )  # fmt: skip
    return math.sqrt(value)


def test_displacement_and_angle_spread_match_the_model_integrals(gust_run, rate_run):
    # Our response and washout model: displacement/angle std = the variance integral above.
    displacement = [washout_std(lambda w: mil_temporal_spectra(w, SETTINGS), a) for a in range(3)]
    np.testing.assert_allclose(gust_run.displacement_m.std(axis=0), displacement, rtol=0.05)
    angle = [washout_std(lambda w: mil_rate_spectra(w, SETTINGS), a) for a in range(3)]
    np.testing.assert_allclose(rate_run.angle_rad.std(axis=0), angle, rtol=0.05)


# --- the case's acceleration and jerk: finite and independent of the sampling rate ---------

CASE_RATES_HZ = (250, 1000)
CASE_RUN_S = 120.0
CASE_COUNT = 5  # 5 x 116 s per rate: accel RMS within ~1.8 %, jerk within ~0.6-1 % (1 sigma)
CASE_END_S = 0.1  # the last samples' one-sided derivative windows are left out
RATE_REL_TOL = 0.10  # brief: std at 250 Hz and at 1000 Hz within ~10 % of each other
CASE_SETTINGS = dryden.dryden_settings(
    dryden.DEFAULT_ALTITUDE_M, dryden.DEFAULT_AIRSPEED_M_S, intensity="moderate"
)


def still_nominal(fs_hz):
    """A nominal that holds one pose (not the identity) for CASE_RUN_S at fs_hz, even steps."""
    n = round(fs_hz * CASE_RUN_S) + 1
    t = np.arange(n) / fs_hz
    return Trajectory.from_arrays(
        t, np.tile([1.0, 0.5, 2.0], (n, 1)), rpy_rad=np.tile([0.1, -0.2, 0.3], (n, 1)),
        name="still.csv",
    )  # fmt: skip


@pytest.fixture(scope="module")
def case_derivatives():
    """{fs: (acceleration, jerk)}, each (M, 6): x, y, z (m) and the rotation vector θ (rad)
    of case minus nominal, between the fade-in and the fade-out, estimated by
    reachgate.derivatives, pooled."""
    out = {}
    for fs, seed in zip(CASE_RATES_HZ, (401, 402), strict=True):
        nominal = still_nominal(fs)
        t = nominal.t_s
        keep = (t > disturb.FADE_IN_S) & (t < t[-1] - disturb.FADE_IN_S - CASE_END_S)
        nominal_R_T = np.swapaxes(quat_to_matrix(nominal.scenario_q_wxyz), -1, -2)
        acc, jerk = [], []
        for case in disturb.make_disturbance_cases(nominal, CASE_COUNT, seed):
            theta = rotation_log(quat_to_matrix(case.trajectory.scenario_q_wxyz) @ nominal_R_T)
            d = time_derivatives(t, np.hstack([case.trajectory.scenario_p_m - nominal.scenario_p_m,
                                               theta]))  # fmt: skip
            acc.append(d.acceleration[keep])
            jerk.append(d.jerk[keep])
        out[fs] = (np.vstack(acc), np.vstack(jerk))
    return out


def case_spectrum_integrals(fs_hz, order):
    """For the derivative of `order` estimated at fs_hz: the true variance ∫ω^2r Φx dω, the
    estimator's expected variance ∫|G|²Φx dω and ∫(|G|²Φx)² dω, each (6,).

    Φx = MIL-F-8785C spectrum · |response|² · |washout|² (our model, library defaults); G is
    the 7-point degree-4 Savitzky-Golay derivative filter on even steps (scipy
    signal.savgol_coeffs), the interior fit of reachgate.derivatives. Simpson in log ω.
    """
    u = np.linspace(math.log(1e-4), math.log(1e6), 200_001)
    omega = np.exp(u)
    phi = np.column_stack(
        [mil_temporal_spectra(omega, CASE_SETTINGS), mil_rate_spectra(omega, CASE_SETTINGS)]
    )
    phi *= (response_gain_sq(omega, disturb.DEFAULT_RESPONSE_HZ)
            * washout_gain_sq(omega, disturb.DEFAULT_WASHOUT_S))[:, None]  # fmt: skip
    coeffs = signal.savgol_coeffs(7, 4, deriv=order, delta=1.0 / fs_hz, use="dot")
    gain_sq = np.abs(np.exp(1j * np.outer(omega, np.arange(-3, 4)) / fs_hz) @ coeffs) ** 2

    def area(f):
        return integrate.simpson(f * omega[:, None], x=u, axis=0)

    return (area(omega[:, None] ** (2 * order) * phi), area(gain_sq[:, None] * phi),
            area((gain_sq[:, None] * phi) ** 2))  # fmt: skip


def test_case_acceleration_and_jerk_do_not_depend_on_the_sampling_rate(case_derivatives):
    # Brief: the RMS acceleration and jerk of a case at 250 Hz and 1000 Hz agree within 10 %
    # (without the vehicle response the acceleration alone differed by a factor of 2 = √4).
    for k in range(2):
        rms = [np.sqrt(np.mean(case_derivatives[fs][k] ** 2, axis=0)) for fs in CASE_RATES_HZ]
        np.testing.assert_allclose(rms[0], rms[1], rtol=RATE_REL_TOL, err_msg=f"derivative {k}")


def test_case_acceleration_and_jerk_match_the_spectrum_through_the_model(case_derivatives):
    # Analytic: the estimate's mean square is ∫|G|²Φx dω (see case_spectrum_integrals). Its
    # sampling error: a Gaussian process's mean square over T has relative variance
    # 2π∫Φ²dω / (T (∫Φ dω)²) (Parseval on the autocovariance), so the RMS has half that
    # relative error; the band is the normal quantile for FALSE_ALARM over all comparisons.
    checks = len(CASE_RATES_HZ) * 2 * 6
    z = stats.norm.ppf(1 - FALSE_ALARM / (2 * checks))
    for fs in CASE_RATES_HZ:
        kept_s = CASE_COUNT * (CASE_RUN_S - 2 * disturb.FADE_IN_S - CASE_END_S)
        for k, order in enumerate((2, 3)):
            true_var, expected, squared = case_spectrum_integrals(fs, order)
            rel_se = 0.5 * np.sqrt(2 * math.pi * squared / kept_s) / expected
            rms = np.sqrt(np.mean(case_derivatives[fs][k] ** 2, axis=0))
            ratio = rms / np.sqrt(expected)
            assert np.all(np.abs(ratio - 1) < z * rel_se), (fs, order, ratio, z * rel_se)
            # The estimator sees nearly all of the true derivative: finite, and rate-free up to
            # the ω⁻² jerk tail beyond the fit's pass band (at most ~7 % at 250 Hz).
            assert np.all((np.sqrt(expected / true_var) > 0.9) & (expected <= true_var * 1.001))


# --- cases and files -----------------------------------------------------------------------


def nominal_path(samples=400, seed=105):
    """A small invented approach: a descending glide with some yaw, jittered 100 Hz sampling."""
    rng = np.random.default_rng(seed)
    t = np.concatenate([[0.0], np.cumsum(0.01 * rng.uniform(0.8, 1.2, samples - 1))])
    p = np.column_stack([2.0 - 0.3 * t, 0.1 * np.sin(t), 1.5 - 0.2 * t])
    rpy = np.column_stack([0 * t, 0.05 * np.ones_like(t), 0.2 * t])
    return Trajectory.from_arrays(t, p, rpy_rad=rpy, name="glide.csv")


def test_case_files_are_identical_for_the_same_seed_and_differ_for_another(tmp_path):
    nominal = nominal_path()
    first = write_case_files(
        disturb.make_disturbance_cases(nominal, 3, 11), tmp_path / "a", "glide"
    )
    again = write_case_files(
        disturb.make_disturbance_cases(nominal, 3, 11), tmp_path / "b", "glide"
    )
    other = write_case_files(
        disturb.make_disturbance_cases(nominal, 3, 12), tmp_path / "c", "glide"
    )
    assert [p.name for p in first] == ["glide_0001.csv", "glide_0002.csv", "glide_0003.csv"]
    for a, b, c in zip(first, again, other, strict=True):
        assert a.read_bytes() == b.read_bytes()
        assert not np.array_equal(load_trajectory(a).scenario_p_m, load_trajectory(c).scenario_p_m)
    assert not np.array_equal(load_trajectory(first[0]).scenario_p_m,
                              load_trajectory(first[1]).scenario_p_m)  # fmt: skip


def header(path):
    lines = [ln[2:] for ln in path.read_text().splitlines() if ln.startswith("# ")]
    return dict(line.split(" = ", 1) for line in lines)


def test_each_file_header_records_how_it_was_made(tmp_path):
    nominal = nominal_path()
    cases = disturb.make_disturbance_cases(
        nominal, 2, 21, intensity="light", airspeed_m_s=12.0, altitude_m=40.0, washout_s=0.8,
        response_hz=1.25,
    )  # fmt: skip
    paths = write_case_files(cases, tmp_path, "glide")
    s = dryden.dryden_settings(40.0, 12.0, intensity="light")
    for index, (case, path) in enumerate(zip(cases, paths, strict=True), start=1):
        h = header(path)
        assert h["made_by"] == f"reachgate {reachgate.__version__} perturb"
        assert h["nominal"] == "glide.csv"
        assert (h["seed"], h["case"], h["case_seed"]) == ("21", str(index), str(case.case_seed))
        assert h["intensity"] == "light"
        for key in ("sigma_u_m_s", "sigma_w_m_s", "scale_u_m", "scale_w_m"):
            assert float(h[key]) == getattr(s, key)
        assert (float(h["airspeed_m_s"]), float(h["altitude_m"]), float(h["washout_s"])) == (
            12.0, 40.0, 0.8,
        )  # fmt: skip
        assert float(h["response_hz"]) == 1.25
        assert float(h["fade_in_s"]) == disturb.FADE_IN_S
    assert cases[0].case_seed != cases[1].case_seed


def test_case_seed_in_the_header_regenerates_that_case():
    nominal = nominal_path()
    case = disturb.make_disturbance_cases(nominal, 3, 31, washout_s=0.6)[2]
    s = dryden.dryden_settings(dryden.DEFAULT_ALTITUDE_M, dryden.DEFAULT_AIRSPEED_M_S)
    response = disturb.dryden_response(nominal.t_s, s, 0.6, case.case_seed)
    fade = disturb.fade_in_out(nominal.t_s)[:, None]
    np.testing.assert_allclose(
        case.trajectory.scenario_p_m - nominal.scenario_p_m, fade * response.displacement_m,
        atol=1e-12,
    )  # fmt: skip
    # Orientation: R_case = Exp(fade·θ) · R_nominal, θ the washout-integrated rates (our model).
    r_case = quat_to_matrix(case.trajectory.scenario_q_wxyz)
    r_nominal = quat_to_matrix(nominal.scenario_q_wxyz)
    theta = rotation_log(r_case @ np.swapaxes(r_nominal, -1, -2))
    np.testing.assert_allclose(theta, fade * response.angle_rad, atol=1e-9)
    assert np.abs(fade * response.angle_rad).max() > 1e-3  # the comparison is not between zeros


def test_fade_in_is_a_septic_smoothstep_flat_to_third_order_at_both_ends():
    # Analytic: 35u⁴ - 84u⁵ + 70u⁶ - 20u⁷ rises from 0 to 1 with derivatives 1-3 zero at both
    # ends, so a faded case has no step in speed, acceleration or jerk.
    smoothstep = np.polynomial.Polynomial([0, 0, 0, 0, 35, -84, 70, -20])
    for order in (1, 2, 3):
        assert smoothstep.deriv(order)(0.0) == 0.0 and smoothstep.deriv(order)(1.0) == 0.0
    t = np.linspace(-1.0, 4.0, 501)
    expected = np.where(t < 0, 0.0, np.where(t > 2.5, 1.0, smoothstep(np.clip(t / 2.5, 0, 1))))
    np.testing.assert_allclose(disturb.fade_in(t, 2.5), expected, rtol=0, atol=1e-14)


def test_a_case_starts_with_the_nominal_speed_and_acceleration():
    # Our model: a case is the nominal plus the faded response, so at t = 0 the case moves
    # as the nominal does (a step in speed would be asked of an arm and rail at rest there).
    nominal = nominal_path()
    (case,) = disturb.make_disturbance_cases(nominal, 1, 71)
    offset = case.trajectory.scenario_p_m - nominal.scenario_p_m
    d = time_derivatives(nominal.t_s, offset)
    later = nominal.t_s > disturb.FADE_IN_S
    for name in ("velocity", "acceleration"):
        values = getattr(d, name)
        assert np.all(np.abs(values[0]) < 1e-3 * np.abs(values[later]).max(axis=0)), name


def test_a_case_does_not_depend_on_how_many_cases_were_made():
    nominal = nominal_path()
    few = disturb.make_disturbance_cases(nominal, 2, 41)
    many = disturb.make_disturbance_cases(nominal, 5, 41)
    for a, b in zip(few, many[:2], strict=True):
        assert a.case_seed == b.case_seed
        assert np.array_equal(a.trajectory.scenario_p_m, b.trajectory.scenario_p_m)


def test_zero_sigma_gives_back_the_nominal_path():
    nominal = nominal_path()
    (case,) = disturb.make_disturbance_cases(nominal, 1, 51, intensity=None, sigma_m_s=0.0)
    assert np.array_equal(case.trajectory.scenario_p_m, nominal.scenario_p_m)
    np.testing.assert_allclose(case.trajectory.scenario_q_wxyz, nominal.scenario_q_wxyz,
                               rtol=0, atol=1e-15)  # fmt: skip


def test_disturbance_scales_linearly_with_sigma_and_starts_on_the_nominal_pose():
    nominal = nominal_path()

    def offsets(sigma):
        (case,) = disturb.make_disturbance_cases(nominal, 1, 61, intensity=None, sigma_m_s=sigma)
        r = quat_to_matrix(case.trajectory.scenario_q_wxyz)
        r_nominal = quat_to_matrix(nominal.scenario_q_wxyz)
        theta = rotation_log(r @ np.swapaxes(r_nominal, -1, -2))
        return case.trajectory.scenario_p_m - nominal.scenario_p_m, theta

    d1, a1 = offsets(0.4)
    d2, a2 = offsets(0.8)
    assert np.abs(d1).max() > 1e-3
    # Linear up to the rounding of the noise factors (expm picks its scaling by the norm).
    np.testing.assert_allclose(d2, 2 * d1, rtol=0, atol=LINEAR_RTOL * np.abs(d2).max())
    np.testing.assert_allclose(a2, 2 * a1, rtol=0, atol=LINEAR_RTOL * np.abs(a2).max())
    assert np.array_equal(d1[0], np.zeros(3))  # each case begins on the nominal pose


@pytest.mark.parametrize(
    ("options", "named"),
    [
        ({"count": 0}, "count"),
        ({"count": 2.5}, "count"),
        ({"seed": -1}, "seed"),
        ({"airspeed_m_s": 0.0}, "airspeed"),
        ({"altitude_m": -5.0}, "altitude"),
        ({"altitude_m": 400.0}, "altitude"),
        ({"washout_s": 0.0}, "washout"),
        ({"washout_s": float("nan")}, "washout"),
        ({"response_hz": 0.0}, "response_hz"),
        ({"response_hz": float("inf")}, "response_hz"),
        ({"response_hz": "fast"}, "response_hz"),
        ({"intensity": "stormy"}, "intensity"),
        ({"sigma_m_s": 1.0}, "intensity or sigma"),  # both given (intensity defaults)
        ({"intensity": None}, "intensity or sigma"),  # neither given
        ({"intensity": None, "sigma_m_s": -1.0}, "sigma"),
    ],
)
def test_bad_options_are_refused_naming_the_option(options, named):
    kwargs = {"count": 2, "seed": 1, **options}
    count, seed = kwargs.pop("count"), kwargs.pop("seed")
    with pytest.raises(ReachgateError, match=named):
        disturb.make_disturbance_cases(nominal_path(50), count, seed, **kwargs)


# --- command line --------------------------------------------------------------------------

runner = CliRunner()


def test_perturb_command_writes_the_cases_beside_the_nominal(tmp_path):
    nominal = tmp_path / "glide.csv"
    write_trajectory(nominal, nominal_path(), comments=("invented glide",))
    result = runner.invoke(app, ["perturb", str(nominal), "--count", "3", "--seed", "7"])
    assert result.exit_code == 0, result.output
    written = sorted((tmp_path / "glide_cases").iterdir())
    assert [p.name for p in written] == ["glide_0001.csv", "glide_0002.csv", "glide_0003.csv"]
    assert len(result.stdout.splitlines()) == 1 and "3 disturbance cases" in result.stdout
    h = header(written[0])  # CLI defaults are the library's defaults
    assert h["intensity"] == "moderate"
    assert float(h["airspeed_m_s"]) == dryden.DEFAULT_AIRSPEED_M_S
    assert float(h["altitude_m"]) == dryden.DEFAULT_ALTITUDE_M
    assert float(h["washout_s"]) == disturb.DEFAULT_WASHOUT_S
    assert float(h["response_hz"]) == disturb.DEFAULT_RESPONSE_HZ
    assert load_trajectory(written[2]).n_samples == 400


def test_perturb_command_honours_out_and_sigma(tmp_path):
    nominal = tmp_path / "glide.csv"
    write_trajectory(nominal, nominal_path())
    out = tmp_path / "cases"
    options = ["--sigma", "0.3", "--response-hz", "1.25", "--out", str(out)]
    result = runner.invoke(app, ["perturb", str(nominal), "--count", "2", "--seed", "7", *options])
    assert result.exit_code == 0, result.output
    h = header(out / "glide_0002.csv")
    assert (float(h["sigma_w_m_s"]), float(h["response_hz"])) == (0.3, 1.25)


@pytest.mark.parametrize(
    ("args", "named"),
    [
        (["--intensity", "stormy"], "intensity"),
        (["--intensity", "light", "--sigma", "1"], "intensity or sigma"),
        (["--altitude", "500"], "altitude"),
        (["--count", "0"], "count"),
        (["--response-hz", "0"], "response_hz"),
        (["--response-hz", "-2"], "response_hz"),
    ],
)
def test_perturb_command_bad_option_exits_2_with_one_line(tmp_path, args, named):
    nominal = tmp_path / "glide.csv"
    write_trajectory(nominal, nominal_path(50))
    result = runner.invoke(app, ["perturb", str(nominal), "--count", "2", "--seed", "1", *args])
    assert result.exit_code == 2
    assert len(result.stderr.strip().splitlines()) == 1 and named in result.stderr
    assert "Traceback" not in result.output
    assert not (tmp_path / "glide_cases").exists()


def test_perturb_command_missing_nominal_exits_2_with_one_line(tmp_path):
    missing = tmp_path / "nowhere.csv"
    result = runner.invoke(app, ["perturb", str(missing), "--count", "2", "--seed", "1"])
    assert result.exit_code == 2
    assert len(result.stderr.strip().splitlines()) == 1 and "nowhere.csv" in result.stderr
