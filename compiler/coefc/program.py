"""The realised fixed-point (or float32) program of a channel.

Produced by :mod:`coefc.realise`, executed by :mod:`coefc.engine`, measured by
:mod:`coefc.analyse` and written out by :mod:`coefc.emit`.  It holds finished
integers: nothing downstream re-derives a coefficient.

Canonical integer DF1 section (the arithmetic every part agrees on; ``Fd``/``Fc``
are the data/coefficient fractional bits, ``s`` the section's post-shift)::

    acc  = B0*x[n] + B1*x[n-1] + B2*x[n-2] - A1*y[n-1] - A2*y[n-2]
           (exact products, summed modulo 2^acc_bits, two's complement)
    y[n] = fit_data(round_shift(acc, Fc - s))

The physical coefficient of an integer ``C`` is ``C * 2^(s - Fc)``.  Gains and FIR
blocks follow the same rule (``acc = sum(C_k * x[n-k])``).  For a float32
arithmetic the coefficients are float32 values and every operation is a float32
operation in the order written above, with no fused multiply-add.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from .qformat import QFormat

STRUCTURES = ("df1", "tdf2", "df1ef")
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
    rounding: str = "nearest"
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
    """One second-order section: ``b = (B0, B1, B2)``, ``a = (A1, A2)``, post-shift.

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
    notes: tuple[str, ...] = field(default_factory=tuple)  # saturated coefficients, pairing choices, ...

    def sections(self) -> tuple[SectionOp, ...]:
        return tuple(op for op in self.ops if isinstance(op, SectionOp))
