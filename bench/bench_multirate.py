"""Multirate: multiplies per input sample of the polyphase decimators against the same FIR
at the input rate, and the engine's speed in input samples per second (issue 14).

Goal: a polyphase decimator by M needs at least M times fewer multiplies per input
sample than the full-rate FIR (the cost figures of the generated code,
coefc.emit.codegen.channel_cost).  Run from the repository root:
``python bench/bench_multirate.py``.
"""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np

import coefc
from coefc.emit.codegen import cost_of
from coefc.program import ChannelProgram, FirOp, PolyFirOp
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


if __name__ == "__main__":
    main()
