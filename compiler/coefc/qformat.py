"""Q formats, rounding and overflow: the vocabulary of fixed-point words.

Notation (defined once, here): ``Qm.n`` is a signed two's-complement word of
``m + n`` bits with ``n`` fractional bits; the sign bit is counted in ``m``.  So
Q1.15 is a 16-bit word covering [-1, 1 - 2^-15], Q2.30 a 32-bit word covering
[-2, 2 - 2^-30].  ``Qn`` is shorthand for ``Q1.n``.  A value ``v`` is stored as
the integer ``round(v * 2^n)``.

Rounding modes (how ``v / 2^k`` becomes an integer, for an integer ``v``):

``add-half``     ``(v + 2^(k-1)) >> k``: add half an LSB, then drop the bits; to
                 nearest with ties towards +infinity (the cheap "add half and
                 shift" of every DSP).
``truncate``     ``v >> k``: two's-complement truncation, towards -infinity.
``half-even``    to nearest, ties to even (unbiased).
``toward-zero``  magnitude truncation: ``sign(v) * (|v| >> k)``.

``>>`` is an arithmetic shift (floor division by ``2^k``).  Overflow modes:
``saturate`` clamps to the word's range, ``wrap`` keeps the low bits (two's
complement).

References
----------
Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., sec. 6.7
(number representation) and 6.8 (quantisation of coefficients).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from .errors import close_match

ROUNDING_MODES = ("add-half", "truncate", "half-even", "toward-zero")
# Stems of other words for these modes -> the mode they mean; error hints only.
ROUNDING_HINTS = (("near", "add-half"), ("half-up", "add-half"), ("floor", "truncate"), ("trunc", "truncate"),
                  ("conv", "half-even"), ("even", "half-even"), ("bank", "half-even"), ("zero", "toward-zero"),
                  ("magn", "toward-zero"))
OVERFLOW_MODES = ("saturate", "wrap")

_Q_RE = re.compile(r"^[Qq](\d+)(?:\.(\d+))?$")


@dataclass(frozen=True, order=True)
class QFormat:
    """A signed fixed-point word: ``int_bits`` (sign included) + ``frac_bits``.

    >>> QFormat.parse("Q1.15").width
    16
    >>> str(QFormat.parse("Q31"))
    'Q1.31'
    """

    int_bits: int
    frac_bits: int

    def __post_init__(self) -> None:
        if self.int_bits < 1:
            raise ValueError(f"Q{self.int_bits}.{self.frac_bits}: the integer part must count the sign bit (m >= 1)")
        if self.frac_bits < 0:
            raise ValueError(f"Q{self.int_bits}.{self.frac_bits}: negative fractional bits")
        if self.width > 64:
            raise ValueError(f"{self}: words wider than 64 bits are not supported")

    @classmethod
    def parse(cls, text: str) -> "QFormat":
        """Parse ``Qm.n`` or ``Qn``; raise ``ValueError`` with the fix on failure."""
        m = _Q_RE.match(str(text).strip())
        if not m:
            raise ValueError(
                f"'{text}' is not a Q format; write Qm.n with the sign bit counted in m "
                "(Q1.15 is a 16-bit word, Q2.30 a 32-bit one) or Qn for Q1.n"
            )
        if m.group(2) is None:
            return cls(1, int(m.group(1)))
        return cls(int(m.group(1)), int(m.group(2)))

    @property
    def width(self) -> int:
        return self.int_bits + self.frac_bits

    @property
    def min_int(self) -> int:
        return -(1 << (self.width - 1))

    @property
    def max_int(self) -> int:
        return (1 << (self.width - 1)) - 1

    @property
    def lsb(self) -> float:
        """Value of one LSB (the quantisation step q)."""
        return 2.0 ** -self.frac_bits

    @property
    def max_value(self) -> float:
        return self.max_int * self.lsb

    @property
    def min_value(self) -> float:
        return self.min_int * self.lsb

    def __str__(self) -> str:
        return f"Q{self.int_bits}.{self.frac_bits}"


def round_shift(v, k: int, mode: str):
    """Divide integers ``v`` by ``2^k`` and round by *mode* (see module docstring).

    Works on Python ints (exact, any size) and on int64 numpy arrays (exact for
    every int64 value: the rounding is done on the remainder, so ``v + 2^(k-1)``
    is never formed).  ``k <= 0`` shifts left exactly (Python ints) or modulo
    2^64 (arrays).

    >>> [round_shift(x, 1, "add-half") for x in (-3, -1, 1, 3)]
    [-1, 0, 1, 2]
    >>> [round_shift(x, 1, "half-even") for x in (-3, -1, 1, 3)]
    [-2, 0, 0, 2]
    >>> [round_shift(x, 2, "toward-zero") for x in (-7, 7)]
    [-1, 1]
    """
    if mode not in ROUNDING_MODES:
        raise ValueError(f"unknown rounding mode '{mode}'{close_match(mode, ROUNDING_MODES, ROUNDING_HINTS)}; "
                         f"use one of {', '.join(ROUNDING_MODES)}")
    if k <= 0:
        return v * (1 << -k) if isinstance(v, int) else np.left_shift(v, -k)
    scalar = isinstance(v, int)
    if not scalar:
        v = np.asarray(v, dtype=np.int64)
    half = 1 << (k - 1)
    mask = (1 << k) - 1
    q = v >> k  # floor
    rem = v & mask  # v - q * 2^k, in [0, 2^k)
    if mode == "truncate":
        return q
    if mode == "add-half":
        up = rem >= half
    elif mode == "toward-zero":
        up = (v < 0) & (rem != 0)
    else:  # half-even
        up = (rem > half) | ((rem == half) & ((q & 1) == 1))
    if scalar:
        return q + 1 if up else q
    return q + up.astype(np.int64)


def fit_word(v, width: int, overflow: str):
    """Bring integers ``v`` into a signed ``width``-bit word by saturating or wrapping."""
    lo, hi = -(1 << (width - 1)), (1 << (width - 1)) - 1
    if overflow == "saturate":
        if isinstance(v, int):
            return lo if v < lo else hi if v > hi else v
        return np.clip(v, lo, hi)
    if overflow == "wrap":
        if isinstance(v, int):
            return ((v - lo) % (1 << width)) + lo
        if width == 64:
            return np.asarray(v, dtype=np.int64)
        sh = 64 - width
        return (np.left_shift(np.asarray(v, dtype=np.int64), sh)) >> sh
    raise ValueError(f"unknown overflow mode '{overflow}'; use one of {', '.join(OVERFLOW_MODES)}")


def round_real(x: np.ndarray, mode: str) -> np.ndarray:
    """Round real numbers to integers (float64 in, float64 of integer values out).

    ``add-half`` rounds ties towards +infinity like :func:`round_shift`; it is
    computed from the exact fractional part (``x - floor(x)``), so values just
    below one half (0.49999999999999994) are not pushed up by ``x + 0.5``.
    """
    x = np.asarray(x, dtype=np.float64)
    if mode == "add-half":
        fl = np.floor(x)
        return fl + ((x - fl) >= 0.5)
    if mode == "truncate":
        return np.floor(x)
    if mode == "toward-zero":
        return np.trunc(x)
    if mode == "half-even":
        return np.rint(x)  # IEEE round-half-even
    raise ValueError(f"unknown rounding mode '{mode}'{close_match(mode, ROUNDING_MODES, ROUNDING_HINTS)}; "
                         f"use one of {', '.join(ROUNDING_MODES)}")


@dataclass(frozen=True)
class Quantised:
    """Result of quantising reals: the integers and where they did not fit."""

    ints: tuple[int, ...]
    saturated: tuple[int, ...]  # indices whose value was clamped (or wrapped)


def quantise(values, fmt: QFormat, rounding: str = "add-half", overflow: str = "saturate") -> Quantised:
    """Quantise real *values* to integers of format *fmt*.

    Every value that did not fit (a coefficient of exactly +1.0 in Q1.15, say) is
    listed in ``saturated`` instead of being hidden.

    >>> quantise([0.5, 1.0, -1.0], QFormat.parse("Q1.15"))
    Quantised(ints=(16384, 32767, -32768), saturated=(1,))
    """
    x = np.atleast_1d(np.asarray(values, dtype=np.float64))
    if not np.all(np.isfinite(x)):
        raise ValueError("cannot quantise NaN or infinity")
    r = round_real(np.ldexp(x, fmt.frac_bits), rounding)
    out, bad = [], []
    for i, v in enumerate(r):
        iv = int(v)
        fitted = fit_word(iv, fmt.width, overflow)
        if fitted != iv:
            bad.append(i)
        out.append(fitted)
    return Quantised(tuple(out), tuple(bad))
