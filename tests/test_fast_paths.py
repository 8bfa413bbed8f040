"""Fast paths of the limit-cycle analysis against the reference they replace.

- ``coefc._engine.zero_input`` (the compiled zero-input stepper) against the numpy
  steps of :func:`coefc.analyse.limitcycles.run_zero_input` with ``engine=False``
  and against an exact model written here from the rounding definitions: random
  sections, states, residuals, formats, every rounding mode, saturation and wrap,
  accumulators narrower than the products (wrap events).
- The once-per-process cache of the exhaustive granular searches: the verdicts of
  whole sections must not depend on what was analysed before.
"""

from __future__ import annotations


import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from exact_model import rshift  # rounding of acc / 2^k through exact fractions, from the definitions
from coefc.analyse import limitcycles as lc
from coefc.program import Arithmetic, SectionOp
from coefc.qformat import OVERFLOW_MODES, ROUNDING_MODES, QFormat

SETTINGS = dict(max_examples=250, deadline=None, suppress_health_check=[HealthCheck.too_slow])

pytestmark = pytest.mark.skipif(lc._zero_input_engine() is None, reason="compiled core not built")


# ---------------------------------------------------------------- exact model (written from the definitions)

def wrap(v: int, bits: int) -> int:
    """Two's-complement wrap into ``bits`` bits (common practice, no source)."""
    m = 1 << bits
    v %= m
    return v - m if v >= m >> 1 else v


def exact_steps(y1, y2, e, a1, a2, k, ar: Arithmetic, ef: bool, order: int, steps: int):
    lo, hi = ar.data.min_int, ar.data.max_int
    for _ in range(steps):
        acc = wrap(-a1 * y1 - a2 * y2 + (e if ef else 0), ar.acc_bits)
        v = rshift(acc, k, ar.rounding)
        if ef:
            e = acc - v * (1 << k)
        y = (min(max(v, lo), hi) if ar.overflow == "saturate" else wrap(v, ar.data.width))
        y1, y2 = y, (y1 if order == 2 else 0)
    return y1, y2, e


# ---------------------------------------------------------------- strategies

@st.composite
def cases(draw):
    wd = draw(st.integers(3, 40))
    wc = draw(st.integers(3, min(40, 64 - wd)))
    fc = draw(st.integers(1, wc - 1))
    acc = draw(st.integers(wd, 64))
    ar = Arithmetic(data=QFormat(1, wd - 1), coef=QFormat(wc - fc, fc), acc_bits=acc,
                    rounding=draw(st.sampled_from(ROUNDING_MODES)), overflow=draw(st.sampled_from(OVERFLOW_MODES)))
    k = draw(st.integers(1, min(fc, 62)))
    coef = st.one_of(st.sampled_from([ar.coef.min_int, ar.coef.max_int, 0, -1, 1]),
                     st.integers(ar.coef.min_int, ar.coef.max_int))
    a1, a2 = draw(coef), draw(coef)
    order = 2 if a2 else 1
    n = draw(st.integers(1, 12))
    word = st.one_of(st.sampled_from([ar.data.min_int, ar.data.max_int, 0, -1, 1]),
                     st.integers(ar.data.min_int, ar.data.max_int))
    y1 = draw(st.lists(word, min_size=n, max_size=n))
    y2 = draw(st.lists(word, min_size=n, max_size=n)) if order == 2 else [0] * n
    ef = draw(st.booleans())
    res = st.integers(-(1 << (k - 1)), (1 << (k - 1)))
    e = draw(st.lists(res, min_size=n, max_size=n)) if ef else [0] * n
    steps = draw(st.integers(0, 200))
    tail = draw(st.integers(0, 70))
    gran = draw(st.one_of(st.none(), st.floats(0.0, 2.0 ** 40), st.just(1e300)))
    return ar, k, a1, a2, order, y1, y2, e, ef, steps, tail, gran


def _np(v):
    return np.array(v, dtype=np.int64)


@settings(**SETTINGS)
@given(cases())
def test_engine_zero_input_matches_numpy_steps(case):
    ar, k, a1, a2, order, y1, y2, e, ef, steps, tail, gran = case
    fast = lc.run_zero_input(_np(y1), _np(y2), _np(e), a1, a2, k, ar, ef, order, steps, tail, gran)
    ref = lc.run_zero_input(_np(y1), _np(y2), _np(e), a1, a2, k, ar, ef, order, steps, tail, gran, engine=False)
    for got, want in zip(fast, ref):
        assert got.dtype == want.dtype
        assert np.array_equal(got, want)


@settings(**dict(SETTINGS, max_examples=150))
@given(cases())
def test_engine_zero_input_matches_exact_model(case):
    ar, k, a1, a2, order, y1, y2, e, ef, steps, _, _ = case
    steps = min(steps, 40)
    got = lc.run_zero_input(_np(y1), _np(y2), _np(e), a1, a2, k, ar, ef, order, steps)
    for j in range(len(y1)):
        want = exact_steps(y1[j], y2[j], e[j], a1, a2, k, ar, ef, order, steps)
        if ef and ar.acc_bits == 64 and abs(want[2]) >= 1 << 63:  # pragma: no cover - residual leaves int64
            continue
        assert (int(got[0][j]), int(got[1][j])) == want[:2]
        if ef:
            assert int(got[2][j]) == want[2]


def test_engine_early_stop_and_peaks():
    # a decaying section stops at the first multiple of 64 steps where every state is
    # within the bound; a growing one runs to the end and records its peaks
    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32)
    st0 = _np([32767, -32768, 1000, 5])
    for a1, a2 in ((-round(0.5 * 2 ** 14), round(0.25 * 2 ** 14)), (-round(1.0 * 2 ** 14), round(0.5 * 2 ** 14))):
        for ef in (False, True):
            fast = lc.run_zero_input(st0, st0[::-1], np.zeros(4, np.int64), a1, a2, 14, ar, ef, 2, 512, 64, 2.0)
            ref = lc.run_zero_input(st0, st0[::-1], np.zeros(4, np.int64), a1, a2, 14, ar, ef, 2, 512, 64, 2.0,
                                    engine=False)
            for got, want in zip(fast, ref):
                assert np.array_equal(got, want)


def test_wrap_around_oscillation_same_verdict_both_paths(monkeypatch):
    # 1/(1 - z^-1 + 0.5 z^-2) with wrap-around oscillates for zero input
    # (D. L. Jones, "Limit Cycles", OpenStax CNX m11928 [confirmed]); the compiled and
    # the numpy paths must give the same verdict, period and start state
    ar = Arithmetic(data=QFormat(1, 7), coef=QFormat(2, 6), acc_bits=16, overflow="wrap")
    op = SectionOp(b=(64, 0, 0), a=(-64, 32), shift=0)
    fast = lc.analyse_section(op, 0, ar)
    monkeypatch.setattr(lc, "_zero_input_engine", lambda: None)
    ref = lc.analyse_section(op, 0, ar)
    assert fast == ref
    assert fast.overflow_status == "found"


# ---------------------------------------------------------------- the granular-search cache

def _section(a1: float, a2: float, fc: int, structure: str) -> SectionOp:
    return SectionOp(b=(1 << fc, 0, 0), a=(round(a1 * 2 ** fc), round(a2 * 2 ** fc)), shift=0, structure=structure)


@pytest.mark.parametrize("structure", ["df1", "df1ef"])
@pytest.mark.parametrize("overflow", ["saturate", "wrap"])
@pytest.mark.parametrize("rounding", ["add-half", "truncate", "toward-zero"])
def test_cached_search_equals_fresh_search(structure, overflow, rounding, monkeypatch):
    # a1 = -1.8, a2 = 0.95: a section with granular limit cycles of about 10 LSB
    # (Jackson, Proc. 7th Allerton Conf., 1969; from memory); analysed at several data
    # widths in a row, every verdict equals the one from an empty cache
    op = _section(-1.8, 0.95, 14, structure)
    arith = [Arithmetic(data=QFormat(1, w - 1), coef=QFormat(2, 14), acc_bits=40, rounding=rounding,
                        overflow=overflow, structure=structure) for w in (8, 12, 16, 24)]
    monkeypatch.setattr(lc, "_GRANULAR_CACHE", {})
    warm = [lc.analyse_section(op, 0, ar) for ar in arith]
    assert lc._GRANULAR_CACHE  # the searches were stored
    for ar, got in zip(arith, warm):
        monkeypatch.setattr(lc, "_GRANULAR_CACHE", {})
        assert lc.analyse_section(op, 0, ar) == got
    if rounding != "toward-zero":  # magnitude truncation may leave none; rounding keeps some
        assert any(r.status == "found" for r in warm)
