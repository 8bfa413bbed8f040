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
    coupled  (coupled, or normal, form of Rader and Gold; two states S1, S2 kept as
           data words; b = (D, C1, C2, G), a = (A11, A12, A21, A22); both state
           updates read the states of the previous sample)
           accY = wrapA(D*x[n] + C1*S1 + C2*S2);   y[n] = fit_data(round_shift(accY, k))
           acc1 = wrapA(A11*S1 + A12*S2 + G*x[n])
           acc2 = wrapA(A21*S1 + A22*S2)
           S1   = fit_data(round_shift(acc1, k));  S2 = fit_data(round_shift(acc2, k))
           With the physical values (``C * 2^(s - Fc)``) the section is the state-space
           system  s[n+1] = A s[n] + (G, 0)' x[n],  y[n] = (C1, C2) s[n] + D x[n],  so
             H(z) = D + G (C1 (z - A22) + C2 A21) / det(zI - A)
             det(zI - A) = z^2 - (A11 + A22) z + (A11 A22 - A12 A21).
           A complex pole pair r e^(+-j theta) is realised as the rotation
           A11 = A22 = alpha = r cos(theta), A21 = -A12 = beta = r sin(theta): the
           coefficients are the real and imaginary parts of the pole, so the grid of
           realisable poles is uniform in the plane (dense near z = 1, where the
           direct form's grid, uniform in r^2 and r cos(theta), is sparse).  A pair
           of real poles |p1| <= |p2| is realised with A11 = p1, A22 = p2, A12 = 0
           and A21 = 1 - |p2| (two first-order recursions in cascade; the coupling
           balances the two states' gains and keeps ||A||_2 < 1).  G sets the
           states' level (chosen by the realiser), C1, C2 and D realise the zeros.
           Three roundings per sample: the output and each state update.

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

    df1ef-wide  (df1ef-wide-fb with a double-word numerator too: every coefficient,
           feedforward and feedback, is a high and a low word; L, AH, AL as for
           df1-wide-fb, and likewise BH, BL with |BL| <= 2^(L-1), physical value
           (BH + BL * 2^-L) * 2^(s - Fc); E the previous residual)
           Q    = B0L*x[n] + B1L*x[n-1] + B2L*x[n-2]         (exact)
           P    = A1L*y[n-1] + A2L*y[n-2]                    (exact)
           acc  = wrapA(B0H*x[n] + B1H*x[n-1] + B2H*x[n-2] + floor(Q / 2^L)
                        - A1H*y[n-1] - A2H*y[n-2] - floor(P / 2^L) + E)
           v    = round_shift(acc, k)
           E    = acc - v * 2^k                (the rounding residual, |E| < 2^k)
           y[n] = fit_data(v)
           Both low sums are floored (arithmetic shift right by L) exactly as the
           feedback's of df1ef-wide-fb, and both floored integers are part of acc,
           so E is the residual of that accumulator.  The numerator's floor drops a
           fraction g in [0, 1) of an accumulator LSB (floor(Q/2^L) = Q/2^L - g): a
           third error source, input-side like the feedback floor's (never in acc,
           so E cannot carry it; unshaped, through 1/A(z)), mean about -2^-k/2 and
           variance about 2^-2k/12 output LSB; the means of the two floors cancel.
           The numerator then has Fc + L fraction bits, so zeros close to the unit
           circle (a narrow low-frequency peaking or notch section) are placed 2^L
           times more finely.  On zero input x = 0 the numerator adds nothing
           (Q = 0, floor(0) = 0): the zero-input map is df1ef-wide-fb's.

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

    cic      a CIC decimator (Hogenauer 1981) of factor ``R``, ``N`` stages, differential
             delay ``D``, in a register of ``B = Wd + G`` bits, ``G = ceil(N log2(R D))``
             (the register growth); ``wrapB`` reduces modulo ``2^B`` into the signed range:
               I_1[n] = wrapB(I_1[n-1] + x[n]);  I_j[n] = wrapB(I_j[n-1] + I_(j-1)[n])  (j = 2..N)
               c_0[i] = I_N[i*R];  c_j[i] = wrapB(c_(j-1)[i] - c_(j-1)[i-D])         (j = 1..N)
               v[i]   = c_N[i]     (i = 0 .. ceil(n/R) - 1; every state starts at zero)
               y[i]   = fit_data(round_shift(C * v[i], k))
             By the modulo property v[i] equals the exact sum_j h[j] x[i*R - j] of the
             CIC's impulse response h (the coefficients of ((1 - z^-RD)/(1 - z^-1))^N,
             summing to (R D)^N): every step is a ring operation modulo 2^B, so
             v = that sum modulo 2^B, and |that sum| <= (R D)^N 2^(Wd-1) <= 2^(B-1) puts
             it in the signed range, where reduction is the identity.  Any register
             of at least B bits therefore gives the same v.  The product C * v is
             exact (``C < 2^c`` with ``B + c <= 64``; no accumulator wrap).  When
             (R D)^N = 2^G the gain is removed by the shift alone (C = 1, k = G);
             otherwise C = floor(2^k / (R D)^N) with k = c + floor(log2 (R D)^N), so the
             gain C (R D)^N / 2^k lies in (1 - 2^(1-c), 1]: never above 1, the output
             word cannot overflow.  One rounding per output sample (the arithmetic's
             rounding mode); the integrators and combs never round.

A block of n input samples gives ceil(n*L/M) output samples; a caller that feeds
blocks must make n a multiple of the channel's total decimation factor, so that every
block starts at the phase the polyphase branches expect.

An *accumulator overflow* is a sample where the exact (unwrapped) sum of that
sample's terms lies outside the accumulator's range (for tdf2 and coupled: any of
its three sums); wrapping in between is harmless and not counted.  A *data overflow* is a
sample where ``fit_data`` changed the value (for coupled: any of its three).

float32 order (every step rounded to float32, no fused multiply-add)::

    df1    acc = b0*x0; acc += b1*x1; acc += b2*x2; acc -= a1*y1; acc -= a2*y2; y = acc
    tdf2   y = b0*x + s1; s1 = (b1*x - a1*y) + s2; s2 = b2*x - a2*y
    fir    acc = t0*x[n]; acc += t_k*x[n-k] for k = 1, 2, ...;  gain  y = g*x
    (coupled has no float32 order: fixed point only)

References
----------
C. M. Rader and B. Gold, "Effects of parameter quantization on the poles of a
digital filter", Proc. IEEE 55(5), 1967 (the coupled form; cited from memory).
C. T. Mullis and R. A. Roberts, "Roundoff noise in digital filters: frequency
transformations and invariants", IEEE Trans. ASSP-24(6), 1976 (normal-form
state-space sections; from memory).
L. B. Jackson, *Digital Filters and Signal Processing*, 3rd ed., Kluwer 1996,
sec. 11 (coupled-form sections and their noise; from memory).
E. B. Hogenauer, "An economical class of digital filters for decimation and
interpolation", IEEE Trans. ASSP-29(2), 1981 (the CIC filter; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Literal

from .qformat import QFormat


#: what a realisation note is about
NoteKind = Literal["unstable", "saturated", "precision", "pairing", "scaling", "choice"]


class Note(str):
    """A note of the realisation: its text (a ``str``, printed as is) and its ``kind``, for code to test.

    ``unstable`` (quantised poles on or outside the unit circle) and ``saturated``
    (a coefficient that does not fit its word) mean the program is not what the
    design meant (:attr:`departs_from_design`); ``precision``, ``pairing`` and
    ``scaling`` explain choices and costs; ``choice`` says why ``structure = "auto"``
    chose a section's structure (``section`` names the section, 1-based).
    """

    kind: NoteKind
    section: int | None  # the 1-based section a note is about, where it is about one (choice notes)

    def __new__(cls, kind: NoteKind, text: str, section: int | None = None) -> "Note":
        note = super().__new__(cls, text)
        note.kind = kind
        note.section = section
        return note

    def __getnewargs__(self):
        return (self.kind, str(self), self.section)

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
    ``float32`` whether a float32 target can run it, ``state_space`` whether the
    section holds a 2x2 state matrix (``coupled``) instead of ``b``/``a`` polynomials.
    """

    name: str
    description: str
    engine_code: int
    data_states: int
    acc_states: int
    error_feedback: bool = False
    float32: bool = True
    wide_feedback: bool = False  # a1, a2 each in a high and a low coefficient word (df1-wide-fb)
    wide_numerator: bool = False  # b0, b1, b2 each in a high and a low coefficient word too (df1ef-wide)
    multiplies: int = 5  # multiplies per sample of one second-order section (cost, structure = "auto")
    reference_kernel: bool = True  # the targets' reference kernels (operation table) run it; else generated code only
    state_space: bool = False  # b = (D, C1, C2, G), a = (A11, A12, A21, A22): see section_transfer

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
              acc_states=0, float32=False, wide_feedback=True, multiplies=7, reference_kernel=False),
    Structure("coupled", "coupled (normal) form of Rader and Gold", 3, data_states=2, acc_states=0,
              float32=False, state_space=True, multiplies=8, reference_kernel=False),
    Structure("df1ef-wide-fb", "direct form I with first-order error feedback and double-word feedback "
              "coefficients", 5, data_states=4, acc_states=1, error_feedback=True, float32=False,
              wide_feedback=True, multiplies=7, reference_kernel=False),
    Structure("df1ef-wide", "direct form I with first-order error feedback and double-word numerator and "
              "feedback coefficients", 6, data_states=4, acc_states=1, error_feedback=True, float32=False,
              wide_feedback=True, wide_numerator=True, multiplies=10, reference_kernel=False),
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

    ``structure`` is a name of :data:`STRUCTURE_TABLE`; for ``coupled``
    ``b = (D, C1, C2, G)`` and ``a = (A11, A12, A21, A22)`` (the recurrence in the
    module docstring; :func:`section_transfer` gives the polynomials of any
    section).  For ``df1-wide-fb``, ``df1ef-wide-fb`` and ``df1ef-wide`` ``a`` holds the high words and ``a_lo`` the low
    words, of weight ``2^-L`` with ``L = Wc - 1`` (:func:`lo_bits`); an empty
    ``a_lo`` means low words of zero.  Other structures leave ``a_lo`` empty.
    For ``df1ef-wide`` ``b`` holds the numerator's high words and ``b_lo`` its low
    words (same weight ``2^-L``; empty: zero); every other structure leaves ``b_lo`` empty.
    Integers for fixed-point arithmetic, float32 values otherwise.
    """

    b: tuple
    a: tuple
    shift: int = 0
    structure: str = "df1"
    a_lo: tuple = ()
    b_lo: tuple = ()

    def b_phys(self, coef: "QFormat | None") -> tuple[float, float, float]:
        """The physical numerator ``(b0, b1, b2)`` of a direct-form section, low words included."""
        if coef is None:
            return tuple(float(v) for v in self.b)
        sc = 2.0 ** (self.shift - coef.frac_bits)
        if not self.b_lo:
            return tuple(float(v) * sc for v in self.b)
        lo = 2.0 ** -lo_bits(coef)
        return tuple((float(h) + float(l) * lo) * sc for h, l in zip(self.b, self.b_lo))

    def a_phys(self, coef: "QFormat | None") -> tuple[float, float]:
        """The physical feedback coefficients ``(a1, a2)``, low words included.

        *coef* is the arithmetic's coefficient format (``None`` for float32: the
        stored values).
        """
        if STRUCTURE_TABLE[self.structure].state_space:  # the polynomial's, from the state matrix
            return tuple(section_transfer(self, coef)[1][1:])
        if coef is None:
            return (float(self.a[0]), float(self.a[1]))
        sc = 2.0 ** (self.shift - coef.frac_bits)
        if not self.a_lo:
            return (float(self.a[0]) * sc, float(self.a[1]) * sc)
        lo = 2.0 ** -lo_bits(coef)
        return tuple((float(h) + float(l) * lo) * sc for h, l in zip(self.a, self.a_lo))


def lo_bits(coef: QFormat) -> int:
    """``L``, the weight ``2^-L`` of a low coefficient word relative to its high word (``Wc - 1``)."""
    return coef.width - 1


def section_transfer(op: "SectionOp", coef: "QFormat | int | None" = 0):
    """Physical ``(b, a)`` of a section: ``b = [b0, b1, b2]``, ``a = [1, a1, a2]`` (floats).

    For ``coupled`` the polynomials of its state-space form (module docstring):
    ``b = [D, D a1 + G C1, D a2 + G (C2 A21 - C1 A22)]``, ``a = [1, -(A11 + A22),
    A11 A22 - A12 A21]``; for ``df1-wide-fb`` the feedback with its low words (and for
    ``df1ef-wide`` the numerator with its low words too).
    *coef* is the coefficient format, or just its ``Fc`` (0 or ``None`` for float
    values; a section with low words needs the format).

    Examples
    --------
    >>> section_transfer(SectionOp(b=(0, 4, 0, 4), a=(2, 0, 1, 2), structure="coupled"), 2)
    ([0.0, 1.0, -0.5], [1.0, -1.0, 0.25])
    """
    frac_bits = coef.frac_bits if isinstance(coef, QFormat) else int(coef or 0)
    sc = 2.0 ** (op.shift - frac_bits)
    if op.a_lo or op.b_lo:
        if not isinstance(coef, QFormat):
            raise ValueError("a section with low coefficient words needs the coefficient format")
        return list(op.b_phys(coef)), [1.0, *op.a_phys(coef)]
    if STRUCTURE_TABLE[op.structure].state_space:
        d, c1, c2, g = (float(v) * sc for v in op.b)
        a11, a12, a21, a22 = (float(v) * sc for v in op.a)
        a1, a2 = -(a11 + a22), a11 * a22 - a12 * a21
        return [d, d * a1 + g * c1, d * a2 + g * (c2 * a21 - c1 * a22)], [1.0, a1, a2]
    return [float(v) * sc for v in op.b], [1.0] + [float(v) * sc for v in op.a]


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


def cic_gain(factor: int, stages: int, delay: int) -> int:
    """The DC gain ``(R D)^N`` of a CIC filter (the sum of its impulse response)."""
    return (int(factor) * int(delay)) ** int(stages)


def cic_growth(factor: int, stages: int, delay: int) -> int:
    """Hogenauer's register growth ``G = ceil(N log2(R D))`` in bits (exact integer arithmetic).

    >>> cic_growth(16, 5, 1), cic_growth(10, 3, 1), cic_growth(25, 4, 2)
    (20, 10, 23)
    """
    return (cic_gain(factor, stages, delay) - 1).bit_length()


def cic_impulse(factor: int, stages: int, delay: int) -> tuple[int, ...]:
    """The integer impulse response of a CIC filter at the input rate: the coefficients of
    ``((1 - z^-(R D)) / (1 - z^-1))^N`` = ``(1 + z^-1 + ... + z^-(R D - 1))^N``,
    ``N (R D - 1) + 1`` taps summing to ``(R D)^N``.

    >>> cic_impulse(2, 2, 1)
    (1, 2, 1)
    """
    h = [1]
    box = int(factor) * int(delay)
    for _ in range(int(stages)):
        out = [0] * (len(h) + box - 1)
        run = 0
        for i in range(len(out)):  # running sum of the last `box` values of h: the convolution with a boxcar
            run += h[i] if i < len(h) else 0
            run -= h[i - box] if i - box >= 0 else 0
            out[i] = run
        h = out
    return tuple(h)


@dataclass(frozen=True)
class CicOp:
    """A CIC decimator (``cic`` in the module docstring): ``N`` integrators at the input rate,
    keep every ``R``-th sample, ``N`` combs of differential delay ``D`` at the output rate, in a
    ``register_bits``-bit register that wraps by design; then ``y = fit(round(coef * v / 2^k))``
    with ``k = Fc - shift`` (the arithmetic's final shift).

    References
    ----------
    E. B. Hogenauer, "An economical class of digital filters for decimation and
    interpolation", IEEE Trans. ASSP-29(2), 1981 (register growth, the modulo
    property of two's complement arithmetic; from memory).
    """

    factor: int
    stages: int
    delay: int
    register_bits: int
    coef: int = 1
    shift: int = 0

    @property
    def down(self) -> int:
        return self.factor

    @property
    def up(self) -> int:
        return 1

    @property
    def gain(self) -> int:
        return cic_gain(self.factor, self.stages, self.delay)

    def impulse(self) -> tuple[int, ...]:
        return cic_impulse(self.factor, self.stages, self.delay)

    def as_polyfir(self) -> "PolyFirOp":
        """The same integer map as a polyphase FIR: taps ``coef * h`` and the same shift (exact:
        ``v`` is the exact FIR sum, see the module docstring).  For the analyses' linear models;
        the engine, the exact model and the generated code run the integrators and combs."""
        return PolyFirOp(taps=tuple(int(self.coef) * h for h in self.impulse()), shift=self.shift,
                         down=self.factor, symmetric=True)


Op = SectionOp | FirOp | GainOp | DelayOp | PolyFirOp | RateOp | CicOp

#: the ops that change the rate (each has ``down`` and ``up``)
RATE_OPS = (PolyFirOp, RateOp, CicOp)


def rate_ratio(ops) -> "Fraction":
    """Output rate / input rate of a sequence of ops (a ``fractions.Fraction``)."""
    from fractions import Fraction

    r = Fraction(1)
    for op in ops:
        if isinstance(op, RATE_OPS):
            r *= Fraction(op.up, op.down)
    return r


def output_length(ops, n: int) -> int:
    """Samples out for *n* samples in (each rate op: ``ceil(n * up / down)``)."""
    for op in ops:
        if isinstance(op, RATE_OPS):
            n = -(-n * op.up // op.down)
    return n


def decimation(ops) -> int:
    """The block-length rule: a block's input length must be a multiple of this, the product of the
    ``down`` factors (then every block starts at the phase the polyphase branches expect)."""
    m = 1
    for op in ops:
        if isinstance(op, RATE_OPS):
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
        return any(isinstance(op, RATE_OPS) for op in self.ops)

    def sections(self) -> tuple[SectionOp, ...]:
        return tuple(op for op in self.ops if isinstance(op, SectionOp))
