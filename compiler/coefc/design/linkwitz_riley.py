"""Linkwitz-Riley crossover filters: order (2, 4, 8) and crossover frequency in, SOS out.

An LR filter of order 2n is a Butterworth filter of order n applied twice, so
each branch is -6.02 dB at the crossover frequency.  LR4 low-pass and high-pass
outputs are in phase at every frequency and sum to an all-pass; LR2 outputs are
180 degrees apart, so one of them is wired with inverted polarity.

References
----------
S. H. Linkwitz, "Active Crossover Networks for Noncoincident Drivers",
J. Audio Eng. Soc. 24(1), 1976.
"""

from __future__ import annotations

import numpy as np

from ..blocks import SosBlock
from .stage import StageContext, StageResult

LR_ORDERS = (2, 4, 8)


def linkwitz_riley_sos(order: int, cutoff_hz: float, kind: str, fs: float) -> np.ndarray:
    """SOS of an LR low-pass or high-pass: Butterworth of order ``order/2``, squared.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy import signal
    >>> sos = linkwitz_riley_sos(4, 1000.0, "lowpass", 48000.0)
    >>> h = signal.sosfreqz(sos, worN=[1000.0], fs=48000.0)[1]
    >>> round(float(20 * np.log10(abs(h[0]))), 4)
    -6.0206
    """
    from scipy import signal

    z, p, k = signal.butter(order // 2, cutoff_hz, kind, output="zpk", fs=fs)
    return signal.zpk2sos(np.concatenate([z, z]), np.concatenate([p, p]), k * k)


def design_linkwitz_riley(ctx: StageContext) -> StageResult:
    kind = ctx.kind
    if kind not in ("lowpass", "highpass"):
        raise ctx.error(f"a Linkwitz-Riley filter is a lowpass or highpass crossover branch, not a {kind}; "
                        "use kind = \"lowpass\" or \"highpass\"", "kind")
    ctx.only({"response", "order", "cutoff_hz"}, "to a Linkwitz-Riley filter (it takes order and cutoff_hz)")
    order = ctx.require("order", "give order = 2, 4 or 8")
    if order not in LR_ORDERS:
        raise ctx.error(f"Linkwitz-Riley order {order} is not available; use 2, 4 or 8", "order")
    fc = ctx.require("cutoff_hz", "give the crossover frequency, e.g. cutoff_hz = 2000")
    sos = linkwitz_riley_sos(order, fc, kind, ctx.fs)
    text = f"{kind} Linkwitz-Riley LR{order} at {fc:g} Hz"
    return StageResult(blocks=(SosBlock(sos, label=text),), text=text, order=order, sections=len(sos))
