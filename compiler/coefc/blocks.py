"""Floating-point building blocks of a channel and their frequency response.

The design step turns every stage of a description into one or more blocks; a
channel's float design is the ordered chain of them.  Second-order sections are
the working representation of every IIR filter (never a long b/a polynomial);
rows use scipy's layout ``[b0, b1, b2, a0, a1, a2]`` with ``a0 == 1``.

Frequencies are in Hz everywhere in the public API.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from .program import ChannelProgram


#: Impulse responses (the scaling norms, node gains, noise gains) are followed until
#: the slowest pole has decayed below this factor: one rule for the realiser and the analyses.
DECAY = 1e-13


def decay_samples(radius: float) -> int:
    """Samples for a pole of *radius* (``0 < radius < 1``) to decay below :data:`DECAY`.

    >>> decay_samples(0.5)
    44
    """
    return int(np.ceil(np.log(DECAY) / np.log(radius)))


#: bounds of :func:`impulse_length`
MIN_IMPULSE = 256
MAX_IMPULSE = 1 << 18


def impulse_length(radius: float, extra: int = 0) -> int:
    """Samples that capture a realised chain's impulse response at every node.

    Twice the decay of the slowest pole (*radius*; ``1 << 14`` samples when it does
    not decay), plus *extra* samples of FIR taps, plus 8, within
    ``[MIN_IMPULSE, MAX_IMPULSE]``: the one length of the l1 scaling bounds and of
    every analysis of the realised program.

    >>> impulse_length(0.0), impulse_length(0.999)
    (256, 59846)
    """
    if radius >= 1.0:
        n = 1 << 14
    elif radius > 0.0:
        n = decay_samples(radius) * 2
    else:
        n = 0
    return int(min(max(n + int(extra) + 8, MIN_IMPULSE), MAX_IMPULSE))


@dataclass(frozen=True, eq=False)
class SosBlock:
    """A cascade of second-order sections, shape (n, 6), a0 normalised to 1."""

    sos: np.ndarray
    label: str = ""


@dataclass(frozen=True, eq=False)
class FirBlock:
    """A finite impulse response, ``taps[k]`` multiplying ``x[n-k]``."""

    taps: np.ndarray
    label: str = ""


@dataclass(frozen=True, eq=False)
class CicBlock(FirBlock):
    """A CIC filter before its decimation by ``factor``: as a float block it is the FIR of its
    impulse response normalised to DC gain 1 (``taps``), so every response and analysis treats
    it as the FIR it is; the realiser turns it (with the :class:`RateBlock` after it) into a
    :class:`coefc.program.CicOp` of integrators and combs (Hogenauer 1981)."""

    factor: int = 1
    stages: int = 1
    delay: int = 1


@dataclass(frozen=True)
class GainBlock:
    """A plain multiplication (negative for polarity inversion)."""

    gain: float
    label: str = ""


@dataclass(frozen=True)
class DelayBlock:
    """An integer delay of ``samples`` samples."""

    samples: int
    label: str = ""


@dataclass(frozen=True)
class RateBlock:
    """A rate change: keep every ``down``-th sample, or insert ``up - 1`` zeros after each.

    Every block after it runs at the new rate.  Responses of a chain with rate
    changes are those of its equivalent single-rate model (the noble identities,
    Vaidyanathan 1993, sec. 4.2; from memory): each block is evaluated at the
    physical frequency at its own rate, i.e. ``H(z^M)`` at the input rate after a
    decimation by ``M``; a decimation has gain 1, an interpolation ``1/L`` (zero
    insertion spreads the signal over ``L`` images; the FIR after it carries the gain
    ``L`` back).
    """

    down: int = 1
    up: int = 1
    label: str = ""

    @property
    def ratio(self) -> float:
        return self.up / self.down


Block = SosBlock | FirBlock | CicBlock | GainBlock | DelayBlock | RateBlock


def block_response(block: Block, freqs_hz: np.ndarray, fs: float) -> np.ndarray:
    """Complex response of one block at *freqs_hz* (scipy.signal.sosfreqz/freqz)."""
    from scipy import signal  # imported here: scipy.signal takes ~1 s to import

    f = np.atleast_1d(np.asarray(freqs_hz, dtype=np.float64))
    if isinstance(block, SosBlock):
        return signal.sosfreqz(block.sos, worN=f, fs=fs)[1]
    if isinstance(block, FirBlock):
        return signal.freqz(block.taps, 1.0, worN=f, fs=fs)[1]
    if isinstance(block, GainBlock):
        return np.full(f.shape, complex(block.gain))
    if isinstance(block, DelayBlock):
        return np.exp(-2j * np.pi * f / fs * block.samples)
    if isinstance(block, RateBlock):  # zero insertion keeps 1/L of the amplitude at each frequency
        return np.full(f.shape, complex(1.0 / block.up))
    raise TypeError(f"not a block: {block!r}")


def chain_response(blocks, freqs_hz, fs: float) -> np.ndarray:
    """Complex response of a chain of blocks (the product of their responses).

    *fs* is the chain's input rate; after a :class:`RateBlock` the following
    blocks are evaluated at the new rate (the equivalent single-rate model).
    """
    f = np.atleast_1d(np.asarray(freqs_hz, dtype=np.float64))
    h = np.ones(f.shape, dtype=complex)
    for b in blocks:
        h = h * block_response(b, f, fs)
        if isinstance(b, RateBlock):
            fs = fs * b.up / b.down
    return h


def rate_of(blocks, fs: float) -> float:
    """The rate after *blocks* for an input rate *fs*."""
    for b in blocks:
        if isinstance(b, RateBlock):
            fs = fs * b.up / b.down
    return fs


def model_rate(blocks, fs: float) -> float:
    """The highest rate anywhere in the chain: the rate of its equivalent single-rate model."""
    top = fs
    for b in blocks:
        if isinstance(b, RateBlock):
            fs = fs * b.up / b.down
            top = max(top, fs)
    return top


@dataclass(frozen=True)
class StageSummary:
    """What one description stage became, for the design report."""

    index: int  # 1-based, as in error messages
    kind: str
    text: str  # e.g. "lowpass linkwitz-riley order 4 at 2200 Hz"
    order: int  # filter order (0 for gain/delay); FIR: taps - 1
    sections: int  # second-order sections (IIR)
    taps: int  # FIR taps
    latency_samples: float  # pure delay or FIR group delay at DC, where defined
    # Designs given by requirements: asked, margin for quantisation, reached, how the margin was kept.
    requirement: Mapping | None = None
    # Further lines the design report prints under the stage (e.g. fitted correction sections).
    details: tuple[str, ...] = ()
    rate_hz: float = 0.0  # the stage's input rate (0: not known)


@dataclass(frozen=True, eq=False)
class ChannelDesign:
    """The float design of one channel: its blocks in signal order."""

    name: str
    sample_rate_hz: float
    blocks: tuple[Block, ...]
    stages: tuple[StageSummary, ...] = ()
    warnings: tuple[str, ...] = field(default_factory=tuple)
    # Stopbands stated by the stages' own requirements (stopband_hz), as (lo, hi) Hz:
    # where the quantised channel must keep its attenuation when the budget names none.
    stopbands: tuple[tuple[float, float], ...] = ()
    # Every frequency (Hz) a stage names (cutoffs, centres, band edges): the response
    # grid covers them all, down to the lowest.
    edges_hz: tuple[float, ...] = ()

    def response(self, freqs_hz) -> np.ndarray:
        """Complex float response of the whole channel at *freqs_hz*."""
        return chain_response(self.blocks, freqs_hz, self.sample_rate_hz)

    @property
    def output_rate_hz(self) -> float:
        """The rate of the channel's output (the input rate after every rate change)."""
        return rate_of(self.blocks, self.sample_rate_hz)

    @property
    def multirate(self) -> bool:
        return any(isinstance(b, RateBlock) for b in self.blocks)

    def sos(self) -> np.ndarray:
        """All IIR sections of the channel in one (n, 6) array (gains/FIR excluded)."""
        parts = [b.sos for b in self.blocks if isinstance(b, SosBlock)]
        return np.vstack(parts) if parts else np.zeros((0, 6))


def as_float_blocks(program: ChannelProgram) -> tuple[Block, ...]:
    """The exact physical values of a realised program as float blocks.

    ``chain_response(as_float_blocks(p), f, fs)`` is the response of the quantised
    coefficients (roundoff noise and overflow aside).  Consecutive sections become
    one :class:`SosBlock`.
    """
    from .program import CicOp, DelayOp, FirOp, GainOp, PolyFirOp, RateOp, SectionOp, section_transfer

    ar = program.arithmetic
    fc = 0 if ar.is_float else ar.coef.frac_bits
    out: list[Block] = []
    rows: list[list[float]] = []

    def flush():
        if rows:
            out.append(SosBlock(np.array(rows, dtype=float)))
            rows.clear()

    for op in program.ops:
        if isinstance(op, RateOp):
            flush()
            out.append(RateBlock(down=op.down, up=op.up))
            continue
        scale = 1.0 if ar.is_float else 2.0 ** (op.shift - fc) if not isinstance(op, DelayOp) else 1.0
        if isinstance(op, CicOp):  # its exact integer map: the FIR of coef * h, then keep every R-th sample
            op = op.as_polyfir()
        if isinstance(op, PolyFirOp):  # the prototype FIR at the higher rate, then (or after) the rate change
            flush()
            fir = FirBlock(np.array([float(v) * scale for v in op.taps]))
            rate = RateBlock(down=op.down, up=op.up)
            out.extend((fir, rate) if op.down > 1 else (rate, fir))
            continue
        if isinstance(op, SectionOp):
            bq, aq = section_transfer(op, 0 if ar.is_float else ar.coef)
            rows.append(bq + aq)
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
