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

References
----------
Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., sec. 6.8
(quantisation of filter coefficients).
"""

from __future__ import annotations

import numpy as np

from ..qformat import QFormat, fit_word, round_real

MAX_K = 62


def _quantise(values, fmt: QFormat, s: int, rounding: str) -> tuple[list[int], bool]:
    x = np.ldexp(np.asarray(values, dtype=float), fmt.frac_bits - s)
    ints = [int(v) for v in round_real(x, rounding)]
    fits = all(fmt.min_int <= v <= fmt.max_int for v in ints)
    return ints, fits


def fit_group(values, fmt: QFormat, rounding: str, *, min_shift: int, acc_limit: int | None = None,
              data_width: int | None = None) -> tuple[tuple[int, ...], int, bool]:
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
        if fmt.frac_bits - s <= 1:
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
