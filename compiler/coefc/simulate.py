"""Bit-true engine: a :class:`~coefc.program.ChannelProgram` and input samples in,
the output samples (and optionally every op's output and overflow counts) out.

The arithmetic is exactly the one stated in :mod:`coefc.program` (df1, tdf2, df1ef,
df1-wide-fb, df1ef-wide-fb, df1ef-wide and coupled sections, FIR, gain, delay; accumulators wrap modulo ``2^acc_bits``; rounding and
overflow by the program's arithmetic).  Input for fixed-point programs is an
integer array of data words (any integer dtype; values must lie in the data
word), output an int64 array; for float32 programs input and output are float32.

Two paths compute the same thing:

- the compiled core ``coefc._engine`` (C99, buffer protocol): products of two
  words summed exactly (128-bit sums, or carries tracked out of 64 bits) and
  wrapped to ``acc_bits``; consecutive sections run fused, sample by sample, so
  their recursions overlap in the processor; used when
  ``acc_bits <= 64``, the data and coefficient words together are at most 64 bits
  wide and every rounding shift is below 63;
- an exact Python-integer path for everything else (``acc_bits > 64``, ...):
  slow, unlimited precision.

References
----------
Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., sec. 6.3-6.5
(direct and transposed forms) and 6.7-6.9 (finite-precision effects).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .errors import DataError
from .program import (ChannelProgram, CicOp, DelayOp, FirOp, GainOp, PolyFirOp, RateOp, SectionOp, STRUCTURE_TABLE,
                      lo_bits)
from .qformat import ROUNDING_MODES, round_shift

try:  # the compiled core; the exact Python path covers its absence
    from . import _engine
except ImportError:  # pragma: no cover - a broken build; see HAVE_ENGINE
    _engine = None

HAVE_ENGINE = _engine is not None and hasattr(_engine, "cascade")

_STRUCT_CODE = {s.name: s.engine_code for s in STRUCTURE_TABLE.values()}
_ROUND_CODE = {m: i for i, m in enumerate(ROUNDING_MODES)}  # add-half, truncate, half-even, toward-zero
_OVF_CODE = {"saturate": 0, "wrap": 1}


@dataclass(frozen=True, eq=False)
class Trace:
    """Everything the engine saw: the output and, per op, its output and overflows."""

    y: np.ndarray
    node_outputs: list = field(default_factory=list)
    overflow_counts: list = field(default_factory=list)  # per op: samples where fit_data changed the value
    acc_overflow_counts: list = field(default_factory=list)  # per op: samples whose exact sum left the acc


def _input(program: ChannelProgram, x) -> np.ndarray:
    ar = program.arithmetic
    x = np.asarray(x)
    if x.ndim != 1:
        raise DataError(f"channel '{program.name}': input must be one-dimensional (one channel), got shape {x.shape}")
    if ar.is_float:
        if x.dtype != np.float32:
            if not np.issubdtype(x.dtype, np.floating):
                raise DataError(f"channel '{program.name}': float32 arithmetic needs float32 input, got {x.dtype}")
            x = x.astype(np.float32)
        return np.ascontiguousarray(x)
    if not (np.issubdtype(x.dtype, np.integer) or x.dtype == object):
        raise DataError(f"channel '{program.name}': fixed-point input must be integer data words, got {x.dtype}; "
                        f"quantise to {ar.data} first")
    if x.size:
        lo, hi = int(x.min()), int(x.max())
        if lo < ar.data.min_int or hi > ar.data.max_int:
            raise DataError(f"channel '{program.name}': input word {lo if lo < ar.data.min_int else hi} is outside "
                            f"{ar.data} [{ar.data.min_int}, {ar.data.max_int}]")
    return np.ascontiguousarray(x, dtype=np.int64)


def _wide(op) -> bool:
    return isinstance(op, SectionOp) and STRUCTURE_TABLE[op.structure].wide_feedback


def _lo(op: SectionOp) -> tuple[int, int]:
    return (int(op.a_lo[0]), int(op.a_lo[1])) if op.a_lo else (0, 0)


def _blo(op: SectionOp) -> tuple[int, int, int]:
    """The numerator's low words (df1ef-wide; zero for every other structure)."""
    return tuple(int(v) for v in op.b_lo) if op.b_lo else (0, 0, 0)


def _k(program: ChannelProgram, op) -> int:
    """The accumulator's final right shift ``Fc - s - P`` (P = the product shift, usually 0)."""
    return program.arithmetic.final_shift(op.shift)


def _fast_ok(program: ChannelProgram) -> bool:
    ar = program.arithmetic
    if not HAVE_ENGINE:
        return False
    if ar.is_float:
        return True
    if ar.acc_bits > 64 or ar.data.width + ar.coef.width > 64:
        return False
    if ar.data.width + ar.coef.width > 63 and any(_wide(op) for op in program.ops):
        return False  # the low-word sums P (and Q of df1ef-wide) must be exact in int64
    lowest = 0 if ar.product_shift else 1
    return all(lowest <= _k(program, op) <= 62 for op in program.ops if not isinstance(op, (DelayOp, RateOp)))


def simulate(program: ChannelProgram, x, *, trace: bool = False, _exact: bool = False):
    """Run *program* bit-true over the whole input *x*.

    Parameters
    ----------
    program : ChannelProgram
        The realised channel.
    x : array_like
        Data words (integers) for fixed-point programs, float32 for float32 ones.
    trace : bool
        Return a :class:`Trace` instead of the output array.

    Returns
    -------
    numpy.ndarray or Trace
        int64 (fixed) or float32 output; of the same length as *x*, or
        ``ceil(len(x) * up / down)`` over the rate-changing ops of a multirate channel.

    Examples
    --------
    >>> from coefc.program import Arithmetic, ChannelProgram, GainOp
    >>> from coefc.qformat import QFormat
    >>> ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32)
    >>> p = ChannelProgram("half", 48000, ar, (GainOp(coef=8192),))   # 0.5 in Q2.14
    >>> simulate(p, [100, -3, 32767]).tolist()
    [50, -1, 16384]
    """
    x = _input(program, x)
    fast = _fast_ok(program) and not _exact
    ar = program.arithmetic
    nodes, ovf, aovf = [], [], []
    cur = x
    ops = program.ops
    i = 0
    while i < len(ops):
        op = ops[i]
        if fast and not ar.is_float and isinstance(op, SectionOp) and not _wide(op) \
                and not ar.product_shift \
                and not STRUCTURE_TABLE[op.structure].state_space:
            j = i
            while j < len(ops) and isinstance(ops[j], SectionOp) and ops[j].structure == op.structure \
                    and not _wide(ops[j]):
                j += 1
            for y, o, a in _run_cascade(program, ops[i:j], cur, keep_nodes=trace):
                nodes.append(y)
                ovf.append(int(o))
                aovf.append(int(a))
                cur = y
            i = j
            continue
        if ar.is_float:
            y, o, a = _run_float(op, cur, fast)
        else:
            y, o, a = (_run_fast if fast else _run_exact)(program, op, cur)
        nodes.append(y)
        ovf.append(int(o))
        aovf.append(int(a))
        cur = y
        i += 1
    y = cur if program.ops else cur.copy()
    if trace:
        return Trace(y=y, node_outputs=nodes, overflow_counts=ovf, acc_overflow_counts=aovf)
    return y


# ---------------------------------------------------------------- compiled path

def _run_fast(program: ChannelProgram, op, x: np.ndarray):
    ar = program.arithmetic
    y = np.empty_like(x)
    common = (ar.acc_bits, _ROUND_CODE[ar.rounding], _OVF_CODE[ar.overflow], ar.data.width)
    if ar.product_shift and not isinstance(op, DelayOp):
        if isinstance(op, SectionOp):
            kind, cs = _STRUCT_CODE[op.structure], (*op.b, *op.a)
        else:
            kind, cs = (3, op.taps) if isinstance(op, FirOp) else (4, (op.coef,))
        coefs = np.ascontiguousarray(np.array([int(v) for v in cs], dtype=np.int64))
        o, a = _engine.rounded_products(x, y, coefs, kind, _k(program, op), ar.product_shift,
                                        _ROUND_CODE[ar.product_rounding], *common)
        return y, o, a
    if _wide(op):
        o, a = _engine.sos_wide(x, y, *[int(v) for v in op.b], *[int(v) for v in op.a], *_lo(op),
                                lo_bits(ar.coef), _k(program, op), *common,
                                STRUCTURE_TABLE[op.structure].error_feedback, *_blo(op))
    elif isinstance(op, SectionOp) and STRUCTURE_TABLE[op.structure].state_space:
        coefs = np.array([int(v) for v in (*op.b, *op.a)] + [_k(program, op)], dtype=np.int64)
        o, a = _engine.coupled(x, y, coefs, *common)
    elif isinstance(op, SectionOp):
        o, a = _engine.sos(x, y, *[int(v) for v in op.b], *[int(v) for v in op.a], _k(program, op),
                           _STRUCT_CODE[op.structure], *common)
    elif isinstance(op, FirOp):
        taps = np.ascontiguousarray(np.array([int(v) for v in op.taps], dtype=np.int64))
        o, a = _engine.fir(x, y, taps, _k(program, op), *common)
    elif isinstance(op, GainOp):
        o, a = _engine.gain(x, y, int(op.coef), _k(program, op), *common)
    elif isinstance(op, DelayOp):
        return _delay(x, op.samples), 0, 0
    elif isinstance(op, RateOp):
        return _rate(x, op), 0, 0
    elif isinstance(op, PolyFirOp):
        taps = np.ascontiguousarray(np.array([int(v) for v in op.taps], dtype=np.int64))
        y = np.empty(-(-len(x) * op.up // op.down), dtype=np.int64)
        o, a = _engine.fir_rate(x, y, taps, op.down, op.up, _k(program, op), *common)
    elif isinstance(op, CicOp):
        y = np.empty(-(-len(x) // op.factor), dtype=np.int64)
        o, a = _engine.cic(x, y, op.factor, op.stages, op.delay, op.register_bits, int(op.coef), _k(program, op),
                           *common[1:])
    else:
        raise TypeError(f"not an op: {op!r}")
    return y, o, a


def _rate(x: np.ndarray, op: RateOp) -> np.ndarray:
    """Keep every ``down``-th sample (from the first) or insert ``up - 1`` zeros after each."""
    if op.down > 1:
        return np.ascontiguousarray(x[::op.down])
    y = np.zeros(len(x) * op.up, dtype=x.dtype)
    y[::op.up] = x
    return y


def _run_cascade(program: ChannelProgram, secs, x: np.ndarray, keep_nodes: bool = True):
    """Consecutive sections of one structure in one fused call of the compiled core.

    Without *keep_nodes* every section writes the same buffer (the last one wins),
    which saves memory traffic when only the output is wanted.
    """
    ar = program.arithmetic
    coefs = np.array([[int(v) for v in (*op.b, *op.a)] + [_k(program, op)] for op in secs], dtype=np.int64)
    ys = [np.empty_like(x) for _ in secs] if keep_nodes else [np.empty_like(x)] * len(secs)
    counts = _engine.cascade(x, ys, np.ascontiguousarray(coefs.ravel()), _STRUCT_CODE[secs[0].structure],
                             ar.acc_bits, _ROUND_CODE[ar.rounding], _OVF_CODE[ar.overflow], ar.data.width)
    return [(y, o, a) for y, (o, a) in zip(ys, counts)]


def _delay(x: np.ndarray, d: int) -> np.ndarray:
    y = np.zeros_like(x)
    if d < len(x):
        y[d:] = x[: len(x) - d]
    return y


def _run_float(op, x: np.ndarray, fast: bool):
    if isinstance(op, DelayOp):
        return _delay(x, op.samples), 0, 0
    if isinstance(op, RateOp):
        return _rate(x, op), 0, 0
    if isinstance(op, PolyFirOp):
        y = _poly_float(op, x)
        return y, int(np.count_nonzero(~np.isfinite(y))), 0
    if isinstance(op, SectionOp) and not STRUCTURE_TABLE[op.structure].float32:
        raise TypeError(f"structure '{op.structure}' has no float32 recurrence")
    y = np.empty_like(x)
    if fast:
        if isinstance(op, SectionOp):
            _engine.sos_f32(x, y, *[float(v) for v in op.b], *[float(v) for v in op.a], _STRUCT_CODE[op.structure])
        elif isinstance(op, FirOp):
            _engine.fir_f32(x, y, np.ascontiguousarray(np.array(op.taps, dtype=np.float32)))
        elif isinstance(op, GainOp):
            _engine.gain_f32(x, y, float(op.coef))
        else:
            raise TypeError(f"not an op: {op!r}")
    else:
        y = _float_exact(op, x)
    return y, int(np.count_nonzero(~np.isfinite(y))), 0


def _poly_float(op: PolyFirOp, x: np.ndarray) -> np.ndarray:
    """float32 polyphase FIR: for each output, the products in increasing tap order, inputs before
    the first one being 0.0 (as the plain fir: ``acc = t_k0 x; acc = acc + t_k x`` for the later k)."""
    f = np.float32
    t = [f(v) for v in op.taps]
    M, L = op.down, op.up
    y = np.empty(-(-len(x) * L // M), dtype=np.float32)
    zero = f(0)
    with np.errstate(over="ignore", invalid="ignore"):
        for i in range(len(y)):
            r = i * M
            acc = None
            for k in range(r % L, len(t), L):
                p = t[k] * (x[(r - k) // L] if r >= k else zero)
                acc = p if acc is None else acc + p
            y[i] = f(0) if acc is None else acc
    return y


def _float_exact(op, x: np.ndarray) -> np.ndarray:
    """float32 path with numpy scalars (slow, same order as the C core)."""
    f = np.float32
    y = np.empty_like(x)
    with np.errstate(over="ignore", invalid="ignore"):
        if isinstance(op, GainOp):
            return (f(op.coef) * x).astype(np.float32)
        if isinstance(op, FirOp):
            t = [f(v) for v in op.taps]
            for n in range(len(x)):
                acc = t[0] * x[n]
                for k in range(1, len(t)):
                    if n - k >= 0:
                        acc = acc + t[k] * x[n - k]
                    else:
                        acc = acc + t[k] * f(0)
                y[n] = acc
            return y
        b0, b1, b2 = (f(v) for v in op.b)
        a1, a2 = (f(v) for v in op.a)
        x1 = x2 = y1 = y2 = s1 = s2 = f(0)
        for n in range(len(x)):
            xn = x[n]
            if op.structure == "tdf2":
                yn = b0 * xn + s1
                s1 = (b1 * xn - a1 * yn) + s2
                s2 = b2 * xn - a2 * yn
            else:
                acc = b0 * xn
                acc = acc + b1 * x1
                acc = acc + b2 * x2
                acc = acc - a1 * y1
                acc = acc - a2 * y2
                yn = acc
            y[n] = yn
            x2, x1, y2, y1 = x1, xn, y1, yn
    return y


# ---------------------------------------------------------------- exact Python path

def _wrap(v: int, bits: int) -> int:
    half = 1 << (bits - 1)
    return ((v + half) & ((1 << bits) - 1)) - half


def _fit(v: int, width: int, overflow: str) -> tuple[int, bool]:
    lo, hi = -(1 << (width - 1)), (1 << (width - 1)) - 1
    if lo <= v <= hi:
        return v, False
    if overflow == "saturate":
        return (lo if v < lo else hi), True
    return _wrap(v, width), True


def _cic_exact(program: ChannelProgram, op: CicOp, x: np.ndarray):
    """The ``cic`` recurrence of coefc.program as written: integrators and combs in a register of
    ``op.register_bits`` bits, every step reduced modulo ``2^B`` into the signed range."""
    ar = program.arithmetic
    B, N, R, D = op.register_bits, op.stages, op.factor, op.delay
    k, C = _k(program, op), int(op.coef)
    integ = [0] * N
    combs = [[0] * D for _ in range(N)]
    ys, n_ovf, cp = [], 0, 0
    for t, xn in enumerate(int(v) for v in x):
        integ[0] = _wrap(integ[0] + xn, B)
        for j in range(1, N):
            integ[j] = _wrap(integ[j] + integ[j - 1], B)
        if t % R == 0:
            c = integ[-1]
            for j in range(N):
                old, combs[j][cp] = combs[j][cp], c
                c = _wrap(c - old, B)
            cp = (cp + 1) % D
            y, bad = _fit(round_shift(C * c, k, ar.rounding), ar.data.width, ar.overflow)
            ys.append(y)
            n_ovf += bad
    return np.array(ys, dtype=np.int64), n_ovf, 0


def _run_exact(program: ChannelProgram, op, x: np.ndarray):
    if isinstance(op, DelayOp):
        return _delay(x, op.samples), 0, 0
    if isinstance(op, RateOp):
        return _rate(x, op), 0, 0
    if isinstance(op, CicOp):
        return _cic_exact(program, op, x)
    ar = program.arithmetic
    A, W, rnd, ovf = ar.acc_bits, ar.data.width, ar.rounding, ar.overflow
    lo, hi = -(1 << (A - 1)), (1 << (A - 1)) - 1
    k = _k(program, op)
    P, prnd = ar.product_shift, ar.product_rounding

    def q(t: int) -> int:  # a product as it enters the accumulator
        return round_shift(t, P, prnd) if P else t

    xs = [int(v) for v in x]
    ys = [0] * len(xs)
    n_ovf = n_acc = 0

    def acc_of(exact: int) -> int:
        nonlocal n_acc
        if exact < lo or exact > hi:
            n_acc += 1
            return _wrap(exact, A)
        return exact

    def out(acc: int) -> tuple[int, int]:
        nonlocal n_ovf
        v = round_shift(acc, k, rnd)
        y, bad = _fit(v, W, ovf)
        n_ovf += bad
        return y, v

    if isinstance(op, GainOp):
        c = int(op.coef)
        for n, xn in enumerate(xs):
            ys[n] = out(acc_of(q(c * xn)))[0]
    elif isinstance(op, FirOp):
        taps = [int(v) for v in op.taps]
        for n in range(len(xs)):
            s = 0
            for j, t in enumerate(taps):
                if n - j < 0:
                    break
                s += q(t * xs[n - j])
            ys[n] = out(acc_of(s))[0]
    elif isinstance(op, SectionOp) and STRUCTURE_TABLE[op.structure].state_space:
        d, c1, c2, g = (int(v) for v in op.b)
        a11, a12, a21, a22 = (int(v) for v in op.a)
        s1 = s2 = 0
        for n, xn in enumerate(xs):
            before_acc, before_ovf = n_acc, n_ovf
            accy = acc_of(d * xn + c1 * s1 + c2 * s2)
            acc1 = acc_of(a11 * s1 + a12 * s2 + g * xn)
            acc2 = acc_of(a21 * s1 + a22 * s2)
            ys[n] = out(accy)[0]
            s1, s2 = out(acc1)[0], out(acc2)[0]
            n_acc = before_acc + (n_acc != before_acc)  # one event per sample
            n_ovf = before_ovf + (n_ovf != before_ovf)
    elif isinstance(op, PolyFirOp):
        taps = [int(v) for v in op.taps]
        M, L = op.down, op.up
        ys = [0] * (-(-len(xs) * L // M))
        for i in range(len(ys)):
            r = i * M
            s = sum(taps[j] * xs[(r - j) // L] for j in range(r % L, min(len(taps) - 1, r) + 1, L))
            ys[i] = out(acc_of(s))[0]
    elif isinstance(op, SectionOp):
        b0, b1, b2 = (int(v) for v in op.b)
        a1, a2 = (int(v) for v in op.a)
        l1, l2 = _lo(op)
        m0, m1, m2 = _blo(op)
        wide, L = _wide(op), lo_bits(ar.coef)
        ef = STRUCTURE_TABLE[op.structure].error_feedback  # df1ef, df1ef-wide-fb
        x1 = x2 = y1 = y2 = 0
        s1 = s2 = e = 0
        for n, xn in enumerate(xs):
            if op.structure == "tdf2":
                before = n_acc
                acc = acc_of(q(b0 * xn) + s1)
                yn = out(acc)[0]
                t1 = q(b1 * xn) + q(-a1 * yn) + s2
                t2 = q(b2 * xn) + q(-a2 * yn)
                s1 = _wrap(t1, A)
                s2 = _wrap(t2, A)
                if n_acc == before and (t1 != s1 or t2 != s2):
                    n_acc += 1
            else:
                exact = q(b0 * xn) + q(b1 * x1) + q(b2 * x2) + q(-a1 * y1) + q(-a2 * y2)
                if ef:
                    exact += e
                if wide:
                    exact -= (l1 * y1 + l2 * y2) >> L  # floor(P / 2^L)
                    exact += (m0 * xn + m1 * x1 + m2 * x2) >> L  # floor(Q / 2^L) (df1ef-wide; else 0)
                acc = acc_of(exact)
                yn, v = out(acc)
                if ef:
                    e = acc - (v << k)  # the residual of the acc that holds the floored low products
            ys[n] = yn
            x2, x1, y2, y1 = x1, xn, y1, yn
    else:
        raise TypeError(f"not an op: {op!r}")
    return np.array(ys, dtype=np.int64), n_ovf, n_acc
