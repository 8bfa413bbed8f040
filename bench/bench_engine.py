"""Speed of the bit-true engine against scipy.signal.sosfilt (float64).

Same 8-section cascade, 2^20 samples; engine in Q1.31 data, Q2.30 coefficients,
64-bit accumulator, saturation, rounding to nearest.  Prints ns per
section-sample for both and their ratio (the cascade on 512-bit lanes where the
processor has them, and the scalar loops), the other structures against df1, and
the first-call latency of the engine in a fresh Python process.  Goals: within
1.5x of sosfilt; tdf2 no slower than df1; first call < 0.5 s.

Run:  python bench/bench_engine.py [--samples N] [--repeat R]
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time

import numpy as np
from scipy import signal

FRESH = """
import time
t0 = time.perf_counter()
import numpy as np
from coefc.simulate import simulate
from coefc.program import Arithmetic, ChannelProgram, SectionOp
p = ChannelProgram("b", 48000, Arithmetic(), (SectionOp(b=(1 << 28, 1 << 29, 1 << 28), a=(-(1 << 30), 1 << 28)),))
y = simulate(p, np.arange(1000, dtype=np.int64))
print(time.perf_counter() - t0)
"""


def cascade() -> np.ndarray:
    return signal.ellip(16, 0.1, 90, 3000, fs=48000, output="sos")  # 8 sections


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=1 << 20)
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()

    from coefc.blocks import ChannelDesign, SosBlock
    from coefc.program import Arithmetic
    from coefc.realise import realise_channel
    from coefc.simulate import HAVE_ENGINE, simulate

    sos = cascade()
    n = args.samples
    rng = np.random.default_rng(0)
    xf = rng.uniform(-0.5, 0.5, n)
    ar = Arithmetic(structure="df1", acc_bits=64, rounding="add-half", overflow="saturate", scaling="linf")
    prog = realise_channel(ChannelDesign("bench", 48000, (SosBlock(sos),)), ar)
    prog = type(prog)(prog.name, prog.sample_rate_hz, prog.arithmetic, prog.sections(), prog.notes)  # sections only
    k = len(prog.sections())
    xi = np.round(xf * 2 ** 31).astype(np.int64)

    def best(fn):
        ts = []
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            fn()
            ts.append(time.perf_counter() - t0)
        return min(ts)

    from coefc import _engine

    lanes = bool(_engine.lanes()) if HAVE_ENGINE else False
    t_scipy = best(lambda: signal.sosfilt(sos, xf))
    t_engine = best(lambda: simulate(prog, xi))
    ns = lambda t: t / (n * k) * 1e9  # noqa: E731
    print(f"cascade: {k} sections, {n} samples; compiled core: {HAVE_ENGINE}; 512-bit lanes: {lanes}")
    print(f"scipy.signal.sosfilt float64 : {ns(t_scipy):6.2f} ns per section-sample")
    print(f"coefc engine Q1.31/Q2.30/64  : {ns(t_engine):6.2f} ns per section-sample")
    print(f"ratio engine / sosfilt       : {t_engine / t_scipy:6.2f}  (goal <= 1.5)")
    for st in ("tdf2", "df1ef"):
        p2 = realise_channel(ChannelDesign("bench", 48000, (SosBlock(sos),)), ar.with_(structure=st))
        p2 = type(p2)(p2.name, p2.sample_rate_hz, p2.arithmetic, p2.sections(), p2.notes)
        t2 = best(lambda: simulate(p2, xi))
        print(f"coefc engine {st:<6}           : {ns(t2):6.2f} ns per section-sample, "
              f"{t2 / t_engine:4.2f}x df1{'  (goal <= 1)' if st == 'tdf2' else ''}")
    if lanes:
        _engine.lanes(0)
        t_scalar = best(lambda: simulate(prog, xi))
        _engine.lanes(1)
        print(f"scalar loops (lanes off), df1: {ns(t_scalar):6.2f} ns per section-sample, "
              f"{t_scalar / t_scipy:4.2f}x sosfilt")
    lat = [float(subprocess.run([sys.executable, "-c", FRESH], capture_output=True, text=True, check=True).stdout)
           for _ in range(3)]
    print(f"first call in a fresh process: {min(lat):.3f} s (best of 3; goal < 0.5 s)")


if __name__ == "__main__":
    main()
