"""Q formats, rounding and overflow against exact rational arithmetic and textbook facts."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from coefc.qformat import (OVERFLOW_MODES, ROUNDING_MODES, QFormat, fit_word, quantise, round_real,
                           round_shift)


def _ref_round(q: Fraction, mode: str) -> int:
    # exact rational reference (Python's round() of a Fraction is round-half-even)
    return {"add-half": math.floor(q + Fraction(1, 2)), "truncate": math.floor(q),
            "half-even": round(q), "toward-zero": math.trunc(q)}[mode]


def test_parse_and_print():
    # Q notation with the sign bit counted in m (common practice, no source)
    assert QFormat.parse("Q1.15").width == 16
    assert QFormat.parse("q2.30") == QFormat(2, 30)
    assert QFormat.parse("Q31") == QFormat(1, 31)
    assert str(QFormat.parse("Q15")) == "Q1.15"
    f = QFormat.parse("Q1.15")
    assert (f.min_int, f.max_int) == (-32768, 32767)
    assert f.max_value == 1 - 2 ** -15 and f.min_value == -1.0
    assert QFormat.parse("Q2.30").min_value == -2.0


@pytest.mark.parametrize("bad", ["Q", "Q1.", "1.15", "Q-1.3", "Qa.b", "Q0.15", "Q40.40"])
def test_parse_rejects_with_the_fix(bad):
    with pytest.raises(ValueError) as e:
        QFormat.parse(bad)
    assert str(e.value)


@settings(max_examples=400, deadline=None)
@given(st.integers(-(1 << 70), 1 << 70), st.integers(1, 40), st.sampled_from(ROUNDING_MODES))
def test_round_shift_python_ints_equal_exact_rationals(v, k, mode):
    assert round_shift(v, k, mode) == _ref_round(Fraction(v, 1 << k), mode)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.integers(-(1 << 63), (1 << 63) - 1), min_size=1, max_size=20), st.integers(1, 62),
       st.sampled_from(ROUNDING_MODES))
def test_round_shift_int64_arrays_are_exact_over_the_whole_range(vals, k, mode):
    got = round_shift(np.array(vals, dtype=np.int64), k, mode)
    assert got.tolist() == [_ref_round(Fraction(v, 1 << k), mode) for v in vals]


def test_round_shift_ties():
    # the tie rules the module docstring states, on the four ties +-0.5, +-1.5
    v = [-3, -1, 1, 3]  # /2
    assert [round_shift(x, 1, "add-half") for x in v] == [-1, 0, 1, 2]
    assert [round_shift(x, 1, "half-even") for x in v] == [-2, 0, 0, 2]
    assert [round_shift(x, 1, "truncate") for x in v] == [-2, -1, 0, 1]
    assert [round_shift(x, 1, "toward-zero") for x in v] == [-1, 0, 0, 1]
    assert round_shift(5, -3, "add-half") == 40


@settings(max_examples=300, deadline=None)
@given(st.integers(-(1 << 66), 1 << 66), st.integers(2, 64), st.sampled_from(OVERFLOW_MODES))
def test_fit_word_python_ints(v, width, mode):
    lo, hi = -(1 << (width - 1)), (1 << (width - 1)) - 1
    got = fit_word(v, width, mode)
    assert lo <= got <= hi
    if mode == "saturate":
        assert got == min(hi, max(lo, v))
    else:  # two's complement: congruent modulo 2^width
        assert (got - v) % (1 << width) == 0


@settings(max_examples=100, deadline=None)
@given(st.lists(st.integers(-(1 << 63), (1 << 63) - 1), min_size=1, max_size=10), st.integers(2, 64),
       st.sampled_from(OVERFLOW_MODES))
def test_fit_word_arrays_equal_python_ints(vals, width, mode):
    got = fit_word(np.array(vals, dtype=np.int64), width, mode)
    assert got.tolist() == [fit_word(v, width, mode) for v in vals]


def test_round_real_nearest_is_exact_below_one_half():
    x = np.array([0.49999999999999994, -0.5, 0.5, 2.5, -2.5, 1e16 + 2])
    assert round_real(x, "add-half").tolist() == [0.0, 0.0, 1.0, 3.0, -2.0, 1e16 + 2]
    assert round_real(x, "half-even").tolist() == [0.0, -0.0, 0.0, 2.0, -2.0, 1e16 + 2]


def test_quantise_reports_every_saturated_value():
    q = quantise([0.5, 1.0, -1.0, 1.5, -3.0], QFormat.parse("Q1.15"))
    assert q.ints == (16384, 32767, -32768, 32767, -32768)
    assert q.saturated == (1, 3, 4)
    w = quantise([1.0], QFormat.parse("Q1.15"), overflow="wrap")
    assert w.ints == (-32768,) and w.saturated == (0,)
    with pytest.raises(ValueError):
        quantise([float("nan")], QFormat.parse("Q1.15"))


@pytest.mark.parametrize("mode, mean, var", [
    # Rounding to step q: error mean 0, variance q^2/12; two's-complement truncation
    # (floor): mean -q/2, variance q^2/12 (from memory: Oppenheim & Schafer,
    # Discrete-Time Signal Processing, finite-precision chapter; Widrow & Kollar,
    # Quantization Noise, 2008).
    ("add-half", 0.0, 1 / 12),
    ("half-even", 0.0, 1 / 12),
    ("truncate", -0.5, 1 / 12),
])
def test_rounding_error_statistics(mode, mean, var):
    rng = np.random.default_rng(11)
    k = 12  # q = 2^12 units of the input integer
    v = rng.integers(-(1 << 40), 1 << 40, 200_000)
    e = (round_shift(v, k, mode) * (1 << k) - v) / float(1 << k)  # error in units of q
    assert abs(e.mean() - mean) < 0.005
    assert abs(e.var() - var) < 0.003


def test_magnitude_truncation_error_is_below_q_with_opposite_sign():
    # magnitude truncation: |e| < q, sign opposite to the value (from memory:
    # Oppenheim & Schafer, finite-precision chapter)
    rng = np.random.default_rng(12)
    v = rng.integers(-(1 << 30), 1 << 30, 50_000)
    e = round_shift(v, 8, "toward-zero") * 256 - v
    assert np.all(np.abs(e) < 256)
    assert np.all(e * np.sign(v) <= 0)
