"""Coefficient word length per operation: a channel and ranges of widths in, the smallest width each op needs out.

A channel realised with the widest coefficient word is the reference.  For one op
(second-order section, FIR, polyphase FIR or gain) at a time, its coefficients are replaced by the
ones the same realisation gets with a narrower coefficient word, written exactly in
the wide format (a narrow integer ``C`` with ``Fn`` fractional bits is the wide
integer ``C * 2^(Fw - Fn)``: the same physical value), and every other op keeps its
wide coefficients.  The hybrid program is analysed and judged like any
configuration, so the answer says which ops really need the wide word -- typically
the sections whose poles sit close to the unit circle at low frequency.

The smallest passing width per op is found by bisection over the given widths
(assuming more bits never hurt), and the width one step narrower is checked as
well; the verdict is reported as found.  Ops are matched between the wide and the
narrow realisation by position and type, and only when their physical coefficients
agree to within the narrow word's resolution (the same pairing and ordering);
otherwise that op is reported as not comparable.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from collections.abc import Sequence

import numpy as np

from ..program import ChannelProgram, FirOp, GainOp, PolyFirOp, SectionOp

_COEF_OPS = (SectionOp, FirOp, PolyFirOp, GainOp)


@dataclass(frozen=True)
class OpWidth:
    """The smallest coefficient width one op of a channel needs (``None``: none passed)."""

    op: int  # 1-based position in the program
    kind: str  # "section", "fir", "polyphase-fir", "gain"
    coef_bits: int | None
    note: str = ""

    def to_json(self) -> dict:
        return {"op": self.op, "kind": self.kind, "coef_bits": self.coef_bits, "note": self.note}


def _coefs(op) -> list[int]:
    if isinstance(op, SectionOp):
        return [*op.b, *op.a, *op.a_lo]
    if isinstance(op, (FirOp, PolyFirOp)):
        return list(op.taps)
    return [op.coef]


def _with_coefs(op, vals: list[int], shift: int):
    if isinstance(op, SectionOp):
        return replace(op, b=tuple(vals[:3]), a=tuple(vals[3:]), shift=shift)
    if isinstance(op, (FirOp, PolyFirOp)):
        return replace(op, taps=tuple(vals), shift=shift)
    return replace(op, coef=vals[0], shift=shift)


def _physical(op, frac: int) -> np.ndarray:
    return np.array(_coefs(op), dtype=float) * 2.0 ** (op.shift - frac)


def hybrid(wide: ChannelProgram, narrow: ChannelProgram, index: int) -> ChannelProgram | None:
    """*wide* with op *index* (0-based) taken from *narrow*, rewritten exactly in the wide format.

    Returns ``None`` when the two realisations do not correspond at that op.
    """
    wo, no = wide.ops[index], narrow.ops[index] if index < len(narrow.ops) else None
    if no is None or type(wo) is not type(no) or len(_coefs(wo)) != len(_coefs(no)):
        return None
    if isinstance(wo, SectionOp) and (wo.a_lo or wo.b_lo or no.a_lo or no.b_lo):
        return None  # low words weigh 2^-(Wc - 1) of their width: no exact rewrite into another width here
    fw, fn = wide.arithmetic.coef.frac_bits, narrow.arithmetic.coef.frac_bits
    tol = 4.0 * 2.0 ** (no.shift - fn)
    if np.max(np.abs(_physical(wo, fw) - _physical(no, fn))) > tol:
        return None
    e = (fw - wo.shift) - (fn - no.shift)
    if e < 0:
        return None
    vals = [int(v) << e for v in _coefs(no)]
    fmt = wide.arithmetic.coef
    if any(v < fmt.min_int or v > fmt.max_int for v in vals):
        return None
    ops = list(wide.ops)
    ops[index] = _with_coefs(wo, vals, wo.shift)
    return replace(wide, ops=tuple(ops))


def fewest_op_widths(sweeper, channel_index: int, target: str, structure: str, acc_bits: int,
                       data_bits: int, coefs: Sequence[int]) -> list[OpWidth]:
    """Smallest coefficient width of every op of one channel (the others at the widest width)."""
    from ..api import Design, Realisation
    from ..budget import run_check
    from .sweep import Config

    coefs = sorted(coefs)
    design_ch = sweeper.design.channels[channel_index]
    one = Design(sweeper.design.loaded, (design_ch,))
    tgt = sweeper.target(target)
    progs: dict[int, ChannelProgram] = {}

    def program(c: int) -> ChannelProgram:
        if c not in progs:
            ov = sweeper.overrides_for(Config(tgt.name, structure, acc_bits, data_bits, c))
            progs[c] = one.realise(tgt, ov, budget=sweeper.budget).programs[0]
        return progs[c]

    def passes(prog: ChannelProgram) -> bool:
        rep = run_check(Realisation(one, tgt, (prog,)), sweeper.budget, options=sweeper.options)
        return rep.channels[0].ok

    wide = program(coefs[-1])
    if not passes(wide):
        return [OpWidth(i + 1, _kind(op), None, f"the channel fails even with {coefs[-1]}-bit coefficients")
                for i, op in enumerate(wide.ops) if isinstance(op, _COEF_OPS)]
    out = []
    for i, op in enumerate(wide.ops):
        if not isinstance(op, _COEF_OPS):
            continue
        verdict: dict[int, bool | None] = {coefs[-1]: True}

        def ok(c: int) -> bool | None:
            if c not in verdict:
                h = hybrid(wide, program(c), i)
                verdict[c] = None if h is None else passes(h)
            return verdict[c]

        lo, hi = 0, len(coefs) - 1  # coefs[hi] passes
        note = ""
        while lo < hi:
            mid = (lo + hi) // 2
            v = ok(coefs[mid])
            if v is None:
                note = f"the {coefs[mid]}-bit realisation pairs or orders this op differently; not comparable"
                lo = mid + 1
            elif v:
                hi = mid
            else:
                lo = mid + 1
        best = coefs[hi]
        if hi > 0 and ok(coefs[hi - 1]):  # monotonicity check one step below
            note = f"also passes at {coefs[hi - 1]} bits below the bisection result (not monotone)"
            best = coefs[hi - 1]
        out.append(OpWidth(i + 1, _kind(op), best, note))
    return out


def _kind(op) -> str:
    return {SectionOp: "section", FirOp: "fir", PolyFirOp: "polyphase-fir", GainOp: "gain"}[type(op)]
