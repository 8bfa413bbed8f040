"""The bit-true engine against the independent exact model (tests/exact_model.py).

Random sections, FIRs, gains and delays, random formats, every rounding mode,
saturation and wrap, accumulators narrower than the products (wrap events) and
wider than 64 bits (the exact Python path).  Equality is exact: outputs, per-op
outputs and both overflow counts.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from coefc import simulate as sim
from coefc.program import Arithmetic, ChannelProgram, DelayOp, FirOp, GainOp, SectionOp, STRUCTURE_TABLE, STRUCTURES
from coefc.qformat import OVERFLOW_MODES, ROUNDING_MODES, QFormat

import exact_model

SETTINGS = dict(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def arithmetics(draw, max_acc=64, wide=False):
    wd = draw(st.integers(4, 40 if wide else 32))
    wc = draw(st.integers(4, 40 if wide else min(32, 64 - wd)))
    fc = draw(st.integers(2, wc - 1))
    acc = draw(st.integers(wd, max_acc))
    return Arithmetic(data=QFormat(1, wd - 1), coef=QFormat(wc - fc, fc), acc_bits=acc,
                      rounding=draw(st.sampled_from(ROUNDING_MODES)),
                      overflow=draw(st.sampled_from(OVERFLOW_MODES)),
                      structure=draw(st.sampled_from(STRUCTURES)))


def _sec(c, shift, structure):
    """A section of *structure* from coefficient words *c* (8 words for the coupled form, else 5)."""
    if STRUCTURE_TABLE[structure].state_space:
        c = list(c) + list(c)[: 8 - len(c)] if len(c) < 8 else list(c)
        return SectionOp(b=tuple(c[:4]), a=tuple(c[4:8]), shift=shift, structure=structure)
    return SectionOp(b=tuple(c[:3]), a=tuple(c[3:5]), shift=shift, structure=structure)


def _word(draw, fmt):
    edge = st.sampled_from([fmt.min_int, fmt.max_int, 0, -1, 1])
    return draw(st.one_of(edge, st.integers(fmt.min_int, fmt.max_int)))


@st.composite
def ops(draw, ar):
    fc = ar.coef.frac_bits
    kind = draw(st.sampled_from(("sos", "sos", "sos", "fir", "gain", "delay")))
    shift = draw(st.integers(max(fc - 62, -4), fc - 1))
    if kind == "sos":
        c = [_word(draw, ar.coef) for _ in range(8)]
        if STRUCTURE_TABLE[ar.structure].wide_numerator:  # df1ef-wide: low words of b as well
            b_lo = tuple(_word(draw, ar.coef) for _ in range(3))
            return SectionOp(b=tuple(c[:3]), a=tuple(c[3:5]), shift=shift, structure=ar.structure, a_lo=tuple(c[5:7]),
                             b_lo=b_lo)
        if STRUCTURE_TABLE[ar.structure].wide_feedback:
            return SectionOp(b=tuple(c[:3]), a=tuple(c[3:5]), shift=shift, structure=ar.structure, a_lo=tuple(c[5:7]))
        return _sec(c, shift, ar.structure)
    if kind == "fir":
        n = draw(st.integers(1, 9))
        taps = [_word(draw, ar.coef) for _ in range(n)]
        if draw(st.booleans()):
            taps = taps[: (n + 1) // 2] + taps[: n // 2][::-1]
        return FirOp(taps=tuple(taps), shift=shift, symmetric=taps == taps[::-1])
    if kind == "gain":
        return GainOp(coef=_word(draw, ar.coef), shift=shift)
    return DelayOp(draw(st.integers(0, 5)))


@st.composite
def programs(draw, max_acc=64, wide=False):
    ar = draw(arithmetics(max_acc, wide))
    n_ops = draw(st.integers(1, 3))
    prog = ChannelProgram("t", 48000, ar, tuple(draw(ops(ar)) for _ in range(n_ops)))
    n = draw(st.integers(0, 40))
    x = [_word(draw, ar.data) for _ in range(n)]
    return prog, x


def _compare(prog, x, exact=False):
    t = sim.simulate(prog, np.array(x, dtype=np.int64), trace=True, _exact=exact)
    y, nodes, ovf, aovf = exact_model.run_program(prog, x)
    assert t.y.tolist() == y
    assert [n.tolist() for n in t.node_outputs] == nodes
    assert t.overflow_counts == ovf
    assert t.acc_overflow_counts == aovf


def test_compiled_core_is_built():
    assert sim.HAVE_ENGINE, "coefc._engine did not build; reinstall with a C compiler"


@settings(**SETTINGS)
@given(programs())
def test_compiled_engine_equals_exact_model(case):
    prog, x = case
    assert sim._fast_ok(prog)
    _compare(prog, x)


@settings(**SETTINGS)
@given(programs())
def test_python_path_equals_exact_model(case):
    prog, x = case
    _compare(prog, x, exact=True)


@settings(**dict(SETTINGS, max_examples=60))
@given(programs(max_acc=100, wide=True))
def test_wide_accumulators_and_words_equal_exact_model(case):
    # acc_bits up to 100 and data + coefficient words up to 80 bits: exact path
    prog, x = case
    _compare(prog, x)


@pytest.mark.parametrize("structure", STRUCTURES)
@pytest.mark.parametrize("acc", [32, 40, 64])
def test_full_scale_32_bit_words_hit_both_accumulator_paths(structure, acc):
    # Q1.31 data and Q2.30 coefficients with extreme coefficients: sums leave int64
    ar = Arithmetic(data=QFormat(1, 31), coef=QFormat(2, 30), acc_bits=acc, structure=structure)
    big = (1 << 31) - 1
    prog = ChannelProgram("t", 48000, ar, (
        _sec((big, -big - 1, big, -big - 1, big), 0, structure),
        _sec((1 << 28, 1 << 29, 1 << 28, -(1 << 31) + 5, (1 << 30) - 9), 0, structure),
    ))
    rng = np.random.default_rng(7)
    x = rng.choice([-(1 << 31), (1 << 31) - 1, 0, 12345], size=200).tolist()
    _compare(prog, x)


def test_symmetric_fir_folding_gives_identical_results():
    # folding symmetric taps is exact in integer arithmetic (common practice, no source)
    rng = np.random.default_rng(3)
    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(1, 15), acc_bits=32, rounding="half-even")
    for n in (6, 7):
        half = rng.integers(-30000, 30000, (n + 1) // 2).tolist()
        taps = half + half[: n // 2][::-1]
        x = rng.integers(-32768, 32768, 100).tolist()
        prog = ChannelProgram("t", 48000, ar, (FirOp(taps=tuple(taps), shift=0, symmetric=True),))
        m = exact_model.Model(16, 15, 32, "half-even", "saturate")
        assert sim.simulate(prog, x).tolist() == m.fir_folded(x, taps, 0)


@pytest.mark.parametrize("structure", ["df1", "tdf2"])
def test_float32_engine_equals_float32_model(structure):
    rng = np.random.default_rng(5)
    ar = Arithmetic(kind="float32", structure=structure, data=None, coef=None)
    f = lambda v: float(np.float32(v))  # noqa: E731
    prog = ChannelProgram("t", 48000, ar, (
        GainOp(coef=f(0.7)),
        SectionOp(b=(f(0.2), f(0.3), f(0.1)), a=(f(-1.6), f(0.81)), structure=structure),
        FirOp(taps=tuple(f(v) for v in rng.standard_normal(7) / 4)),
        DelayOp(3),
    ))
    x = (rng.standard_normal(500) * 0.3).astype(np.float32)
    y = sim.simulate(prog, x)
    assert y.dtype == np.float32
    assert np.array_equal(y, exact_model.run_float32(prog, x))
    assert np.array_equal(y, sim.simulate(prog, x, _exact=True))


def test_float32_engine_close_to_scipy_sosfilt():
    # scipy.signal.sosfilt (float64) as the reference library; float32 error ~1e-6
    from scipy import signal

    sos = signal.butter(4, 2000, fs=48000, output="sos")
    ar = Arithmetic(kind="float32", data=None, coef=None)
    ops_ = tuple(SectionOp(b=tuple(float(np.float32(v)) for v in r[:3]),
                           a=tuple(float(np.float32(v)) for v in r[4:])) for r in sos)
    prog = ChannelProgram("t", 48000, ar, ops_)
    x = (np.random.default_rng(1).standard_normal(4000) * 0.2).astype(np.float32)
    ref = signal.sosfilt(sos, x.astype(np.float64))
    assert np.max(np.abs(sim.simulate(prog, x) - ref)) < 1e-5


def test_input_out_of_range_is_a_data_error():
    from coefc.errors import DataError

    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32)
    prog = ChannelProgram("t", 48000, ar, (GainOp(coef=1 << 14),))
    with pytest.raises(DataError, match="outside Q1.15"):
        sim.simulate(prog, [0, 40000])
    with pytest.raises(DataError, match="integer data words"):
        sim.simulate(prog, np.zeros(3))


@settings(**dict(SETTINGS, max_examples=60))
@given(st.integers(0, 2 ** 31 - 1), st.sampled_from(ROUNDING_MODES))
def test_tdf2_equals_df1_without_accumulator_wrap(seed, rounding):
    # with unrounded accumulator-width states, tdf2's states hold exactly the
    # partial sums of df1 (from memory: Oppenheim & Schafer sec. 6.3-6.5, both realise
    # (b0 + b1 z^-1 + b2 z^-2)/(1 + a1 z^-1 + a2 z^-2)), so outputs agree bit for bit
    rng = np.random.default_rng(seed)
    r, th = rng.uniform(0.1, 0.99), rng.uniform(0, np.pi)
    a = (round(-2 * r * np.cos(th) * 2 ** 30), round(r * r * 2 ** 30))
    b = tuple(int(v) for v in rng.integers(-(1 << 28), 1 << 28, 3))
    x = rng.integers(-(1 << 31), 1 << 31, 300)
    out = {}
    for structure in ("df1", "tdf2"):
        ar = Arithmetic(structure=structure, rounding=rounding, acc_bits=64)
        prog = ChannelProgram("t", 48000, ar, (SectionOp(b=b, a=a, shift=0, structure=structure),))
        t = sim.simulate(prog, x, trace=True)
        assert t.acc_overflow_counts == [0]
        out[structure] = t.y
    assert np.array_equal(out["df1"], out["tdf2"])


@pytest.mark.parametrize("structure", ["df1", "df1ef"])
def test_fast_path_detects_a_difference_that_leaves_int64(structure):
    # Each partial sum (b1 x1 + b2 x2, a1 y1 + a2 y2) fits int64 here, but their
    # difference reaches 2^63 on this full-scale input: the engine must see the
    # accumulator overflow exactly as the exact model does.
    ar = Arithmetic(data=QFormat(1, 31), coef=QFormat(2, 30), acc_bits=64, structure=structure)
    sec = SectionOp(b=(796896755, -1734506556, -1956332619), a=(-2144487839, 1728701087), structure=structure)
    M, m = (1 << 31) - 1, -(1 << 31)
    x = [M] * 5 + [m, M, m, M, M, M, M, m, m, m, m, M, M, m, M, M, m, M, M, m, m, M, M, M, m]
    prog = ChannelProgram("t", 48000, ar, (sec,))
    _compare(prog, x)
    assert sim.simulate(prog, x, trace=True).acc_overflow_counts[0] > 0


@pytest.mark.parametrize("structure", STRUCTURES)
@pytest.mark.parametrize("rounding", ROUNDING_MODES)
def test_first_sum_wraps_while_the_states_stay_in_range(structure, rounding):
    # a single large tap and a 40-bit accumulator: only B0 x[n] leaves the range
    ar = Arithmetic(data=QFormat(1, 31), coef=QFormat(2, 30), acc_bits=40, structure=structure, rounding=rounding)
    c = (1 << 29, 0, 0, 0, 0, 0, 0, 0) if STRUCTURE_TABLE[structure].state_space else (1 << 29, 0, 0, 0, 0)
    prog = ChannelProgram("t", 48000, ar, (_sec(c, 0, structure),))
    x = [(1 << 31) - 1, -(1 << 31), 1 << 20, -(1 << 25), 12345, (1 << 31) - 1]
    _compare(prog, x)
    assert sim.simulate(prog, x, trace=True).acc_overflow_counts[0] > 0


@pytest.mark.parametrize("rounding", ROUNDING_MODES)
def test_tdf2_fast_path_detects_state_sums_that_leave_int64(rounding):
    # Q1.30 data with 33-bit Q3.30 coefficients (64 bits together): the paired
    # products stay exact in int64, but adding a state to them leaves int64 on
    # these full-scale samples (both the output sum and the first state sum)
    ar = Arithmetic(data=QFormat(1, 30), coef=QFormat(3, 30), acc_bits=64, structure="tdf2", rounding=rounding)
    sec = SectionOp(b=(-1323187808, 2974090473, -4194493868), a=(95055989, 2367076241), structure="tdf2")
    M, m = (1 << 30) - 1, -(1 << 30)
    prog = ChannelProgram("t", 48000, ar, (sec,))
    assert sim._fast_ok(prog)
    x = [M, M, m, m, M, m, M, M, m, m, m, M]
    _compare(prog, x)
    assert sim.simulate(prog, x, trace=True).acc_overflow_counts[0] > 0


def test_tdf2_second_state_wraps_alone():
    ar = Arithmetic(data=QFormat(1, 31), coef=QFormat(2, 30), acc_bits=40, structure="tdf2")
    prog = ChannelProgram("t", 48000, ar, (SectionOp(b=(0, 0, 1 << 29), a=(0, 0), structure="tdf2"),))
    x = [(1 << 31) - 1, -(1 << 31), 1 << 20, -(1 << 25), 12345, (1 << 31) - 1, 0, 0]
    _compare(prog, x)
    assert sim.simulate(prog, x, trace=True).acc_overflow_counts[0] > 0


@pytest.mark.parametrize("rounding", ROUNDING_MODES)
@pytest.mark.parametrize("overflow", OVERFLOW_MODES)
def test_wide_feedback_section_equals_exact_model_on_every_mode(rounding, overflow):
    # df1-wide-fb against the independent model (recurrence of coefc.program's docstring), 16-bit words:
    # a low-frequency pole pair whose high words alone sit on the unit circle (a1 = -2, a2 = 1), the low words
    # pull it inside; a full-scale square wave drives it into saturation or wrap
    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32, rounding=rounding, overflow=overflow,
                    structure="df1-wide-fb")
    secs = (SectionOp(b=(300, -600, 300), a=(-32768, 16384), a_lo=(9000, -8999), shift=1, structure="df1-wide-fb"),
            SectionOp(b=(16384, 0, -16384), a=(-32767, 16383), a_lo=(-16384, 16383), structure="df1-wide-fb"))
    x = np.tile(np.r_[np.full(40, 32767), np.full(40, -32768)], 5).astype(np.int64)
    prog = ChannelProgram("t", 48000, ar, secs)
    _compare(prog, x.tolist())
    _compare(prog, x.tolist(), exact=True)


EF_WIDE_SECS = (
    # a1 = -2, a2 = 1 in the high words alone (a double pole on z = 1); the low words pull it inside
    SectionOp(b=(300, -600, 300), a=(-32768, 16384), a_lo=(9000, -8999), shift=1, structure="df1ef-wide-fb"),
    SectionOp(b=(16384, 0, -16384), a=(-32767, 16383), a_lo=(-16384, 16383), structure="df1ef-wide-fb"),
)


@pytest.mark.parametrize("acc_bits", [32, 24])
@pytest.mark.parametrize("rounding", ROUNDING_MODES)
@pytest.mark.parametrize("overflow", OVERFLOW_MODES)
def test_error_feedback_wide_section_equals_exact_model_on_every_mode(rounding, overflow, acc_bits):
    # df1ef-wide-fb against the independent model (recurrence of coefc.program's docstring), 16-bit words, both
    # the compiled core and the exact Python path; a full-scale square wave drives it into saturation or wrap,
    # and a 24-bit accumulator wraps (the residual E is then that of the wrapped accumulator)
    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=acc_bits, rounding=rounding,
                    overflow=overflow, structure="df1ef-wide-fb")
    x = np.tile(np.r_[np.full(40, 32767), np.full(40, -32768), np.arange(-200, 200, 5)], 4).astype(np.int64)
    prog = ChannelProgram("t", 48000, ar, EF_WIDE_SECS)
    assert sim._fast_ok(prog)
    _compare(prog, x.tolist())
    _compare(prog, x.tolist(), exact=True)
    t = sim.simulate(prog, x, trace=True)
    if acc_bits == 24:
        assert sum(t.acc_overflow_counts) > 0
    # the structure is neither of its parts: on a small input (no overflow) error feedback and the low words
    # both change the output
    # (a stable low-frequency pole pair, radius 0.9995, 20 Hz at 48 kHz)
    r, th = 0.9995, 2 * np.pi * 20 / 48000
    a = (-2 * r * np.cos(th), r * r)
    hi = (round(a[0] * 2 ** 13), round(a[1] * 2 ** 13))  # coefficient shift 1: Q2.14 holds |a1| < 2 only so
    lo = tuple(round((v * 2 ** 13 - h) * 2 ** 15) for v, h in zip(a, hi))
    sec = SectionOp(b=(40, 0, -40), a=hi, a_lo=lo, shift=1, structure="df1ef-wide-fb")
    small = np.random.default_rng(7).integers(-3000, 3001, 600)
    p1 = ChannelProgram("t", 48000, ar, (sec,))
    y = sim.simulate(p1, small, trace=True)
    assert y.overflow_counts == [0] and y.acc_overflow_counts == [0]
    _compare(p1, small.tolist())
    for other in ("df1-wide-fb", "df1ef"):
        s2 = SectionOp(b=sec.b, a=sec.a, shift=1, structure=other, a_lo=lo if other == "df1-wide-fb" else ())
        y_other = sim.simulate(ChannelProgram("t", 48000, ar.with_(structure=other), (s2,)), small)
        assert not np.array_equal(y_other, y.y)


EF_WIDE_NUM_SECS = (
    # EF_WIDE_SECS with double-word numerators: low words at both ends of their range, and the floored low
    # numerator products of a full-scale input
    SectionOp(b=(300, -600, 300), a=(-32768, 16384), a_lo=(9000, -8999), b_lo=(16384, -16384, 777), shift=1,
              structure="df1ef-wide"),
    SectionOp(b=(16384, 0, -16384), a=(-32767, 16383), a_lo=(-16384, 16383), b_lo=(-16383, 5, 16383),
              structure="df1ef-wide"),
)


@pytest.mark.parametrize("acc_bits", [32, 24])
@pytest.mark.parametrize("rounding", ROUNDING_MODES)
@pytest.mark.parametrize("overflow", OVERFLOW_MODES)
def test_double_word_numerator_section_equals_exact_model_on_every_mode(rounding, overflow, acc_bits):
    # df1ef-wide against the independent model (recurrence of coefc.program's docstring), 16-bit words, the
    # compiled core and the exact Python path, saturating/wrapping inputs and a wrapping 24-bit accumulator
    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=acc_bits, rounding=rounding,
                    overflow=overflow, structure="df1ef-wide")
    x = np.tile(np.r_[np.full(40, 32767), np.full(40, -32768), np.arange(-200, 200, 5)], 4).astype(np.int64)
    prog = ChannelProgram("t", 48000, ar, EF_WIDE_NUM_SECS)
    assert sim._fast_ok(prog)
    _compare(prog, x.tolist())
    _compare(prog, x.tolist(), exact=True)
    # the low numerator words act: without them (df1ef-wide-fb, same high words) the output differs, and with
    # low words of zero df1ef-wide is df1ef-wide-fb sample for sample
    fb = tuple(SectionOp(b=s.b, a=s.a, a_lo=s.a_lo, shift=s.shift, structure="df1ef-wide-fb") for s in EF_WIDE_NUM_SECS)
    y_fb = sim.simulate(ChannelProgram("t", 48000, ar.with_(structure="df1ef-wide-fb"), fb), x)
    assert not np.array_equal(y_fb, sim.simulate(prog, x))
    zero = tuple(SectionOp(b=s.b, a=s.a, a_lo=s.a_lo, b_lo=(0, 0, 0), shift=s.shift, structure="df1ef-wide")
                 for s in EF_WIDE_NUM_SECS)
    assert np.array_equal(y_fb, sim.simulate(ChannelProgram("t", 48000, ar, zero), x))


@pytest.mark.parametrize("rounding", ROUNDING_MODES)
def test_double_word_numerator_beyond_64_bits_takes_the_exact_path(rounding):
    ar = Arithmetic(data=QFormat(1, 31), coef=QFormat(2, 30), acc_bits=80, rounding=rounding, structure="df1ef-wide")
    sec = SectionOp(b=(1 << 20, -(1 << 21), 1 << 20), a=(-(1 << 31), (1 << 30) - 1), a_lo=((1 << 30) - 7, 12345),
                    b_lo=((1 << 30) - 1, -(1 << 30), 99), structure="df1ef-wide")
    prog = ChannelProgram("t", 48000, ar, (sec,))
    assert not sim._fast_ok(prog)
    x = np.r_[np.full(30, (1 << 31) - 1), np.full(30, -(1 << 31)), np.zeros(40)].astype(np.int64)
    _compare(prog, x.tolist())


@pytest.mark.parametrize("rounding", ROUNDING_MODES)
def test_error_feedback_wide_section_beyond_64_bits_takes_the_exact_path(rounding):
    # Q1.31 data, Q2.30 coefficients and an 80-bit accumulator: the compiled core does not apply, the exact
    # Python path runs the recurrence and must equal the independent model
    ar = Arithmetic(data=QFormat(1, 31), coef=QFormat(2, 30), acc_bits=80, rounding=rounding,
                    structure="df1ef-wide-fb")
    sec = SectionOp(b=(1 << 20, -(1 << 21), 1 << 20), a=(-(1 << 31), (1 << 30) - 1), a_lo=((1 << 30) - 7, 12345),
                    structure="df1ef-wide-fb")
    prog = ChannelProgram("t", 48000, ar, (sec,))
    assert not sim._fast_ok(prog)
    x = np.r_[np.full(30, (1 << 31) - 1), np.full(30, -(1 << 31)), np.zeros(40)].astype(np.int64)
    _compare(prog, x.tolist())
@pytest.mark.parametrize("rounding", ROUNDING_MODES)
@pytest.mark.parametrize("overflow", OVERFLOW_MODES)
@pytest.mark.parametrize("acc", [24, 32, 40])
def test_coupled_form_equals_exact_model_at_full_scale(rounding, overflow, acc):
    # Q1.15 data, Q2.14 coefficients (a 16-bit part): poles 0.999 e^(+-j 0.01) as a rotation
    # (Rader & Gold 1967, from memory: alpha = r cos(theta), beta = r sin(theta)), an output
    # combination that saturates, full-scale and random inputs; a 24-bit accumulator wraps
    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=acc, rounding=rounding,
                    overflow=overflow, structure="coupled")
    al, be = round(0.999 * np.cos(0.01) * 2 ** 14), round(0.999 * np.sin(0.01) * 2 ** 14)
    prog = ChannelProgram("t", 48000, ar, (
        SectionOp(b=(8000, 30000, -30000, 2000), a=(al, -be, be, al), shift=0, structure="coupled"),
        SectionOp(b=(-32768, 32767, 32767, -32768), a=(32767, -32768, 32767, 32767), shift=1, structure="coupled"),
    ))
    rng = np.random.default_rng(13)
    x = np.concatenate([np.full(300, 32767), np.full(200, -32768),
                        rng.integers(-32768, 32768, 800)]).tolist()
    _compare(prog, x)
    _compare(prog, x, exact=True)
    t = sim.simulate(prog, x, trace=True)
    if acc == 24:
        assert t.acc_overflow_counts[0] > 0 and t.acc_overflow_counts[1] > 0
    else:
        assert t.overflow_counts[0] > 0  # the states (DC gain about 8.6) overflow their word


# ---------------------------------------------------------------- rounded products
# [arithmetic] product_shift / product_rounding: every product rounded by 2^P before
# it is added (coefc.program docstring, "Rounded products"); the exact model is
# written from that text.

#: the structures coefc models with rounded products (the others need exact products: coefc.targetspec)
EXACT_PRODUCT_FREE = [s for s in STRUCTURES if not (STRUCTURE_TABLE[s].wide_feedback or STRUCTURE_TABLE[s].state_space)]


@st.composite
def rounded_product_programs(draw, product_rounding=None):
    wd = draw(st.integers(4, 32))
    wc = draw(st.integers(4, min(32, 64 - wd)))
    fc = draw(st.integers(2, wc - 1))
    P = draw(st.integers(1, fc))
    ar = Arithmetic(data=QFormat(1, wd - 1), coef=QFormat(wc - fc, fc), acc_bits=draw(st.integers(wd, 64)),
                    rounding=draw(st.sampled_from(ROUNDING_MODES)), overflow=draw(st.sampled_from(OVERFLOW_MODES)),
                    structure=draw(st.sampled_from(EXACT_PRODUCT_FREE)), product_shift=P,
                    product_rounding=product_rounding or draw(st.sampled_from(ROUNDING_MODES)))
    out = []
    for _ in range(draw(st.integers(1, 3))):
        op = draw(ops(ar))
        if not isinstance(op, DelayOp):  # the final shift Fc - s - P must not be negative
            op = type(op)(**{**op.__dict__, "shift": draw(st.integers(max(fc - P - 62, -4), fc - P))})
        out.append(op)
    n = draw(st.integers(0, 40))
    return ChannelProgram("t", 48000, ar, tuple(out)), [_word(draw, ar.data) for _ in range(n)]


@pytest.mark.parametrize("product_rounding", ROUNDING_MODES)
@settings(**dict(SETTINGS, max_examples=150))
@given(data=st.data())
def test_rounded_products_engine_equals_exact_model(product_rounding, data):
    prog, x = data.draw(rounded_product_programs(product_rounding))
    assert sim._fast_ok(prog)
    _compare(prog, x)
    _compare(prog, x, exact=True)


@pytest.mark.parametrize("structure", EXACT_PRODUCT_FREE)
@pytest.mark.parametrize("product_rounding", ROUNDING_MODES)
def test_rounded_products_by_hand(structure, product_rounding):
    """A worked case: Q1.7 data, Q2.6 coefficients, P = 6 = Fc (no final shift), so every
    output is the sum of the rounded products; checked against Python's own rounding."""
    import math
    from fractions import Fraction

    rnd = {"add-half": lambda f: math.floor(f + Fraction(1, 2)), "truncate": math.floor,
           "half-even": round, "toward-zero": math.trunc}[product_rounding]  # Python semantics
    ar = Arithmetic(data=QFormat(1, 7), coef=QFormat(2, 6), acc_bits=16, rounding="add-half",
                    overflow="saturate", structure=structure, product_shift=6, product_rounding=product_rounding)
    b, a = (23, -41, 9), (-70, 30)
    prog = ChannelProgram("t", 48000, ar, (SectionOp(b, a, 0, structure),))
    x = [100, -37, 5, 0, 0, -128, 127, 3]
    y = sim.simulate(prog, np.array(x, dtype=np.int64)).tolist()
    q = lambda c, v: rnd(Fraction(c * v, 64))  # noqa: E731
    x1 = x2 = y1 = y2 = 0
    s1 = s2 = 0
    for n, xn in enumerate(x):
        if structure == "tdf2":
            yn = max(-128, min(127, q(b[0], xn) + s1))
            s1 = q(b[1], xn) + q(-a[0], yn) + s2
            s2 = q(b[2], xn) + q(-a[1], yn)
        else:  # df1ef feeds back E = 0: with no final shift there is no residual
            yn = max(-128, min(127, q(b[0], xn) + q(b[1], x1) + q(b[2], x2) + q(-a[0], y1) + q(-a[1], y2)))
        assert y[n] == yn, n
        x2, x1, y2, y1 = x1, xn, y1, yn


@st.composite
def cascades(draw):
    """Up to 19 sections of one structure (three groups of the 8-lane path) on up to 300 samples."""
    ar = draw(arithmetics())
    if STRUCTURE_TABLE[ar.structure].state_space or STRUCTURE_TABLE[ar.structure].wide_feedback:
        ar = ar.with_(structure="df1")
    fc = ar.coef.frac_bits
    small = draw(st.booleans())  # small coefficients: the vector steps; full words: the exact fall-back
    secs = []
    for _ in range(draw(st.integers(1, 19))):
        c = [_word(draw, ar.coef) >> (ar.coef.width // 2 if small else 0) for _ in range(5)]
        secs.append(_sec(c, draw(st.integers(max(fc - 62, -4), fc - 1)), ar.structure))
    n = draw(st.integers(0, 300))
    return ChannelProgram("t", 48000, ar, tuple(secs)), [_word(draw, ar.data) for _ in range(n)]


@pytest.mark.parametrize("lanes", [0, 1])
@settings(**dict(SETTINGS, max_examples=150))
@given(cascades())
def test_long_cascades_equal_exact_model_with_and_without_lanes(lanes, case):
    # the 512-bit lane path (where the processor has it) and the scalar loops, each against
    # the exact model; more sections than one group of lanes, every rounding and overflow mode
    prog, x = case
    before = sim._engine.lanes()
    try:
        sim._engine.lanes(lanes)
        _compare(prog, x)
    finally:
        sim._engine.lanes(int(before))
