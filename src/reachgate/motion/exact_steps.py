"""Exact per-step discretisation of linear stochastic systems, and their fast propagation.

A system dx = A x dt + dβ, β Wiener with intensity Qc (E[dβ dβᵀ] = Qc dt), moves over a step
of dt exactly as x[k+1] = Ad x[k] + w[k], Ad = expm(A dt), w[k] ~ N(0, Qd),
Qd = ∫0^dt e^{As} Qc e^{Aᵀs} ds (Van Loan's method gives both from one matrix exponential).
Every step may have its own dt, so uneven sampling is honoured without a resampling grid.
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import expm


def psd_factor(q: np.ndarray) -> np.ndarray:
    """A factor L with L Lᵀ = q for symmetric positive semidefinite q ``(..., n, n)``.

    Eigen-factor (robust where Cholesky fails on nearly singular short-step covariances), with
    each eigenvector's sign fixed so its largest entry is positive: a scaled q gives a scaled L.
    """
    lam, vec = np.linalg.eigh(0.5 * (q + np.swapaxes(q, -1, -2)))
    pivot = np.take_along_axis(vec, np.argmax(np.abs(vec), axis=-2)[..., None, :], axis=-2)
    vec = vec * np.where(pivot < 0, -1.0, 1.0)
    return vec * np.sqrt(np.clip(lam, 0.0, None))[..., None, :]


def step_maps(a: np.ndarray, qc: np.ndarray, dt_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Exact maps for steps dt ``(M,)`` s of dx = a x dt + dβ (a, qc ``(n, n)``): transitions
    Ad ``(M, n, n)`` and noise factors L ``(M, n, n)`` with L Lᵀ = Qd.

    Van Loan: expm([[-A, Qc], [0, Aᵀ]] dt) = [[., F12], [0, F22]], Ad = F22ᵀ, Qd = F22ᵀ F12.
    """
    n = a.shape[0]
    block = np.zeros((2 * n, 2 * n))
    block[:n, :n], block[:n, n:], block[n:, n:] = -a, qc, a.T
    f = expm(block[None] * np.asarray(dt_s, dtype=float)[:, None, None])
    ad = np.swapaxes(f[:, n:, n:], -1, -2)
    return ad, psd_factor(ad @ f[:, :n, n:])


def propagate(ad: np.ndarray, w: np.ndarray, x0: np.ndarray) -> np.ndarray:
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
