"""The coupled (normal) form: realiser pole grid, limit-cycle verdicts against brute force."""

from __future__ import annotations

import numpy as np
import pytest

import coefc
from coefc.analyse.coupled_cycles import analyse_coupled, step
from coefc.program import Arithmetic, SectionOp, section_transfer
from coefc.qformat import QFormat
from coefc.realise.coupled import fit_coupled
from coefc.targetspec import Overrides

from conftest import FILTERS

Q15, Q14 = QFormat(1, 15), QFormat(2, 14)


def test_quantised_poles_lie_on_the_uniform_grid():
    # Rader & Gold 1967 (from memory): the coupled form stores Re and Im of the pole, so a
    # rounded pole is within half an LSB in each part, |p - p_q| <= LSB / sqrt(2);
    # reference poles from numpy.roots of the design denominator
    rng = np.random.default_rng(3)
    for _ in range(200):
        r, th = 1.0 - 10 ** rng.uniform(-4.5, -1), rng.uniform(1e-3, 0.3)
        a = [1.0, -2 * r * np.cos(th), r * r]
        g = (1 + a[1] + a[2]) / 4  # a low-pass numerator of unit DC gain: C and D near 1, shift 0
        bi, ai, s, sat = fit_coupled([g, 2 * g, g], a, Q14, "add-half", Q15, "l2", 0.5)
        assert not sat
        p = np.roots(a)
        pq = np.roots(section_transfer(SectionOp(bi, ai, s, "coupled"), 14)[1])
        err = max(min(abs(pq - z)) for z in p)
        assert err <= 2.0 ** (s - 14) / np.sqrt(2) + 1e-12


def test_weighting_filters_on_16_bits_keep_their_poles_inside():
    # issue 13 (measured there): on mcu16 every A- and C-weighting realisation in df1 puts a
    # pole on z = 1; IEC 61672-1 A weighting has a double pole at 20.6 Hz (from memory)
    real = {s: coefc.load(FILTERS / "sound_level_meter.toml").design().realise("mcu16", Overrides(structure=s))
            for s in ("df1", "coupled")}
    from coefc.analyse import instability

    assert all(instability(p) is not None for p in real["df1"].programs)
    assert all(instability(p) is None for p in real["coupled"].programs)


def _brute_cycles(A, k, ar):
    """Every state of the whole data-word space, iterated until the set stops shrinking."""
    lo, hi = ar.data.min_int, ar.data.max_int
    g1, g2 = np.meshgrid(np.arange(lo, hi + 1), np.arange(lo, hi + 1))
    s1, s2 = g1.ravel(), g2.ravel()
    while True:
        t1, t2, _ = step(s1, s2, A, k, ar)
        codes = np.unique((t1 - lo) * (hi - lo + 1) + (t2 - lo))
        old = np.unique((s1 - lo) * (hi - lo + 1) + (s2 - lo))
        if np.array_equal(codes, old):
            return {(int(a), int(b)) for a, b in zip(s1, s2)}
        s1, s2 = codes // (hi - lo + 1) + lo, codes % (hi - lo + 1) + lo


@pytest.mark.parametrize("rounding", ["add-half", "truncate", "half-even", "toward-zero"])
@pytest.mark.parametrize("overflow", ["saturate", "wrap"])
def test_limit_cycle_verdicts_agree_with_the_whole_state_space(rounding, overflow):
    # exhaustive enumerator (every state of 7-bit data words) as the reference
    ar = Arithmetic(data=QFormat(1, 6), coef=QFormat(2, 8), acc_bits=24, rounding=rounding, overflow=overflow,
                    structure="coupled")
    rng = np.random.default_rng(11)
    for _ in range(6):
        r, th = rng.uniform(0.85, 0.995), rng.uniform(0.02, 1.0)
        al, be = round(r * np.cos(th) * 256), round(r * np.sin(th) * 256)
        op = SectionOp((64, 100, -50, 30), (al, -be, be, al), 0, "coupled")
        res = analyse_coupled(op, 0, ar)
        cyc = _brute_cycles(op.a, 8, ar)
        small = {c for c in cyc if max(map(abs, c)) < ar.data.max_int}
        if res.status == "none":
            assert small <= {(0, 0)}, (res, small)
        elif res.status == "found":
            assert small - {(0, 0)} and res.start_state in cyc
        if res.overflow_status == "none":
            big = {c for c in cyc if max(map(abs, c)) > (res.bound_lsb or 0) * 4 + 64}
            assert not big
        if rounding == "toward-zero" and overflow == "saturate":
            assert res.status == "none" and cyc == {(0, 0)}


def _walk_cycles(A, k, ar, B1, B2):
    """Independent enumerator: a box state is cyclic when following the map (pure Python
    integers, no numpy) returns to it without overflowing or leaving the box."""
    from coefc.qformat import round_shift

    a, W = ar.acc_bits, ar.data.width
    lo, hi = ar.data.min_int, ar.data.max_int

    def one(s1, s2):
        out = []
        for c1, c2 in ((A[0], A[1]), (A[2], A[3])):
            t = c1 * s1 + c2 * s2
            w = ((t + (1 << (a - 1))) % (1 << a)) - (1 << (a - 1))
            v = round_shift(w, k, ar.rounding)
            f = max(lo, min(hi, v)) if ar.overflow == "saturate" else ((v - lo) % (1 << W)) + lo
            if w != t or f != v:
                return None
            out.append(f)
        return tuple(out)

    cyc = set()
    for s1 in range(-B1, B1 + 1):
        for s2 in range(-B2, B2 + 1):
            s, seen = (s1, s2), {(s1, s2)}
            while True:
                s = one(*s)
                if s is None or abs(s[0]) > B1 or abs(s[1]) > B2:
                    break
                if s == (s1, s2):
                    cyc.add(s)
                    break
                if s in seen:  # ran into a cycle not through the start
                    break
                seen.add(s)
    return cyc


@pytest.mark.parametrize("rounding", ["add-half", "truncate", "half-even", "toward-zero"])
@pytest.mark.parametrize("overflow", ["saturate", "wrap"])
def test_compiled_coupled_search_matches_the_numpy_search_and_a_walk(rounding, overflow):
    # the compiled search (engine core) against the numpy image iteration it replaced and an
    # independent per-state walk; boxes cover the whole 6-bit data space and smaller boxes
    from coefc.analyse.coupled_cycles import _search, _search_numpy
    from coefc.simulate import HAVE_ENGINE

    if not HAVE_ENGINE:
        pytest.skip("no compiled engine core")
    ar = Arithmetic(data=QFormat(1, 5), coef=QFormat(2, 8), acc_bits=16, rounding=rounding, overflow=overflow,
                    structure="coupled")
    rng = np.random.default_rng(29)
    for trial in range(12):
        r, th = rng.uniform(0.8, 1.02), rng.uniform(0.02, 1.5)
        al, be = round(r * np.cos(th) * 256), round(r * np.sin(th) * 256)
        A = (al, -be, be, al) if trial % 3 else tuple(int(v) for v in rng.integers(-300, 300, 4))
        B1, B2 = (31, 31) if trial % 2 else (int(rng.integers(0, 12)), int(rng.integers(0, 12)))
        got, n = _search(A, 8, ar, B1, B2)
        ref, n2 = _search_numpy(A, 8, ar, B1, B2)
        assert n == n2 == (2 * B1 + 1) * (2 * B2 + 1)
        assert [a.tolist() for a in got] == [a.tolist() for a in ref]  # same states, same order
        assert set(zip(got[0].tolist(), got[1].tolist())) == _walk_cycles(A, 8, ar, B1, B2)


@pytest.mark.parametrize("acc", [63, 64])
def test_compiled_coupled_search_on_32_bit_words(acc):
    # data and coefficient words 64 bits together (the search's widest case): every sum of two
    # products stays inside int64 for states strictly inside the data word; the compiled search
    # against the numpy search and the per-state walk (Python integers) on boxes near zero
    from coefc.analyse.coupled_cycles import _search, _search_numpy
    from coefc.simulate import HAVE_ENGINE

    if not HAVE_ENGINE:
        pytest.skip("no compiled engine core")
    rng = np.random.default_rng(5)
    for rounding in ("add-half", "truncate", "half-even"):
        ar = Arithmetic(data=QFormat(1, 31), coef=QFormat(2, 30), acc_bits=acc, rounding=rounding,
                        overflow="saturate", structure="coupled")
        for _ in range(4):
            r, th = rng.uniform(0.99, 1.0), rng.uniform(1e-3, 0.05)
            al, be = round(r * np.cos(th) * 2 ** 30), round(r * np.sin(th) * 2 ** 30)
            A = (al, -be, be, al)
            got, _ = _search(A, 30, ar, 15, 15)
            ref, _ = _search_numpy(A, 30, ar, 15, 15)
            assert [a.tolist() for a in got] == [a.tolist() for a in ref]
            assert set(zip(got[0].tolist(), got[1].tolist())) == _walk_cycles(A, 30, ar, 15, 15)
    # a box at the edge of the word: products near 2^62, a sum near 2^63 (acc 63 wraps it)
    ar = Arithmetic(data=QFormat(1, 31), coef=QFormat(2, 30), acc_bits=acc, structure="coupled")
    A = (-(1 << 31), -(1 << 31), (1 << 31) - 1, 1 << 30)
    top = (1 << 31) - 2
    s1 = np.array([top, -top, top], dtype=np.int64)
    s2 = np.array([top, -top, -top], dtype=np.int64)
    t1, t2, bad = step(s1, s2, A, 30, ar)
    from coefc.qformat import round_shift

    lo, hi = ar.data.min_int, ar.data.max_int
    for j, (a, b) in enumerate(zip(s1.tolist(), s2.tolist())):
        want, over = [], False
        for c1, c2 in ((A[0], A[1]), (A[2], A[3])):
            t = c1 * a + c2 * b  # Python integers: exact
            w = ((t + (1 << (acc - 1))) % (1 << acc)) - (1 << (acc - 1))
            v = round_shift(w, 30, ar.rounding)
            want.append(max(lo, min(hi, v)))
            over |= w != t or want[-1] != v
        assert (int(t1[j]), int(t2[j]), bool(bad[j])) == (want[0], want[1], over)
