"""Realisation: a float :class:`~coefc.blocks.ChannelDesign` and an Arithmetic in, a
:class:`~coefc.program.ChannelProgram` out.

The exact integer recurrences of every op (``df1``, ``tdf2``, ``df1ef``, ``coupled`` sections,
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
``GainOp`` restores the overall gain, including the gain each numerator lost in
rounding (:func:`.coefficients.realised_gain`).  With ``l1`` the promise is "no
internal overflow for any input within full scale", kept op by op on the realised
coefficients (:func:`_realise_l1`): each op's scale is chosen on the response through
the ops already quantised and lowered (by at most ``L1_MAX_LOSS_BITS``) until its
output's worst case -- the l1 norm of the quantised response plus the largest
roundoff of every rounding along its path -- fits the data word; where it cannot,
the ``l1_scaling`` check of :mod:`coefc.budget` fails with the bits missing.  Zeros
of the float design at z = +-1 stay there exactly (:func:`.coefficients.fit_section`).
If re-pairing would change the response by
more than 1e-8 relative (or a numerator has ``b0 == 0``), the designed sections are
kept in design order, only scaled, and a note says so.

With ``scaling = "none"`` the sections are realised exactly as designed, in design
order, and no gain is moved; a note warns when a designed numerator keeps fewer
than 8 significant bits (a design that puts its whole gain in one section).

Coefficients are fitted by :mod:`.coefficients` (``coupled`` sections by
:mod:`.coupled`: poles as the real and imaginary parts of the pole pair, the
states' level set by the scaling norm, the zeros by an output combination); saturated coefficients, kept
pairings and quantised poles on or outside the unit circle are recorded in
``ChannelProgram.notes``.  For float32 arithmetic the same ops are built with
float32 coefficients and shift 0.

References
----------
L. B. Jackson, "Roundoff-noise analysis for fixed-point digital filters realized in
cascade or parallel form", IEEE Trans. Audio Electroacoust. AU-18(2), 1970.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..blocks import ChannelDesign, CicBlock, DelayBlock, FirBlock, GainBlock, RateBlock, SosBlock
from ..errors import CoefcError
from ..program import (STRUCTURE_TABLE, Arithmetic, ChannelProgram, CicOp, DelayOp, FirOp, GainOp, Note, PolyFirOp,
                       RateOp, SectionOp, cic_growth, section_transfer)
from ..qformat import QFormat  # noqa: F401 (used by the doctest)
from . import coefficients, coupled, pairing, scaling

__all__ = ["realise_channel"]


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
    notes: list[Note] = []
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
            notes.append(Note("pairing", "sections re-paired (poles closest to the unit circle first, each with its "
                              f"nearest zeros) and ordered for the lowest analytic output noise under {norm} "
                              f"scaling ({10 * np.log10(noise['exchanged'] / (1 / 12)):.1f} dB above one rounding)"))
        except pairing.NotRepairable:
            k0 = 1.0
            notes.append(Note("pairing", "designed sections kept as they are (re-pairing them would not preserve "
                              "the response)"))
    chain = pre + [("sos", s) for s in sections] + post
    return 1.0, delay, chain, k0 * gain, notes


def _target(arithmetic: Arithmetic) -> float:
    return 1.0 if arithmetic.is_float else 1.0 - 2.0 * arithmetic.data.lsb


def _scale(chain, final: float, norm: str, target: float):
    f = scaling.scale_factors(chain, norm, target)
    chain = [(kind, scaling.scaled(kind, op, c)) for (kind, op), c in zip(chain, f)]
    return chain, (final / float(np.prod(f)) if f else final)


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
                notes.append(Note("precision", f"section {i}: numerator keeps only {max(0, int(bits))} significant "
                                  "bits without scaling (the designed gain sits in this section); choose scaling l2, "
                                  "l1 or linf"))


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
                                          min_shift=coefficients.lowest_shift([g], fmt),
                                          min_k=arithmetic.product_shift)
    if sat:
        notes.append(Note("saturated", f"{where} gain {g:.6g} does not fit the coefficient word {fmt}: saturated"))
    return GainOp(coef=ints[0], shift=s)


def realise_channel(design: ChannelDesign, arithmetic: Arithmetic,
                    structures: tuple[str, ...] | None = None) -> ChannelProgram:
    """Realise one channel's float design in *arithmetic* (see the module docstring).

    Parameters
    ----------
    design : ChannelDesign
        The float blocks of the channel, in signal order.
    arithmetic : Arithmetic
        Formats, accumulator, rounding, overflow, structure and scaling.
    structures : tuple of str, optional
        One structure per second-order section, in realised order (what
        ``structure = "auto"`` chose, :mod:`.auto`); a section past the end takes
        the last one.  ``None``: every section in ``arithmetic.structure``.

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
    >>> p.ops[0].a, p.ops[0].b[1] == 2 * p.ops[0].b[0] == 2 * p.ops[0].b[2]
    ((-29743, 13615), True)
    """
    if any(isinstance(b, RateBlock) for b in design.blocks):
        if arithmetic.product_shift:
            raise RealisationError(f"channel '{design.name}': rate-changing stages are not modelled with rounded "
                                   "products ([arithmetic] product_shift); choose a target with exact products")
        return _realise_multirate(design, arithmetic, structures)
    for name in {arithmetic.structure, *(structures or ())}:
        if arithmetic.is_float and not STRUCTURE_TABLE[name].float32:
            raise RealisationError(f"channel '{design.name}': structure '{name}' "
                                   f"({STRUCTURE_TABLE[name].description}) needs fixed-point arithmetic; use "
                                   + " or ".join(s.name for s in STRUCTURE_TABLE.values() if s.float32) + " for float32")
    pre_gain, delay, chain0, final0, notes = _float_plan(design, arithmetic)
    if arithmetic.scaling == "none":
        return _build(design, arithmetic, pre_gain, delay, chain0, final0, notes, structures)
    if arithmetic.is_float:
        chain, final_gain = _scale(chain0, final0, arithmetic.scaling, _target(arithmetic))
        return _build(design, arithmetic, pre_gain, delay, chain, final_gain, notes, structures)
    if arithmetic.scaling == "l1":
        return _realise_l1(design, arithmetic, delay, chain0, final0, notes, structures)
    factors = scaling.scale_factors(chain0, arithmetic.scaling, _target(arithmetic))
    ops, gain = [], 1.0
    for (kind, op), c in zip(chain0, factors):
        c = _at_least_one_lsb(kind, op, c, arithmetic)
        n_sec = sum(isinstance(o, SectionOp) for o in ops) + 1
        rop, g = _fixed_op(kind, op, c, _section_arithmetic(arithmetic, structures, n_sec), notes, n_sec)
        ops.append(rop)
        gain *= g
    return _finish(design, arithmetic, delay, ops, final0 / gain, notes)


def _section_arithmetic(arithmetic: Arithmetic, structures: tuple[str, ...] | None, n_sec: int) -> Arithmetic:
    """The arithmetic of section *n_sec* (1-based): *arithmetic* in that section's structure, if one is given."""
    if not structures:
        return arithmetic
    return arithmetic.with_(structure=structures[min(n_sec, len(structures)) - 1])


def _at_least_one_lsb(kind, op, c: float, arithmetic: Arithmetic) -> float:
    """*c*, raised where a scaled section numerator would round to nothing (largest value 1 LSB).

    The node then sits above its norm target (the overflow analysis and, under l1,
    the l1_scaling check say by how much); a numerator of zeros would silence the channel.
    """
    if kind != "sos":
        return c
    top = float(np.max(np.abs(op[0]))) * c * 2.0 ** arithmetic.coef.frac_bits
    return c / top if 0.0 < top < 1.0 else c


def _fixed_op(kind, op, c: float, arithmetic: Arithmetic, notes: list, n_sec: int):
    """The fixed-point op for the float op scaled by *c*, and its realised gain.

    The realised gain is the least-squares ratio of the realised numerator (or taps)
    to the unscaled float one; the final gain op divides by the product of these, so
    the gain lost in rounding a numerator is restored there.
    """
    fmt = arithmetic.coef
    if kind == "sos":
        b, a = op
        bs = np.asarray(b, dtype=float) * c
        if STRUCTURE_TABLE[arithmetic.structure].state_space:
            from ..analyse.limitcycles import error_interval

            cen, rad = error_interval(arithmetic.rounding)
            bi, ai, s, sat = coupled.fit_coupled(bs, a, fmt, arithmetic.rounding, arithmetic.data,
                                                 arithmetic.scaling, abs(cen) + rad)
            if sat:
                notes.append(Note("saturated", f"section {n_sec}: coupled-form coefficients do not fit {fmt} even "
                                  f"with a coefficient shift of {s}; saturated (the response will be wrong): use a "
                                  "wider coefficient word"))
            rop = SectionOp(b=bi, a=ai, shift=s, structure=arithmetic.structure)
            phys = np.array(section_transfer(rop, fmt.frac_bits)[0])
            return rop, coefficients.realised_gain(b, phys)
        ints, s, sat = coefficients.fit_section(bs, a, fmt, arithmetic.rounding, min_shift=0,
                                                     min_k=arithmetic.product_shift)
        if sat:
            notes.append(Note("saturated", f"section {n_sec}: coefficients do not fit {fmt} even with a coefficient "
                              f"shift of {s}; saturated (the response will be wrong): use a wider coefficient word"))
        rop = SectionOp(b=tuple(ints[:3]), a=tuple(ints[3:]), shift=s, structure=arithmetic.structure)
        if STRUCTURE_TABLE[arithmetic.structure].wide_feedback:
            hi, lo, bad = coefficients.split_feedback(a, fmt, s)
            if bad:
                notes.append(Note("saturated", f"section {n_sec}: a feedback coefficient does not fit {fmt} as a "
                                  f"high and a low word with a coefficient shift of {s}; clamped"))
            rop = replace(rop, a=hi, a_lo=lo)
        if STRUCTURE_TABLE[arithmetic.structure].wide_numerator:
            bh, bl, bad = coefficients.split_numerator(bs, fmt, s)
            if bad:
                notes.append(Note("saturated", f"section {n_sec}: a numerator coefficient does not fit {fmt} as a "
                                  f"high and a low word with a coefficient shift of {s}; clamped"))
            rop = replace(rop, b=bh, b_lo=bl)
            return rop, coefficients.realised_gain(b, np.array(rop.b_phys(fmt)))
        phys = np.array(ints[:3], dtype=float) * 2.0 ** (s - fmt.frac_bits)
        return rop, coefficients.realised_gain(b, phys)
    taps = np.asarray(op, dtype=float)
    ts = taps * c
    ints, s, sat = coefficients.fit_group(ts, fmt, arithmetic.rounding,
                                          min_shift=coefficients.lowest_shift(ts, fmt),
                                          acc_limit=arithmetic.acc_bits + arithmetic.product_shift,
                                          data_width=arithmetic.data.width, min_k=arithmetic.product_shift)
    if sat:
        notes.append(Note("saturated", f"FIR of {len(op)} taps: taps do not fit {fmt} with the accumulator of "
                          f"{arithmetic.acc_bits} bits; saturated"))
    rop = FirOp(taps=ints, shift=s, symmetric=ints == ints[::-1])
    phys = np.array(ints, dtype=float) * 2.0 ** (s - fmt.frac_bits)
    return rop, coefficients.realised_gain(taps, phys)


def _finish(design, arithmetic, delay, ops, final_gain, notes) -> ChannelProgram:
    """Delay first, the realised ops, the final gain op; notes on unstable quantised poles."""
    out = [DelayOp(delay)] if delay else []
    n_sec = 0
    for op in ops:
        if isinstance(op, SectionOp):
            n_sec += 1
            r = pairing.pole_radius([1.0, *op.a_phys(arithmetic.coef)])
            if r >= 1.0:
                notes.append(Note("unstable", f"section {n_sec}: quantised poles have radius {r:.9f} >= 1 "
                                  "(unstable); use a wider coefficient word"))
        out.append(op)
    if final_gain != 1.0:
        out.append(_fixed_gain(final_gain, arithmetic, notes, "output"))
    return ChannelProgram(design.name, design.sample_rate_hz, arithmetic, tuple(out), tuple(notes))


#: l1 scaling gives up (and the check fails) rather than lose more headroom than this
L1_MAX_LOSS_BITS = 4


def _l1_length(chain) -> int:
    """Impulse-response length for the l1 bounds: as long as the overflow analysis uses."""
    from ..blocks import impulse_length

    r = max([pairing.pole_radius(op[1]) for kind, op in chain if kind == "sos"] + [0.0])
    return impulse_length(r, sum(len(op) - 1 for kind, op in chain if kind != "sos"))


def _realise_l1(design, arithmetic: Arithmetic, delay: int, chain0, final0: float, notes: list,
                structures: tuple[str, ...] | None = None) -> ChannelProgram:
    """l1 scaling on the realised ops, one op at a time (Jackson's l1 argument, roundoff included).

    For op i the float design's l1 scale factor (output norm ``1 - 2 LSB``) is the
    starting point, so realisations in different words share their scaling where
    they can.  The op is quantised and its
    worst case computed: the l1 norm of the realised response plus, for every
    rounding so far (its own included), the rounding's largest error times the l1
    norm of its path to this output.  While that exceeds the largest data word the
    factor is lowered by the excess and by one step of the op's largest integer
    (so the integers really change) and the op quantised again.  When no factor
    within ``2^-L1_MAX_LOSS_BITS`` of the first one fits (the roundoff alone may
    exceed full scale), the first one is kept and the overflow analysis reports the
    failing ``l1_scaling`` check with the bits missing.
    """
    from ..analyse.limitcycles import error_interval
    from ..analyse.linear import _run, keep_l1_bound_terms, l1_key, op_models

    ar = arithmetic
    cen, rad = error_interval(ar.rounding)
    eps = (abs(cen) + rad) * ar.data.lsb
    maxv = ar.data.max_value
    target = _target(ar)
    n = _l1_length(chain0)
    unit = np.zeros(n)
    unit[0] = 1.0
    h = unit.copy()
    paths: list[np.ndarray] = []  # roundoff of each earlier rounding, carried to the current node
    ops, gain, worst = [], 1.0, 0.0
    over: list[tuple[int, float, str]] = []  # (position in ops, bound, why the search stopped)
    # start from the float design's factors: realisations of one design in different words
    # then share their scaling wherever the quantised coefficients do not force a lower one
    # (the per-op width search of coefc.explore.opwidths relies on this correspondence)
    factors = scaling.scale_factors(chain0, "l1", target, n)
    prefix: tuple | None = ()  # l1_key of the ops kept so far (None: one of them is not shared)
    for (kind, op), c0 in zip(chain0, factors):
        c0 = _at_least_one_lsb(kind, op, c0, ar)
        c, first, best, fill = c0, None, None, 0
        stop = ""
        n_sec = sum(isinstance(o, SectionOp) for o in ops) + 1
        ar = _section_arithmetic(arithmetic, structures, n_sec) if kind == "sos" else arithmetic
        while True:
            trial_notes: list[str] = []
            rop, g = _fixed_op(kind, op, c, ar, trial_notes, n_sec)
            m = op_models(ChannelProgram(design.name, design.sample_rate_hz, ar, (rop,)))[0]
            stable = not m.recursive or float(np.max(np.abs(np.roots(m.a)))) < 1.0
            hn = _run(m.b, m.a, h)
            pn = [_run(m.b, m.a, p) for p in paths]
            if m.k > 0:
                pn.extend(_run(nb, na, unit) for nb, na in m.noise_paths)
            if m.product_bound:  # rounded products: their worst total, through 1/A(z), in units of eps
                pn.append(_run(np.array([1.0]), m.noise_a, unit) * (m.product_bound / (abs(cen) + rad)))
            pl1 = [float(np.sum(np.abs(p))) for p in pn]
            roundoff = eps * sum(pl1)
            hl1 = float(np.sum(np.abs(hn)))
            bound = hl1 + roundoff
            state = (rop, g, trial_notes, hn, pn, bound, m, hl1, pl1)
            first = first or state
            if not stable:
                stop = "its quantised poles are not stable"
                break
            if bound <= maxv:
                if fill < 3 and bound < maxv * (1.0 - 1e-6) and c < c0:  # lowered too far: fill up again
                    fill += 1
                    best = state
                    c = min(c0, c * maxv / bound * (1.0 - 1e-9))
                    continue
                break
            if best is not None:  # filling up overshot: keep the last fit
                state = best
                break
            ints = (rop.b[:3] if STRUCTURE_TABLE[rop.structure].state_space else rop.b) if kind == "sos" \
                else rop.taps
            lower = c * maxv / bound
            if _fixed_op(kind, op, lower, ar, [], n_sec)[0] == rop:  # the same integers: one step down
                lower *= 1.0 - 1.0 / max(max(abs(v) for v in ints), 2)
            c = lower
            zero = kind == "sos" and not any(_fixed_op(kind, op, c, ar, [], n_sec)[0].b[:3])
            if c < c0 * 2.0 ** -L1_MAX_LOSS_BITS or roundoff >= maxv or zero:
                stop = (f"lowering its scale factor by up to {L1_MAX_LOSS_BITS} bits did not make it fit"
                        if c < c0 * 2.0 ** -L1_MAX_LOSS_BITS else "the roundoff alone reaches full scale"
                        if roundoff >= maxv else "a lower scale factor rounds its numerator to zero")
                stop += ", so the design's factor was kept"
                state = first
                break
        rop, g, trial_notes, h, paths, bound, m, hl1, pl1 = state
        # the overflow analysis's l1 promise needs these very sums for these ops (linear.l1_bound_terms)
        key = l1_key(m)
        prefix = None if prefix is None or key is None else prefix + (key,)
        if prefix is not None:
            keep_l1_bound_terms(prefix, n, hl1, pl1)
        notes.extend(trial_notes)
        if bound > maxv:
            over.append((len(ops), bound, stop))
        worst = max(worst, bound)
        ops.append(rop)
        gain *= g
    if over:
        lead = 1 if delay else 0  # _finish puts the delay op first
        parts = []
        for pos, b, why in over:
            parts.append(f"op {pos + lead + 1} output can reach {b / maxv:.6g} x full scale "
                         f"({np.log2(b / maxv):.2f} bits of headroom missing)" + (f": {why}" if why else ""))
        notes.append(Note("scaling", "l1 scaling, by the realisation's bound (realised l1 gain plus roundoff): "
                          + "; ".join(parts) + ". The l1_scaling and overflow checks judge the realised program; "
                          "a wider data or coefficient word gives room"))
    return _finish(design, arithmetic, delay, ops, final0 / gain, notes)


def _build(design, arithmetic, pre_gain, delay, chain, final_gain, notes,
           structures: tuple[str, ...] | None = None) -> ChannelProgram:
    """The program of an already scaled float chain (float32, or fixed point without scaling)."""
    ops = []
    if arithmetic.is_float:
        if delay:
            ops.append(DelayOp(delay))
        f32 = lambda v: float(np.float32(v))  # noqa: E731
        if pre_gain != 1.0:
            ops.append(GainOp(coef=f32(pre_gain)))
        for kind, op in chain:
            if kind == "sos":
                b, a = op
                n_sec = sum(isinstance(o, SectionOp) for o in ops) + 1
                ops.append(SectionOp(b=tuple(f32(v) for v in b), a=(f32(a[1]), f32(a[2])),
                                     structure=_section_arithmetic(arithmetic, structures, n_sec).structure))
            else:
                taps = tuple(f32(v) for v in op)
                ops.append(FirOp(taps=taps, symmetric=taps == taps[::-1]))
        if final_gain != 1.0:
            ops.append(GainOp(coef=f32(final_gain)))
        return ChannelProgram(design.name, design.sample_rate_hz, arithmetic, tuple(ops), tuple(notes))
    if pre_gain != 1.0:
        ops.append(_fixed_gain(pre_gain, arithmetic, notes, "input"))
    for kind, op in chain:
        n_sec = sum(isinstance(o, SectionOp) for o in ops) + 1
        ops.append(_fixed_op(kind, op, 1.0, _section_arithmetic(arithmetic, structures, n_sec), notes, n_sec)[0])
    return _finish(design, arithmetic, delay, ops, final_gain, notes)


def _realise_multirate(design: ChannelDesign, arithmetic: Arithmetic,
                       structures: tuple[str, ...] | None = None) -> ChannelProgram:
    """A channel with rate changes: each stretch between rate changes realised on its own, then joined.

    Blocks do not commute across a rate change, so the op ordering, pairing and
    scaling of :func:`realise_channel` act within each stretch at its own rate (each
    stretch's input is a data word within full scale, so its scaling promise holds
    on its own).  At the joins a decimation directly after an FIR becomes one
    polyphase :class:`~coefc.program.PolyFirOp` (gains after that FIR are moved behind
    the rate change: a gain is memoryless, so it commutes with keeping every M-th
    sample bit for bit), and an interpolation directly before an FIR likewise (gains
    before that FIR move in front of the zero insertion: the rounded gain of 0 is 0).
    Otherwise the rate change stays a :class:`~coefc.program.RateOp`.  The gain that
    restores a stretch's scaling is carried on to the next stretch (and so to the
    channel's final gain op), so that no stretch output is driven past its scaling.

    References
    ----------
    R. E. Crochiere and L. R. Rabiner, *Multirate Digital Signal Processing*,
    Prentice-Hall, 1983, ch. 3 (polyphase structures; from memory).
    """
    stretches: list[tuple[float, list]] = [(design.sample_rate_hz, [])]
    rates: list[RateBlock] = []
    fs = design.sample_rate_hz
    for b in design.blocks:
        if isinstance(b, RateBlock):
            fs = fs * b.up / b.down
            rates.append(b)
            stretches.append((fs, []))
        else:
            stretches[-1][1].append(b)
    ops: list = []
    notes: list[Note] = []
    carry = 1.0  # the gain a stretch's final gain op would restore, carried into the next stretch
    fc = 0 if arithmetic.is_float else arithmetic.coef.frac_bits
    for i, (rate, blocks) in enumerate(stretches):
        seg: list = []
        if carry != 1.0:
            blocks = [GainBlock(carry)] + list(blocks)
            carry = 1.0
        cic = None
        if blocks and isinstance(blocks[-1], CicBlock):  # a CIC ends its stretch: integrators, decimation, combs
            cic = _cic_op(design.name, blocks[-1], arithmetic, rate)
            notes.append(_cic_note(cic, arithmetic, i, rate))
            blocks = blocks[:-1]
        if blocks:
            done = sum(isinstance(op, SectionOp) for op in ops)  # sections of the earlier stretches
            sub = realise_channel(ChannelDesign(f"{design.name}", rate, tuple(blocks)), arithmetic,
                                  structures[min(done, len(structures) - 1):] if structures else None)
            seg = list(sub.ops)
            if i + 1 < len(stretches) and seg and isinstance(seg[-1], GainOp):
                # the gain restoring this stretch's scale goes on, through the rate change (a gain is
                # memoryless), to the end of the channel: restored here it could overflow the
                # stretch's output, which is an internal node of the channel
                g = seg.pop()
                carry = float(g.coef) * 2.0 ** (g.shift - fc)
            at = f"at {rate:g} Hz: " if i else ""
            notes.extend(Note(n.kind, at + str(n)) for n in sub.notes)
        if i > 0 and rates[i - 1].up > 1:  # the interpolation before this stretch
            L = rates[i - 1].up
            j = next((j for j, op in enumerate(seg) if not isinstance(op, GainOp)), len(seg))
            if j < len(seg) and isinstance(seg[j], FirOp):
                f = seg[j]
                seg = seg[:j] + [PolyFirOp(taps=f.taps, shift=f.shift, up=L, symmetric=f.symmetric)] + seg[j + 1:]
            else:
                seg = seg[:j] + [RateOp(up=L)] + seg[j:]
            j = next(j for j, op in enumerate(seg) if isinstance(op, (PolyFirOp, RateOp)))
            ops.extend(seg[:j])  # gains moved in front of the zero insertion
            seg = seg[j:]
        if cic is not None:  # the CIC is its own decimation (its RateBlock follows it)
            seg.append(cic)
        elif i < len(rates) and rates[i].down > 1:  # the decimation after this stretch
            M = rates[i].down
            j = len(seg)
            while j > 0 and isinstance(seg[j - 1], GainOp):
                j -= 1
            if j > 0 and isinstance(seg[j - 1], FirOp):
                f = seg[j - 1]
                seg[j - 1] = PolyFirOp(taps=f.taps, shift=f.shift, down=M, symmetric=f.symmetric)
            else:
                seg.insert(j, RateOp(down=M))
        ops.extend(seg)
    return ChannelProgram(design.name, design.sample_rate_hz, arithmetic, tuple(ops), tuple(notes))


#: fewest bits of the coefficient that removes a CIC gain which is not a power of two
MIN_CIC_COEF_BITS = 8


def _cic_op(name: str, block: CicBlock, arithmetic: Arithmetic, rate: float) -> CicOp:
    """The CIC decimator of *block* in *arithmetic* (the ``cic`` recurrence of :mod:`coefc.program`).

    The register is the data word plus Hogenauer's growth ``G = ceil(N log2(R D))``; it must fit
    64 bits (the engine's and the generated code's register).  The gain ``(R D)^N`` is removed by
    the output shift alone when it is ``2^G``; otherwise by the coefficient
    ``C = floor(2^k / (R D)^N)`` of ``c`` bits, ``c = min(Wc - 1, 64 - B)`` (the product ``C v``
    exact in 64 bits and ``C`` a positive coefficient word), ``k = c + floor(log2 (R D)^N)``.

    References
    ----------
    E. B. Hogenauer, "An economical class of digital filters for decimation and interpolation",
    IEEE Trans. ASSP-29(2), 1981 (register growth; from memory).
    """
    if arithmetic.is_float:
        raise RealisationError(f"channel '{name}': a CIC decimator runs in a wrap-around integer register "
                               "(its exactness rests on two's complement arithmetic); it has no float32 "
                               "realisation: choose a fixed-point target")
    r, n, d = block.factor, block.stages, block.delay
    g = (r * d) ** n
    growth = cic_growth(r, n, d)
    width = arithmetic.data.width
    reg = width + growth
    if reg > 64:
        raise RealisationError(f"channel '{name}': the CIC decimator at {rate:g} Hz needs a register of {width} "
                               f"data bits + {growth} bits of growth = {reg} bits, more than 64; use a narrower "
                               "data word, fewer CIC stages or a smaller factor")
    fc = arithmetic.coef.frac_bits
    if g == 1 << growth:
        coef, k = 1, growth
    else:
        c = min(arithmetic.coef.width - 1, 64 - reg)
        if c < MIN_CIC_COEF_BITS:
            raise RealisationError(f"channel '{name}': the CIC decimator's gain (R*D)^N = {g} is not a power of two "
                                   f"and a {reg}-bit register leaves {c} bits (fewer than {MIN_CIC_COEF_BITS}) for "
                                   "the coefficient that removes it; choose R*D a power of two or a narrower data "
                                   "word")
        k = c + g.bit_length() - 1
        coef = (1 << k) // g
    if k > 62:
        raise RealisationError(f"channel '{name}': the CIC decimator's output shift of {k} bits is above 62; use "
                               "fewer stages or a smaller factor")
    return CicOp(factor=r, stages=n, delay=d, register_bits=reg, coef=coef, shift=fc - k)


def _cic_note(op: CicOp, arithmetic: Arithmetic, stretch: int, rate: float) -> Note:
    k = arithmetic.final_shift(op.shift)
    gain = "a shift" if op.coef == 1 else f"the coefficient {op.coef} and a shift"
    at = f"at {rate:g} Hz: " if stretch else ""
    return Note("precision", f"{at}CIC decimator: {op.stages} integrators and {op.stages} combs in a "
                f"{op.register_bits}-bit register ({arithmetic.data.width} data bits + {op.register_bits - arithmetic.data.width} "
                f"bits of growth, Hogenauer 1981) that wraps by design: the comb output is exact by the modulo "
                f"property; the gain {op.gain} is removed by {gain} of {k} bits, one rounding per output sample")
