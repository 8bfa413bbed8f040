"""Realisation: a float :class:`~coefc.blocks.ChannelDesign` and an Arithmetic in, a
:class:`~coefc.program.ChannelProgram` out.

The exact integer recurrences of every op (``df1``, ``tdf2``, ``df1ef`` sections,
FIR, gain, delay, and the float32 operation order) are stated in the docstring of
:mod:`coefc.program`; this module only decides the ops and their integers.

Order of the ops
----------------
Every block of a channel is linear and time-invariant, so blocks commute; the
realised order is chosen for headroom and noise:

1. all delays, merged into one ``DelayOp`` (it stores input words, costs no
   arithmetic);
2. without scaling, all gains merged into one ``GainOp``, placed first when it
   attenuates (``|g| <= 1``: it makes headroom for what follows);
3. FIR blocks and the IIR cascade: every second-order section of the channel is
   gathered into one cascade at the place of the first IIR block; FIR blocks keep
   their places before or after it in design order;
4. with scaling, one final ``GainOp`` restores the overall gain (the product of the
   user's gains and the inverse of the scale factors); without scaling, the merged
   user gain goes here when it amplifies (``|g| > 1``: overflow as late as possible).

Pairing, ordering and scaling (``arithmetic.scaling`` = ``l1``, ``l2`` or ``linf``)
------------------------------------------------------------------------------------
The poles and zeros of the gathered cascade are re-paired (pole pair closest to the
unit circle first, with its nearest zeros) and the sections ordered by pole radius,
the direction chosen by the lower analytic output noise, then improved by pairwise
exchanges of sections while that noise drops (:mod:`.pairing`); an order that
would leave a scaled numerator with fewer than 8 significant coefficient bits is
avoided whenever another order does better on that count.  Then
every FIR and section output is scaled so that the transfer function from the
channel input to that output has norm ``1 - 2 LSB`` (:mod:`.scaling`); the scale
factors are arbitrary reals folded into the numerators (or taps), and the final
``GainOp`` restores the overall gain.  With ``l1`` the promise is "no overflow for
any input within full scale", so the target is lowered (at most three times) until
the realised worst case -- the l1 norm of the quantised response plus the largest
roundoff of every earlier rounding along its path -- stays within the data word.  If re-pairing would change the response by
more than 1e-8 relative (or a numerator has ``b0 == 0``), the designed sections are
kept in design order, only scaled, and a note says so.

With ``scaling = "none"`` the sections are realised exactly as designed, in design
order, and no gain is moved; a note warns when a designed numerator keeps fewer
than 8 significant bits (a design that puts its whole gain in one section).

Coefficients are fitted by :mod:`.coefficients`; saturated coefficients, kept
pairings and quantised poles on or outside the unit circle are recorded in
``ChannelProgram.notes``.  For float32 arithmetic the same ops are built with
float32 coefficients and shift 0.

References
----------
L. B. Jackson, "Roundoff-noise analysis for fixed-point digital filters realized in
cascade or parallel form", IEEE Trans. Audio Electroacoust. AU-18(2), 1970.
"""

from __future__ import annotations

import numpy as np

from ..blocks import Block, ChannelDesign, DelayBlock, FirBlock, GainBlock, SosBlock
from ..errors import CoefcError
from ..program import Arithmetic, ChannelProgram, DelayOp, FirOp, GainOp, SectionOp
from ..qformat import QFormat  # noqa: F401 (used by the doctest)
from . import coefficients, pairing, scaling

__all__ = ["realise_channel", "as_float_blocks"]


class RealisationError(CoefcError):
    """A design cannot be realised in the requested arithmetic."""


def _gather(design: ChannelDesign):
    """Split the design into (gain, delay, pre FIRs, sos rows, post FIRs)."""
    gain, delay, pre, post, rows = 1.0, 0, [], [], []
    for b in design.blocks:
        if isinstance(b, GainBlock):
            gain *= float(b.gain)
        elif isinstance(b, DelayBlock):
            delay += int(b.samples)
        elif isinstance(b, FirBlock):
            (post if rows else pre).append(("fir", np.asarray(b.taps, dtype=float)))
        elif isinstance(b, SosBlock):
            sos = np.asarray(b.sos, dtype=float).reshape(-1, 6)
            if np.any(sos[:, 3] != 1.0):
                sos = sos / sos[:, 3:4]
            rows.extend(sos)
        else:
            raise TypeError(f"not a block: {b!r}")
    return gain, delay, pre, rows, post


def _check_finite(design: ChannelDesign, rows, pre, post, gain) -> None:
    vals = [np.asarray(rows, dtype=float).ravel(), np.array([gain])]
    vals += [op for _, op in pre + post]
    if not all(np.all(np.isfinite(v)) for v in vals):
        raise RealisationError(f"channel '{design.name}': the float design has a coefficient that is not "
                               "finite (NaN or infinity); check the stage parameters")


def _float_plan(design: ChannelDesign, arithmetic: Arithmetic):
    """The float chain to realise, unscaled.

    Returns ``(pre gain, delay, chain, final gain, notes)``; with scaling, the
    sections are re-paired and ordered and the final gain holds the gain taken
    out of the numerators (before the scale factors are applied).
    """
    gain, delay, pre, rows, post = _gather(design)
    _check_finite(design, rows, pre, post, gain)
    notes: list[str] = []
    sections = [(r[:3].copy(), r[3:].copy()) for r in rows]
    if arithmetic.scaling == "none":
        chain = pre + [("sos", s) for s in sections] + post
        _note_thin_numerators(sections, arithmetic, notes)
        if abs(gain) <= 1.0:
            return gain, delay, chain, 1.0, notes
        return 1.0, delay, chain, gain, notes
    norm = arithmetic.scaling
    radius = max([pairing.pole_radius(a) for _, a in sections] + [0.0])
    if radius >= 1.0:
        raise RealisationError(f"channel '{design.name}': the float design has a pole at radius {radius:.6f} "
                               f">= 1 (unstable), so its {norm} norms are infinite; fix the design (or realise it "
                               "with scaling 'none' to study it)")
    target = _target(arithmetic)
    k0 = 1.0
    if len(sections) > 1:
        try:
            rep, k0 = pairing.repair(np.asarray(rows))
            f = np.linspace(0.0, 0.5, 512)
            h_old = _chain_freq([("sos", s) for s in sections], f)
            h_new = k0 * _chain_freq([("sos", s) for s in rep], f)
            if np.max(np.abs(h_new - h_old)) > 1e-8 * max(1e-300, float(np.max(np.abs(h_old)))):
                raise pairing.NotRepairable("response changed")
            sections, noise = pairing.order_sections(
                pre, rep, post, norm, target, arithmetic.structure, k0 * gain,
                coef_lsb=0.0 if arithmetic.is_float else arithmetic.coef.lsb)
            notes.append("sections re-paired (poles closest to the unit circle first, each with its nearest "
                         f"zeros) and ordered for the lowest analytic output noise under {norm} scaling "
                         f"({10 * np.log10(noise['exchanged'] / (1 / 12)):.1f} dB above one rounding)")
        except pairing.NotRepairable:
            k0 = 1.0
            notes.append("designed sections kept as they are (re-pairing them would not preserve the response)")
    chain = pre + [("sos", s) for s in sections] + post
    return 1.0, delay, chain, k0 * gain, notes


def _target(arithmetic: Arithmetic) -> float:
    return 1.0 if arithmetic.is_float else 1.0 - 2.0 * arithmetic.data.lsb


def _scale(chain, final: float, norm: str, target: float):
    f = scaling.scale_factors(chain, norm, target)
    chain = [(kind, scaling.scaled(kind, op, c)) for (kind, op), c in zip(chain, f)]
    return chain, (final / float(np.prod(f)) if f else final)


def _l1_worst_peak(program: ChannelProgram) -> float:
    """Largest value any section or FIR output can reach for inputs bounded by 1.

    The l1 norm of the realised (quantised) response from the input to the node,
    plus each rounding's largest error (q/2 for add-half and half-even, q otherwise)
    times the l1 norm of its path to the node (Jackson's l1 argument, with the
    roundoff of earlier ops bounded instead of neglected).
    """
    ar = program.arithmetic
    q = ar.data.lsb
    eps = q / 2 if ar.rounding in ("add-half", "half-even") else q
    chain = []
    for blk in as_float_blocks(program):
        if isinstance(blk, SosBlock):
            chain += [("sos", (r[:3], r[3:])) for r in blk.sos]
        elif isinstance(blk, FirBlock):
            chain.append(("fir", blk.taps))
        elif isinstance(blk, GainBlock):
            chain.append(("fir", np.array([blk.gain])))
    n = scaling.response_length(chain)
    h = np.zeros(n)
    h[0] = 1.0
    sources: list[np.ndarray] = []
    worst = 0.0
    for i, (kind, op) in enumerate(chain):
        h = scaling.apply_op(kind, op, h)
        sources = [scaling.apply_op(kind, op, g) for g in sources]
        own = np.zeros(n)
        own[0] = 1.0
        if kind == "sos":
            if ar.structure == "df1ef":
                own[1] = -1.0
            own = scaling.signal.lfilter([1.0], op[1], own)
        sources.append(own)
        if i < len(chain) - 1 or kind != "fir" or len(op) > 1:
            peak = float(np.sum(np.abs(h))) + eps * sum(float(np.sum(np.abs(g))) for g in sources)
            worst = max(worst, peak)
    return worst


def _note_thin_numerators(sections, arithmetic: Arithmetic, notes: list) -> None:
    """Without scaling, say when a designed numerator keeps fewer than 8 significant bits."""
    if arithmetic.is_float:
        return
    fc = arithmetic.coef.frac_bits
    for i, (b, a) in enumerate(sections, 1):
        big = float(np.max(np.abs(np.concatenate([b, a[1:]]))))
        nb = float(np.max(np.abs(b)))
        if nb > 0 and big > 0:
            s = max(0, int(np.ceil(np.log2(big))) + fc - arithmetic.coef.width + 2)
            bits = np.log2(nb) + fc - s + 1
            if bits < 8:
                notes.append(f"section {i}: numerator keeps only {max(0, int(bits))} significant bits without "
                             "scaling (the designed gain sits in this section); choose scaling l2, l1 or linf")


def _chain_freq(chain, f):
    w = np.exp(-2j * np.pi * np.asarray(f))
    h = np.ones(len(f), dtype=complex)
    for kind, op in chain:
        if kind == "sos":
            b, a = op
            h *= np.polyval(np.asarray(b)[::-1], w) / np.polyval(np.asarray(a)[::-1], w)
        else:
            h *= np.polyval(np.asarray(op)[::-1], w)
    return h


def _fixed_gain(g: float, arithmetic: Arithmetic, notes: list, where: str) -> GainOp:
    fmt = arithmetic.coef
    ints, s, sat = coefficients.fit_group([g], fmt, arithmetic.rounding,
                                          min_shift=coefficients.lowest_shift([g], fmt))
    if sat:
        notes.append(f"{where} gain {g:.6g} does not fit the coefficient word {fmt}: saturated")
    return GainOp(coef=ints[0], shift=s)


def realise_channel(design: ChannelDesign, arithmetic: Arithmetic) -> ChannelProgram:
    """Realise one channel's float design in *arithmetic* (see the module docstring).

    Parameters
    ----------
    design : ChannelDesign
        The float blocks of the channel, in signal order.
    arithmetic : Arithmetic
        Formats, accumulator, rounding, overflow, structure and scaling.

    Returns
    -------
    ChannelProgram
        The ops with finished integers (or float32 values) and the notes.

    Examples
    --------
    >>> from scipy import signal
    >>> from coefc.blocks import ChannelDesign, SosBlock
    >>> d = ChannelDesign("lp", 48000, (SosBlock(signal.butter(2, 1000, fs=48000, output="sos")),))
    >>> p = realise_channel(d, Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32))
    >>> p.ops[0].a
    (-29743, 13615)
    """
    if arithmetic.structure == "df1ef" and arithmetic.is_float:
        raise RealisationError(f"channel '{design.name}': structure 'df1ef' (error feedback) needs "
                               "fixed-point arithmetic; use df1 or tdf2 for float32")
    pre_gain, delay, chain0, final0, notes = _float_plan(design, arithmetic)
    if arithmetic.scaling == "none":
        return _build(design, arithmetic, pre_gain, delay, chain0, final0, notes)
    target = _target(arithmetic)
    first = None
    for _ in range(4):
        chain, final_gain = _scale(chain0, final0, arithmetic.scaling, target)
        prog = _build(design, arithmetic, pre_gain, delay, chain, final_gain, list(notes))
        if arithmetic.scaling != "l1" or arithmetic.is_float or any("unstable" in n for n in prog.notes):
            return prog
        first = first or prog
        peak = _l1_worst_peak(prog)
        if peak <= arithmetic.data.max_value:
            return prog
        if target * arithmetic.data.max_value / peak < _target(arithmetic) / 16:
            break
        target *= arithmetic.data.max_value / peak * (1.0 - 1e-9)
    worst = _l1_worst_peak(first)
    return ChannelProgram(first.name, first.sample_rate_hz, first.arithmetic, first.ops, first.notes + (
        f"l1 scaling: with the quantised coefficients and roundoff a section output can reach "
        f"{20 * np.log10(worst / arithmetic.data.max_value):.1f} dB above full scale; not corrected "
        "(more than 4 bits of headroom would be lost): use a wider coefficient or data word",))


def _build(design, arithmetic, pre_gain, delay, chain, final_gain, notes) -> ChannelProgram:
    ops = []
    if delay:
        ops.append(DelayOp(delay))
    if arithmetic.is_float:
        f32 = lambda v: float(np.float32(v))  # noqa: E731
        if pre_gain != 1.0:
            ops.append(GainOp(coef=f32(pre_gain)))
        for kind, op in chain:
            if kind == "sos":
                b, a = op
                ops.append(SectionOp(b=tuple(f32(v) for v in b), a=(f32(a[1]), f32(a[2])),
                                     structure=arithmetic.structure))
            else:
                taps = tuple(f32(v) for v in op)
                ops.append(FirOp(taps=taps, symmetric=taps == taps[::-1]))
        if final_gain != 1.0:
            ops.append(GainOp(coef=f32(final_gain)))
        return ChannelProgram(design.name, design.sample_rate_hz, arithmetic, tuple(ops), tuple(notes))

    fmt = arithmetic.coef
    if pre_gain != 1.0:
        ops.append(_fixed_gain(pre_gain, arithmetic, notes, "input"))
    n_sec = 0
    for kind, op in chain:
        if kind == "sos":
            n_sec += 1
            b, a = op
            ints, s, sat = coefficients.fit_group([*b, a[1], a[2]], fmt, arithmetic.rounding, min_shift=0)
            if sat:
                notes.append(f"section {n_sec}: coefficients do not fit {fmt} even with a coefficient shift of {s}; "
                             "saturated (the response will be wrong): use a wider coefficient word")
            sec = SectionOp(b=tuple(ints[:3]), a=tuple(ints[3:]), shift=s, structure=arithmetic.structure)
            r = pairing.pole_radius([1.0, sec.a[0] * 2.0 ** (s - fmt.frac_bits),
                                     sec.a[1] * 2.0 ** (s - fmt.frac_bits)])
            if r >= 1.0:
                notes.append(f"section {n_sec}: quantised poles have radius {r:.9f} >= 1 (unstable); "
                             "use a wider coefficient word")
            ops.append(sec)
        else:
            ints, s, sat = coefficients.fit_group(op, fmt, arithmetic.rounding,
                                                  min_shift=coefficients.lowest_shift(op, fmt),
                                                  acc_limit=arithmetic.acc_bits, data_width=arithmetic.data.width)
            if sat:
                notes.append(f"FIR of {len(op)} taps: taps do not fit {fmt} with the accumulator of "
                             f"{arithmetic.acc_bits} bits; saturated")
            ops.append(FirOp(taps=ints, shift=s, symmetric=ints == ints[::-1]))
    if final_gain != 1.0:
        ops.append(_fixed_gain(final_gain, arithmetic, notes, "output"))
    return ChannelProgram(design.name, design.sample_rate_hz, arithmetic, tuple(ops), tuple(notes))


def as_float_blocks(program: ChannelProgram) -> tuple[Block, ...]:
    """The exact physical values of a realised program as float blocks.

    ``chain_response(as_float_blocks(p), f, fs)`` is the response of the quantised
    coefficients (roundoff noise and overflow aside).  Consecutive sections become
    one :class:`SosBlock`.
    """
    ar = program.arithmetic
    fc = 0 if ar.is_float else ar.coef.frac_bits
    out: list[Block] = []
    rows: list[list[float]] = []

    def flush():
        if rows:
            out.append(SosBlock(np.array(rows, dtype=float)))
            rows.clear()

    for op in program.ops:
        scale = 1.0 if ar.is_float else 2.0 ** (op.shift - fc) if not isinstance(op, DelayOp) else 1.0
        if isinstance(op, SectionOp):
            rows.append([float(v) * scale for v in op.b] + [1.0] + [float(v) * scale for v in op.a])
            continue
        flush()
        if isinstance(op, FirOp):
            out.append(FirBlock(np.array([float(v) * scale for v in op.taps])))
        elif isinstance(op, GainOp):
            out.append(GainBlock(float(op.coef) * scale))
        elif isinstance(op, DelayOp):
            out.append(DelayBlock(op.samples))
    flush()
    return tuple(out)
