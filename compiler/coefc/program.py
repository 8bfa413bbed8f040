"""The realised fixed-point (or float32) program of a channel.

Produced by :mod:`coefc.realise`, executed by :mod:`coefc.simulate`, measured by
:mod:`coefc.analyse` and written out by :mod:`coefc.emit.header`.  It holds finished
integers: nothing downstream re-derives a coefficient.

Canonical integer DF1 section (the arithmetic every part agrees on; ``Fd``/``Fc``
are the data/coefficient fractional bits, ``s`` the section's coefficient shift)::

    acc  = B0*x[n] + B1*x[n-1] + B2*x[n-2] - A1*y[n-1] - A2*y[n-2]
           (exact products, summed modulo 2^acc_bits, two's complement)
    y[n] = fit_data(round_shift(acc, Fc - s))

The physical coefficient of an integer ``C`` is ``C * 2^(s - Fc)``.  Gains and FIR
blocks follow the same rule (``acc = sum(C_k * x[n-k])``).  For a float32
arithmetic the coefficients are float32 values and every operation is a float32
operation in the order written above, with no fused multiply-add.

Double-precision feedback coefficients ("coefficient splitting", a feedback
coefficient held in two words) are the classic answer to the coarse pole grid of
a direct form near z = 1: Dattorro, "The implementation of recursive digital
filters for high-fidelity audio", J. Audio Eng. Soc. 36(11), 1988 (double-precision
coefficients and "fraction saving" for low-frequency sections; from memory); see
also Jackson, *Digital Filters and Signal Processing*, 3rd ed., 1996, ch. 11
(coefficient quantisation and pole-grid density of the direct form; from memory).

Exact definitions shared by the engine, the C kernels and the noise analysis
(``k = Fc - s >= 1``; all states start at zero; ``wrapA(v)`` reduces ``v`` modulo
``2^acc_bits`` into ``[-2^(acc_bits-1), 2^(acc_bits-1))``)::

    round_shift(v, k)  exact: (v + 2^(k-1)) >> k etc. (coefc.qformat); the rounding
                       addition never wraps, it acts on the accumulator's value
    fit_data(v)        saturate or wrap into the data word (coefc.qformat.fit_word)

    df1    acc  = wrapA(B0*x[n] + B1*x[n-1] + B2*x[n-2] - A1*y[n-1] - A2*y[n-2])
           y[n] = fit_data(round_shift(acc, k))

    tdf2   (transposed direct form II; states at accumulator precision, unrounded)
           acc   = wrapA(B0*x[n] + S1)
           y[n]  = fit_data(round_shift(acc, k))
           S1    = wrapA(B1*x[n] - A1*y[n] + S2)          (S2 of the previous sample)
           S2    = wrapA(B2*x[n] - A2*y[n])

    df1ef  (df1 with first-order error feedback; E = the previous residual)
           acc  = wrapA(B0*x[n] + B1*x[n-1] + B2*x[n-2] - A1*y[n-1] - A2*y[n-2] + E)
           v    = round_shift(acc, k)
           E    = acc - v * 2^k                (the rounding residual, |E| < 2^k)
           y[n] = fit_data(v)
           so the rounding error is shaped by (1 - z^-1) before 1/A(z).

    df1-wide-fb  (df1 with double-word feedback coefficients; L = Wc - 1, Wc the
           coefficient word's width; each feedback coefficient is a high word AH and a
           low word AL, physical value (AH + AL * 2^-L) * 2^(s - Fc), |AL| <= 2^(L-1))
           P    = A1L*y[n-1] + A2L*y[n-2]                    (exact)
           acc  = wrapA(B0*x[n] + B1*x[n-1] + B2*x[n-2] - A1H*y[n-1] - A2H*y[n-2]
                        - floor(P / 2^L))
           y[n] = fit_data(round_shift(acc, k))
           floor(P / 2^L) is an arithmetic shift right by L; it drops a fraction
           f = P/2^L - floor(P/2^L) in [0, 1) of an accumulator LSB, an extra error
           source at the rounding node (mean about 2^-k/2, variance about 2^-2k/12
           output LSB).  The feedback coefficients then have Fc + L fraction bits, so
           the grid of realisable poles near z = 1 is 2^L times finer per axis.

    fir    acc  = wrapA(sum_k C_k * x[n-k]);   y[n] = fit_data(round_shift(acc, k))
           (folding symmetric taps gives the identical integer result)
    gain   acc  = wrapA(C * x[n]);             y[n] = fit_data(round_shift(acc, k))
    delay  y[n] = x[n - D]

Rate-changing ops (multirate; the output runs at ``up/down`` times the input rate)::

    polyfir  a polyphase FIR of factor ``down = M`` (decimating) or ``up = L``
             (interpolating); exactly one factor is above 1.  With u the input
             upsampled by L (u[r] = x[r/L] where L divides r, else 0):
             acc  = wrapA(sum over k with L | (i*M - k), i*M - k >= 0 of
                          C_k * x[(i*M - k) / L])
             y[i] = fit_data(round_shift(acc, k))
             decimating (L = 1):  y[i] = fir(x)[i*M], for i = 0 .. ceil(n/M) - 1: only
                                  the kept samples are computed, bit-identical to the
                                  full-rate fir op followed by keeping every M-th output
             interpolating (M = 1): y[n*L + p] = fit_data(round_shift(wrapA(
                                  sum_j C_(p + j*L) * x[n - j]), k)), for p = 0 .. L-1
                                  (L sub-filters of the taps, one per output phase)
    rate     down M: y[i] = x[i*M] (i = 0 .. ceil(n/M) - 1);
             up L:   y[n*L] = x[n], y[n*L + p] = 0 for 0 < p < L   (no arithmetic)

A block of n input samples gives ceil(n*L/M) output samples; a caller that feeds
blocks must make n a multiple of the channel's total decimation factor, so that every
block starts at the phase the polyphase branches expect.

An *accumulator overflow* is a sample where the exact (unwrapped) sum of that
sample's terms lies outside the accumulator's range (for tdf2: any of its three
sums); wrapping in between is harmless and not counted.  A *data overflow* is a
sample where ``fit_data`` changed the value.

float32 order (every step rounded to float32, no fused multiply-add)::

    df1    acc = b0*x0; acc += b1*x1; acc += b2*x2; acc -= a1*y1; acc -= a2*y2; y = acc
    tdf2   y = b0*x + s1; s1 = (b1*x - a1*y) + s2; s2 = b2*x - a2*y
    fir    acc = t0*x[n]; acc += t_k*x[n-k] for k = 1, 2, ...;  gain  y = g*x
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Literal

from .qformat import QFormat


#: what a realisation note is about
NoteKind = Literal["unstable", "saturated", "precision", "pairing", "scaling"]


class Note(str):
    """A note of the realisation: its text (a ``str``, printed as is) and its ``kind``, for code to test.

    ``unstable`` (quantised poles on or outside the unit circle) and ``saturated``
    (a coefficient that does not fit its word) mean the program is not what the
    design meant (:attr:`departs_from_design`); ``precision``, ``pairing`` and
    ``scaling`` explain choices and costs.
    """

    kind: NoteKind

    def __new__(cls, kind: NoteKind, text: str) -> "Note":
        note = super().__new__(cls, text)
        note.kind = kind
        return note

    def __getnewargs__(self):
        return (self.kind, str(self))

    @property
    def departs_from_design(self) -> bool:
        return self.kind in ("unstable", "saturated")


@dataclass(frozen=True)
class Structure:
    """One second-order-section structure: the facts every part of coefc reads about it.

    Its recurrence is written above (and in every reader listed in DEVELOPERS.md,
    "Adding a structure"); this record holds what the readers need besides:
    ``engine_code`` is its number in the compiled engine (``_engine.c``),
    ``data_states``/``acc_states`` the state words it keeps at data and at
    accumulator precision (kernel state words, state bytes, memory estimates),
    ``error_feedback`` whether the rounding residual is fed back (the noise is then
    shaped by ``1 - z^-1``: noise model, scaling, limit-cycle search, an extra add),
    ``float32`` whether a float32 target can run it.
    """

    name: str
    description: str
    engine_code: int
    data_states: int
    acc_states: int
    error_feedback: bool = False
    float32: bool = True
    wide_feedback: bool = False  # a1, a2 each in a high and a low coefficient word (df1-wide-fb)
    multiplies: int = 5  # multiplies per sample of one second-order section (cost, structure = "auto")

    @property
    def state_words(self) -> int:
        """State words of one section in the reference kernels."""
        return self.data_states + self.acc_states


#: The table of structures: adding one is an entry here, its recurrence (above, the engine,
#: tests/exact_model.py, the C kernels and coefc.emit.codegen) and its noise and limit-cycle models.
STRUCTURE_TABLE: dict[str, Structure] = {s.name: s for s in (
    Structure("df1", "direct form I", 0, data_states=4, acc_states=0),
    Structure("tdf2", "transposed direct form II", 1, data_states=0, acc_states=2),
    Structure("df1ef", "direct form I with first-order error feedback", 2, data_states=4, acc_states=1,
              error_feedback=True, float32=False),
    Structure("df1-wide-fb", "direct form I with double-word feedback coefficients", 4, data_states=4,
              acc_states=0, float32=False, wide_feedback=True, multiplies=7),
)}
STRUCTURES = tuple(STRUCTURE_TABLE)
SCALINGS = ("none", "l1", "l2", "linf")
KINDS = ("fixed", "float32")


@dataclass(frozen=True)
class Arithmetic:
    """Exactly how a chip computes: word formats, accumulator, rounding, overflow.

    For ``kind == "float32"`` the Q formats, accumulator, rounding and overflow do
    not apply and are ``None``/ignored.
    """

    kind: str = "fixed"
    structure: str = "df1"
    data: QFormat | None = QFormat(1, 31)
    coef: QFormat | None = QFormat(2, 30)
    acc_bits: int = 64
    rounding: str = "add-half"
    overflow: str = "saturate"
    scaling: str = "none"

    @property
    def is_float(self) -> bool:
        return self.kind == "float32"

    def with_(self, **changes) -> "Arithmetic":
        return replace(self, **changes)

    def as_dict(self) -> dict:
        """The ``arithmetic`` object of the JSON report contract."""
        return {
            "kind": self.kind,
            "structure": self.structure,
            "data": str(self.data) if self.data else None,
            "coef": str(self.coef) if self.coef else None,
            "acc_bits": self.acc_bits,
            "rounding": self.rounding,
            "overflow": self.overflow,
            "scaling": self.scaling,
        }


@dataclass(frozen=True)
class SectionOp:
    """One second-order section: ``b = (B0, B1, B2)``, ``a = (A1, A2)``, coefficient shift.

    ``structure`` is a name of :data:`STRUCTURE_TABLE` (``df1``, ``tdf2``, ``df1ef``,
    ``df1-wide-fb``).  Integers for fixed-point arithmetic, float32 values otherwise.
    For ``df1-wide-fb`` ``a`` holds the high words and ``a_lo`` the low words, of
    weight ``2^-L`` with ``L = Wc - 1`` (:func:`lo_bits`); an empty ``a_lo`` means
    low words of zero.  Other structures leave ``a_lo`` empty.
    """

    b: tuple
    a: tuple
    shift: int = 0
    structure: str = "df1"
    a_lo: tuple = ()

    def a_phys(self, coef: "QFormat | None") -> tuple[float, float]:
        """The physical feedback coefficients ``(a1, a2)``, low words included.

        *coef* is the arithmetic's coefficient format (``None`` for float32: the
        stored values).
        """
        if coef is None:
            return (float(self.a[0]), float(self.a[1]))
        sc = 2.0 ** (self.shift - coef.frac_bits)
        if not self.a_lo:
            return (float(self.a[0]) * sc, float(self.a[1]) * sc)
        lo = 2.0 ** -lo_bits(coef)
        return tuple((float(h) + float(l) * lo) * sc for h, l in zip(self.a, self.a_lo))


def lo_bits(coef: QFormat) -> int:
    """``L``, the weight ``2^-L`` of a low feedback word relative to its high word (``Wc - 1``)."""
    return coef.width - 1


@dataclass(frozen=True)
class FirOp:
    """A direct-form FIR: ``acc = sum(taps[k] * x[n-k])``, then round and fit."""

    taps: tuple
    shift: int = 0
    symmetric: bool = False  # taps[k] == taps[N-1-k]: the kernel may fold


@dataclass(frozen=True)
class GainOp:
    """``y = fit_data(round_shift(coef * x, Fc - shift))``."""

    coef: int | float
    shift: int = 0


@dataclass(frozen=True)
class DelayOp:
    """``y[n] = x[n - samples]``."""

    samples: int


@dataclass(frozen=True)
class PolyFirOp:
    """A polyphase FIR changing the rate: decimating (``down = M``) or interpolating (``up = L``).

    ``taps`` hold the whole prototype filter at the higher of the two rates (its
    ``k``-th tap multiplies ``u[i*M - k]``, see the module docstring); the engine,
    the exact model and the generated code compute only the output samples kept
    (decimating) or only the non-zero products (interpolating), branch by branch.

    References
    ----------
    R. E. Crochiere and L. R. Rabiner, *Multirate Digital Signal Processing*,
    Prentice-Hall, 1983, ch. 3 (polyphase structures; from memory).
    P. P. Vaidyanathan, *Multirate Systems and Filter Banks*, Prentice-Hall, 1993,
    sec. 4.3 (polyphase decomposition, noble identities; from memory).
    """

    taps: tuple
    shift: int = 0
    down: int = 1
    up: int = 1
    symmetric: bool = False

    @property
    def factor(self) -> int:
        return self.down if self.down > 1 else self.up


@dataclass(frozen=True)
class RateOp:
    """Keep every ``down``-th sample, or insert ``up - 1`` zeros after each sample (no arithmetic)."""

    down: int = 1
    up: int = 1

    @property
    def factor(self) -> int:
        return self.down if self.down > 1 else self.up


Op = SectionOp | FirOp | GainOp | DelayOp | PolyFirOp | RateOp


def rate_ratio(ops) -> "Fraction":
    """Output rate / input rate of a sequence of ops (a ``fractions.Fraction``)."""
    from fractions import Fraction

    r = Fraction(1)
    for op in ops:
        if isinstance(op, (PolyFirOp, RateOp)):
            r *= Fraction(op.up, op.down)
    return r


def output_length(ops, n: int) -> int:
    """Samples out for *n* samples in (each rate op: ``ceil(n * up / down)``)."""
    for op in ops:
        if isinstance(op, (PolyFirOp, RateOp)):
            n = -(-n * op.up // op.down)
    return n


def decimation(ops) -> int:
    """The block-length rule: a block's input length must be a multiple of this, the product of the
    ``down`` factors (then every block starts at the phase the polyphase branches expect)."""
    m = 1
    for op in ops:
        if isinstance(op, (PolyFirOp, RateOp)):
            m *= op.down
    return m


@dataclass(frozen=True, eq=False)
class ChannelProgram:
    """A channel as the chip runs it: the arithmetic and the ordered operations."""

    name: str
    sample_rate_hz: float
    arithmetic: Arithmetic
    ops: tuple[Op, ...]
    notes: tuple[Note, ...] = field(default_factory=tuple)  # saturated coefficients, pairing choices, ...

    @property
    def output_rate_hz(self) -> float:
        """The rate of the channel's output samples (the input rate times every ``up/down``)."""
        return float(self.sample_rate_hz * rate_ratio(self.ops))

    @property
    def multirate(self) -> bool:
        return any(isinstance(op, (PolyFirOp, RateOp)) for op in self.ops)

    def sections(self) -> tuple[SectionOp, ...]:
        return tuple(op for op in self.ops if isinstance(op, SectionOp))
