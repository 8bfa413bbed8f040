"""Generated C code specialised to each channel: ``coefc build --kernel``.

A realised channel in, straight-line C out.  Every fact of the arithmetic is
fixed here, in Python, before a template sees it: the coefficient values (as
literals), the sign each ``a`` term is accumulated in, the rounding shift, the
rounding and overflow modes, the C type of every state word and of the
accumulator, the constants of the rounding and saturation steps, and the code
lines.  The templates (``templates/kernel.h.j2``, ``templates/kernel.c.j2``)
only lay the lines out.

Each op runs over the whole block before the next one starts (section-major),
with its states in local variables, so a compiler keeps them in registers.

The exact arithmetic is the one stated in :mod:`coefc.program`.  It is written
without any implementation-defined or undefined C operation:

* with ``[arithmetic] product_shift = P`` every product is formed exactly in int64_t,
  biased by 2^62 into uint64_t and shifted by P with the target's product rounding
  (no shift of a negative value), then added modulo the container; otherwise
* products are formed exactly (``int32_t`` when ``data + coef`` bits fit 32,
  otherwise ``int64_t``) and summed in an *unsigned* container ``U`` of
  ``C = 32`` or ``64`` bits, so the sum is the exact sum modulo ``2^C``; the
  accumulator's value modulo ``2^acc_bits`` follows because ``acc_bits <= C``;
* rounding and fitting add one constant (the offset form, ``_Fixed._finish_offset``):
  every rounding mode is ``floor((a + o) / 2^k)`` with ``0 <= o < 2^k``, and
  ``g = a + o + 2^(d-1+k)`` modulo ``2^C`` is below ``2^(d+k)`` exactly when the
  rounded value fits the ``d``-bit data word, where the range of the true ``g``
  (checked per op) keeps the reduction from aliasing; then ``y = (g >> k) - 2^(d-1)``
  (``g`` non-negative, no signed shift), a saturated word takes the sign of ``a``,
  wrapping keeps ``g >> k`` modulo ``2^d``, and ``E = (g mod 2^k) - o``.  With a 64-bit
  container the saturation test reads the high word only.  Where the range argument
  does not hold:
* the rounding shift works on the *biased* accumulator
  ``w = a + 2^(C-1)`` (``a`` the accumulator's signed value), which is never
  negative: ``w >> k = floor(a / 2^k) + 2^(C-1-k)`` exactly for ``k <= C - 2``,
  so no signed value is ever shifted; for ``acc_bits = C`` the bias is a single
  exclusive-or of the sign bit, otherwise ``w = ((u ^ 2^(A-1)) & (2^A - 1)) +
  2^(C-1) - 2^(A-1)`` sign-extends from ``A`` bits at the same time;
* the rounding increment comes from the ``k`` low bits, which the bias leaves
  unchanged (``2^(C-1)`` is a multiple of ``2^k``): add-half adds bit ``k-1``
  (``floor(a/2^k) + [a mod 2^k >= 2^(k-1)]`` is ``floor((a + 2^(k-1))/2^k)``),
  half-even and toward-zero compare the remainder with half;
* saturation compares the biased quotient with biased limits; wrapping keeps the
  low ``data`` bits and sign-extends them with an exclusive-or and a subtraction;
* error feedback keeps ``E = a - v 2^k`` as ``w - (v_biased << k)`` modulo
  ``2^C`` (exact, since ``|E| < 2^k``), or in an ``int32_t`` when ``k <= 31`` with a
  64-bit container (then the offset form always holds), and tdf2 keeps ``S1``, ``S2``
  modulo ``2^C``: both are only ever added into the accumulator, and each sum
  starts from the state it adds, so a compiler accumulates the products onto it.

float32 channels keep the reference kernel's statement order (one rounding per
product and per sum, each product stored in its own variable so no compiler
fuses a multiply-add within a statement; build with ``-ffp-contract=off``).

References
----------
The arithmetic facts used (unsigned arithmetic in C is modulo ``2^N``; a
conversion to an unsigned type is modulo ``2^N``; a conversion of an
out-of-range value to a signed type and the right shift of a negative value are
implementation-defined) are those of ISO/IEC 9899:1999, 6.2.5p9, 6.3.1.3 and
6.5.7p5.  ``floor(floor(a / 2^j) / 2^i) = floor(a / 2^(i+j))`` for integers is
the nested-floor identity (R. L. Graham, D. E. Knuth, O. Patashnik, *Concrete
Mathematics*, 2nd ed., 1994, eq. 3.11).  Section-major block processing with
states in registers is common practice of filter kernels for microcontrollers
(common practice, no source).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

from .header import EmitError
from ..errors import DescriptionError, setting
from ..program import (ChannelProgram, CicOp, DelayOp, FirOp, GainOp, PolyFirOp, RateOp, SectionOp, STRUCTURE_TABLE,
                       decimation, lo_bits)

__all__ = ["CNames", "ChannelCNames", "channel_cost", "cost_of", "render_kernel", "GeneratedCodeError"]

_CTYPE_BITS = {"int8_t": 8, "int16_t": 16, "int32_t": 32, "int64_t": 64, "float": 32}
#: Irregular block lengths of the self test (the state must carry across blocks of
#: every length, including 1; odd blocks are processed in place).
SELFTEST_BLOCKS = (1, 7, 2, 37, 3, 16, 5, 64, 11)
#: FIRs of at most this many stored taps are written out tap by tap (no loop, no table).
UNROLL_TAPS = 8


class GeneratedCodeError(EmitError):
    """A channel cannot be written as generated code for this target."""


# ---------------------------------------------------------------------------
# every C identifier of the generated code, in one place
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class ChannelCNames:
    """Every C identifier and macro one channel of generated code defines (one record per channel)."""

    owner: str  # "channel 2 'tweeter'", for messages
    state_t: str
    reset: str
    process: str
    golden_out: str
    check: str
    macros: Mapping[str, str]  # CHANNEL_MACROS entry -> macro

    def identifiers(self) -> list[str]:
        return [self.state_t, self.reset, self.process, self.golden_out, self.check, *self.macros.values()]


@dataclass(frozen=True)
class CNames:
    """The C identifiers of one generated header and source.

    ``name`` is the description's C name and ``channels`` the channel parts (as
    made by :func:`coefc.emit.header.c_identifier`); every identifier and macro of the
    generated code comes from the suffix tables here, the channel's in one
    :class:`ChannelCNames` record (:meth:`channel`).
    """

    name: str
    channels: tuple[str, ...]  # channel parts (without the description prefix)

    #: identifiers of the description: field -> suffix after the description's name
    DESCRIPTION_SUFFIXES = {"data_t": "_data_t", "selftest": "_selftest", "golden_in": "_golden_in"}
    #: identifiers of a channel: field of ChannelCNames -> suffix after the channel's identifier
    CHANNEL_SUFFIXES = {"state_t": "_state_t", "reset": "_reset", "process": "_process",
                        "golden_out": "_golden_out", "check": "_check"}
    GLOBAL_MACROS = ("COEFC_H", "DATA_BITS", "DATA_FRAC_BITS", "COEF_BITS", "COEF_FRAC_BITS", "ACC_BITS",
                     "SAMPLE_RATE_HZ", "OVER_BUDGET", "N_CHANNELS", "GOLDEN_LEN", "GENERATED_CODE")
    CHANNEL_MACROS = ("MULS_PER_SAMPLE", "ADDS_PER_SAMPLE", "COEF_BYTES", "STATE_BYTES", "SECTIONS", "DECIMATION",
                      "INTERPOLATION", "OUT_ROOM")

    def description(self) -> dict[str, str]:
        """The description's identifiers by field (``data_t``, ``selftest``, ``golden_in``)."""
        return {f: self.name + suffix for f, suffix in self.DESCRIPTION_SUFFIXES.items()}

    def macro(self, what: str) -> str:
        return f"{self.name.upper()}_{what}"

    @property
    def guard(self) -> str:
        return self.macro("COEFC_H")

    def channel(self, i: int) -> ChannelCNames:
        """The record of channel *i* (0-based)."""
        ident = f"{self.name}_{self.channels[i]}"
        return ChannelCNames(f"channel {i + 1} '{self.channels[i]}'",
                             **{f: ident + suffix for f, suffix in self.CHANNEL_SUFFIXES.items()},
                             macros={m: f"{ident.upper()}_{m}" for m in self.CHANNEL_MACROS})

    def all_identifiers(self) -> list[tuple[str, str]]:
        """(identifier, owner) of everything the generated code defines."""
        out = [(v, "the description") for v in self.description().values()]
        out += [(self.macro(m), "the description") for m in self.GLOBAL_MACROS]
        for i in range(len(self.channels)):
            rec = self.channel(i)
            out += [(v, rec.owner) for v in rec.identifiers()]
        return out

    def validate(self, source: str) -> None:
        """Refuse two generated names that coincide (macros are compared in upper case)."""
        seen: dict[str, str] = {}
        for ident, owner in self.all_identifiers():
            key = ident.upper()
            if key in seen and seen[key] != owner:
                raise DescriptionError(source, f"{owner} makes the C name '{ident}', which {seen[key]} also "
                                       "uses; rename the channel", key="name")
            seen.setdefault(key, owner)


# ---------------------------------------------------------------------------
# literals
# ---------------------------------------------------------------------------

def _s(v: int, bits: int) -> str:
    """A signed literal of at most *bits* bits (an int for 32, int64_t otherwise)."""
    v = int(v)
    if -(1 << 31) < v < (1 << 31):
        return str(v)
    if v == -(1 << 31):
        return "(-2147483647 - 1)" if bits == 32 else "(-INT64_C(2147483647) - 1)"
    if v == -(1 << 63):
        return "(-INT64_C(9223372036854775807) - 1)"
    return f"INT64_C({v})"


def _u(v: int, bits: int) -> str:
    """An unsigned literal of the container type."""
    v = int(v)
    assert 0 <= v < (1 << bits)
    text = f"0x{v:X}" if v >= 256 else str(v)
    return f"UINT{bits}_C({text})"


# ---------------------------------------------------------------------------
# cost figures
# ---------------------------------------------------------------------------

def channel_cost(program: ChannelProgram, coef_bytes: int, data_bytes: int) -> dict:
    """Multiplies and adds per sample, coefficient bytes and state bytes of a channel.

    Counts the products and the sums of products of the generated code
    (rounding and saturation steps not counted): a section 5 multiplies and
    4 adds (5 with error feedback; df1-wide-fb 7 multiplies, 6 adds and 7 stored
    coefficients, df1ef-wide-fb 7 multiplies, 7 adds and 7 stored coefficients, df1ef-wide
    10 multiplies, 10 adds and 10 stored coefficients; a coupled
    section 8 multiplies, 5 adds and 8 coefficients); an FIR of N taps N multiplies and
    N - 1 adds,
    folded ceil(N/2) multiplies and N - 1 adds, where zero taps are skipped (no multiply,
    add or stored word: a half-band filter's every other tap); a gain one multiply; a delay none.
    Coefficient bytes count the stored coefficient words (a folded FIR stores
    ceil(N/2)); state bytes the fields of the generated state structure before
    padding.  In a multirate channel the figures are per *input* sample, rounded
    up: a polyphase FIR decimating by M costs N/M multiplies per input sample
    (folded ceil(N/2)/M), one interpolating by L costs N per input sample (each input
    meets every tap once, in one of the L branches; adds N - L; a branch whose taps are
    symmetric is folded), and an op after a rate change counts its work times its rate
    over the input rate.  A CIC decimator of N stages by R costs N adds per input sample
    (integrators) and N per output sample (combs), no multiply when its gain is a power of two
    (one per output sample otherwise): its state is 8 (N + N D) bytes of register and its phase.
    """
    from fractions import Fraction

    fixed = not program.arithmetic.is_float
    muls = adds = coefs = 0
    state = 0
    per = Fraction(1)  # this op's samples per channel input sample (multirate channels)
    mr, ar_ = Fraction(0), Fraction(0)  # multiplies and adds of ops at other rates, per input sample
    for op in program.ops:
        if isinstance(op, CicOp):  # N adds per input sample, N adds and at most 1 multiply per output
            low = per / op.factor
            mr += low * (0 if int(op.coef) == 1 else 1)
            ar_ += per * op.stages + low * op.stages
            coefs += 0 if int(op.coef) == 1 else 1
            state += 8 * op.stages * (1 + op.delay) + 4 + (4 if op.delay > 1 else 0)
            per = per / op.factor
            continue
        if isinstance(op, (PolyFirOp, RateOp)):
            if isinstance(op, PolyFirOp):  # the non-zero products per output sample at the lower rate
                n = len(op.taps)
                folded = op.symmetric and fixed and op.down > 1 and not program.arithmetic.product_shift
                m_, a_, c_ = _fir_counts(op.taps, folded)
                if op.down > 1:
                    mr += per / op.down * m_
                    ar_ += per / op.down * a_
                else:  # interpolating: each input meets every non-zero tap once, in one of the L branches
                    c_ = 0
                    for b in _branches(op.taps, op.up):
                        bm, ba, bc = _fir_counts(b, fixed and _branch_folds(b, program.arithmetic.product_shift))
                        mr += per * bm
                        ar_ += per * ba
                        c_ += bc
                coefs += c_
                state += 2 * n * data_bytes + 8
            else:
                state += 4
            per = per * Fraction(op.up, op.down)
            continue
        m0, a0 = muls, adds
        if isinstance(op, SectionOp) and STRUCTURE_TABLE[op.structure].state_space:
            muls += STRUCTURE_TABLE[op.structure].multiplies  # coupled: y 3, S1 3, S2 2
            adds += 5
            coefs += 8
            state += _section_state_bytes(op, program, data_bytes)
        elif isinstance(op, SectionOp):
            st = STRUCTURE_TABLE[op.structure]
            muls += st.multiplies
            adds += (5 if st.error_feedback else 4) + (2 if st.wide_feedback else 0) + (3 if st.wide_numerator else 0)
            coefs += 5 + (2 if st.wide_feedback else 0) + (3 if st.wide_numerator else 0)
            state += _section_state_bytes(op, program, data_bytes)
        elif isinstance(op, FirOp):
            n = len(op.taps)
            folded = op.symmetric and fixed and not program.arithmetic.product_shift
            m_, a_, c_ = _fir_counts(op.taps, folded)
            muls += m_
            adds += a_
            coefs += c_
            state += 2 * n * data_bytes + 4
        elif isinstance(op, GainOp):
            muls += 1
            coefs += 1
        elif isinstance(op, DelayOp):
            state += (op.samples * data_bytes + 4) if op.samples else 0
        if per != 1:  # an op after a rate change: its work counted per channel input sample
            mr += per * (muls - m0)
            ar_ += per * (adds - a0)
            muls, adds = m0, a0
    if mr or ar_:
        muls += -(-mr.numerator // mr.denominator)
        adds += -(-ar_.numerator // ar_.denominator)
    return {"muls_per_sample": muls, "adds_per_sample": adds, "coef_bytes": coefs * coef_bytes,
            "state_bytes": state}


def _fir_counts(taps, folded: bool) -> tuple[int, int, int]:
    """(multiplies, adds, stored coefficients) of one output of an FIR, zero taps skipped: unfolded one
    multiply per non-zero tap; folded one per non-zero pair and the non-zero middle tap (a pair's two
    samples are added first); adds one fewer than the non-zero taps."""
    n = len(taps)
    nz = sum(1 for t in taps if t)
    if not folded:
        return nz, max(0, nz - 1), nz
    stored = sum(1 for t in taps[:(n + 1) // 2] if t)
    return stored, max(0, nz - 1), stored


def cost_of(program: ChannelProgram) -> dict:
    """:func:`channel_cost` with the word containers of the arithmetic (2 bytes up to
    16 bits, 4 up to 32, 8 beyond; float32 4), as ``check`` and ``report`` state it."""
    a = program.arithmetic
    if a.is_float:
        return channel_cost(program, 4, 4)

    def size(bits: int) -> int:
        return 2 if bits <= 16 else 4 if bits <= 32 else 8

    return channel_cost(program, size(a.coef.width), size(a.data.width))


def _container(program: ChannelProgram, k: int) -> int:
    """Bits of the unsigned accumulator container of an op with rounding shift *k*."""
    a = program.arithmetic
    return 32 if a.acc_bits <= 32 and k <= 30 else 64


def _narrow_residual(program: ChannelProgram, k: int, C: int) -> bool:
    """True when error feedback keeps ``E`` (``|E| < 2^k``) in an ``int32_t`` rather than the 64-bit
    container: ``C = 64`` and ``k <= 31``.  Then ``d + k <= 63 = C - 1`` and every true ``g`` of the
    offset form lies in ``[-2^63, 2^63 + 2^62 + 2^31)``, so :meth:`_Fixed.finish` writes the offset form,
    which forms ``E = (g mod 2^k) - o`` as a signed value."""
    return C == 64 and k <= 31 and program.arithmetic.data.width <= 32


def _section_state_bytes(op: SectionOp, program: ChannelProgram, data_bytes: int) -> int:
    st = STRUCTURE_TABLE[op.structure]
    if program.arithmetic.is_float:
        return 4 * st.state_words
    k = program.arithmetic.final_shift(op.shift)
    C = _container(program, k)
    if st.error_feedback:  # one of the accumulator-precision states is E
        e_bytes = 4 if _narrow_residual(program, k, C) else C // 8
        return st.data_states * data_bytes + (st.acc_states - 1) * (C // 8) + e_bytes
    return st.data_states * data_bytes + st.acc_states * (C // 8)


# ---------------------------------------------------------------------------
# code of one fixed-point channel
# ---------------------------------------------------------------------------

class _Fixed:
    """Builds the C lines of a fixed-point channel."""

    def __init__(self, program: ChannelProgram, data_type: str):
        a = program.arithmetic
        self.p = program
        self.D = data_type
        self.d = a.data.width
        self.cb = a.coef.width
        self.fc = a.coef.frac_bits
        self.A = a.acc_bits
        self.rounding = a.rounding
        self.overflow = a.overflow
        self.P = a.product_shift  # rounded products (coefc.program, "Rounded products")
        self.prounding = a.product_rounding
        self.dmax = (1 << (self.d - 1)) - 1
        self.dmin = -(1 << (self.d - 1))

    # products -------------------------------------------------------------
    def qprod(self, x: str, c: int, C: int) -> str:
        """The rounded product ``round(c x / 2^P)`` modulo 2^C: the exact int64 product (|c x| <= 2^62)
        biased by 2^62 into uint64_t, so every shift is of a non-negative value."""
        P = self.P
        assert 1 <= P <= 61
        p = f"(int64_t){x} * {c if isinstance(c, str) else _s(c, 64)}"
        u = f"((uint64_t)({p}) + {_u(1 << 62, 64)})"
        off = _u(1 << (62 - P), 64)
        if self.prounding == "truncate":
            q = f"(({u} >> {P}) - {off})"
        elif self.prounding == "add-half":
            q = f"((({u} + {_u(1 << (P - 1), 64)}) >> {P}) - {off})"
        elif self.prounding == "half-even":
            mask, half = _u((1 << P) - 1, 64), _u(1 << (P - 1), 64)
            q = (f"(({u} >> {P}) + (uint64_t)(({u} & {mask}) > {half} || "
                 f"(({u} & {mask}) == {half} && (({u} >> {P}) & 1u) != 0u)) - {off})")
        else:  # toward-zero: floor, plus one for a negative product with dropped bits
            q = f"(({u} >> {P}) + (uint64_t)(({p}) < 0 && ({u} & {_u((1 << P) - 1, 64)}) != 0u) - {off})"
        return q if C == 64 else f"(uint32_t){q}"

    def prod(self, x: str, c: int, C: int) -> str:
        if self.P:
            return self.qprod(x, c, C)
        if C == 64:
            return f"(uint64_t)((int64_t){x} * {_s(c, 64)})"
        if self.d + self.cb <= 32 and -(1 << 31) <= c < (1 << 31):
            return f"(uint32_t)((int32_t){x} * (int32_t){_s(c, 32)})"
        return f"(uint32_t)((int64_t){x} * {_s(c, 64)})"

    def prodv(self, x: str, h: str, C: int) -> str:
        """The product of sample *x* and the int32_t coefficient variable *h*."""
        if self.P:
            return self.qprod(x, h, C)
        if C == 64:
            return f"(uint64_t)((int64_t){x} * {h})"
        if self.d + self.cb <= 32:
            return f"(uint32_t)((int32_t){x} * {h})"
        return f"(uint32_t)((int64_t){x} * {h})"

    def fits_coef(self, c: int) -> bool:
        return -(1 << (self.cb - 1)) <= c < (1 << (self.cb - 1))

    def sum_lines(self, acc: str, C: int, terms, start: str | None = None) -> list[str]:
        """``U acc = sum`` of (sign, coefficient, sample expression); zero terms dropped.

        A negative term is added with its negated coefficient when that still fits
        the coefficient word (a multiply-accumulate), subtracted otherwise.
        """
        U = f"uint{C}_t"
        parts: list[tuple[str, str]] = []
        for sign, c, x in terms:
            c = int(c)
            if c == 0:
                continue
            if sign < 0 and self.P:  # the product of the negated coefficient is the one rounded
                parts.append(("+", self.prod(x, -c, C)))
            elif sign < 0 and self.fits_coef(-c):
                parts.append(("+", self.prod(x, -c, C)))
            elif sign < 0:
                parts.append(("-", self.prod(x, c, C)))
            else:
                parts.append(("+", self.prod(x, c, C)))
        lines = []
        if start is not None:
            lines.append(f"{U} {acc} = {start};")
        elif parts and parts[0][0] == "+":
            lines.append(f"{U} {acc} = {parts.pop(0)[1]};")
        else:
            lines.append(f"{U} {acc} = 0u;")
        for op, term in parts:
            lines.append(f"{acc} {op}= {term};")
        return lines

    def low_products(self, acc: str, C: int, l1: int, l2: int, L: int) -> list[str]:
        """``acc -= floor((l1 y1 + l2 y2) / 2^L)`` (df1-wide-fb), without signed overflow or signed shifts.

        With ``|l| <= 2^(L-1) = 2^(Wc-2)`` and ``|y| <= 2^(Wd-1)`` the sum P lies
        strictly inside ``2^(Wc+Wd-2)``; it is formed in a signed word of
        ``Wc + Wd`` bits (32 or 64), biased to unsigned, shifted, and unbiased.
        """
        return self._floored_low(acc, C, [("y1", l1), ("y2", l2)], L, "-", "lp", "lq",
                                 "A1lo y[n-1] + A2lo y[n-2]")

    def low_numerator(self, acc: str, C: int, m0: int, m1: int, m2: int, L: int) -> list[str]:
        """``acc += floor((m0 x + m1 x1 + m2 x2) / 2^L)`` (df1ef-wide's low numerator words).

        With ``|m| <= 2^(Wc-2)`` and ``|x| <= 2^(Wd-1)`` each product is at most
        ``2^(Wc+Wd-3)`` and the sum Q of three lies strictly inside ``2^(Wc+Wd-1)``
        (every partial sum too), so it is exact in the signed ``Wc + Wd``-bit word
        (32 or 64) and the bias ``2^(W-1)`` keeps it in the unsigned range.
        """
        return self._floored_low(acc, C, [("x", m0), ("x1", m1), ("x2", m2)], L, "+", "np_", "nq",
                                 "B0lo x[n] + B1lo x[n-1] + B2lo x[n-2]")

    def _floored_low(self, acc: str, C: int, pairs, L: int, sign: str, p_name: str, q_name: str,
                     what: str) -> list[str]:
        W = 32 if self.d + self.cb <= 32 else 64
        S, U = f"int{W}_t", f"uint{W}_t"
        prods = [f"({S}){v} * ({S}){_s(c, W)}" for v, c in pairs if c]
        if not prods:
            return []
        p = " + ".join(prods)
        bias = 1 << (W - 1)
        return [f"const {S} {p_name} = {p}; /* {what}, exact */",
                f"const {S} {q_name} = ({S})((({U}){p_name} + {_u(bias, W)}) >> {L}) - ({S}){_u(bias >> L, W)}; "
                f"/* floor({p_name} / 2^{L}) */",
                f"{acc} {sign}= (uint{C}_t){q_name};"]

    # rounding and fitting ------------------------------------------------
    def finish(self, acc: str, k: int, C: int, y: str, residual: str | None = None,
               narrow: bool = False) -> list[str]:
        """Lines computing data word *y* from accumulator *acc* (and the residual, an ``int32_t``
        when *narrow*, else modulo the container).

        The offset form (:meth:`_finish_offset`) where its range argument holds,
        otherwise the biased form (:meth:`_finish_biased`)."""
        lines = self._finish_offset(acc, k, C, y, residual, narrow)
        if lines is None and narrow:  # pragma: no cover - _narrow_residual proves the offset form holds
            raise GeneratedCodeError(f"internal: a 32-bit residual needs the offset form (k {k}, container {C})")
        return lines if lines is not None else self._finish_biased(acc, k, C, y, residual)

    def _finish_offset(self, acc: str, k: int, C: int, y: str, residual: str | None,
                       narrow: bool = False) -> list[str] | None:
        """Rounding and fitting by one added constant: ``g = a + o + 2^(d-1+k)`` modulo ``2^C``.

        Every rounding mode is ``floor((a + o) / 2^k)`` with an offset ``0 <= o < 2^k``
        (truncate 0; add-half ``2^(k-1)``; half-even ``2^(k-1) - 1 + bit_k(a)``;
        toward-zero ``2^k - 1`` for a negative ``a``, else 0: the nested-floor
        identity).  The rounded value fits the ``d``-bit data word exactly when
        ``0 <= g < 2^(d+k)`` for the true (unreduced) ``g``; every true ``g`` lies in
        ``[2^(d+k) - 2^C, 2^C)`` (checked here), so ``g`` modulo ``2^C`` is below
        ``2^(d+k)`` exactly when it fits, and then ``y = (g >> k) - 2^(d-1)``.  The
        low ``d + k`` bits of ``g`` do not depend on the reduction, so wrapping takes
        ``g >> k`` modulo ``2^d``; a saturated word takes the sign of ``a`` (bit
        ``A - 1``); the residual is ``E = (g mod 2^k) - o``.  ``None`` when the range
        argument does not hold (the biased form is used).
        """
        U = f"uint{C}_t"
        A, d = self.A, self.d
        if not (0 <= k and A <= C and d <= 32 and d + k <= C - 1):
            return None
        B = 1 << (d - 1 + k)
        mask = (1 << k) - 1
        mode = self.rounding if k else "truncate"
        omin, omax = {"truncate": (0, 0), "add-half": (1 << (k - 1), 1 << (k - 1)) if k else (0, 0),
                      "half-even": ((1 << (k - 1)) - 1, 1 << (k - 1)) if k else (0, 0),
                      "toward-zero": (0, mask)}[mode]
        sat = self.overflow == "saturate"
        if sat and not (-(1 << (A - 1)) + omin + B >= (1 << (d + k)) - (1 << C)
                        and (1 << (A - 1)) - 1 + omax + B < (1 << C)):
            return None
        lines = []
        # the accumulator's value a modulo 2^C: the container sign-extended from A bits when wider
        ext = A < C and (sat or d + k > A or mode == "toward-zero")
        sign = f"({acc} >> {A - 1})" if A == C else f"(({acc} >> {A - 1}) & 1u)"
        if ext:
            a_expr, extra = f"(({acc} ^ {_u(1 << (A - 1), C)}) & {_u((1 << A) - 1, C)})", -(1 << (A - 1))
            what = f"a (from {A} bits)"
        else:
            a_expr, extra, what = acc, 0, "a"
        if mode in ("truncate", "add-half"):
            lines.append(f"const {U} g = {a_expr} + {_u((omin + B + extra) % (1 << C), C)}; "
                         f"/* {what}{f' + 2^{k - 1}' if omin else ''} + 2^{d - 1 + k} */")
            o = _u(omin, C) if omin else None
        elif mode == "half-even":
            lines.append(f"const {U} ro = {_u(omin, C)} + (({acc} >> {k}) & 1u); "
                         f"/* 2^{k - 1} - 1, plus 1 when floor(a / 2^{k}) is odd: ties to even */")
        else:  # toward-zero
            lines.append(f"const {U} ro = (0u - {sign}) & {_u(mask, C)}; /* 2^{k} - 1 when a < 0: towards zero */")
        if mode in ("half-even", "toward-zero"):
            lines.append(f"const {U} g = {a_expr} + {_u((B + extra) % (1 << C), C)} + ro; "
                         f"/* {what} + ro + 2^{d - 1 + k} */")
            o = "ro"
        if residual is not None and k == 0:
            lines.append(f"{residual} = {'0' if narrow else '0u'}; /* E = 0: nothing is rounded here */")
        elif residual is not None and narrow:
            lines.append(f"{residual} = (int32_t)((int64_t)(g & {_u(mask, C)}){f' - (int64_t){o}' if o else ''}); "
                         f"/* E = a - round(a) 2^{k}, |E| < 2^{k} */")
        elif residual is not None:
            lines.append(f"{residual} = (g & {_u(mask, C)}){f' - {o}' if o else ''}; "
                         f"/* E = a - round(a) 2^{k}, |E| < 2^{k} */")
        D = self.D
        if d == 32:
            value = f"({D})((int64_t)(uint32_t)(g >> {k}) - INT64_C(2147483648))"
        elif sat:
            value = f"({D})((int32_t)(g >> {k}) - {1 << (d - 1)})"
        else:
            value = f"({D})((int32_t)((uint32_t)(g >> {k}) & {_u((1 << d) - 1, 32)}) - {1 << (d - 1)})"
        if sat:
            # with C = 64 and d + k >= 32 the test needs only the high word (one compare on a 32-bit core)
            fits = (f"(uint32_t)(g >> 32) < {_u(1 << (d + k - 32), 32)}" if C == 64 and d + k >= 32 else
                    f"g < {_u(1 << (d + k), C)}")
            lines.append(f"const {D} {y} = {fits} ? {value} : {sign} != 0u ? "
                         f"({D}){_s(self.dmin, 32)} : ({D}){_s(self.dmax, 32)}; /* saturate to {d} bits */")
        else:
            lines.append(f"const {D} {y} = {value}; /* wrap to {d} bits */")
        return lines

    def _finish_biased(self, acc: str, k: int, C: int, y: str, residual: str | None = None) -> list[str]:
        """Rounding and fitting on the biased accumulator ``w = a + 2^(C-1)`` (any shift and width)."""
        U = f"uint{C}_t"
        A = self.A
        bias = 1 << (C - 1)
        assert (0 if self.P else 1) <= k <= C - 2 and A <= C
        if k == 0 and C == 64:
            raise GeneratedCodeError("no final shift with a 64-bit accumulator container has no generated code; "
                                     "use an accumulator of at most 32 bits or a smaller product shift")
        lines = []
        if A == C:
            lines.append(f"const {U} w = {acc} ^ {_u(bias, C)}; /* a + 2^{C - 1} */")
        else:
            lines.append(f"const {U} w = (({acc} ^ {_u(1 << (A - 1), C)}) & {_u((1 << A) - 1, C)}) + "
                         f"{_u(bias - (1 << (A - 1)), C)}; /* a (from {A} bits) + 2^{C - 1} */")
        off = 1 << (C - 1 - k)  # the bias after the shift
        half, mask = (1 << (k - 1), (1 << k) - 1) if k else (0, 0)
        if k == 0:
            lines.append(f"const {U} v = w; /* no final rounding: the products were rounded */")
        elif self.rounding == "truncate":
            lines.append(f"const {U} v = w >> {k}; /* floor(a / 2^{k}) + 2^{C - 1 - k} */")
        elif self.rounding == "add-half":
            lines.append(f"const {U} v = (w >> {k}) + ((w >> {k - 1}) & 1u); /* floor((a + 2^{k - 1}) / 2^{k}) "
                         f"+ 2^{C - 1 - k} */")
        elif self.rounding == "half-even":
            lines += [f"const {U} q = w >> {k};",
                      f"const {U} r = w & {_u(mask, C)};",
                      f"const {U} v = q + ({U})(r > {_u(half, C)} || (r == {_u(half, C)} && (q & 1u) != 0u)); "
                      "/* ties to even */"]
        elif self.rounding == "toward-zero":
            lines.append(f"const {U} v = (w >> {k}) + ({U})(w < {_u(bias, C)} && (w & {_u(mask, C)}) != 0u); "
                         "/* towards zero */")
        else:  # pragma: no cover - the spec refuses other modes
            raise GeneratedCodeError(f"rounding mode '{self.rounding}' has no generated code")
        if residual is not None and k == 0:
            lines.append(f"{residual} = 0u; /* E = 0: nothing is rounded here */")
        elif residual is not None:
            lines.append(f"{residual} = w - (v << {k}); /* E = a - round(a) * 2^{k}, |E| < 2^{k} */")
        vmax = 1 << (C - k)  # largest v (inclusive)
        D = self.D
        if self.overflow == "saturate":
            hi, lo = self.dmax + off, self.dmin + off
            wide = "int64_t" if min(vmax, hi) >= (1 << (C - 1)) or C == 64 else f"int{C}_t"
            value = f"({wide})v - {_s(off, 64 if wide == 'int64_t' else 32)}"
            if lo > 0:
                value = f"v < {_u(lo, C)} ? {_s(self.dmin, 64 if wide == 'int64_t' else 32)} : {value}"
            if hi < vmax:
                value = f"v > {_u(hi, C)} ? {_s(self.dmax, 64 if wide == 'int64_t' else 32)} : {value}"
            lines.append(f"const {D} {y} = ({D})({value}); /* saturate to {self.d} bits */")
        else:
            sign = 1 << (self.d - 1)
            masked = f"(uint32_t)(v - {_u(off, C)})"
            if self.d < 32:
                masked = f"({masked} & {_u((1 << self.d) - 1, 32)})"
            wt = "int32_t" if self.d < 32 else "int64_t"
            lines.append(f"const {D} {y} = ({D})(({wt})({masked} ^ {_u(sign, 32)}) - {_s(sign, 64)}); "
                         f"/* wrap to {self.d} bits */")
        return lines

    def product_note(self) -> list[str]:
        if not self.P:
            return []
        return [f"every product rounded before the sum: q(c v) = round(c v / 2^{self.P}) ({self.prounding}); "
                "a subtracted term is q(-c v)"]

    def k_of(self, shift: int) -> int:
        return self.fc - shift - self.P


def _indent(lines, n: int) -> list[str]:
    pad = " " * n
    return [pad + ln if ln else ln for ln in lines]


@dataclass
class _OpCode:
    comment: list[str]
    fields: list[tuple[str, str, int, str]]  # (C type, field name, count (0 = scalar), comment)
    lines: list[str]  # the block, without the enclosing braces


def _loop(src: str, body: list[str], D: str) -> list[str]:
    return ["for (t = 0u; t < n; t++) {", f"    const {D} x = {src}[t];", *_indent(body, 4), "}"]


def _fixed_ops(program: ChannelProgram, D: str) -> list[_OpCode]:
    fx = _Fixed(program, D)
    out: list[_OpCode] = []
    n_sec = 0
    for i, op in enumerate(program.ops, 1):
        src = "in" if not out else "out"
        f = f"op{i}"
        if isinstance(op, SectionOp) and STRUCTURE_TABLE[op.structure].state_space:
            n_sec += 1
            k = fx.k_of(op.shift)
            C = _container(program, k)
            Dc, C1, C2, G = (int(v) for v in op.b)
            A11, A12, A21, A22 = (int(v) for v in op.a)
            head = [f"section {n_sec}, coupled: D {Dc}, C1 {C1}, C2 {C2}, G {G}, A11 {A11}, A12 {A12}, "
                    f"A21 {A21}, A22 {A22} (coefficient shift {op.shift}, rounding shift {k}, {C}-bit container)",
                    f"y = fit(round((D x + C1 S1 + C2 S2) / 2^{k})); S1 = fit(round((A11 S1 + A12 S2 + G x) / 2^{k})); "
                    f"S2 = fit(round((A21 S1 + A22 S2) / 2^{k})) (old S1, S2 on the right)"]
            fields = [(D, f"{f}_s", 2, "S1, S2 (data words)")]
            pre = [f"{D} s1 = s->{f}_s[0], s2 = s->{f}_s[1];"]
            post = [f"s->{f}_s[0] = s1;", f"s->{f}_s[1] = s2;"]
            body = [f"{D} y, n1, n2;"]  # three sibling blocks: each rounding's temporaries stay in its own
            for name, terms in (("y", [(1, Dc, "x"), (1, C1, "s1"), (1, C2, "s2")]),
                                ("n1", [(1, A11, "s1"), (1, A12, "s2"), (1, G, "x")]),
                                ("n2", [(1, A21, "s1"), (1, A22, "s2")])):
                inner = fx.sum_lines("a", C, terms) + fx.finish("a", k, C, "res") + [f"{name} = res;"]
                body += ["{", *_indent(inner, 4), "}"]
            body += ["s1 = n1;", "s2 = n2;", "out[t] = y;"]
            lines = pre + _loop(src, body, D) + post
            out.append(_OpCode(head, fields, lines))
        elif isinstance(op, SectionOp):
            n_sec += 1
            k = fx.k_of(op.shift)
            C = _container(program, k)
            U = f"uint{C}_t"
            B0, B1, B2 = (int(v) for v in op.b)
            A1, A2 = (int(v) for v in op.a)
            head = [f"section {n_sec}, {op.structure}: b0 {B0}, b1 {B1}, b2 {B2}, a1 {A1}, a2 {A2} "
                    f"(coefficient shift {op.shift}, rounding shift {k}, {C}-bit container)"]
            wide = STRUCTURE_TABLE[op.structure].wide_feedback
            if wide:
                L = lo_bits(program.arithmetic.coef)
                A1L, A2L = (int(v) for v in (op.a_lo or (0, 0)))
                if max(abs(A1L), abs(A2L)) > 1 << (L - 1):
                    raise GeneratedCodeError(f"section {n_sec}: low feedback word beyond 2^{L - 1}; realise again")
                head[0] += f", low words a1 {A1L}, a2 {A2L} (weight 2^-{L})"
            wide_b = STRUCTURE_TABLE[op.structure].wide_numerator
            if wide_b:  # df1ef-wide: the numerator's low words
                B0L, B1L, B2L = (int(v) for v in (op.b_lo or (0, 0, 0)))
                if max(abs(B0L), abs(B1L), abs(B2L)) > 1 << (L - 1):
                    raise GeneratedCodeError(f"section {n_sec}: low numerator word beyond 2^{L - 1}; realise again")
                head[0] += f", low words b0 {B0L}, b1 {B1L}, b2 {B2L} (weight 2^-{L})"
            ef = STRUCTURE_TABLE[op.structure].error_feedback
            if op.structure in ("df1", "df1ef") or wide:
                head.append("acc = b0 x[n] + b1 x[n-1] + b2 x[n-2] - a1 y[n-1] - a2 y[n-2]"
                            + (f" + floor((b0lo x[n] + b1lo x[n-1] + b2lo x[n-2]) / 2^{L})" if wide_b else "")
                            + (f" - floor((a1lo y[n-1] + a2lo y[n-2]) / 2^{L})" if wide else "")
                            + (" + E" if ef else "")
                            + f"; y[n] = fit(round(acc / 2^{k}))"
                            + ("; E = acc - round(acc / 2^k) 2^k" if ef else ""))
                terms = [(1, B0, "x"), (1, B1, "x1"), (1, B2, "x2"), (-1, A1, "y1"), (-1, A2, "y2")]
                fields = [(D, f"{f}_x", 2, "x[n-1], x[n-2]"), (D, f"{f}_y", 2, "y[n-1], y[n-2]")]
                pre = [f"{D} x1 = s->{f}_x[0], x2 = s->{f}_x[1];", f"{D} y1 = s->{f}_y[0], y2 = s->{f}_y[1];"]
                post = [f"s->{f}_x[0] = x1;", f"s->{f}_x[1] = x2;", f"s->{f}_y[0] = y1;", f"s->{f}_y[1] = y2;"]
                body = []
                if ef:  # E: an int32_t when |E| < 2^k fits one (_narrow_residual), else modulo the container
                    narrow = _narrow_residual(program, k, C)
                    et = "int32_t" if narrow else U
                    fields.append((et, f"{f}_e", 0, "E, the previous rounding residual" +
                                   ("" if narrow else " (modulo the container)")))
                    pre.append(f"{et} e = s->{f}_e;")
                    post.append(f"s->{f}_e = e;")
                    start = f"({U})(int64_t)e" if narrow else "e"
                if op.structure == "df1ef":
                    body += fx.sum_lines("acc", C, terms, start=start)  # products accumulate onto E
                    body += fx.finish("acc", k, C, "y", residual="e", narrow=narrow)
                elif wide and ef:  # df1ef-wide-fb: E is the residual of the acc that holds the floored term
                    body += fx.sum_lines("acc", C, terms, start=start)
                    if wide_b:  # df1ef-wide: the floored low numerator products, before E (coefc.program)
                        body += fx.low_numerator("acc", C, B0L, B1L, B2L, L)
                    body += fx.low_products("acc", C, A1L, A2L, L)
                    body += fx.finish("acc", k, C, "y", residual="e", narrow=narrow)
                elif wide:
                    body += fx.sum_lines("acc", C, terms)
                    body += fx.low_products("acc", C, A1L, A2L, L)
                    body += fx.finish("acc", k, C, "y")
                else:
                    body += fx.sum_lines("acc", C, terms)
                    body += fx.finish("acc", k, C, "y")
                body += ["x2 = x1;", "x1 = x;", "y2 = y1;", "y1 = y;", "out[t] = y;"]
            else:  # tdf2
                head.append(f"y = fit(round((b0 x + S1) / 2^{k})); S1 = b1 x - a1 y + S2; S2 = b2 x - a2 y "
                            f"(S1, S2 modulo 2^{C})")
                fields = [(U, f"{f}_s", 2, "S1, S2 (modulo the container)")]
                pre = [f"{U} s1 = s->{f}_s[0], s2 = s->{f}_s[1];"]
                post = [f"s->{f}_s[0] = s1;", f"s->{f}_s[1] = s2;"]
                # each sum starts from the state it adds (a multiply-accumulate onto it)
                body = fx.sum_lines("acc", C, [(1, B0, "x")], start="s1")
                body += fx.finish("acc", k, C, "y")
                t1 = fx.sum_lines("n1", C, [(1, B1, "x"), (-1, A1, "y")], start="s2")
                t2 = fx.sum_lines("n2", C, [(1, B2, "x"), (-1, A2, "y")])
                body += t1 + t2 + ["s1 = n1;", "s2 = n2;", "out[t] = y;"]
            lines = pre + _loop(src, body, D) + post
            out.append(_OpCode(head + fx.product_note(), fields, lines))
        elif isinstance(op, PolyFirOp) and op.up > 1:
            out.append(_interpolating(fx, op, f, src, D))
        elif isinstance(op, (FirOp, PolyFirOp)):
            taps = [int(v) for v in op.taps]
            n = len(taps)
            k = fx.k_of(op.shift)
            C = _container(program, k)
            U = f"uint{C}_t"
            folded = op.symmetric and taps == taps[::-1] and not fx.P  # rounded products do not fold
            stored = taps[:(n + 1) // 2] if folded else taps
            ct = ("int16_t" if all(-(1 << 15) <= c < (1 << 15) for c in stored) and fx.cb <= 16 else
                  "int32_t" if all(-(1 << 31) <= c < (1 << 31) for c in stored) else "int64_t")
            head = [f"FIR, {n} taps{', symmetric: ' + str(len(stored)) + ' stored, folded' if folded else ''} "
                    f"(coefficient shift {op.shift}, rounding shift {k}, {C}-bit container)",
                    f"acc = sum h[j] x[n-j]; y[n] = fit(round(acc / 2^{k})); "
                    f"history z[p..p+{n - 1}] newest first, kept twice so it is contiguous"]
            fields = [(D, f"{f}_z", 2 * n, f"the last {n} inputs, twice"), ("uint32_t", f"{f}_p", 0,
                                                                           "position of the newest input")]
            # zero taps (every other tap of a half-band filter) are skipped: no product, no table entry
            live = [(j, c) for j, c in enumerate(stored[:n // 2] if folded else stored) if c]
            middle = stored[-1] if folded and n % 2 else 0
            unroll = len(live) <= UNROLL_TAPS
            hlines, jx = [], "j"
            if not unroll:
                hlines = [f"static const {ct} h[{len(live)}] = {{ /* the non-zero taps, newest first */"]
                hlines += ["    " + ", ".join(_s(c, 64 if ct == "int64_t" else 32) for _, c in live[j:j + 6]) + ","
                           for j in range(0, len(live), 6)]
                hlines.append("};")
                jx, olines = _tap_index([j for j, _ in live], "hpos")
                hlines += olines
                if len(live) < len(stored[:n // 2] if folded else stored):
                    head.append(f"{len(live)} non-zero taps{' pairs' if folded else ''} of "
                                f"{len(stored[:n // 2] if folded else stored)}; the zero taps are skipped")
            pre = hlines + [f"{D} *const z = s->{f}_z;", f"uint32_t p = s->{f}_p;"]
            post = [f"s->{f}_p = p;"]
            body = ([] if unroll else ["uint32_t j;"]) + [f"p = (p == 0u) ? {n - 1}u : p - 1u;", "z[p] = x;",
                                                          f"z[p + {n}u] = x;"]
            signed_pre = C == 64 and fx.d + 1 + fx.cb <= 64

            def pair(hx: str, j: str) -> str:
                if signed_pre:
                    return f"(uint64_t)((int64_t){hx} * ((int64_t)z[p + {j}] + (int64_t)z[p + {n - 1}u - {j}]))"
                return f"({U}){hx} * (({U})z[p + {j}] + ({U})z[p + {n - 1}u - {j}])"

            if folded and unroll:
                body.append(f"{U} acc = 0u;")
                for j, c in live:
                    body.append(f"acc += {pair(_s(c, 64 if signed_pre or C == 64 else 32), f'{j}u')}; "
                                f"/* h[{j}] (x[n-{j}] + x[n-{n - 1 - j}]) */")
                if middle:
                    body.append(f"acc += {fx.prod(f'z[p + {n // 2}u]', middle, C)}; /* the middle tap */")
            elif folded:
                body += [f"{U} acc = 0u;", f"for (j = 0u; j < {len(live)}u; j++) {{",
                         f"    acc += {pair('h[j]', jx)}; /* h (x[n-i] + x[n-{n - 1}+i]), i = {jx} */", "}"]
                if middle:
                    body.append(f"acc += {fx.prod(f'z[p + {n // 2}u]', middle, C)}; /* the middle tap */")
            elif unroll:
                body += fx.sum_lines("acc", C, [(1, c, f"z[p + {j}u]") for j, c in live])
            else:
                body += [f"{U} acc = 0u;", f"for (j = 0u; j < {len(live)}u; j++) {{",
                         f"    acc += {fx.prodv(f'z[p + {jx}]', 'h[j]', C)};", "}"]
            body += fx.finish("acc", k, C, "y") + ["out[t] = y;"]
            if isinstance(op, PolyFirOp):
                head, fields, pre, body, post = _decimating(op, f, head, fields, pre, body, post,
                                                            pushed=3 if unroll else 4)
            out.append(_OpCode(head + fx.product_note(), fields, pre + _loop(src, body, D) + post))
        elif isinstance(op, RateOp):
            out.append(_rate_op(program, op, f, src, D, i))
        elif isinstance(op, CicOp):
            out.append(_cic_code(fx, op, f, src, D))
        elif isinstance(op, GainOp):
            k = fx.k_of(op.shift)
            C = _container(program, k)
            c = int(op.coef)
            head = [f"gain {c} (coefficient shift {op.shift}, rounding shift {k}): y = fit(round(c x / 2^{k}))"]
            body = fx.sum_lines("acc", C, [(1, c, "x")]) + fx.finish("acc", k, C, "y") + ["out[t] = y;"]
            out.append(_OpCode(head + fx.product_note(), [], _loop(src, body, D)))
        elif isinstance(op, DelayOp):
            out.append(_delay(op, f, src, D))
        else:  # pragma: no cover - emit refuses first
            raise GeneratedCodeError(f"channel '{program.name}': op {i} has no generated code")
    return out


def _tap_index(js: list[int], name: str) -> tuple[str, str]:
    """The C expression of the *j*-th tap position in the list *js* (ascending) inside a loop over
    ``j``, and the lines of the table it needs: ``j`` for consecutive taps, ``a + d*j`` for every
    d-th tap (a half-band filter), otherwise a table of positions."""
    if len(js) < 2 or all(js[i + 1] - js[i] == js[1] - js[0] for i in range(len(js) - 1)):
        a, d = js[0] if js else 0, (js[1] - js[0]) if len(js) > 1 else 1
        expr = "j" if d == 1 else f"{d}u * j"
        return (expr if a == 0 else f"({a}u + {expr})"), []
    t = "uint16_t" if js[-1] < (1 << 16) else "uint32_t"
    lines = [f"static const {t} {name}[{len(js)}] = {{ /* positions of the non-zero taps */"]
    lines += ["    " + ", ".join(f"{v}u" for v in js[i:i + 12]) + "," for i in range(0, len(js), 12)]
    lines.append("};")
    return f"{name}[j]", lines


_BACKWARDS = ("the block is processed from its last input backwards, so in and out may be the same array: "
              "output t*{L}+p is written after every input up to t is read")


def _branches(taps, L: int) -> list[list]:
    """The L polyphase branches of *taps*: branch p holds ``taps[p + j*L]``, j = 0, 1, ..."""
    return [list(taps[p::L]) for p in range(L)]


def _branch_folds(branch, product_shift: int) -> bool:
    """A branch whose taps read the same backwards is folded (a pair's two samples added first);
    rounded products do not fold."""
    return not product_shift and len(branch) > 1 and list(branch) == list(branch)[::-1]


def _interpolating(fx: "_Fixed", op: PolyFirOp, f: str, src: str, D: str) -> _OpCode:
    """A polyphase FIR interpolating by ``L = op.up`` (coefc.program's polyfir with ``M = 1``):
    ``y[t*L + p] = fit(round(sum_j h[p + j*L] x[t - j]))``, the L branches of ``J = ceil(N/L)``
    taps each computed once per input; zero taps are skipped.  The inputs ``x[t - j]`` come from
    a window of the J newest inputs; the state keeps the J - 1 inputs before the block."""
    L = op.up
    taps = [int(v) for v in op.taps]
    n = len(taps)
    J = -(-n // L)
    k = fx.k_of(op.shift)
    C = _container(program=fx.p, k=k)
    U = f"uint{C}_t"
    head = [f"polyphase FIR interpolating by {L}, {n} taps in {L} branches of up to {J} (coefficient shift "
            f"{op.shift}, rounding shift {k}, {C}-bit container)",
            f"y[t*{L} + p] = fit(round(sum_j h[p + {L}j] x[t - j] / 2^{k})), p = 0 .. {L - 1}; "
            f"{sum(1 for c in taps if c)} non-zero taps (zero taps skipped)",
            _BACKWARDS.format(L=L)]
    fields, lines, body, post = _window(f, src, D, J)
    tables: list[str] = []
    signed_pre = C == 64 and fx.d + 1 + fx.cb <= 64

    def pair(hx: str, a: str, b: str) -> str:
        if signed_pre:
            return f"(uint64_t)((int64_t){hx} * ((int64_t)win[{a}] + (int64_t)win[{b}]))"
        return f"({U}){hx} * (({U})win[{a}] + ({U})win[{b}])"

    for p, branch in enumerate(_branches(taps, L)):
        Jp = len(branch)
        folded = _branch_folds(branch, fx.P)
        live = [(j, c) for j, c in enumerate(branch[:Jp // 2] if folded else branch) if c]
        middle = branch[Jp // 2] if folded and Jp % 2 else 0
        lit = lambda c: _s(c, 64 if signed_pre or C == 64 else 32)  # noqa: E731
        if folded:
            inner = [f"/* branch {p}: symmetric, {len(live) + bool(middle)} multiplies (pairs folded) */",
                     f"{U} acc = 0u;"]
        if len(live) <= UNROLL_TAPS and folded:
            inner += [f"acc += {pair(lit(c), f'{j}u', f'{Jp - 1 - j}u')};" for j, c in live]
        elif len(live) <= UNROLL_TAPS:
            inner = fx.sum_lines("acc", C, [(1, c, f"win[{j}u]") for j, c in live])
        else:
            ct = "int32_t" if all(-(1 << 31) <= c < (1 << 31) for _, c in live) else "int64_t"
            tables += [f"static const {ct} h{p}[{len(live)}] = {{ /* branch {p}: its non-zero taps"
                       f"{' (first half)' if folded else ''} */"]
            tables += ["    " + ", ".join(_s(c, 64 if ct == "int64_t" else 32) for _, c in live[i:i + 6]) + ","
                       for i in range(0, len(live), 6)]
            tables.append("};")
            jx, olines = _tap_index([j for j, _ in live], f"hpos{p}")
            tables += olines
            if folded:
                inner += [f"for (j = 0u; j < {len(live)}u; j++) {{",
                          f"    acc += {pair(f'h{p}[j]', jx, f'{Jp - 1}u - {jx}')};", "}"]
            else:
                inner = [f"{U} acc = 0u;", f"for (j = 0u; j < {len(live)}u; j++) {{",
                         f"    acc += {fx.prodv(f'win[{jx}]', f'h{p}[j]', C)};", "}"]
        if middle:
            inner.append(f"acc += {fx.prod(f'win[{Jp // 2}u]', middle, C)}; /* the middle tap */")
        inner += fx.finish("acc", k, C, "y") + [f"out[t * {L}u + {p}u] = y;"]
        body += ["{", *_indent(inner, 4), "}"]
    lines = tables + lines + ["for (t = n; t-- > 0u;) {", *_indent(body, 4), "}"] + post
    lines.append(f"n = n * {L}u; /* the block at the new rate */")
    return _OpCode(head + fx.product_note(), fields, lines)


def _window(f: str, src: str, D: str, J: int) -> tuple[list, list, list, list]:
    """(fields, lines before the backwards loop, lines opening its body, lines after it) of an
    interpolating op: the J - 1 inputs kept from the previous block (newest first), the state after
    this block saved before ``out`` is written, and the window ``win`` of x[t] .. x[t - J + 1]."""
    H = J - 1
    fields = [(D, f"{f}_z", max(H, 1), f"the last {H} inputs, newest first" if H else "unused")]
    pre = [f"{D} *const z = s->{f}_z;", "uint32_t j;"]
    post = []
    if H:
        pre += [f"{D} nz[{H}]; /* the state after this block, saved before out is written */",
                f"for (j = 0u; j < {H}u; j++) {{",
                f"    nz[j] = ((size_t)j < n) ? {src}[n - 1u - j] : z[(size_t)j - n];", "}"]
        post = [f"for (j = 0u; j < {H}u; j++) {{", "    z[j] = nz[j];", "}"]
    else:
        pre.append("(void)z;")
    body = [f"{D} win[{J}]; /* x[t], x[t-1], .. x[t-{J - 1}] */", f"for (j = 0u; j < {J}u; j++) {{",
            f"    win[j] = ((size_t)j <= t) ? {src}[t - j] : z[(size_t)j - t - 1u];", "}"]
    return fields, pre, body, post


def _interpolating_float(op: PolyFirOp, f: str, src: str) -> _OpCode:
    """A float32 polyphase FIR interpolating by ``L``: output ``t L + p`` is ``acc = h[p] x[t]``, then
    ``acc = acc + h[p + jL] x[t - j]`` for j = 1, 2, ... (every step rounded; the engine's order, the
    plain fir's: inputs before the first are 0.0), run backwards through the block as the fixed-point
    code."""
    from .header import _float_literal as flt

    L = op.up
    taps = list(op.taps)
    J = max(1, -(-len(taps) // L))
    fields, pre, body, post = _window(f, src, "float", J)
    tables: list[str] = []
    for p, branch in enumerate(_branches(taps, L)):
        if not branch:
            inner = [f"out[t * {L}u + {p}u] = 0.0f; /* no tap in this branch */"]
        elif len(branch) <= UNROLL_TAPS:
            inner = [f"float acc = {flt(branch[0])} * win[0];", "float q;"]
            for j, c in enumerate(branch[1:], 1):
                inner += [f"q = {flt(c)} * win[{j}];", "acc = acc + q;"]
            inner.append(f"out[t * {L}u + {p}u] = acc;")
        else:
            tables += [f"static const float h{p}[{len(branch)}] = {{ /* branch {p} */"]
            tables += ["    " + ", ".join(flt(c) for c in branch[i:i + 4]) + "," for i in range(0, len(branch), 4)]
            tables.append("};")
            inner = [f"float acc = h{p}[0] * win[0];", f"for (j = 1u; j < {len(branch)}u; j++) {{",
                     f"    const float q = h{p}[j] * win[j];", "    acc = acc + q;", "}",
                     f"out[t * {L}u + {p}u] = acc;"]
        body += ["{", *_indent(inner, 4), "}"]
    head = [f"polyphase FIR interpolating by {L}, {len(taps)} taps in {L} branches (float32): y[t*{L} + p] = "
            f"h[p] x[t] + h[p + {L}] x[t-1] + ... (each step rounded)", _BACKWARDS.format(L=L)]
    lines = tables + pre + ["for (t = n; t-- > 0u;) {", *_indent(body, 4), "}"] + post
    lines.append(f"n = n * {L}u; /* the block at the new rate */")
    return _OpCode(head, fields, lines)


def _decimating(op: PolyFirOp, f: str, head, fields, pre, body, post, pushed: int, y: str = "y"):
    """An FIR's code turned into its polyphase decimation by ``M = op.down``: every input enters the
    history, the sum of products is formed only when the input phase is 0 (the kept samples,
    coefc.program's polyfir), and the block's length becomes the number of outputs."""
    M = op.down
    push, comp = body[:pushed], body[pushed:-1]
    head = [head[0].replace("FIR,", f"polyphase FIR decimating by {M},", 1), *head[1:],
            f"only every {M}-th output (input phase 0) is computed"]
    fields = fields + [("uint32_t", f"{f}_ph", 0, f"input phase 0 .. {M - 1}; an output is made at 0")]
    pre = pre + [f"uint32_t ph = s->{f}_ph;", "size_t o = 0u;"]
    body = push + ["if (ph == 0u) {", *_indent(comp + [f"out[o] = {y};", "o++;"], 4), "}",
                   f"ph = (ph + 1u == {M}u) ? 0u : ph + 1u;"]
    post = post + [f"s->{f}_ph = ph;", f"n = o; /* the block at the new rate: n / {M} samples */"]
    return head, fields, pre, body, post


def _cic_code(fx: "_Fixed", op: CicOp, f: str, src: str, D: str) -> _OpCode:
    """A CIC decimator (coefc.program, "cic"): integrators and combs in uint64_t, i.e. modulo 2^64.

    The program's register is ``B = op.register_bits <= 64`` bits; by the modulo property any
    register of at least B bits gives the same comb output (the exact sum, which fits B bits), so
    the code computes modulo 2^64 without masking.  ``C v`` is formed modulo 2^64 too: the exact
    product lies inside the signed 64-bit range (the realiser keeps B + bits(C) <= 64), so that is
    its two's complement, which :meth:`_Fixed.finish` rounds and fits as any 64-bit accumulator.
    """
    R, N, Dd = op.factor, op.stages, op.delay
    k = fx.k_of(op.shift)
    C = int(op.coef)
    head = [f"CIC decimator by {R}: {N} integrators, keep every {R}-th sample, {N} combs of differential delay "
            f"{Dd} (Hogenauer 1981); a {op.register_bits}-bit register is enough, computed here modulo 2^64, "
            "which gives the same words (the modulo property)",
            f"y = fit(round({'' if C == 1 else f'{C} * '}v / 2^{k})), v the last comb's output "
            f"(gain ({R}*{Dd})^{N} = {op.gain} removed)"]
    fields = [("uint64_t", f"{f}_i", N, "integrators, modulo 2^64"),
              ("uint64_t", f"{f}_c", N * Dd, f"comb delay lines, {Dd} per comb"),
              ("uint32_t", f"{f}_ph", 0, f"input phase 0 .. {R - 1}; an output is made at 0")]
    if Dd > 1:
        fields.append(("uint32_t", f"{f}_cp", 0, f"comb position 0 .. {Dd - 1}"))
    pre = [f"uint64_t *const ig = s->{f}_i;", f"uint64_t *const cd = s->{f}_c;", f"uint32_t ph = s->{f}_ph;"]
    if Dd > 1:
        pre.append(f"uint32_t cp = s->{f}_cp;")
    pre.append("size_t o = 0u;")
    body = ["ig[0] += (uint64_t)x;"] + [f"ig[{j}] += ig[{j - 1}];" for j in range(1, N)]
    comp = [f"uint64_t c = ig[{N - 1}];"]
    for j in range(N):
        at = f"{j * Dd}u + cp" if Dd > 1 else f"{j}u"
        comp += ["{", f"    const uint64_t old = cd[{at}];", f"    cd[{at}] = c;", "    c -= old;", "}"]
    if Dd > 1:
        comp.append(f"cp = (cp + 1u == {Dd}u) ? 0u : cp + 1u;")
    comp.append("const uint64_t acc = c; /* v modulo 2^64 */" if C == 1 else
                f"const uint64_t acc = c * {_u(C, 64)}; /* C v modulo 2^64: its two's complement */")
    A = fx.A
    fx.A = 64  # the product is exact in 64 bits: no accumulator wrap (coefc.program, "cic")
    try:
        comp += fx.finish("acc", k, 64, "y")
    finally:
        fx.A = A
    comp += ["out[o] = y;", "o++;"]
    body += ["if (ph == 0u) {", *_indent(comp, 4), "}", f"ph = (ph + 1u == {R}u) ? 0u : ph + 1u;"]
    post = [f"s->{f}_ph = ph;"] + ([f"s->{f}_cp = cp;"] if Dd > 1 else []) + \
        [f"n = o; /* the block at the new rate: n / {R} samples */"]
    return _OpCode(head, fields, pre + _loop(src, body, D) + post)


def _rate_op(program: ChannelProgram, op: RateOp, f: str, src: str, D: str, i: int) -> _OpCode:
    if op.up > 1:
        L = op.up
        zero = "0.0f" if D == "float" else "0"
        body = [f"const {D} v = {src}[t];"] + [f"out[t * {L}u + {p}u] = {zero};" for p in range(L - 1, 0, -1)]
        body.append(f"out[t * {L}u] = v;")
        lines = [f"for (t = n; t-- > 0u;) {{", *_indent(body, 4), "}", f"n = n * {L}u; /* the block at the new rate */"]
        return _OpCode([f"insert {L - 1} zeros after each sample (no image filter)", _BACKWARDS.format(L=L).replace(
            "output t*{L}+p".format(L=L), f"output t*{L}+p")], [], lines)
    M = op.down
    fields = [("uint32_t", f"{f}_ph", 0, f"input phase 0 .. {M - 1}; a sample is kept at 0")]
    body = ["if (ph == 0u) {", "    out[o] = x;", "    o++;", "}", f"ph = (ph + 1u == {M}u) ? 0u : ph + 1u;"]
    lines = [f"uint32_t ph = s->{f}_ph;", "size_t o = 0u;", *_loop(src, body, D), f"s->{f}_ph = ph;",
             f"n = o; /* the block at the new rate: n / {M} samples */"]
    return _OpCode([f"keep every {M}-th sample (no anti-alias filter: allow_aliasing)"], fields, lines)


def _delay(op: DelayOp, f: str, src: str, D: str) -> _OpCode:
    d = int(op.samples)
    if d == 0:
        return _OpCode(["delay of 0 samples: a copy"], [],
                       ["if (in != out) {", "    for (t = 0u; t < n; t++) {", f"        out[t] = {src}[t];",
                        "    }", "}"] if src == "in" else ["/* nothing to do */"])
    fields = [(D, f"{f}_d", d, f"the last {d} inputs, circular"), ("uint32_t", f"{f}_p", 0, "oldest position")]
    body = [f"const {D} y = b[p];", "b[p] = x;", f"p = (p + 1u == {d}u) ? 0u : p + 1u;", "out[t] = y;"]
    lines = [f"{D} *const b = s->{f}_d;", f"uint32_t p = s->{f}_p;", *_loop(src, body, D), f"s->{f}_p = p;"]
    return _OpCode([f"delay: y[n] = x[n - {d}]"], fields, lines)


# ---------------------------------------------------------------------------
# code of one float32 channel
# ---------------------------------------------------------------------------

def _float_ops(program: ChannelProgram) -> list[_OpCode]:
    from .header import _float_literal as flt

    D = "float"
    out: list[_OpCode] = []
    n_sec = 0
    for i, op in enumerate(program.ops, 1):
        src = "in" if not out else "out"
        f = f"op{i}"
        if isinstance(op, SectionOp):
            n_sec += 1
            b0, b1, b2 = (flt(v) for v in op.b)
            a1, a2 = (flt(v) for v in op.a)
            head = [f"section {n_sec}, {op.structure}: b0 {b0}, b1 {b1}, b2 {b2}, a1 {a1}, a2 {a2}"]
            if op.structure == "df1":
                head.append("acc = b0 x; acc += b1 x1; acc += b2 x2; acc -= a1 y1; acc -= a2 y2 "
                            "(each step rounded to float32)")
                fields = [(D, f"{f}_x", 2, "x[n-1], x[n-2]"), (D, f"{f}_y", 2, "y[n-1], y[n-2]")]
                pre = [f"float x1 = s->{f}_x[0], x2 = s->{f}_x[1];", f"float y1 = s->{f}_y[0], y2 = s->{f}_y[1];"]
                post = [f"s->{f}_x[0] = x1;", f"s->{f}_x[1] = x2;", f"s->{f}_y[0] = y1;", f"s->{f}_y[1] = y2;"]
                body = [f"float acc = {b0} * x;", "float p;", f"p = {b1} * x1;", "acc = acc + p;",
                        f"p = {b2} * x2;", "acc = acc + p;", f"p = {a1} * y1;", "acc = acc - p;",
                        f"p = {a2} * y2;", "acc = acc - p;",
                        "x2 = x1;", "x1 = x;", "y2 = y1;", "y1 = acc;", "out[t] = acc;"]
            elif op.structure == "tdf2":
                head.append("y = b0 x + s1; s1 = (b1 x - a1 y) + s2; s2 = b2 x - a2 y (each step rounded)")
                fields = [(D, f"{f}_s", 2, "s1, s2")]
                pre = [f"float s1 = s->{f}_s[0], s2 = s->{f}_s[1];"]
                post = [f"s->{f}_s[0] = s1;", f"s->{f}_s[1] = s2;"]
                body = [f"float p = {b0} * x;", "const float y = p + s1;", "float acc;",
                        f"p = {b1} * x;", f"acc = {a1} * y;", "acc = p - acc;", "s1 = acc + s2;",
                        f"p = {b2} * x;", f"acc = {a2} * y;", "s2 = p - acc;", "out[t] = y;"]
            else:
                raise GeneratedCodeError(f"channel '{program.name}': float32 has no {op.structure} sections")
            out.append(_OpCode(head, fields, pre + _loop(src, body, D) + post))
        elif isinstance(op, PolyFirOp) and op.up > 1:
            out.append(_interpolating_float(op, f, src))
        elif isinstance(op, (FirOp, PolyFirOp)):
            taps = [flt(v) for v in op.taps]
            n = len(taps)
            head = [f"FIR, {n} taps: acc = t0 x[n]; acc += t_j x[n-j] for j = 1 .. {n - 1} (each step rounded); "
                    "history kept twice so it is contiguous"]
            fields = [(D, f"{f}_z", 2 * n, f"the last {n} inputs, twice"),
                      ("uint32_t", f"{f}_p", 0, "position of the newest input")]
            pre = [f"static const float h[{n}] = {{"]
            pre += ["    " + ", ".join(taps[j:j + 4]) + "," for j in range(0, n, 4)]
            pre += ["};", f"float *const z = s->{f}_z;", f"uint32_t p = s->{f}_p;"]
            body = ["uint32_t j;", f"p = (p == 0u) ? {n - 1}u : p - 1u;", "z[p] = x;", f"z[p + {n}u] = x;",
                    "float acc = h[0] * x;", f"for (j = 1u; j < {n}u; j++) {{", "    const float q = h[j] * z[p + j];",
                    "    acc = acc + q;", "}", "out[t] = acc;"]
            post = [f"s->{f}_p = p;"]
            if isinstance(op, PolyFirOp):
                head, fields, pre, body, post = _decimating(op, f, head, fields, pre, body, post, pushed=4,
                                                            y="acc")
            out.append(_OpCode(head, fields, pre + _loop(src, body, D) + post))
        elif isinstance(op, RateOp):
            out.append(_rate_op(program, op, f, src, D, i))
        elif isinstance(op, GainOp):
            c = flt(op.coef)
            out.append(_OpCode([f"gain {c}: y = c x"], [], _loop(src, [f"out[t] = {c} * x;"], D)))
        elif isinstance(op, DelayOp):
            out.append(_delay(op, f, src, D))
        else:  # pragma: no cover
            raise GeneratedCodeError(f"channel '{program.name}': op {i} has no generated code")
    return out


# ---------------------------------------------------------------------------
# rendering
# ---------------------------------------------------------------------------

def _fields_sorted(ops: list[_OpCode]) -> list[dict]:
    """State fields, widest element type first (no padding between fields)."""
    rows = []
    for o in ops:
        for ctype, name, count, comment in o.fields:
            rows.append({"decl": f"{ctype} {name}" + (f"[{count}]" if count else "") + ";", "comment": comment,
                         "bits": _CTYPE_BITS.get(ctype, 32) if not ctype.startswith("uint") else
                         int(re.sub(r"\D", "", ctype))})
    rows.sort(key=lambda r: -r["bits"])
    return rows


def interpolation(ops) -> int:
    """The product of the ``up`` factors of a channel's ops (1: none)."""
    m = 1
    for op in ops:
        if isinstance(op, (PolyFirOp, RateOp)):
            m *= op.up
    return m


def _room(ops) -> int:
    """The output array's room in input-block lengths: the largest rate ratio after any op, rounded
    up (every op works in place in the output array; with blocks of a multiple of the decimation
    every length is exact)."""
    from fractions import Fraction

    r, most = Fraction(1), Fraction(1)
    for op in ops:
        if isinstance(op, (PolyFirOp, RateOp)):
            r *= Fraction(op.up, op.down)
            most = max(most, r)
    return -(-most.numerator // most.denominator)


def _hz(v: float) -> str:
    return str(int(v)) if float(v).is_integer() else repr(float(v))


def render_kernel(*, programs, names: CNames, source: str, banner: list[str], header_name: str,
                  data_type: str, coef_type: str, arith, sample_rate_hz: str, over_budget: bool,
                  golden_inputs: list[str] | None, golden_outs: list[list[str]]) -> dict[str, str]:
    """Render ``OUT.h`` and ``OUT.c`` of generated code (see the module docstring)."""
    from .header import _lines, render_template

    names.validate(source)
    fixed = not arith.is_float
    if fixed and data_type not in ("int16_t", "int32_t"):
        raise GeneratedCodeError(f"generated code holds data words in int16_t or int32_t; the target's data type "
                                 f"is {data_type} (use the reference kernel, without {setting('kernel')})")
    if fixed and _CTYPE_BITS[data_type] < arith.data.width:
        raise GeneratedCodeError(f"the {arith.data.width}-bit data word does not fit {data_type}")
    if fixed and arith.acc_bits > 64:
        raise GeneratedCodeError(f"generated code keeps accumulators of up to 64 bits, not {arith.acc_bits}")
    D = data_type if fixed else "float"
    data_bytes = _CTYPE_BITS.get(D, 32) // 8
    coef_bytes = _CTYPE_BITS.get(coef_type, 32) // 8
    stem = Path(header_name).stem
    channels = []
    for i, p in enumerate(programs):
        rec = names.channel(i)
        ops = _fixed_ops(p, D) if fixed else _float_ops(p)
        cost = channel_cost(p, coef_bytes, data_bytes)
        fields = _fields_sorted(ops)
        channels.append({
            "name": p.name,
            **{f: getattr(rec, f) for f in CNames.CHANNEL_SUFFIXES}, "macros": dict(rec.macros),
            "n_sections": len(p.sections()),
            "cost": cost,
            "fields": fields or [{"decl": "uint8_t unused;", "comment": "no state", "bits": 8}],
            "uses_state": bool(fields),
            "ops": [{"comment": o.comment, "lines": o.lines} for o in ops],
            "golden_lines": _lines(golden_outs[i]) if golden_inputs else [],
            # multirate: the decimation M (blocks of a multiple of M samples, n / M out), the
            # interpolation L (n L / M out), the room the output array needs (n R samples) and the rates
            "decim": decimation(p.ops),
            "interp": interpolation(p.ops),
            "room": _room(p.ops),
            "golden_len": len(golden_outs[i]) if golden_inputs else 0,
            "rates": (f"{_hz(p.sample_rate_hz)} Hz in, {_hz(p.output_rate_hz)} Hz out"
                      if p.output_rate_hz != p.sample_rate_hz else ""),
        })
        if golden_inputs and len(golden_inputs) % channels[-1]["decim"]:
            raise GeneratedCodeError(f"channel '{p.name}' decimates by {channels[-1]['decim']}, and the "
                                     f"{len(golden_inputs)} golden-vector samples are not a multiple of it; give "
                                     f"{setting('vectors')} a multiple of {channels[-1]['decim']}")
    context = {
        "banner": banner,
        "header_name": header_name,
        "source_name": stem + ".c",
        "guard": names.guard,
        **names.description(),
        "data_type": D,
        "M": {m: names.macro(m) for m in CNames.GLOBAL_MACROS},
        "fixed": fixed,
        "arith": {"data_bits": arith.data.width if fixed else 32,
                  "data_frac_bits": arith.data.frac_bits if fixed else 0,
                  "coef_bits": arith.coef.width if fixed else 32,
                  "coef_frac_bits": arith.coef.frac_bits if fixed else 0,
                  "acc_bits": arith.acc_bits if fixed else 32},
        "sample_rate_hz": sample_rate_hz,
        "over_budget": 1 if over_budget else 0,
        "golden_n": len(golden_inputs) if golden_inputs else 0,
        "golden_input_lines": _lines(golden_inputs) if golden_inputs else [],
        "blocks": ", ".join(f"{b}u" for b in SELFTEST_BLOCKS),
        "n_blocks": len(SELFTEST_BLOCKS),
        "max_block": max(SELFTEST_BLOCKS),
        "channels": channels,
    }
    folder = Path(__file__).parent / "templates"
    return {header_name: render_template(folder, "kernel.h.j2", context),
            stem + ".c": render_template(folder, "kernel.c.j2", context)}
