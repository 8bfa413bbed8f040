"""Multirate: multiplies per input sample of polyphase and half-band decimators against the same-length
FIR at the input rate, and the engine's speed in input samples per second (issue 14).

Goals: a polyphase decimator by M needs at least M times fewer multiplies per input sample than
the full-rate FIR of the same taps; a half-band decimator by 2 at least 2M = 4 times fewer than a
full-rate FIR of the same length.  Multiplies are the cost figures of the generated code
(coefc.emit.codegen.channel_cost: zero taps skipped, symmetric taps folded in fixed point).  The
full-rate FIR of the same length is counted both ways -- direct form (N multiplies per sample) and
folded (ceil(N/2)) -- and both ratios are printed: a half-band filter of N = 4k + 3 taps folded
needs k + 2 multiplies per output, (k + 2)/2 per input sample, so against the folded full-rate FIR
(2k + 2) its ratio is 4(k + 1)/(k + 2), always just below 4; against the direct form it is about 8.
The PDM microphone chain (CIC decimator by 16, compensator, two decimations by 2): multiplies
per input sample, exactly (as a fraction), against the CIC replaced by its impulse response as a
polyphase FIR and against every FIR at the input rate.
Run from the repository root: ``python bench/bench_multirate.py``.
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np

import coefc
from coefc.emit.codegen import _fir_counts, cost_of
from coefc.program import ChannelProgram, CicOp, FirOp, PolyFirOp
from coefc.simulate import simulate

ROOT = Path(__file__).resolve().parents[1]

#: a half-band decimator of an invented 96 kHz -> 48 kHz audio path (passband 20 kHz, 100 dB)
HALFBAND = """name = "hb96"
sample_rate_hz = 96000

[implementation]
target = "mcu32"

[[channel]]
name = "hb"
stages = [
  { kind = "fir-lowpass", method = "halfband", passband_hz = 20000, stopband_hz = 28000, attenuation_db = 100 },
  { kind = "decimate", factor = 2 },
]
"""


def _muls(prog: ChannelProgram, ops) -> int:
    return cost_of(ChannelProgram(prog.name, prog.sample_rate_hz, prog.arithmetic, tuple(ops)))["muls_per_sample"]


def _speed(prog: ChannelProgram, x: np.ndarray) -> float:
    """Input samples per second, the best of three runs."""
    best = float("inf")
    for _ in range(3):
        t0 = time.perf_counter()
        simulate(prog, x)
        best = min(best, time.perf_counter() - t0)
    return len(x) / best


def row(name: str, prog: ChannelProgram) -> None:
    poly = next(op for op in prog.ops if isinstance(op, PolyFirOp))
    n, M = len(poly.taps), poly.down
    dense = tuple(1 for _ in range(n))  # a full-rate FIR of the same length without zero taps
    # multiplies per input sample: exact (per output / M), and the generated header's figure (rounded up)
    folded = poly.symmetric and not prog.arithmetic.is_float and not prog.arithmetic.product_shift
    mp = _fir_counts(poly.taps, folded)[0] / M
    shown = _muls(prog, [poly])
    direct = _muls(prog, [FirOp(dense, poly.shift, symmetric=False)])
    folded = _muls(prog, [FirOp(dense, poly.shift, symmetric=True)])
    same = _muls(prog, [FirOp(poly.taps, poly.shift, poly.symmetric)])  # these taps at the full rate
    nonzero = sum(1 for t in poly.taps if t)
    halfband = nonzero < n and M == 2
    goal = 2 * M if halfband else M
    x = np.random.default_rng(1).integers(-(1 << 30), 1 << 30, size=1 << 18)
    full = ChannelProgram(prog.name, prog.sample_rate_hz, prog.arithmetic,
                          tuple(FirOp(op.taps, op.shift, op.symmetric) if isinstance(op, PolyFirOp) else op
                                for op in prog.ops))
    print(f"{name}: {n} taps ({nonzero} non-zero){', half-band' if halfband else ''}, decimation by {M}: "
          f"{mp:g} multiplies per input sample (header figure {shown}); full-rate FIR of {n} taps: direct {direct} (ratio "
          f"{direct / mp:.2f}), folded {folded} (ratio {folded / mp:.2f}); these taps at the full rate {same} "
          f"(ratio {same / mp:.2f}); goal >= {goal} "
          f"({'met' if direct / mp >= goal else 'NOT met'} against the direct form, "
          f"{'met' if folded / mp >= goal else 'NOT met'} against the folded one)")
    print(f"    engine {_speed(prog, x):.3g} input samples/s (the full-rate FIR {_speed(full, x):.3g})")


def main() -> None:
    for name in ("decimator_88k2", "decimator_192k"):
        row(name, coefc.load(ROOT / "filters" / f"{name}.toml").design().realise().programs[0])
    with tempfile.TemporaryDirectory() as d:
        p = Path(d) / "hb96.toml"
        p.write_text(HALFBAND)
        row("half-band 96k->48k", coefc.load(p).design().realise().programs[0])


def exact_muls(prog: ChannelProgram):
    """Multiplies per input sample as a fraction (zero taps skipped, symmetric FIRs folded)."""
    from fractions import Fraction

    per, m = Fraction(1), Fraction(0)
    for op in prog.ops:
        if isinstance(op, CicOp):
            m += per / op.factor * (0 if op.coef == 1 else 1)
            per /= op.factor
        elif isinstance(op, PolyFirOp):
            m += per / op.down * _fir_counts(op.taps, op.symmetric)[0]
            per /= op.down
        elif isinstance(op, FirOp):
            m += per * _fir_counts(op.taps, op.symmetric)[0]
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
