"""Velocity, acceleration and jerk of sampled signals on their real, possibly uneven, times.

Method: Savitzky–Golay smoothing generalised to uneven sampling. Around every sample a
polynomial of degree FIT_DEGREE is fitted by least squares to the WINDOW_SAMPLES nearest
samples at their real times, and its derivatives at the sample are the estimates. Near the
ends the window is one-sided (it slides to stay inside the data).

The fit depends on the times alone, so for every sample one weight row per derivative order
is computed once from t, (N, window), and applied to all k signal columns. Each window's times
are mapped onto [-1, 1] and fitted with the polynomials orthogonal on its own nodes, which
needs no system solve and stays well conditioned (see derivative_weights). Work goes in
blocks of CHUNK_SAMPLES
samples, spread over THREADS threads; the result does not depend on either. Evenly spaced
samples share one set of weights and go in one pass of compiled convolutions.

Windows by duration where the rate is high: with WINDOW_SAMPLES neighbours a few samples
wide, sampling faster only shrinks the window, and the jerk's noise gain grows with 1/h³
(rounding and solver noise alone gave thousands of jerk rows at 100 kHz). So the fit's nodes
are every m-th sample, m = fit_stride(t) = round(NODE_STEP_MIN_S / median step) (at least 1):
below 1 kHz nothing changes, above it the WINDOW_SAMPLES nodes always span about
(WINDOW_SAMPLES - 1) · NODE_STEP_MIN_S, and the estimates are those of 1 kHz sampling whatever
the rate (tests/test_rate_independence.py: 250 Hz to 100 kHz give the same rows and peaks).
Every sample still gets its own fit, on its own real times.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

#: Samples in each local fit, and the fit degree. Chosen by measurement (sinusoid, ±20 % step
#: jitter, max error over the path / amplitude; see tests/test_derivatives.py). 7 samples,
#: degree 4: jerk of 1 Hz at 1 kHz within 3e-5 inside the path and 2e-4 at the one-sided
#: ends; at 250 Hz 4e-4 and 3e-3. Jerk noise gain (std of jerk per unit std of white noise
#: on x, times h³): 0.41 inside, 3.4 at the ends. 9 samples with degree 5 is about 50 times
#: more accurate on smooth motion but doubles the noise gain (0.87 / 5.9) and spreads a
#: short event over 8 steps; 5 samples with degree 4 interpolates (end noise gain 17).
WINDOW_SAMPLES = 7

#: Degree of the local polynomial: exact on polynomials up to this degree, jitter or not.
FIT_DEGREE = 4

#: Samples per block: the block's working arrays (a few MB) stay in cache, which measured
#: about 1.5 times faster than blocks of 200,000; memory stays bounded whatever N is.
CHUNK_SAMPLES = 8192

#: Smallest spacing of the fit's nodes, s. Above 1/NODE_STEP_MIN_S samples per second the
#: nodes are every m-th sample (see fit_stride), so the fit window has a duration of its own
#: instead of shrinking with the step. 1 ms: the rates the fit was tuned for (250 Hz to
#: 1 kHz, see WINDOW_SAMPLES) are left as they are, and the jerk's noise gain stays that of
#: 1 kHz sampling (0.41 σ / (1 ms)³ for noise σ on the signal).
NODE_STEP_MIN_S = 1e-3

#: Steps equal to this relative spread count as even (float rounding of k·Δt stays ~1e-11),
#: and the weights of one model window serve every sample.
EVEN_STEP_RTOL = 1e-9

#: Threads sharing the blocks. One by default: a scan already runs one process per core,
#: and the speed figures are stated per core; a caller alone on a machine may pass more.
THREADS = 1

#: Derivative orders estimated: velocity, acceleration, jerk.
_ORDERS = (1, 2, 3)


@dataclass(frozen=True, eq=False)
class Derivatives:
    """Time derivatives of k signals at their N samples, each (N, k) (or (N,) for 1-D input).

    velocity in unit/s, acceleration in unit/s², jerk in unit/s³, unit being the signal's.
    """

    velocity: np.ndarray
    acceleration: np.ndarray
    jerk: np.ndarray


def fit_stride(t_s: np.ndarray) -> int:
    """Samples between the fit's nodes for times t_s (N,): round(NODE_STEP_MIN_S / median
    step), at least 1 (the median, so a gap in a log does not set it)."""
    if t_s.size < 2:
        return 1
    return max(1, round(NODE_STEP_MIN_S / float(np.median(np.diff(t_s)))))


def _usable_stride(n: int, window: int, stride: int) -> int:
    """The stride, lowered where n samples cannot hold `window` nodes that far apart."""
    return max(1, min(stride, (n - 1) // max(window - 1, 1)))


def _window_starts(index: np.ndarray, n: int, window: int, stride: int = 1) -> np.ndarray:
    """First sample of each sample's window of `window` nodes `stride` samples apart:
    centred, slid inward at the ends. (c,) ints."""
    return np.clip(index - (window // 2) * stride, 0, n - 1 - (window - 1) * stride)


def _column_dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """sum_j a[j] * b[j] over the window axis, (w, c) -> (c,), summed in node order (so the
    result does not depend on how many samples share the call)."""
    total = a[0] * b[0]
    for j in range(1, a.shape[0]):
        total += a[j] * b[j]
    return total


def derivative_weights(
    t_s: np.ndarray, index: np.ndarray, window: int, degree: int, stride: int = 1
) -> tuple[np.ndarray, np.ndarray]:
    """Weights of the local fits for the samples `index`.

    t_s: (N,) strictly increasing times in s; index: (c,) sample indices; the window's
    nodes are `stride` samples apart.
    Returns (starts (c,), weights (3, window, c)): derivative r (1, 2, 3) of a signal x at
    sample i is sum_j weights[r-1, j, i] * (x[starts[i] + j·stride] - x[i]), in unit/s^r.
    Orders above `degree` get zero weights. The sample axis is last (contiguous), so every
    step is a plain vector operation over the c samples.

    Each window's times are mapped onto u in [-1, 1] (centred on the window, divided by half
    its span), and the fit is built from the polynomials orthogonal on the window's own
    nodes (Forsythe's three-term recurrence, "Generation and use of orthogonal polynomials
    for data-fitting with a digital computer", 1957): q_0 = 1,
    q_(m+1) = (u - α_m) q_m - β_m q_(m-1), α_m = <u q_m, q_m> / <q_m, q_m>,
    β_m = <q_m, q_m> / <q_(m-1), q_(m-1)>. The least-squares fit is then
    sum_m <x, q_m> q_m / <q_m, q_m> with no system to solve, and its derivatives at the
    sample follow from the recurrence differentiated. The recurrence on near-even nodes in
    [-1, 1] is well conditioned; q_0 drops out of every derivative, which is why the weights
    sum to zero and may act on x - x[i].
    """
    n = t_s.shape[0]
    c = index.shape[0]
    starts = _window_starts(index, n, window, stride)
    t_window = t_s[starts[None, :] + stride * np.arange(window)[:, None]]  # (w, c)
    mid_s = 0.5 * (t_window[-1] + t_window[0])
    half_span_s = 0.5 * (t_window[-1] - t_window[0])
    u = (t_window - mid_s) / half_span_s  # (w, c) in [-1, 1]
    u_sample = (t_s[index] - mid_s) / half_span_s  # (c,)
    orders = np.arange(len(_ORDERS) + 1, dtype=float)[1:, None]  # r = 1, 2, 3

    nodes = np.empty((degree, window, c))  # q_1 .. q_degree at the nodes
    scaled = np.empty((len(_ORDERS), degree, c))  # q_m^(r)(u_sample) / <q_m, q_m>, r = 1-3
    # q_0 = 1 (its derivatives zero); α_0 is the nodes' mean, so q_1 = u - mean(u)
    mean_u = u.mean(axis=0)
    q_prev, q = 1.0, u - mean_u
    at_prev, at = np.zeros((4, c)), np.zeros((4, c))
    at_prev[0], at[0], at[1] = 1.0, u_sample - mean_u, 1.0
    norm_prev, norm = np.full(c, float(window)), _column_dot(q, q)
    for m in range(degree):
        nodes[m] = q
        scaled[:, m] = at[1:] / norm
        if m + 1 == degree:
            break
        alpha = _column_dot(u * q, q) / norm
        beta = norm / norm_prev
        q_next = (u - alpha) * q - beta * q_prev
        at_next = (u_sample - alpha) * at - beta * at_prev
        at_next[1:] += orders * at[:-1]  # d^r/du^r of u q_m adds r q_m^(r-1)
        q_prev, q, at_prev, at = q, q_next, at, at_next
        norm_prev, norm = norm, _column_dot(q, q)
    # plain products (not einsum, not a float power): rounding independent of the block
    weights = np.empty((len(_ORDERS), window, c))
    for r, order in enumerate(_ORDERS):
        scaled[r] /= half_span_s**order
        np.multiply(nodes[0], scaled[r, 0], out=weights[r])
        for m in range(1, degree):
            weights[r] += nodes[m] * scaled[r, m]
    return starts, weights


def _apply_weights(signals, out, lo, hi, starts, weights, stride=1) -> None:
    """out[:, :, lo:hi] = sum_j weights[:, j] * (x[starts + j·stride] - x): weights (3, w, c)
    or (3, w, 1)."""
    centre = signals[:, lo:hi]  # (k, c)
    contiguous = starts[-1] - starts[0] == starts.size - 1  # no window slid at an end
    window = weights.shape[1]
    rel = np.empty((window, *centre.shape))  # (w, k, c): window sample j minus the sample
    for j in range(window):
        first = starts[0] + j * stride
        if contiguous:  # a slice, not a gather
            shifted = signals[:, first : first + starts.size]
        else:
            shifted = signals[:, starts + j * stride]
        np.subtract(shifted, centre, out=rel[j])
    if weights.shape[2] == 1:
        out[:, :, lo:hi] = np.einsum("rj,jsc->rsc", weights[:, :, 0], rel)
    else:
        out[:, :, lo:hi] = np.einsum("rjc,jsc->rsc", weights, rel)


def _apply_centred_weights(signals, out, lo, hi, weights) -> None:
    """Like _apply_weights for windows centred on their samples with one weight row each.

    weights: (3, w). sum_j w_j (x[i+j-h] - x[i]) equals sum_j C_j (x[i+j-h+1] - x[i+j-h])
    with C_j = -(w_0 + ... + w_j) (summation by parts; the w_j sum to zero up to rounding,
    which the left side removes too), so each signal goes through one compiled convolution
    of its first differences per order instead of 3·w array updates.
    """
    half = weights.shape[1] // 2
    steps = np.diff(signals[:, lo - half : hi + half], axis=1)  # (k, c + 2h - 1)
    kernels = -np.cumsum(weights[:, :-1], axis=1)[:, ::-1]  # reversed: convolve flips
    for r in range(len(_ORDERS)):
        for s, row in enumerate(steps):
            out[r, s, lo:hi] = np.convolve(row, kernels[r], mode="valid")


def _apply_strided_centred_weights(signals, out, lo, hi, weights, stride) -> None:
    """Like _apply_centred_weights for nodes `stride` samples apart: weights (3, w), one
    shifted slice per node, summed in node order (w array updates per order)."""
    half = weights.shape[1] // 2
    centre = signals[:, lo:hi]
    out[:, :, lo:hi] = 0.0
    for j in range(weights.shape[1]):
        if j == half:
            continue  # x[i] - x[i]
        rel = signals[:, lo + (j - half) * stride : hi + (j - half) * stride] - centre
        for r in range(len(_ORDERS)):
            out[r, :, lo:hi] += weights[r, j] * rel


def _evenly_spaced(steps: np.ndarray) -> bool:
    return bool(np.ptp(steps) <= EVEN_STEP_RTOL * steps[0])


def _derivatives_of_block(
    t_s: np.ndarray,
    signals: np.ndarray,
    out: np.ndarray,
    lo: int,
    hi: int,
    degree: int,
    stride: int = 1,
) -> None:
    """Fill out[:, :, lo:hi] (3, k, c) with the derivatives of signals (k, N) at samples lo..hi,
    fitted on nodes `stride` samples apart."""
    n = t_s.shape[0]
    window = min(WINDOW_SAMPLES, n)
    reach = window * stride
    span = t_s[max(lo - reach, 0) : min(hi + reach, n)]
    steps = np.diff(span)
    if not _evenly_spaced(steps):
        starts, weights = derivative_weights(t_s, np.arange(lo, hi), window, degree, stride)
        _apply_weights(signals, out, lo, hi, starts, weights, stride)
        return
    if stride > 1:
        # Even steps, nodes apart: one weight row serves every centred sample; the few
        # samples near the ends, where windows slide by fractions of a node, get their own.
        half = window // 2
        model_t = np.arange(window) * stride * float(np.mean(steps))
        _, model = derivative_weights(model_t, np.arange(window), window, degree)
        centred_lo, centred_hi = max(lo, half * stride), min(hi, n - half * stride)
        edges = [(lo, hi)]
        if window % 2 == 1 and centred_lo < centred_hi:
            _apply_strided_centred_weights(
                signals, out, centred_lo, centred_hi, model[:, :, half], stride
            )
            edges = [(lo, centred_lo), (centred_hi, hi)]
        for a, b in edges:
            if a < b:
                starts, weights = derivative_weights(t_s, np.arange(a, b), window, degree, stride)
                _apply_weights(signals, out, a, b, starts, weights, stride)
        return
    # Even steps: the fit depends only on where the sample sits in its window, so the
    # weights of `window` model samples serve the whole block (same fit, no solves).
    model_t = np.arange(window) * float(np.mean(steps))
    _, model = derivative_weights(model_t, np.arange(window), window, degree)
    half = window // 2
    edges = [(lo, hi)]
    centred_lo, centred_hi = max(lo, half), min(hi, n - half)  # windows centred on the sample
    if window % 2 == 1 and centred_lo < centred_hi:
        _apply_centred_weights(signals, out, centred_lo, centred_hi, model[:, :, half])
        edges = [(lo, centred_lo), (centred_hi, hi)]
    for a, b in edges:
        if a < b:
            index = np.arange(a, b)
            starts = _window_starts(index, n, window)
            _apply_weights(signals, out, a, b, starts, model[:, :, index - starts])


def end_node_steps(t_s: np.ndarray, stride: int) -> tuple[float, float]:
    """The fit's node step at the first and at the last sample, s: the time over which the
    motion at an end must be reached from rest (see junction_rates)."""
    n = t_s.shape[0]
    m = _usable_stride(n, min(WINDOW_SAMPLES, n), stride)
    return float(t_s[m] - t_s[0]), float(t_s[-1] - t_s[-1 - m])


def junction_rates(
    v_in: np.ndarray,
    a_in: np.ndarray,
    j_in: np.ndarray,
    v_out: np.ndarray,
    a_out: np.ndarray,
    step_s: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Accel and jerk magnitudes, each (k,), at an end sample where the path's motion (v_in,
    a_in, j_in, estimated inside the path) meets the motion outside it (v_out, a_out; zero for
    an arm held still), reached within one node step step_s.

    A velocity that changes by Δv within one step is an acceleration of Δv/h and a jerk of
    Δv/h² (up and back within two steps); an acceleration that changes by Δa, a jerk of Δa/h:
    the sampled derivatives of the joined motion (second and third differences). So a path
    that starts at a constant speed v needs v/h, and one that starts and ends at rest needs
    nothing more than its own values.
    """
    dv = np.abs(v_in - v_out)
    da = np.abs(a_in - a_out)
    accel = np.maximum(np.abs(a_in), dv / step_s)
    jerk = np.maximum(np.abs(j_in), np.maximum(da / step_s, dv / step_s**2))
    return accel, jerk


def time_derivatives(
    t_s: np.ndarray,
    x: np.ndarray,
    *,
    chunk_samples: int = CHUNK_SAMPLES,
    threads: int = THREADS,
    stride: int | None = None,
) -> Derivatives:
    """Velocity, acceleration and jerk of x sampled at times t_s (uneven steps honoured).

    t_s: (N,) strictly increasing, s, N >= 2; x: (N, k) or (N,) signals in any unit.
    stride: samples between the fit's nodes (default fit_stride(t_s); a caller that cuts a
    long path into blocks passes the whole path's, so every block fits alike).
    With N < WINDOW_SAMPLES the fit uses all N samples with degree min(FIT_DEGREE, N - 1):
    N = 2 gives the difference quotient as velocity and zero acceleration and jerk.
    Blocks of chunk_samples are independent, so the result does not depend on chunk_samples
    or threads; numpy releases the GIL inside its loops, so threads share the work.
    """
    t_s = np.asarray(t_s, dtype=float)
    x = np.asarray(x, dtype=float)
    flat = x.ndim == 1
    x2 = x[:, None] if flat else x
    n = t_s.shape[0]
    if t_s.ndim != 1 or n < 2 or x2.ndim != 2 or x2.shape[0] != n:
        raise ValueError(f"need t_s (N,) with N >= 2 and x (N, k), got {t_s.shape}, {x.shape}")
    degree = min(FIT_DEGREE, min(WINDOW_SAMPLES, n) - 1)
    stride = _usable_stride(
        n, min(WINDOW_SAMPLES, n), fit_stride(t_s) if stride is None else stride
    )
    signals = np.ascontiguousarray(x2.T)  # (k, N): samples last, like the weights
    out = np.empty((len(_ORDERS), signals.shape[0], n))
    if _evenly_spaced(np.diff(t_s)):  # one pass: the compiled convolutions need no blocks
        chunk_samples = n
    bounds = [(lo, min(lo + chunk_samples, n)) for lo in range(0, n, chunk_samples)]
    if threads > 1 and len(bounds) > 1:
        with ThreadPoolExecutor(max_workers=threads) as pool:
            list(
                pool.map(
                    lambda b: _derivatives_of_block(t_s, signals, out, *b, degree, stride), bounds
                )
            )
    else:
        for lo, hi in bounds:
            _derivatives_of_block(t_s, signals, out, lo, hi, degree, stride)
    if flat:
        return Derivatives(velocity=out[0, 0], acceleration=out[1, 0], jerk=out[2, 0])
    return Derivatives(velocity=out[0].T, acceleration=out[1].T, jerk=out[2].T)
