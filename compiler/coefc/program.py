"""The realised fixed-point (or float32) program of a channel.

Produced by :mod:`coefc.realise`, executed by :mod:`coefc.simulate`, measured by
:mod:`coefc.analyse` and written out by :mod:`coefc.emit`.  It holds finished
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

    fir    acc  = wrapA(sum_k C_k * x[n-k]);   y[n] = fit_data(round_shift(acc, k))
           (folding symmetric taps gives the identical integer result)
    gain   acc  = wrapA(C * x[n]);             y[n] = fit_data(round_shift(acc, k))
    delay  y[n] = x[n - D]

Rounded products (``[arithmetic] product_shift = P > 0``, ``product_rounding``): many
32-bit parts without a 64-bit multiply-accumulate keep only the high part of each
product and accumulate those.  Then every product term ``t`` of the sums above
(``B_i*x[n-i]``, ``C_k*x[n-k]``, ``C*x[n]``, and for the subtracted terms the product
of the negated coefficient, ``(-A_i)*y[n-i]``) enters the accumulator as::

    q(t) = round_shift_P(t, P)        (rounded by product_rounding, one of the four
                                       rounding modes, exactly as round_shift)

so the accumulator holds units of ``2^P`` and the final shift is ``k = Fc - s - P >= 0``
(``k = 0``: ``round_shift(v, 0) = v`` and df1ef's residual ``E`` is 0).  For example
``tdf2`` becomes ``acc = wrapA(q(B0*x[n]) + S1)``, ``S1 = wrapA(q(B1*x[n]) + q(-A1*y[n]) + S2)``,
``S2 = wrapA(q(B2*x[n]) + q(-A2*y[n]))``; df1ef adds ``E`` after the rounded products.
Symmetric FIR taps are never folded (``q(C*(x1+x2)) != q(C*x1) + q(C*x2)``).  With
``P = 0`` (the default) products are exact and everything above holds as written.
``(int32_t)(((int64_t)c * x + 2^(P-1)) >> P)`` is ``q`` for add-half, without the
addition for truncate.

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

    @property
    def state_words(self) -> int:
        """State words of one section in the reference kernels."""
        return self.data_states + self.acc_states


#: The table of structures: adding one is an entry here, its recurrence (above, the engine,
#: tests/exact_model.py, the C kernels and coefc.codegen) and its noise and limit-cycle models.
STRUCTURE_TABLE: dict[str, Structure] = {s.name: s for s in (
    Structure("df1", "direct form I", 0, data_states=4, acc_states=0),
    Structure("tdf2", "transposed direct form II", 1, data_states=0, acc_states=2),
    Structure("df1ef", "direct form I with first-order error feedback", 2, data_states=4, acc_states=1,
              error_feedback=True, float32=False),
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
    product_shift: int = 0  # P: every product rounded to a multiple of 2^P before it is added (0: exact)
    product_rounding: str = "truncate"  # how each product is rounded when product_shift > 0

    @property
    def is_float(self) -> bool:
        return self.kind == "float32"

    def final_shift(self, shift: int) -> int:
        """The accumulator's right shift of an op with coefficient shift *shift*: ``Fc - s - P``."""
        return self.coef.frac_bits - shift - self.product_shift

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
        } | ({"product_shift": self.product_shift, "product_rounding": self.product_rounding}
             if self.product_shift else {})


@dataclass(frozen=True)
class SectionOp:
    """One second-order section: ``b = (B0, B1, B2)``, ``a = (A1, A2)``, coefficient shift.

    ``structure`` is ``df1``, ``tdf2`` or ``df1ef`` (DF1 with first-order error
    feedback).  Integers for fixed-point arithmetic, float32 values otherwise.
    """

    b: tuple
    a: tuple
    shift: int = 0
    structure: str = "df1"


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
