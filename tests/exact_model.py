"""Independent exact reference of the bit-true arithmetic, for the tests only.

Written from the definitions in the docstring of ``coefc.program`` (not from the
engine's code): rounding through ``fractions.Fraction`` (``round()`` of a Fraction
is round-half-even), wrapping through ``%``, unlimited Python integers.  Slow by
design; the tests push short signals through it.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np


def rshift(v: int, k: int, mode: str) -> int:
    """v / 2^k rounded by *mode*, through exact rationals."""
    q = Fraction(v, 1 << k) if k >= 0 else Fraction(v * (1 << -k))
    if mode == "add-half":
        return math.floor(q + Fraction(1, 2))
    if mode == "truncate":
        return math.floor(q)
    if mode == "half-even":
        return round(q)
    if mode == "toward-zero":
        return math.trunc(q)
    raise ValueError(mode)


def wrap(v: int, bits: int) -> int:
    m = 1 << bits
    r = v % m
    return r - m if r >= m // 2 else r


def fit(v: int, bits: int, overflow: str) -> tuple[int, bool]:
    hi = (1 << (bits - 1)) - 1
    lo = -hi - 1
    if lo <= v <= hi:
        return v, False
    if overflow == "saturate":
        return max(lo, min(hi, v)), True
    return wrap(v, bits), True


def _polymul(a, b):
    """Product of two integer polynomials (coefficient lists), in Python integers."""
    out = [0] * (len(a) + len(b) - 1)
    for i, u in enumerate(a):
        for j, w in enumerate(b):
            out[i + j] += u * w
    return out


class Model:
    """The arithmetic: data width, coefficient frac bits, acc bits, rounding, overflow."""

    def __init__(self, data_width: int, coef_frac: int, acc_bits: int, rounding: str, overflow: str,
                 product_shift: int = 0, product_rounding: str = "truncate"):
        self.W, self.Fc, self.A, self.rnd, self.ovf = data_width, coef_frac, acc_bits, rounding, overflow
        self.P, self.prnd = product_shift, product_rounding

    def q(self, coef: int, word: int) -> int:
        """A product term as it enters the accumulator: coef * word / 2^P rounded (docstring,
        "Rounded products"); a subtracted term is the product of the negated coefficient."""
        return rshift(coef * word, self.P, self.prnd) if self.P else coef * word

    def _k(self, shift: int) -> int:
        return self.Fc - shift - self.P

    def _acc(self, exact: int) -> tuple[int, bool]:
        w = wrap(exact, self.A)
        return w, w != exact

    def _out(self, acc: int, k: int) -> tuple[int, int, bool]:
        v = rshift(acc, k, self.rnd)
        y, bad = fit(v, self.W, self.ovf)
        return y, v, bad

    def coupled(self, x, b, a, shift):
        """The coupled form (coefc.program docstring): (y, data overflows, accumulator overflows).

        State update s' = A s + (G, 0)' x and output y = C s + D x, each of the three
        sums wrapped, rounded and fitted on its own; one event per sample at most.
        """
        k = self.Fc - shift
        D, C = b[0], (b[1], b[2])
        G = b[3]
        A = ((a[0], a[1]), (a[2], a[3]))
        s = [0, 0]
        ys, no, na = [], 0, 0
        for xn in x:
            sums = [D * xn + C[0] * s[0] + C[1] * s[1],
                    A[0][0] * s[0] + A[0][1] * s[1] + G * xn,
                    A[1][0] * s[0] + A[1][1] * s[1]]
            wrapped = [self._acc(t) for t in sums]
            outs = [self._out(w, k) for w, _ in wrapped]
            na += any(bad for _, bad in wrapped)
            no += any(o[2] for o in outs)
            ys.append(outs[0][0])
            s = [outs[1][0], outs[2][0]]
        return ys, no, na

    def section(self, x, b, a, shift, structure, a_lo=(0, 0), coef_width=None, b_lo=(0, 0, 0)):
        """Returns (y, data overflow count, accumulator overflow count).

        ``df1-wide-fb``: *a* are the high feedback words, *a_lo* the low words of
        weight 2^-L, L = coef_width - 1 (coefc.program's docstring).  ``df1ef-wide-fb``:
        the same, plus the residual E of the previous accumulator (which holds the
        floored low-product term), as in ``df1ef``.  ``df1ef-wide``: as ``df1ef-wide-fb``
        with *b* the numerator's high words and *b_lo* its low words (same weight 2^-L);
        their sum over x[n], x[n-1], x[n-2] is floored and added before E.
        """
        if structure == "coupled":
            return self.coupled(x, b, a, shift)
        known = ("df1", "tdf2", "df1ef", "df1-wide-fb", "df1ef-wide-fb", "df1ef-wide")  # the structures this model knows
        if structure not in known:
            raise NotImplementedError(f"exact model: no recurrence for structure '{structure}'")
        k = self._k(shift)
        b0, b1, b2 = b
        a1, a2 = a
        xh = [0, 0]  # x[n-1], x[n-2]
        yh = [0, 0]
        s1 = s2 = 0
        e = 0
        ys, no, na = [], 0, 0
        for xn in x:
            if structure == "tdf2":
                acc, w0 = self._acc(self.q(b0, xn) + s1)
                yn, _, bad = self._out(acc, k)
                s1, w1 = self._acc(self.q(b1, xn) + self.q(-a1, yn) + s2)
                s2, w2 = self._acc(self.q(b2, xn) + self.q(-a2, yn))
                na += w0 or w1 or w2
            else:
                total = (self.q(b0, xn) + self.q(b1, xh[0]) + self.q(b2, xh[1])
                         + self.q(-a1, yh[0]) + self.q(-a2, yh[1]))
                if structure in ("df1ef", "df1ef-wide-fb", "df1ef-wide"):
                    total += e
                if structure in ("df1-wide-fb", "df1ef-wide-fb", "df1ef-wide"):
                    p = a_lo[0] * yh[0] + a_lo[1] * yh[1]
                    total -= math.floor(Fraction(p, 2 ** (coef_width - 1)))
                if structure == "df1ef-wide":
                    qb = b_lo[0] * xn + b_lo[1] * xh[0] + b_lo[2] * xh[1]
                    total += math.floor(Fraction(qb, 2 ** (coef_width - 1)))
                acc, w = self._acc(total)
                na += w
                yn, v, bad = self._out(acc, k)
                if structure in ("df1ef", "df1ef-wide-fb", "df1ef-wide"):
                    e = acc - v * 2 ** k  # residual of the wrapped accumulator, before fitting
            no += bad
            ys.append(yn)
            xh = [xn, xh[0]]
            yh = [yn, yh[0]]
        return ys, no, na

    def fir(self, x, taps, shift):
        k = self._k(shift)
        ys, no, na = [], 0, 0
        for n in range(len(x)):
            # zero taps (a half-band filter's every other tap) are skipped: q(0 * v) = 0 in every rounding mode
            total = sum(self.q(t, x[n - j]) for j, t in enumerate(taps) if n - j >= 0 and t != 0)
            acc, w = self._acc(total)
            yn, _, bad = self._out(acc, k)
            ys.append(yn)
            no += bad
            na += w
        return ys, no, na

    def fir_folded(self, x, taps, shift):
        """The same FIR with symmetric taps folded: t_j (x[n-j] + x[n-N+1+j])."""
        N = len(taps)
        assert list(taps) == list(taps)[::-1]
        k = self._k(shift)
        ys = []
        for n in range(len(x)):
            xv = lambda i: x[i] if 0 <= i else 0  # noqa: E731
            total = sum(taps[j] * (xv(n - j) + xv(n - (N - 1 - j))) for j in range(N // 2))
            if N % 2:
                total += taps[N // 2] * xv(n - N // 2)
            acc, _ = self._acc(total)
            ys.append(self._out(acc, k)[0])
        return ys

    def gain(self, x, c, shift):
        k = self._k(shift)
        ys, no, na = [], 0, 0
        for xn in x:
            acc, w = self._acc(self.q(c, xn))
            yn, _, bad = self._out(acc, k)
            ys.append(yn)
            no += bad
            na += w
        return ys, no, na

    @staticmethod
    def delay(x, d):
        return ([0] * d + list(x))[: len(x)], 0, 0

    def polyfir(self, x, taps, shift, down, up):
        """The polyphase FIR of coefc.program's docstring, written as stated there: the input
        upsampled by *up* (zeros between), every product of the taps summed, the sum taken at
        output index i from u[i*down - k]; no branch decomposition (that is the engine's business).
        Zero taps (a half-band filter's every other tap) are skipped: a zero product adds nothing."""
        k = self.Fc - shift
        u = []
        for v in x:
            u += [v] + [0] * (up - 1)
        n_out = -(-len(x) * up // down)
        ys, no, na = [], 0, 0
        for i in range(n_out):
            total = sum(t * u[i * down - j] for j, t in enumerate(taps) if i * down - j >= 0 and t != 0)
            acc, w = self._acc(total)
            yn, _, bad = self._out(acc, k)
            ys.append(yn)
            no += bad
            na += w
        return ys, no, na

    def cic(self, x, factor, stages, delay, coef, shift):
        """The CIC decimator of coefc.program's docstring by its *meaning*, not its recurrence: the
        exact wide-integer FIR of the CIC's impulse response (the coefficients of
        (1 + z^-1 + ... + z^-(R D - 1))^N, expanded here by repeated polynomial multiplication),
        taken at i*R, times coef, rounded by 2^(Fc - shift) and fitted; no register, no wrap.
        That the engine's wrap-around integrators and combs give the same words is the modulo
        property (Hogenauer 1981) the tests check."""
        h = [1]
        for _ in range(stages):
            h = _polymul(h, [1] * (factor * delay))
        k = self.Fc - shift
        ys, no = [], 0
        for i in range(0, len(x), factor):
            v = sum(c * x[i - j] for j, c in enumerate(h) if i - j >= 0)
            y, _, bad = self._out(coef * v, k)
            ys.append(y)
            no += bad
        return ys, no, 0

    @staticmethod
    def rate(x, down, up):
        if down > 1:
            return [v for i, v in enumerate(x) if i % down == 0], 0, 0
        out = []
        for v in x:
            out += [v] + [0] * (up - 1)
        return out, 0, 0


def run_program(program, x):
    """Run a ChannelProgram through the model: (y, per-op outputs, ovf, acc ovf)."""
    from coefc.program import CicOp, DelayOp, FirOp, GainOp, PolyFirOp, RateOp, SectionOp

    ar = program.arithmetic
    m = Model(ar.data.width, ar.coef.frac_bits, ar.acc_bits, ar.rounding, ar.overflow,
              ar.product_shift, ar.product_rounding)
    cur = [int(v) for v in x]
    nodes, ovf, aovf = [], [], []
    for op in program.ops:
        if isinstance(op, SectionOp):
            r = m.section(cur, [int(v) for v in op.b], [int(v) for v in op.a], op.shift, op.structure,
                          a_lo=[int(v) for v in op.a_lo] if op.a_lo else (0, 0), coef_width=ar.coef.width,
                          b_lo=[int(v) for v in op.b_lo] if op.b_lo else (0, 0, 0))
        elif isinstance(op, FirOp):
            r = m.fir(cur, [int(v) for v in op.taps], op.shift)
        elif isinstance(op, GainOp):
            r = m.gain(cur, int(op.coef), op.shift)
        elif isinstance(op, DelayOp):
            r = m.delay(cur, op.samples)
        elif isinstance(op, PolyFirOp):
            r = m.polyfir(cur, [int(v) for v in op.taps], op.shift, op.down, op.up)
        elif isinstance(op, RateOp):
            r = m.rate(cur, op.down, op.up)
        elif isinstance(op, CicOp):
            r = m.cic(cur, op.factor, op.stages, op.delay, int(op.coef), op.shift)
        cur = r[0]
        nodes.append(cur)
        ovf.append(r[1])
        aovf.append(r[2])
    return cur, nodes, ovf, aovf


def run_float32(program, x):
    """float32 reference with numpy float32 scalars in the stated order."""
    from coefc.program import DelayOp, FirOp, GainOp, SectionOp

    f = np.float32
    cur = [f(v) for v in x]
    for op in program.ops:
        out = []
        if isinstance(op, GainOp):
            out = [f(op.coef) * v for v in cur]
        elif isinstance(op, DelayOp):
            out = ([f(0)] * op.samples + cur)[: len(cur)]
        elif isinstance(op, FirOp):
            t = [f(v) for v in op.taps]
            for n in range(len(cur)):
                acc = t[0] * cur[n]
                for j in range(1, len(t)):
                    acc = acc + t[j] * (cur[n - j] if n - j >= 0 else f(0))
                out.append(acc)
        elif isinstance(op, SectionOp):
            b0, b1, b2 = (f(v) for v in op.b)
            a1, a2 = (f(v) for v in op.a)
            x1 = x2 = y1 = y2 = s1 = s2 = f(0)
            for xn in cur:
                if op.structure == "tdf2":
                    yn = b0 * xn + s1
                    s1 = (b1 * xn - a1 * yn) + s2
                    s2 = b2 * xn - a2 * yn
                else:
                    yn = ((((b0 * xn) + b1 * x1) + b2 * x2) - a1 * y1) - a2 * y2
                out.append(yn)
                x2, x1, y2, y1 = x1, xn, y1, yn
        cur = out
    return np.array(cur, dtype=np.float32)


def float_reference(blocks, x):
    """Float64 run of float blocks through scipy.signal.sosfilt / lfilter (the reference library)."""
    from scipy import signal

    from coefc.blocks import DelayBlock, FirBlock, GainBlock, RateBlock, SosBlock

    y = np.asarray(x, dtype=float)
    for b in blocks:
        if isinstance(b, RateBlock):  # keep every M-th sample (the first included), or insert L - 1 zeros
            if b.down > 1:
                y = y[::b.down]
            else:
                u = np.zeros(len(y) * b.up)
                u[::b.up] = y
                y = u
            continue
        if isinstance(b, SosBlock):
            y = signal.sosfilt(b.sos, y)
        elif isinstance(b, FirBlock):
            y = signal.lfilter(b.taps, [1.0], y)
        elif isinstance(b, GainBlock):
            y = y * b.gain
        elif isinstance(b, DelayBlock):
            y = np.concatenate([np.zeros(b.samples), y])[: len(y)]
    return y
