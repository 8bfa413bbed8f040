"""Rate changes: ``decimate`` (keep every M-th sample) and ``interpolate`` (insert L - 1 zeros).

A rate change is a :class:`coefc.blocks.RateBlock`; every stage after it is designed
at the new rate.  The realisation (:mod:`coefc.realise`) merges a decimation that
directly follows an FIR (or an interpolation directly before one) into one
polyphase FIR that computes only the samples kept (:class:`coefc.program.PolyFirOp`).

The filter before a decimation keeps what would fold into the output band out of
it (anti-aliasing); the filter after an interpolation removes the images of the
input spectrum that zero insertion creates, and carries the gain ``L`` that zero
insertion takes away (:func:`coefc.design.design_channel` applies it).

References
----------
R. E. Crochiere and L. R. Rabiner, *Multirate Digital Signal Processing*,
Prentice-Hall, 1983, ch. 2 (decimation, interpolation, aliasing and imaging;
from memory).
P. P. Vaidyanathan, *Multirate Systems and Filter Banks*, Prentice-Hall, 1993,
ch. 4 (noble identities, polyphase decomposition; from memory).
"""

from __future__ import annotations

from ..blocks import RateBlock
from .stage import StageContext, StageResult

#: stage kinds that can serve as the anti-alias filter right before a decimation (or the
#: image filter right after an interpolation): low- and band-pass filters and raw coefficients
BAND_LIMITING_KINDS = ("lowpass", "bandpass", "fir-lowpass", "fir-bandpass", "fir", "sos", "transfer")


def design_decimate(ctx: StageContext) -> StageResult:
    """Keep every ``factor``-th sample; the stages after it run at ``fs / factor``."""
    m = int(ctx.require("factor", "give the decimation factor, e.g. factor = 2"))
    return StageResult(blocks=(RateBlock(down=m),),
                       text=f"decimate by {m}: {ctx.fs:g} Hz -> {ctx.fs / m:g} Hz")


def design_interpolate(ctx: StageContext) -> StageResult:
    """Insert ``factor - 1`` zeros after each sample; the stages after it run at ``fs * factor``."""
    m = int(ctx.require("factor", "give the interpolation factor, e.g. factor = 2"))
    return StageResult(blocks=(RateBlock(up=m),),
                       text=f"interpolate by {m}: {ctx.fs:g} Hz -> {ctx.fs * m:g} Hz")
