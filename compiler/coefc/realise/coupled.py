"""Coupled-form sections: a float biquad in, the integers of the ``coupled`` recurrence out.

The recurrence and the meaning of ``b = (D, C1, C2, G)`` and ``a = (A11, A12, A21,
A22)`` are stated in :mod:`coefc.program`.  The mapping:

1. Poles.  A complex pair ``r e^(+-j theta)`` becomes the rotation ``A11 = A22 =
   r cos(theta)``, ``A21 = -A12 = r sin(theta)`` (Rader and Gold); real poles
   ``p1, p2`` (``|p1| >= |p2|``) become ``A11 = p1``, ``A22 = p2``, ``A12 = 0``,
   ``A21 = 1 - |p1|`` (at least one LSB).  The pole coefficients are rounded by
   the arithmetic's rounding mode; the quantised poles are the eigenvalues of the
   integer matrix, so they move by at most about half an LSB in each of their real
   and imaginary parts (the grid is uniform in the z-plane), where the direct
   form's ``a1, a2`` grid is sparse near ``z = 1``.
2. State level.  ``G`` is the largest value, rounded toward zero, for which every
   input within full scale keeps both states within the data word, roundoff
   included, measured on the *quantised* ``A``: ``G ||f_i|| + e_max (||F_i1||_1 +
   ||F_i2||_1) LSB <= full scale`` with ``f_i`` the response from the section input
   to state ``i`` for ``G = 1`` and ``F_ij`` from the rounding of state ``j`` to
   state ``i``.  The norm is the arithmetic's scaling norm (``l1``: the rigorous
   bound; ``l2``, ``linf``; ``none`` uses ``linf``); it is local to the section,
   whose input is a data word.
3. Zeros.  With the quantised ``A`` and ``G`` fixed, ``D = b0`` and ``C1, C2`` are
   solved from ``b1 = D a1 + G C1``, ``b2 = D a2 + G (C2 A21 - C1 A22)`` and rounded;
   only this last rounding moves the zeros.  Zeros at ``z = +-1`` are therefore
   not kept exactly (unlike the direct forms): a high-pass leaks a little DC, which
   the response analysis measures.

One coefficient shift serves the section: the smallest ``s >= 0`` at which every
integer fits the coefficient word (``|C|`` or ``|D|`` above 2 in Q2.n needs ``s >= 1``).

References
----------
C. M. Rader and B. Gold, "Effects of parameter quantization on the poles of a
digital filter", Proc. IEEE 55(5), 1967 (from memory).
L. B. Jackson, *Digital Filters and Signal Processing*, 3rd ed., 1996, ch. 11
(coupled-form sections, state scaling; from memory).
"""

from __future__ import annotations

import numpy as np

from ..qformat import QFormat, fit_word, round_real

#: responses for the state norms stop where the slowest pole has decayed below this factor
_DECAY = 1e-13
_MAX_LEN = 1 << 20


def pole_matrix(a) -> np.ndarray:
    """The real 2x2 matrix of the coupled form for the denominator ``[1, a1, a2]``."""
    a1, a2 = float(a[1]), float(a[2])
    disc = a1 * a1 - 4.0 * a2
    if disc < 0.0:
        al, be = -a1 / 2.0, float(np.sqrt(-disc)) / 2.0
        return np.array([[al, -be], [be, al]])
    r = float(np.sqrt(disc))
    p = sorted([(-a1 + r) / 2.0, (-a1 - r) / 2.0], key=abs)  # the slower pole in the second state
    return np.array([[p[0], 0.0], [max(1.0 - abs(p[1]), 0.0), p[1]]])


def _length(A: np.ndarray) -> int:
    r = float(np.max(np.abs(np.linalg.eigvals(A))))
    if r >= 1.0:
        return 1 << 14
    if r <= 0.0:
        return 16
    return int(min(max(np.ceil(np.log(_DECAY) / np.log(r)) + 16, 16), _MAX_LEN))


def state_responses(A: np.ndarray, n: int) -> np.ndarray:
    """``R[t] = A^t`` for ``t < n`` (shape ``(n, 2, 2)``): column j, row i is state j -> state i."""
    from scipy import signal

    a = [1.0, -(A[0, 0] + A[1, 1]), A[0, 0] * A[1, 1] - A[0, 1] * A[1, 0]]
    imp = np.zeros(n)
    imp[0] = 1.0
    # (zI - A)^-1 = adj / det;  z^-1 (zI - A)^-1 = sum_t A^t z^-(t+1)
    adj = {(0, 0): [0.0, 1.0, -A[1, 1]], (0, 1): [0.0, 0.0, A[0, 1]],
           (1, 0): [0.0, 0.0, A[1, 0]], (1, 1): [0.0, 1.0, -A[0, 0]]}
    R = np.zeros((n, 2, 2))
    for (i, j), b in adj.items():
        R[:, i, j] = signal.lfilter(b, a, imp)
    return R  # R[t] = A^(t-1) for t >= 1: the response one sample after an entry into the states


def _norm(h: np.ndarray, p: str) -> float:
    if p == "l1":
        return float(np.sum(np.abs(h)))
    if p == "l2":
        return float(np.sqrt(np.dot(h, h)))
    nfft = 1 << max(12, int(np.ceil(np.log2(max(len(h), 2)))) + 2)
    return float(np.max(np.abs(np.fft.rfft(h, nfft))))


def fit_coupled(b, a, fmt: QFormat, rounding: str, data: QFormat, norm: str, e_max: float,
                min_shift: int = 0) -> tuple[tuple[int, ...], tuple[int, ...], int, bool]:
    """Quantise a float section ``(b, a)`` into ``(D, C1, C2, G)``, ``(A11, A12, A21, A22)``, shift, saturated.

    *e_max* is the largest rounding error in LSB (its centre plus radius), *norm* the
    scaling norm for the states (module docstring).
    """
    b = [float(v) for v in b] + [0.0] * (3 - len(b))
    A = pole_matrix(a)
    complex_pair = A[0, 1] != 0.0
    s = min_shift
    while True:
        f = fmt.frac_bits - s
        q = lambda v: int(round_real(np.array([np.ldexp(v, f)]), rounding)[0])  # noqa: E731
        if complex_pair:
            al, be = q(A[0, 0]), max(q(A[1, 0]), 1)
            ai = (al, -be, be, al)
        else:
            ai = (q(A[0, 0]), 0, max(q(A[1, 0]), 1), q(A[1, 1]))
        Aq = np.array([[ai[0], ai[1]], [ai[2], ai[3]]], dtype=float) * 2.0 ** -f
        n = _length(Aq)
        R = state_responses(Aq, n)
        fs = data.max_value
        g = np.inf
        for i in (0, 1):
            rnd = e_max * data.lsb * (float(np.sum(np.abs(R[:, i, 0]))) + float(np.sum(np.abs(R[:, i, 1]))))
            nm = _norm(R[:, i, 0], "linf" if norm == "none" else norm)
            if nm > 0:
                g = min(g, max(fs - rnd, 0.0) / nm)
        g = 1.0 if not np.isfinite(g) else g
        gi = max(int(np.floor(np.ldexp(g, f))), 1)
        G = gi * 2.0 ** -f
        a1q, a2q = -(Aq[0, 0] + Aq[1, 1]), Aq[0, 0] * Aq[1, 1] - Aq[0, 1] * Aq[1, 0]
        d = b[0]
        c1 = (b[1] - d * a1q) / G
        c2 = ((b[2] - d * a2q) / G + c1 * Aq[1, 1]) / Aq[1, 0]
        bi = (q(d), q(c1), q(c2), gi)
        ints = bi + ai
        if all(fmt.min_int <= v <= fmt.max_int for v in ints):
            return bi, ai, s, False
        if f <= 1:
            sat = tuple(fit_word(v, fmt.width, "saturate") for v in ints)
            return sat[:4], sat[4:], s, True
        s += 1
