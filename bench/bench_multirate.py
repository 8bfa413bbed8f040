"""Multirate: multiplies per input sample of the polyphase decimators against the same FIR
at the input rate, and the engine's speed in input samples per second (issue 14).

Goal: a polyphase decimator by M needs at least M times fewer multiplies per input
sample than the full-rate FIR (the cost figures of the generated code,
coefc.emit.codegen.channel_cost).  The PDM microphone chain (CIC decimator by 16,
compensator, two decimations by 2): multiplies per input sample, exactly (as a fraction),
against the CIC replaced by its impulse response as a polyphase FIR and against every
FIR at the input rate.  Run from the repository root:
``python bench/bench_multirate.py``.
"""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np

import coefc
from coefc.emit.codegen import cost_of
from coefc.program import ChannelProgram, CicOp, FirOp, PolyFirOp
from coefc.simulate import simulate

ROOT = Path(__file__).resolve().parents[1]


def main() -> None:
    for name in ("decimator_88k2", "decimator_192k"):
        real = coefc.load(ROOT / "filters" / f"{name}.toml").design().realise()
        prog = real.programs[0]
        poly = next(op for op in prog.ops if isinstance(op, PolyFirOp))
        full_ops = tuple(FirOp(op.taps, op.shift, op.symmetric) if isinstance(op, PolyFirOp) else op
                         for op in prog.ops)
        full = ChannelProgram(prog.name, prog.sample_rate_hz, prog.arithmetic, full_ops)
        mp, mf = cost_of(prog)["muls_per_sample"], cost_of(full)["muls_per_sample"]
        x = np.random.default_rng(1).integers(-(1 << 30), 1 << 30, size=1 << 18)
        t0 = time.perf_counter()
        simulate(prog, x)
        t1 = time.perf_counter()
        simulate(full, x)
        t2 = time.perf_counter()
        print(f"{name}: {len(poly.taps)} taps, decimation by {poly.down}: {mp} multiplies per input sample "
              f"(full rate {mf}, ratio {mf / mp:.2f}; goal >= {poly.down}); engine {len(x) / (t1 - t0):.3g} input "
              f"samples/s (full-rate FIR {len(x) / (t2 - t1):.3g})")


def exact_muls(prog: ChannelProgram):
    """Multiplies per input sample as a fraction (folded symmetric FIRs: ceil(N/2) per output)."""
    from fractions import Fraction

    per, m = Fraction(1), Fraction(0)
    for op in prog.ops:
        if isinstance(op, CicOp):
            m += per / op.factor * (0 if op.coef == 1 else 1)
            per /= op.factor
        elif isinstance(op, PolyFirOp):
            n = len(op.taps)
            m += per / op.down * ((n + 1) // 2 if op.symmetric else n)
            per /= op.down
        elif isinstance(op, FirOp):
            n = len(op.taps)
            m += per * ((n + 1) // 2 if op.symmetric else n)
    return m


def pdm_chain() -> None:
    real = coefc.load(ROOT / "filters" / "pdm_microphone.toml").design().realise()
    prog = real.programs[0]
    cic = next(op for op in prog.ops if isinstance(op, CicOp))
    as_fir = tuple(op.as_polyfir() if isinstance(op, CicOp) else op for op in prog.ops)
    poly = ChannelProgram(prog.name, prog.sample_rate_hz, prog.arithmetic, as_fir)
    full = ChannelProgram(prog.name, prog.sample_rate_hz, prog.arithmetic,
                          tuple(FirOp(op.taps, op.shift, op.symmetric) for op in as_fir if isinstance(op, PolyFirOp)))
    m, mp, mf = exact_muls(prog), exact_muls(poly), exact_muls(full)
    x = np.random.default_rng(1).choice([-(1 << 23) + 1, (1 << 23) - 1], size=1 << 20)  # a +-full-scale PDM stream
    t0 = time.perf_counter()
    simulate(prog, x)
    t1 = time.perf_counter()
    print(f"pdm_microphone: CIC R = {cic.factor}, N = {cic.stages} ({cic.register_bits}-bit register), then "
          f"{', '.join(f'{len(op.taps)} taps / {op.down}' for op in prog.ops if isinstance(op, PolyFirOp))}: "
          f"{float(m):.4f} multiplies per input sample ({m}); with the CIC as a polyphase FIR {float(mp):.4f}, "
          f"every FIR at the input rate {float(mf):.1f}; engine {len(x) / (t1 - t0):.3g} input samples/s")


if __name__ == "__main__":
    main()
    pdm_chain()
