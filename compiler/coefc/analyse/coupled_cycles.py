"""Limit cycles of coupled-form sections (zero input): rigorous bounds and an exhaustive search.

The zero-input map of a ``coupled`` section (:mod:`coefc.program`) acts on the two
states, data words ``s = (S1, S2)``:
``S_i <- fit_data(round_shift(wrapA(Ai1 S1 + Ai2 S2), k))``; the output is
``fit_data(round_shift(wrapA(C1 S1 + C2 S2), k))``, zero when the states are.

Arguments, each covering the whole integer map:

Contraction (2-norm)
    With ``||A||_2 < 1`` (decided exactly on the integers: ``2^(2k) I - A'A``
    positive definite), a rounding of at most ``e_max`` LSB per state and a
    ``fit_data`` that never increases a magnitude (saturation), ``||s'|| <=
    ||A|| ||s|| + sqrt(2) e_max``: every cycle lies in the ball of radius
    ``R = sqrt(2) e_max / (1 - ||A||_2)``.  With ``toward-zero`` rounding
    (magnitude truncation) ``|Q(v)| <= |v|`` and ``R = 0``: no limit cycle and no
    overflow oscillation at all.  This is the classical result for normal-form
    sections (Barnes and Fam 1977; Mills, Mullis and Roberts 1978), which the
    rotation matrix of a complex pole pair satisfies for every pole radius below 1.
Granular bound
    An overflow-free cycle obeys ``s[n] = sum_t A^t e[n-1-t]``, so
    ``|S_i| <= e_max sum_t sum_j |(A^t)_ij|`` (the linear model with bounded error).
Exhaustive search
    Every state of the box given by the smaller of the two bounds is visited
    once: the map restricted to the box (steps that overflow or leave it
    dropped) is a function on a finite set, and following it from each unvisited
    state finds every cycle (functional-graph cycle detection, in the compiled
    engine core).  Without the core, the box is mapped until the set stops
    shrinking (the image of a finite set under the map, intersected with the
    box, keeps every cycle; when it no longer changes the map is a bijection on
    it, so every state left is on a cycle).

``wrap`` arithmetic can turn a large state into one of the opposite sign; unless no
state of the data-word box can overflow, overflow oscillations are ``unproven``.

References
----------
C. W. Barnes and A. T. Fam, "Minimum norm recursive digital filters that are free
of overflow limit cycles", IEEE Trans. Circuits Syst. CAS-24(10), 1977 (from memory).
W. L. Mills, C. T. Mullis and R. A. Roberts, "Digital filter realizations without
overflow oscillations", IEEE Trans. ASSP-26(4), 1978 (from memory).
L. B. Jackson, *Digital Filters and Signal Processing*, 3rd ed., 1996, ch. 11
(limit cycles of the coupled form; from memory).
"""

from __future__ import annotations

import math

import numpy as np

from ..program import Arithmetic, SectionOp
from ..qformat import round_shift
from ..simulate import _OVF_CODE, _ROUND_CODE
from .limitcycles import Cycle, GranularVerdict, OverflowVerdict, SectionLimitCycles, error_interval

#: exhaustive search (compiled): at most this many states in the box (one byte of mark each)
MAX_BOX = 1 << 26
#: the numpy search (no compiled core): at most this many box states, at most this many state-steps in all
NUMPY_MAX_BOX = 1 << 22
NUMPY_MAX_WORK = 1 << 25


def _ints(op: SectionOp):
    return tuple(int(v) for v in op.a), tuple(int(v) for v in op.b)


def contraction_norm(A: tuple[int, int, int, int], k: int) -> tuple[bool, float]:
    """(``||A||_2 < 1`` decided exactly on the integers, the norm in floating point)."""
    a11, a12, a21, a22 = A
    u = 1 << (2 * k)
    # M = u I - A'A
    m00 = u - (a11 * a11 + a21 * a21)
    m11 = u - (a12 * a12 + a22 * a22)
    m01 = -(a11 * a12 + a21 * a22)
    pd = m00 > 0 and m00 * m11 - m01 * m01 > 0
    Af = np.array([[a11, a12], [a21, a22]], dtype=float) * 2.0 ** -k
    return pd, float(np.linalg.norm(Af, 2))


def step(s1, s2, A, k: int, arith: Arithmetic):
    """One zero-input step on int64 arrays: (S1', S2', overflowed).

    Exact when the data and coefficient words together are at most 64 bits wide and
    every state lies strictly inside the data word (|Ai1 S1 + Ai2 S2| < 2^63: every sum
    of two products fits int64); :func:`analyse_coupled` searches only such boxes.
    """
    a11, a12, a21, a22 = A
    s1, s2 = np.asarray(s1, dtype=np.int64), np.asarray(s2, dtype=np.int64)
    acc = arith.acc_bits
    dlo, dhi = arith.data.min_int, arith.data.max_int
    out, bad = [], np.zeros(len(s1), dtype=bool)
    for t in (a11 * s1 + a12 * s2, a21 * s1 + a22 * s2):
        w = np.right_shift(np.left_shift(t, 64 - acc), 64 - acc) if acc < 64 else t  # the low acc bits
        bad |= w != t
        v = round_shift(w, k, arith.rounding)
        if arith.overflow == "saturate":
            f = np.minimum(np.maximum(v, dlo), dhi)
        else:
            f = ((v - dlo) % (1 << arith.data.width)) + dlo
        bad |= f != v
        out.append(f)
    return out[0], out[1], bad


def _output(s1: int, s2: int, C: tuple[int, int], k: int, arith: Arithmetic) -> int:
    a = arith.acc_bits
    t = C[0] * s1 + C[1] * s2
    w = ((t + (1 << (a - 1))) % (1 << a)) - (1 << (a - 1))
    v = int(round_shift(int(w), k, arith.rounding))
    lo, hi = arith.data.min_int, arith.data.max_int
    if arith.overflow == "saturate":
        return max(lo, min(hi, v))
    return ((v - lo) % (1 << arith.data.width)) + lo


def cycle_outputs(op: SectionOp, start: tuple[int, int], period: int, arith: Arithmetic) -> list[int]:
    """The section outputs over one period of the zero-input cycle through *start*."""
    A, b = _ints(op)
    k = arith.coef.frac_bits - op.shift
    s1, s2 = np.array([start[0]], dtype=np.int64), np.array([start[1]], dtype=np.int64)
    ys = []
    for _ in range(period):
        ys.append(_output(int(s1[0]), int(s2[0]), b[1:3], k, arith))
        s1, s2, _ = step(s1, s2, A, k, arith)
    return ys


def _granular_bound(A, k: int, e_max: float) -> tuple[float, float] | None:
    from ..realise.coupled import state_responses

    Af = np.array([[A[0], A[1]], [A[2], A[3]]], dtype=float) * 2.0 ** -k
    r = float(np.max(np.abs(np.linalg.eigvals(Af))))
    if r >= 1.0 - 1e-9:
        return None
    n = int(min(max(np.ceil(np.log(1e-15) / np.log(max(r, 1e-3))) + 16, 64), 1 << 22))
    R = state_responses(Af, n)
    tail = r ** n / (1.0 - r) * 4.0  # the decayed remainder, generously
    return tuple(e_max * (float(np.sum(np.abs(R[:, i, :]))) + tail) * (1 + 1e-9) for i in (0, 1))


def _search_numpy(A, k: int, arith: Arithmetic, B1: int, B2: int, max_box: int = NUMPY_MAX_BOX):
    """Cyclic states inside the box |S1| <= B1, |S2| <= B2 by numpy image iteration, or None past the limits.

    The image of the box under the map (steps that overflow or leave the box
    dropped) is taken until it stops shrinking; what is left is a set the map
    permutes, so every state in it is on a cycle.  The path without the compiled
    engine core, and the reference the compiled search is tested against.
    """
    n = (2 * B1 + 1) * (2 * B2 + 1)
    if n > max_box:
        return None, n
    g1, g2 = np.meshgrid(np.arange(-B1, B1 + 1, dtype=np.int64), np.arange(-B2, B2 + 1, dtype=np.int64))
    s1, s2 = g1.ravel(), g2.ravel()
    work = 0
    while True:
        t1, t2, bad = step(s1, s2, A, k, arith)
        keep = ~bad & (np.abs(t1) <= B1) & (np.abs(t2) <= B2)
        codes = np.unique((t1[keep] + B1) * (2 * B2 + 1) + (t2[keep] + B2))
        work += len(s1)
        old = np.unique((s1 + B1) * (2 * B2 + 1) + (s2 + B2))
        if np.array_equal(codes, old):
            return (s1, s2), n
        if work > NUMPY_MAX_WORK:
            return None, n
        s1 = codes // (2 * B2 + 1) - B1
        s2 = codes % (2 * B2 + 1) - B2


def _search(A, k: int, arith: Arithmetic, B1: int, B2: int):
    """Cyclic states inside the box |S1| <= B1, |S2| <= B2, or None past the limits.

    The compiled engine core visits every state of the box once (functional-graph
    cycle detection, ``_engine.coupled_cycles``), exact integers; without it, the
    numpy image iteration (:func:`_search_numpy`).  The states come in the order of
    (S1, S2), except when every state of the box is on a cycle: then in the order
    of the numpy search's grid (S1 varying fastest), which decides the start state
    reported among equal amplitudes.
    """
    from ..simulate import _engine

    if _engine is None or not hasattr(_engine, "coupled_cycles"):
        return _search_numpy(A, k, arith, B1, B2)
    n = (2 * B1 + 1) * (2 * B2 + 1)
    if n > MAX_BOX:
        return None, n
    got = _engine.coupled_cycles(*[int(v) for v in A], k, arith.acc_bits, _ROUND_CODE[arith.rounding],
                                 _OVF_CODE[arith.overflow], arith.data.width, B1, B2, MAX_BOX)
    if got is None:
        return None, n
    s1, s2 = np.frombuffer(got[0], dtype=np.int64), np.frombuffer(got[1], dtype=np.int64)
    if len(s1) == n:  # the whole box: the grid order of the numpy search
        g1, g2 = np.meshgrid(np.arange(-B1, B1 + 1, dtype=np.int64), np.arange(-B2, B2 + 1, dtype=np.int64))
        s1, s2 = g1.ravel(), g2.ravel()
    return (s1, s2), n


def analyse_coupled(op: SectionOp, index: int, arith: Arithmetic) -> SectionLimitCycles:
    """Granular and overflow verdicts of one coupled section (module docstring)."""
    A, b = _ints(op)
    k = arith.coef.frac_bits - op.shift
    c, rad = error_interval(arith.rounding)
    e_max = abs(c) + rad
    W, acc = arith.data.width, arith.acc_bits
    top = 1 << (W - 1)
    acc_ok = all((abs(A[2 * i]) + abs(A[2 * i + 1])) * top < (1 << (acc - 1)) for i in (0, 1))
    pd, nrm = contraction_norm(A, k)
    sat = arith.overflow == "saturate"
    # can any state of the data-word box overflow (a linear form is extreme at the corners)?
    reach = max((abs(A[2 * i]) + abs(A[2 * i + 1])) * top for i in (0, 1))
    no_overflow = acc_ok and int(round_shift(int(reach), k, "truncate")) + 1 <= arith.data.max_int
    ball = None
    if pd and acc_ok and (sat or no_overflow):
        ball = math.sqrt(2.0) * e_max / (1.0 - nrm) * (1 + 1e-9) if nrm < 1.0 else None
    # overflow oscillations
    if arith.rounding == "toward-zero" and pd and acc_ok and (sat or no_overflow):
        ov = OverflowVerdict("none", "||A||_2 < 1 with magnitude truncation: the state norm decreases at every "
                                     "step (Barnes & Fam 1977)")
    elif ball is not None and ball < arith.data.max_int:
        ov = OverflowVerdict("none", f"||A||_2 = {nrm:.9f} < 1 with saturation: every cycle lies within "
                                     f"{ball:.4g} LSB of zero, below full scale")
    elif no_overflow:
        ov = OverflowVerdict("none", "no state of the data-word box can overflow")
    else:
        why = ("wrap arithmetic" if not sat else "||A||_2 >= 1 or the accumulator can wrap")
        ov = OverflowVerdict("unproven", f"{why}: overflow oscillations not excluded")

    def verdict(status, bound, exhaustive: bool, n: int, note: str, cycle: Cycle | None = None):
        return SectionLimitCycles(index, GranularVerdict(status, bound, exhaustive, n, cycle=cycle, note=note), ov)

    # granular
    if k <= 0:
        return verdict("none", 0.0, True, 0, "the loop does not round")
    if arith.rounding == "toward-zero" and pd:
        return verdict("none", 0.0, True, 0, "coupled form, ||A||_2 < 1 and magnitude truncation: no limit cycle "
                                             "(Barnes & Fam 1977; Mills, Mullis & Roberts 1978)")
    gb = _granular_bound(A, k, e_max)
    if gb is None and ball is None:
        return verdict("unproven", None, False, 0, "no amplitude bound: the realised section is not stable")
    bounds = [v for v in (gb, (ball, ball) if ball is not None else None) if v is not None]
    B1f, B2f = min(v[0] for v in bounds), min(v[1] for v in bounds)
    B1, B2 = int(math.floor(B1f)), int(math.floor(B2f))
    out_bound = (abs(b[1]) * B1f + abs(b[2]) * B2f) * 2.0 ** -k + e_max  # at the section output
    if W + arith.coef.width > 64:
        return verdict("unproven", out_bound, False, 0,
                       "data and coefficient words wider than 64 bits together: no exhaustive search")
    if max(B1, B2) >= arith.data.max_int:
        return verdict("unproven", out_bound, False, 0,
                       f"the granular bound ({B1f:.4g}, {B2f:.4g} LSB) reaches full scale")
    found, n = _search(A, k, arith, B1, B2)
    if found is None:
        return verdict("unproven", out_bound, False, 0,
                       f"{n} candidate states (bound {B1f:.4g}, {B2f:.4g} LSB) exceed the exhaustive search's limits")
    s1, s2 = found
    nz = (s1 != 0) | (s2 != 0)
    searched = f"exhaustive search of all {n} states within the granular bound"
    if not np.any(nz):
        return verdict("none", out_bound, True, n, searched)
    ys = [abs(_output(int(a), int(c2), b[1:3], k, arith)) for a, c2 in zip(s1[nz], s2[nz])]
    j = int(np.argmax(ys))
    start = (int(s1[nz][j]), int(s2[nz][j]))
    # the period: walk from the start until it returns
    t1, t2, per = np.array([start[0]], dtype=np.int64), np.array([start[1]], dtype=np.int64), 0
    while True:
        t1, t2, _ = step(t1, t2, A, k, arith)
        per += 1
        if (int(t1[0]), int(t2[0])) == start or per > n:
            break
    amp = max(abs(y) for y in cycle_outputs(op, start, per, arith))
    return verdict("found", out_bound, True, n, searched, Cycle(int(amp), per, start))
