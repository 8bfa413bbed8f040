"""Section structures on a 16-bit part: where the poles land, what the noise costs.

For a grid of pole radii (0.99 .. 0.99999) and angles (pole frequencies 20 Hz .. 2 kHz
at 48 kHz), one second-order low-pass section with unity DC gain is realised on the
built-in 16-bit target (mcu16: Q1.15 data, Q2.14 coefficients, 32-bit accumulator) in
every fixed-point structure of the table of structures
(:data:`coefc.program.STRUCTURE_TABLE`, so a structure added there is measured here
too), and the script prints per structure:

- the coefficient-quantisation pole error ``max |p_realised - p_design|`` (the
  realised poles from the section's exact integers; ``unstable`` when a realised pole
  is on or outside the unit circle);
- the analytic output roundoff noise in dBFS (coefc's linear noise model, checked
  against the bit-true engine in tests/test_noise_analysis.py);
- the cost: multiplies per sample and state words.

Expected shape (from memory, not looked up): the direct forms' pole grid is uniform in
``2 r cos(theta)`` and ``r^2`` and so sparse near z = 1 that 16-bit coefficients put
low-frequency poles on the unit circle; the coupled form of Rader and Gold (1967) has
a grid uniform in the plane (error about LSB / sqrt(2)); double-word feedback
coefficients make the direct form's grid ``2^L`` times finer; error feedback does not
move poles but shapes the rounding noise by ``1 - z^-1`` (Dattorro 1988).

Usage: python bench/bench_structures.py [--target mcu16]
"""

from __future__ import annotations

import argparse
import math

import numpy as np

RADII = (0.99, 0.999, 0.9999, 0.99999)
FREQS_HZ = (20.0, 200.0, 2000.0)
FS = 48000.0


def section(r: float, f_hz: float) -> np.ndarray:
    """A low-pass biquad with poles r e^(+-j 2 pi f / fs), zeros at z = -1, unity gain at DC."""
    th = 2 * math.pi * f_hz / FS
    a = np.array([1.0, -2 * r * math.cos(th), r * r])
    b = np.array([1.0, 2.0, 1.0]) * a.sum() / 4.0
    return np.r_[b, a]


def measure(row: np.ndarray, arith) -> tuple[str, str]:
    from coefc.analyse.linear import op_models
    from coefc.analyse.noise import analytic_noise
    from coefc.blocks import ChannelDesign, SosBlock
    from coefc.errors import CoefcError
    from coefc.program import SectionOp, section_transfer
    from coefc.realise import realise_channel

    try:
        prog = realise_channel(ChannelDesign("s", FS, (SosBlock(row[None, :]),)), arith)
    except CoefcError as e:
        return "refused", str(e)[:40]
    sec = [op for op in prog.ops if isinstance(op, SectionOp)][0]
    _, aq = section_transfer(sec, arith.coef)
    pq, pd = np.roots(aq), np.roots(row[3:])
    if np.max(np.abs(pq)) >= 1.0:
        return "unstable", "-"
    err = max(min(abs(p - q) for q in pq) for p in pd)
    na = analytic_noise(prog, op_models(prog))
    noise = "-" if na is None or na.dbfs is None else f"{na.dbfs:8.1f}"
    return f"{err:9.2e}", noise


def main() -> None:
    from coefc.program import STRUCTURE_TABLE
    from coefc.targetspec import find_target

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--target", default="mcu16")
    args = ap.parse_args()
    target = find_target(args.target)
    base = target.arithmetic.with_(scaling="l2")
    names = [s for s in target.structures if s in STRUCTURE_TABLE]
    print(f"target {target.name}: data {base.data}, coefficients {base.coef}, {base.acc_bits}-bit accumulator, "
          f"l2 scaling; one low-pass section per row, {FS:.0f} Hz")
    print("cost per section: " + ", ".join(f"{s} {STRUCTURE_TABLE[s].multiplies} mul / "
                                            f"{STRUCTURE_TABLE[s].state_words} states" for s in names))
    print(f"{'radius':>8s} {'pole Hz':>8s}  " + "  ".join(f"{s:>22s}" for s in names))
    print(f"{'':>8s} {'':>8s}  " + "  ".join(f"{'pole err':>10s} {'noise dBFS':>11s}" for _ in names))
    for r in RADII:
        for f in FREQS_HZ:
            row = section(r, f)
            cells = [measure(row, base.with_(structure=s)) for s in names]
            print(f"{r:8.5f} {f:8.0f}  " + "  ".join(f"{e:>10s} {n:>11s}" for e, n in cells))


if __name__ == "__main__":
    main()
