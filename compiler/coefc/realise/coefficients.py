"""Fitting real coefficients to the coefficient word: reals in, integers and shifts out.

A group of coefficients that share one coefficient shift ``s`` (a section's five
coefficients, a FIR's taps, a gain) is stored as integers ``C`` with physical value
``C * 2^(s - Fc)``; the op then rounds its accumulator by ``k = Fc - s`` bits.

- Sections: ``s`` is the smallest ``s >= 0`` for which every quantised coefficient
  fits the coefficient word (``|a1|`` near 2 in a Q1.n word, or a large numerator,
  needs ``s >= 1``).  ``k = Fc - s >= 1`` is required; when no such ``s`` fits,
  the coefficients are saturated and the fact is reported.
- FIR taps and gains: ``s`` may also be negative (``k > Fc``) so that small taps
  and gains use the whole word; ``k`` stays within ``1 .. MAX_K``.  For FIR taps the
  shift is also raised until ``sum|C_k| * 2^(Wd-1)`` fits the accumulator, so a
  full-scale input cannot wrap it.

Quantisation rounds by the arithmetic's rounding mode (add-half by default).

Zeros at z = -1 and z = +1
--------------------------
A numerator ``b0 + b1 z^-1 + b2 z^-2`` has a zero at ``z = -1`` exactly when
``b0 - b1 + b2 = 0`` and at ``z = +1`` exactly when ``b0 + b1 + b2 = 0``.  Where the
float design places a zero there (within 1e-6), :func:`fit_section` rounds ``B0`` and
``B2`` and derives ``B1`` from them so that the same relation holds between the
integers: one zero at -1 gives ``B1 = B0 + B2``, one at +1 ``B1 = -(B0 + B2)``, a
double zero ``B2 = B0, B1 = +-2 B0``, one at each ``B1 = 0, B2 = -B0``.  A high-pass
or DC blocker then blocks DC exactly, and a low-pass has an exact null at Nyquist,
however few bits the numerator's gain has.

References
----------
Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., sec. 6.8
(quantisation of filter coefficients).
"""

from __future__ import annotations

import math

import numpy as np

from ..qformat import QFormat, fit_word, round_real

MAX_K = 62

#: a float zero this close to z = -1 or z = +1 is taken to lie on it
ZERO_TOL = 1e-6


def zeros_at_unit_points(b) -> tuple[int, int]:
    """How many zeros of the numerator ``b = [b0, b1, b2]`` lie at z = -1 and at z = +1.

    The roots of ``b0 z^2 + b1 z + b2``; a root within :data:`ZERO_TOL` of -1 or +1
    counts.  ``(0, 0)`` when ``b0 == 0`` (no second-order numerator to constrain).
    """
    b = [float(v) for v in b] + [0.0] * (3 - len(b))
    if b[0] == 0.0 or not all(np.isfinite(b)):
        return 0, 0
    r = np.roots(b[:3]) if b[2] != 0.0 or b[1] != 0.0 else np.zeros(0)
    minus = int(sum(1 for z in r if abs(z + 1.0) <= ZERO_TOL))
    plus = int(sum(1 for z in r if abs(z - 1.0) <= ZERO_TOL))
    return minus, plus


def place_zeros(ints, minus: int, plus: int) -> list[int]:
    """Integers ``[B0, B1, B2, ...]`` with B1 (and B2) derived so the zeros stay at -1 / +1."""
    out = [int(v) for v in ints]
    b0, b2 = out[0], out[2]
    if (minus, plus) == (2, 0):
        out[1], out[2] = 2 * b0, b0
    elif (minus, plus) == (0, 2):
        out[1], out[2] = -2 * b0, b0
    elif (minus, plus) == (1, 1):
        out[1], out[2] = 0, -b0
    elif minus == 1:
        out[1] = b0 + b2
    elif plus == 1:
        out[1] = -(b0 + b2)
    return out


def fit_section(b, a, fmt: QFormat, rounding: str, *, min_shift: int = 0,
                min_k: int = 1) -> tuple[tuple[int, ...], int, bool]:
    """Quantise a section ``(b, a)`` with one shared shift, zeros at +-1 kept exactly.

    Returns ``(ints, shift, saturated)`` with ``ints = (B0, B1, B2, A1, A2)``; the
    shift is the smallest ``>= min_shift`` at which every integer (after the zero
    placement of the module docstring) fits the coefficient word.
    """
    values = np.asarray([*b, a[1], a[2]], dtype=float)
    if not np.all(np.isfinite(values)):
        raise ValueError("coefficient is not finite")
    minus, plus = zeros_at_unit_points(b)
    s = min_shift
    while True:
        ints, _ = _quantise(values, fmt, s, rounding)
        ints = place_zeros(ints, minus, plus)
        if all(fmt.min_int <= v <= fmt.max_int for v in ints):
            return tuple(ints), s, False
        if fmt.frac_bits - s <= max(1, min_k):  # min_k: the product shift, Fc - s - P >= 0
            return tuple(fit_word(v, fmt.width, "saturate") for v in ints), s, True
        s += 1


def split_feedback(a, fmt: QFormat, s: int) -> tuple[tuple[int, int], tuple[int, int], bool]:
    """High and low words of the feedback coefficients ``a[1], a[2]`` for ``df1-wide-fb``.

    The value ``a * 2^(Fc - s + L)`` (``L = Wc - 1``, :func:`coefc.program.lo_bits`)
    is rounded to the nearest integer ``T`` (ties to even) and split as
    ``T = AH * 2^L + AL`` with ``AH`` the nearest integer to ``T / 2^L``, so
    ``|AL| <= 2^(L-1)``: the pair represents ``a`` to within ``2^-(Fc - s + L + 1)``.
    A high word outside the coefficient word is clamped and the low word takes up
    what it can (``bad`` is then true).  Returns ``((A1H, A2H), (A1L, A2L), bad)``.

    References
    ----------
    J. Dattorro, "The implementation of recursive digital filters for high-fidelity
    audio", J. Audio Eng. Soc. 36(11), 1988 (double-precision feedback
    coefficients; from memory).
    """
    return split_words((a[1], a[2]), fmt, s)


def split_numerator(b, fmt: QFormat, s: int) -> tuple[tuple[int, ...], tuple[int, ...], bool]:
    """High and low words of the numerator ``b[0], b[1], b[2]`` for ``df1ef-wide``.

    The split of :func:`split_feedback` applied to the (already scaled) numerator
    at coefficient shift *s*, after the zeros at z = -1 / +1 are placed exactly on
    the double-word integers ``T`` (:func:`place_zeros`: ``B1 + B2`` and ``B0``
    relations hold for ``T``, so the zeros stay exactly where the design put them).
    Returns ``((B0H, B1H, B2H), (B0L, B1L, B2L), bad)``.
    """
    from ..program import lo_bits

    L = lo_bits(fmt)
    ts = [round(math.ldexp(float(v), fmt.frac_bits - s + L)) for v in b[:3]]
    ts = place_zeros(ts, *zeros_at_unit_points(b))
    return split_words(ts, fmt, s, exact=True)


def split_words(values, fmt: QFormat, s: int, exact: bool = False) -> tuple[tuple[int, ...], tuple[int, ...], bool]:
    """Each value as a high and a low coefficient word (:func:`split_feedback` states the rule).

    *exact*: *values* are already the integers ``T`` (the value times ``2^(Fc - s + L)``)."""
    from ..program import lo_bits

    L = lo_bits(fmt)
    half = 1 << (L - 1)
    his, los, bad = [], [], False
    for v in values:
        t = int(v) if exact else round(math.ldexp(float(v), fmt.frac_bits - s + L))  # exact integer of the rounding
        h = (t + half) >> L  # nearest (ties up); |t - h 2^L| <= 2^(L-1)
        if h > fmt.max_int or h < fmt.min_int:
            h = min(max(h, fmt.min_int), fmt.max_int)
            bad = True
        lo = t - (h << L)
        if abs(lo) > half:
            lo = max(-half, min(half, lo))
            bad = True
        his.append(int(h))
        los.append(int(lo))
    return tuple(his), tuple(los), bad


def realised_gain(intended, realised) -> float:
    """Least-squares gain of the *realised* coefficients relative to the *intended* ones.

    ``<intended, realised> / <intended, intended>``: exactly the ratio of the two when
    the realised numerator has the intended shape (zeros kept at +-1), so dividing
    the channel's final gain by it restores the overall gain.
    """
    x = np.asarray(intended, dtype=float)
    y = np.asarray(realised, dtype=float)
    den = float(np.dot(x, x))
    return float(np.dot(x, y)) / den if den > 0 else 1.0


def _quantise(values, fmt: QFormat, s: int, rounding: str) -> tuple[list[int], bool]:
    x = np.ldexp(np.asarray(values, dtype=float), fmt.frac_bits - s)
    ints = [int(v) for v in round_real(x, rounding)]
    fits = all(fmt.min_int <= v <= fmt.max_int for v in ints)
    return ints, fits


def fit_group(values, fmt: QFormat, rounding: str, *, min_shift: int, acc_limit: int | None = None,
              data_width: int | None = None, min_k: int = 1) -> tuple[tuple[int, ...], int, bool]:
    """Quantise *values* with one shared shift; return ``(ints, shift, saturated)``.

    The shift starts at *min_shift* and rises until every value fits (and, with
    *acc_limit*, until ``sum|C| * 2^(data_width-1) < 2^(acc_limit-1)``); past
    ``k = Fc - s = 1`` the values are saturated.
    """
    values = np.asarray(values, dtype=float)
    if not np.all(np.isfinite(values)):
        raise ValueError("coefficient is not finite")
    s = min_shift
    while True:
        ints, fits = _quantise(values, fmt, s, rounding)
        if fits and acc_limit is not None:
            fits = sum(abs(v) for v in ints) << (data_width - 1) < (1 << (acc_limit - 1))
        if fits:
            return tuple(ints), s, False
        if fmt.frac_bits - s <= max(1, min_k):
            return tuple(fit_word(v, fmt.width, "saturate") for v in ints), s, True
        s += 1


def lowest_shift(values, fmt: QFormat) -> int:
    """The most negative shift worth trying for *values* (full use of the word, k <= MAX_K)."""
    m = float(np.max(np.abs(values))) if len(values) else 0.0
    lo = fmt.frac_bits - MAX_K
    if m == 0.0:
        return 0
    # C = m * 2^(Fc - s) < 2^(W-1)  <=>  s > log2(m) + Fc - W + 1
    s = int(np.floor(np.log2(m))) + fmt.frac_bits - fmt.width + 1
    return max(lo, s)
