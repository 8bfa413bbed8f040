"""Sub-sample delays: a Thiran all-pass or a Lagrange FIR after a whole-sample delay.

A delay of ``D`` samples (not a whole number) is split into a whole-sample delay
``M`` and a fractional-delay filter of order ``N`` whose own delay ``d = D - M``
sits where the filter is most accurate (``d`` near ``N`` for Thiran, near
``N / 2`` for Lagrange).  The order is the smallest (1..:data:`MAX_ORDER`) whose
group delay stays within ``max_error_samples`` of ``d`` from 0 Hz up to
``accuracy_hz``, checked on a grid of 512 points.

Thiran all-pass (maximally flat group delay at 0 Hz), order ``N``:
``A(z) = sum_k a_k z^-k``, ``a_k = (-1)^k C(N, k) prod_{n=0}^{N} (d - N + n) / (d - N + k + n)``,
``H(z) = z^-N A(1/z) / A(z)``; stable for ``d > N - 1``.

Lagrange FIR (maximally flat frequency response at 0 Hz), order ``N``:
``h[n] = prod_{k != n} (d - k) / (n - k)``, ``n = 0..N``.

References
----------
J.-P. Thiran, "Recursive digital filters with maximally flat group delay", IEEE
Trans. Circuit Theory 18(6), 659-664, 1971 (from memory).
T. I. Laakso, V. Valimaki, M. Karjalainen & U. K. Laine, "Splitting the unit
delay: tools for fractional delay filter design", IEEE Signal Processing Magazine
13(1), 30-60, 1996 (from memory): both formulas above.
"""

from __future__ import annotations

import math

import numpy as np

#: Highest order tried.
MAX_ORDER = 20
#: Default accuracy: group delay within 0.02 samples of the request up to 1 kHz.
DEFAULT_MAX_ERROR_SAMPLES = 0.02
DEFAULT_ACCURACY_HZ = 1000.0


def thiran_denominator(d: float, order: int) -> np.ndarray:
    """Thiran all-pass denominator ``[1, a_1, ..., a_N]`` for a delay of *d* samples.

    Examples
    --------
    >>> [round(float(x), 12) for x in thiran_denominator(0.6, 1)]  # first order: a_1 = (1 - d) / (1 + d)
    [1.0, 0.25]
    """
    n_ = order
    a = np.empty(n_ + 1)
    for k in range(n_ + 1):
        p = 1.0
        for n in range(n_ + 1):
            p *= (d - n_ + n) / (d - n_ + k + n)
        a[k] = (-1) ** k * math.comb(n_, k) * p
    return a


def lagrange_taps(d: float, order: int) -> np.ndarray:
    """Lagrange interpolator taps ``h[0..N]`` for a delay of *d* samples.

    Examples
    --------
    >>> [float(x) for x in lagrange_taps(0.5, 1)]  # linear interpolation half-way
    [0.5, 0.5]
    """
    n = np.arange(order + 1)
    h = np.ones(order + 1)
    for k in range(order + 1):
        sel = n != k
        h[sel] *= (d - k) / (n[sel] - k)
    return h


def _gd_fir(h: np.ndarray, w: np.ndarray) -> np.ndarray:
    k = np.arange(h.size)
    e = np.exp(-1j * np.outer(w, k))
    return np.real((e @ (k * h)) / (e @ h))


def _gd_allpass(a: np.ndarray, w: np.ndarray) -> np.ndarray:
    # tau(H) = N - 2 tau_poly(A) for H = z^-N A(1/z) / A(z) ... computed directly: tau = tau(b) - tau(a)
    b = a[::-1]
    return _gd_fir(b, w) - _gd_fir(a, w)


def split(exact: float, order: int, kind: str) -> tuple[int, float]:
    """``(whole-sample delay M, filter delay d)`` for a total of *exact* samples."""
    centre = order if kind == "thiran" else order / 2
    m = int(math.floor(exact - centre + 0.5))
    return m, exact - m


def design(exact: float, kind: str, fs: float, max_error: float, accuracy_hz: float):
    """The lowest-order fractional delay meeting the accuracy.

    Returns ``(kind, order, M, d, coefficients, worst group delay error)``;
    coefficients are the all-pass denominator (Thiran) or the taps (Lagrange).
    ``None`` when no order up to :data:`MAX_ORDER` meets it with ``M >= 0``.
    """
    w = 2 * math.pi * np.linspace(0.0, accuracy_hz, 512) / fs
    for order in range(1, MAX_ORDER + 1):
        m, d = split(exact, order, kind)
        if m < 0:
            return None
        coef = thiran_denominator(d, order) if kind == "thiran" else lagrange_taps(d, order)
        if kind == "thiran" and float(np.max(np.abs(np.roots(coef)))) >= 1.0:
            continue
        gd = _gd_allpass(coef, w) if kind == "thiran" else _gd_fir(coef, w)
        err = float(np.max(np.abs(gd - d)))
        if err <= max_error:
            return kind, order, m, d, coef, err
    return None
