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
coefficients and "fraction saving" for low-frequency sections; from memory); its
"fraction saving" is first-order error feedback (the rounding residual added back
before the next rounding), used there together with the double-precision
coefficients (``df1ef-wide-fb``); on error feedback see also Higgins, *Digital
Signal Processing in VLSI*, Prentice Hall, 1990 (error feedback in fixed-point
recursive sections; from memory); see
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

    df1ef-wide-fb  (df1ef and df1-wide-fb together: error feedback and double-word
           feedback coefficients; L, AH, AL as for df1-wide-fb; E the previous residual)
           P    = A1L*y[n-1] + A2L*y[n-2]                    (exact)
           acc  = wrapA(B0*x[n] + B1*x[n-1] + B2*x[n-2] - A1H*y[n-1] - A2H*y[n-2]
                        - floor(P / 2^L) + E)
           v    = round_shift(acc, k)
           E    = acc - v * 2^k                (the rounding residual, |E| < 2^k)
           y[n] = fit_data(v)
           The low products are floored first and the floored integer is part of
           acc, so E is the residual of the accumulator that already holds
           -floor(P / 2^L): the rounding to the data word is fed back (its error is
           shaped by (1 - z^-1) before 1/A(z)), the fraction f in [0, 1) of an
           accumulator LSB that the floor drops is not (it is never in acc, so E
           cannot carry it): a second, unshaped source at the rounding node, mean
           about 2^-k/2 and variance about 2^-2k/12 output LSB, through 1/A(z).

    fir    acc  = wrapA(sum_k C_k * x[n-k]);   y[n] = fit_data(round_shift(acc, k))
           (folding symmetric taps gives the identical integer result)
    gain   acc  = wrapA(C * x[n]);             y[n] = fit_data(round_shift(acc, k))
    delay  y[n] = x[n - D]

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
    Structure("df1ef-wide-fb", "direct form I with first-order error feedback and double-word feedback "
              "coefficients", 5, data_states=4, acc_states=1, error_feedback=True, float32=False,
              wide_feedback=True, multiplies=7),
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
    ``df1-wide-fb``, ``df1ef-wide-fb``).  Integers for fixed-point arithmetic, float32
    values otherwise.  For ``df1-wide-fb`` and ``df1ef-wide-fb`` ``a`` holds the high words and ``a_lo`` the low words, of
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


Op = SectionOp | FirOp | GainOp | DelayOp


@dataclass(frozen=True, eq=False)
class ChannelProgram:
    """A channel as the chip runs it: the arithmetic and the ordered operations."""

    name: str
    sample_rate_hz: float
    arithmetic: Arithmetic
    ops: tuple[Op, ...]
    notes: tuple[Note, ...] = field(default_factory=tuple)  # saturated coefficients, pairing choices, ...

    def sections(self) -> tuple[SectionOp, ...]:
        return tuple(op for op in self.ops if isinstance(op, SectionOp))
