"""The compiled exhaustive cycle searches (coefc._engine.cycle_region / whole_cycles) against the
numpy searches they replace and against independent enumerators written from the definitions."""

from __future__ import annotations

import math

import numpy as np
import pytest

from exact_model import rshift  # rounding of acc / 2^k through exact fractions, from the definitions
from test_overflow_oscillations import enumerate_cycles  # independent whole-map enumerator (Kahn peeling)
from coefc.analyse import limitcycles as L
from coefc.program import Arithmetic, SectionOp
from coefc.qformat import QFormat
from coefc.simulate import HAVE_ENGINE

ROUNDINGS = ("add-half", "half-even", "truncate", "toward-zero")

pytestmark = pytest.mark.skipif(not HAVE_ENGINE, reason="the compiled core is not built")


def arith(width, coef_frac, rounding, overflow, acc=32, structure="df1"):
    return Arithmetic(data=QFormat(1, width - 1), coef=QFormat(2, coef_frac), acc_bits=acc, rounding=rounding,
                      overflow=overflow, structure=structure)


def ref_step(y1, y2, A1, A2, k, width, acc_bits, mode, overflow):
    """The zero-input recursion of coefc.program, in Python integers from the definitions."""
    total = -A1 * y1 - A2 * y2
    half = 1 << (acc_bits - 1)
    acc = (total + half) % (1 << acc_bits) - half  # two's-complement wrap of the accumulator
    v = rshift(acc, k, mode)
    lo, hi = -(1 << (width - 1)), (1 << (width - 1)) - 1
    return min(max(v, lo), hi) if overflow == "saturate" else (v - lo) % (1 << width) + lo


def region_cycles(A1, A2, k, width, acc_bits, mode, overflow, B, D, S, order):
    """Every nonzero state on a cycle that stays inside the region, by walking every state (a dict)."""
    def inside(a, b):
        return abs(a) <= B and abs(b) <= B and abs(a - b) <= D and abs(a + b) <= S

    states = [(a, b) for a in range(-B, B + 1) for b in ((0,) if order == 1 else range(-B, B + 1))
              if order == 1 or inside(a, b)]
    on_cycle, done = set(), set()
    for s0 in states:
        path, where, s = [], {}, s0
        while s is not None and s not in where and s not in done:
            where[s] = len(path)
            path.append(s)
            y = ref_step(s[0], s[1], A1, A2, k, width, acc_bits, mode, overflow)
            n = (y, s[0] if order == 2 else 0)
            s = n if abs(n[0]) <= B and (order == 1 or inside(*n)) else None
        if s is not None and s in where:
            on_cycle.update(path[where[s]:])
        done.update(path)
    return sorted(p for p in on_cycle if p != (0, 0))


def random_cases(n, seed):
    rng = np.random.default_rng(seed)
    for _ in range(n):
        width = int(rng.integers(4, 9))
        fc = int(rng.integers(3, 12))
        mode = str(rng.choice(ROUNDINGS))
        ovf = str(rng.choice(["saturate", "wrap"]))
        acc = int(rng.choice([10, 14, 32, 64]))
        r, t = rng.uniform(0.5, 1.05), rng.uniform(0, math.pi)
        A1, A2 = round(-2 * r * math.cos(t) * 2 ** fc), round(r * r * 2 ** fc)
        if rng.random() < 0.2:
            A2 = 0
        order = 2 if A2 else 1
        B, D, S = (int(v) for v in rng.integers(0, 30, 3))
        D, S = D * 2, S * 2
        if order == 1:
            D = S = 2 * B
        else:
            B = min(B, (D + S) // 2)
        yield A1, A2, fc, width, acc, mode, ovf, B, D, S, order


@pytest.mark.parametrize("seed", range(4))
def test_region_search_matches_numpy_and_the_enumerator(seed):
    for A1, A2, k, width, acc, mode, ovf, B, D, S, order in random_cases(40, seed):
        ar = arith(width, k, mode, ovf, acc)
        c1, c2 = L.cycle_states(A1, A2, k, ar, B, D, S, order)
        n1, n2 = L.cycle_states_numpy(A1, A2, k, ar, B, D, S, order)
        case = (A1, A2, k, width, acc, mode, ovf, B, D, S, order)
        assert c1.tolist() == n1.tolist() and c2.tolist() == n2.tolist(), case
        want = region_cycles(A1, A2, k, width, acc, mode, ovf, B, D, S, order)
        assert list(zip(c1.tolist(), c2.tolist())) == want, case


def test_region_search_finds_the_first_order_dead_band():
    # First-order dead band (Jones, "Limit Cycles", OpenStax CNX m11928): y[n] = round(-a y[n-1]) with
    # a = -0.9375 and rounding to nearest holds every |y| <= 7 (|y| - 0.0625 |y| rounds back to |y| while
    # 0.0625 |y| < 1/2); with add-half, ties at +1/2 round up, so -8 (-8 + 1/2 -> -7.5 -> -7) does not stay.
    k = 4
    ar = arith(8, k, "add-half", "saturate")
    y1, y2 = L.cycle_states(15, 0, k, ar, 20, 40, 40, 1)
    assert y1.tolist() == [v for v in range(-7, 8) if v != 0] and not y2.any()


@pytest.mark.parametrize("seed", range(3))
def test_whole_space_search_matches_numpy_and_the_enumerator(seed):
    rng = np.random.default_rng(100 + seed)
    for _ in range(25):
        width = int(rng.integers(4, 8))
        fc = int(rng.integers(2, 7))
        mode = str(rng.choice(ROUNDINGS))
        ovf = str(rng.choice(["saturate", "wrap"]))
        ef = bool(rng.random() < 0.4)
        r, t = rng.uniform(0.5, 1.02), rng.uniform(0, math.pi)
        A1, A2 = round(-2 * r * math.cos(t) * 2 ** fc) + int(rng.integers(-2, 3)), round(r * r * 2 ** fc)
        if A2 == 0:
            A2 = 1
        ar = arith(width, fc, mode, ovf, 32)
        got = L.whole_space_cycles(A1, A2, fc, ar, 2, ef)
        ref = L.whole_space_cycles_numpy(A1, A2, fc, ar, 2, ef)
        case = (A1, A2, fc, width, mode, ovf, ef)
        assert got == ref, case
        truth = enumerate_cycles(A1, A2, fc, width, 32, mode, ovf, ef)
        for kind in ("granular", "overflow"):
            cyc = getattr(got, kind)
            assert (cyc.amplitude_lsb if cyc else 0) == truth[kind], (case, kind)
            if cyc:
                periods = [p for kk, a, p in truth["cycles"] if kk == kind and a == cyc.amplitude_lsb]
                assert cyc.period in periods, (case, kind)


def test_whole_space_first_order_matches_numpy():
    for A1 in (-30, -17, 15, 16, 31):
        for mode in ROUNDINGS:
            for ovf in ("saturate", "wrap"):
                ar = arith(9, 4, mode, ovf, 12)
                assert L.whole_space_cycles(A1, 0, 4, ar, 1) == L.whole_space_cycles_numpy(A1, 0, 4, ar, 1)


@pytest.fixture
def numpy_only(monkeypatch):
    """Every search through the numpy reference (the compiled core treated as absent)."""
    def run():
        L._GRANULAR_CACHE.clear()
        L._WHOLE_CACHE.clear()
        monkeypatch.setattr(L, "_zero_input_engine", lambda: None)
    yield run
    L._GRANULAR_CACHE.clear()
    L._WHOLE_CACHE.clear()


def test_section_verdicts_do_not_depend_on_the_compiled_core(numpy_only):
    # Same verdicts, amplitudes, periods and start states with and without the compiled core.
    cases = []
    for width, fc, structure in ((8, 10, "df1"), (7, 5, "tdf2"), (16, 14, "df1"), (6, 4, "df1ef")):
        for r, t in ((0.97, 0.2), (0.99, 1.3), (0.93, 2.9), (0.999, 0.05)):
            for mode in ("add-half", "truncate"):
                for ovf in ("saturate", "wrap"):
                    A1, A2 = round(-2 * r * math.cos(t) * 2 ** fc), round(r * r * 2 ** fc)
                    cases.append((SectionOp((1 << fc, 0, 0), (A1, A2), 0, structure),
                                  arith(width, fc, mode, ovf, 32, structure)))
    L._GRANULAR_CACHE.clear()
    L._WHOLE_CACHE.clear()
    fast = [L.analyse_section(op, 0, ar, max_states=1 << 18) for op, ar in cases]
    numpy_only()
    slow = [L.analyse_section(op, 0, ar, max_states=1 << 18) for op, ar in cases]
    assert fast == slow
    assert {s.status for s in fast} >= {"none", "found"}  # the cases exercise both verdicts


def test_the_default_limit_searches_more_than_two_to_the_21_states():
    # A 24-bit section with poles at radius 0.998, angle 0.02: its candidate region holds about 5e6
    # states, more than 2^21 (the former limit) and at most 2^24 (the current default), so it is now
    # searched exhaustively.
    fc = 22
    A1, A2 = round(-2 * 0.998 * math.cos(0.02) * 2 ** fc), round(0.998 ** 2 * 2 ** fc)
    ar = arith(24, fc, "add-half", "saturate", 56)
    res = L.analyse_section(SectionOp((1 << fc, 0, 0), (A1, A2), 0, "df1"), 0, ar)
    assert (1 << 21) < res.states_searched <= L.MAX_STATES and res.exhaustive
    assert res.status in ("none", "found")
    if res.status == "found":  # the reported cycle is real (independent step)
        s = res.start_state
        for _ in range(res.period):
            s = (ref_step(s[0], s[1], A1, A2, fc, 24, 56, "add-half", "saturate"), s[0])
        assert s == res.start_state


@pytest.mark.parametrize("ef", [False, True])
def test_compiled_walk_matches_the_python_walk(ef):
    # Brent's cycle detection in the compiled core against the dictionary walk: same period, amplitude and
    # cycle states from the same first state, and the same "no cycle within the limit".
    rng = np.random.default_rng(7 + ef)
    for _ in range(150):
        width, fc = int(rng.integers(5, 17)), int(rng.integers(3, 15))
        mode, ovf = str(rng.choice(ROUNDINGS)), str(rng.choice(["saturate", "wrap"]))
        ar = arith(width, fc, mode, ovf, int(rng.choice([12, 20, 32, 64])))
        r, t = rng.uniform(0.8, 1.01), rng.uniform(0, math.pi)
        A1, A2 = round(-2 * r * math.cos(t) * 2 ** fc), round(r * r * 2 ** fc)
        hi = (1 << (width - 1)) - 1
        y1, y2 = (int(v) for v in rng.integers(-hi - 1, hi + 1, 2))
        limit = int(rng.choice([8, 64, 4096]))
        if ef:
            lo_e, hi_e = L._residual_range(fc, mode)
            e = int(rng.integers(lo_e, hi_e + 1))
            assert L._walk_ef(y1, y2, e, A1, A2, fc, ar, limit) == \
                L._walk_ef_python(y1, y2, e, A1, A2, fc, ar, limit), (A1, A2, fc, width, mode, ovf, y1, y2, e, limit)
        else:
            assert L._walk(y1, y2, A1, A2, fc, ar, limit) == L._walk_python(y1, y2, A1, A2, fc, ar, limit), \
                (A1, A2, fc, width, mode, ovf, y1, y2, limit)
