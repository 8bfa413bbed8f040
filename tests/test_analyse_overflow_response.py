"""Node peak gains, worst-case inputs and coefficient quantisation, against closed forms,
scipy as the reference library and the bit-true engine."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from coefc.analyse.overflow import analyse_overflow
from coefc.analyse.response import analyse_response, grid
from coefc.blocks import ChannelDesign, SosBlock
from coefc.program import Arithmetic, ChannelProgram, GainOp, SectionOp
from coefc.qformat import QFormat

AR = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32, rounding="add-half", overflow="saturate")


def first_order(a: float, gain: float):
    ops = (GainOp(coef=round(gain * 2 ** 14)),
           SectionOp(b=(1 << 14, 0, 0), a=(round(-a * 2 ** 14), 0), shift=0))
    return ChannelProgram("f", 48000.0, AR, ops)


def test_peak_gains_of_a_first_order_section():
    # 1/(1 - a z^-1), 0 < a < 1: ||h||_1 = sum a^n = 1/(1 - a) and max |H| = 1/(1 - a) at DC
    # (geometric series; ||F||_2 <= ||F||_inf <= sum |f|, Jackson 1970, from memory)
    res = analyse_overflow(first_order(0.5, 0.25), run_engine=False)
    node = [g for g in res.nodes if g.op_index == 1 and g.node == "output"][0]
    assert node.l1 == pytest.approx(0.25 * 2.0, rel=1e-9)
    assert node.linf == pytest.approx(0.25 * 2.0, rel=1e-6)
    assert node.headroom_bits == pytest.approx(math.log2(1 / 0.5), rel=1e-9)
    res = analyse_overflow(first_order(-0.5, 0.25), run_engine=False)
    node = [g for g in res.nodes if g.op_index == 1 and g.node == "output"][0]
    assert node.l1 == pytest.approx(0.5, rel=1e-9)  # alternating signs: same l1 ...
    assert node.linf == pytest.approx(0.5, rel=1e-6)  # ... peak at Nyquist


@pytest.mark.parametrize("gain, overflows", [(0.45, False), (0.55, True)])
def test_worst_case_input_through_the_engine(gain, overflows):
    # l1 scaling prevents overflow for every bounded input; above it the sign pattern of the
    # time-reversed impulse response drives the node past full scale (Jackson 1970).  A final
    # gain of 1/2 keeps the channel output inside full scale, so the overflow is internal.
    p = first_order(0.5, gain)
    p = ChannelProgram("f", 48000.0, AR, p.ops + (GainOp(coef=1 << 13),))
    res = analyse_overflow(p)
    assert res.runs >= 1 and res.input_peak == 1.0
    assert (res.overflow_count > 0) == overflows
    assert (res.headroom_bits < 0) == overflows


def test_design_gain_above_one_scales_the_worst_case_input():
    # the channel's own peak gain is 1.1: inputs are limited to where the ideal output stays
    # inside full scale, so only the full-scale runs overflow (the design asks for that gain)
    res = analyse_overflow(first_order(0.5, 0.55))
    assert res.output_peak_gain == pytest.approx(1.1, rel=1e-3)
    assert res.input_peak == pytest.approx(1 / 1.1, rel=1e-3) and res.input_peak < 1 / 1.1
    assert res.overflow_count == 0
    assert res.overflow_count_full_scale > 0


def test_passband_deviation_against_scipy():
    # quantised response of a Butterworth section (scipy.signal.butter as the reference design)
    fs = 48000.0
    sos = signal.butter(2, 1000.0, fs=fs, output="sos")
    design = ChannelDesign("lp", fs, (SosBlock(sos),))
    fc = 10  # a starved Q2.10 coefficient word
    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, fc), acc_bits=32)
    # b0 of this design is tiny: keep it in a separate gain so the section's numerator survives
    g = sos[0, 0]
    bq = [round(v / g * 2 ** (fc - 2)) for v in sos[0, :3]]  # numerator 1, 2, 1 scaled by 1/4 (shift 2)
    aq = [round(v * 2 ** (fc - 2)) for v in sos[0, 4:]]
    gc = round(g * 2 ** (fc + 8))  # the gain keeps 8 more bits through a shift of -8
    prog = ChannelProgram("lp", fs, ar, (GainOp(coef=gc, shift=-8), SectionOp(b=tuple(bq), a=tuple(aq), shift=2)))
    res = analyse_response(design, prog)
    f = grid(fs)
    gq = gc * 2.0 ** (-8 - fc)
    sq = np.array([[v * 2.0 ** (2 - fc) for v in bq] + [1.0] + [v * 2.0 ** (2 - fc) for v in aq]])
    hq = gq * signal.sosfreqz(sq, worN=f, fs=fs)[1]
    hf = signal.sosfreqz(sos, worN=f, fs=fs)[1]
    with np.errstate(divide="ignore"):  # both have their zeros at Nyquist
        dq, df = 20 * np.log10(np.abs(hq)), 20 * np.log10(np.abs(hf))
    mask = df >= df.max() - 3.0
    assert res.passband_deviation_db == pytest.approx(np.max(np.abs(dq - df)[mask]), rel=1e-9)
    assert res.passband_deviation_db > 1e-3  # the starved word really shows
    assert res.stable and res.max_pole_radius == pytest.approx(np.max(np.abs(np.roots([1.0, *sq[0, 4:]]))))
    assert res.pole_displacement == pytest.approx(
        np.max(np.abs(np.sort_complex(np.roots([1.0, *sq[0, 4:]])) - np.sort_complex(np.roots(sos[0, 3:])))),
        rel=1e-6)


def test_explicit_stopband_and_unstable_quantisation():
    fs = 48000.0
    sos = signal.butter(4, 2000.0, fs=fs, output="sos")
    design = ChannelDesign("lp", fs, (SosBlock(sos),))
    res = analyse_response(design, _exact_program(sos, fs, 30), stopband=((12000.0, 24000.0),))
    # 4th-order Butterworth: |H| = 1/sqrt(1 + (f/fc)^8) before warping; the bilinear transform
    # only deepens the stopband, so at 12 kHz it is at least 20*log10(sqrt(1 + 6^8)) = 62.3 dB
    # down (Butterworth magnitude, common practice, no source)
    assert res.stopband_attenuation_db > 62.2
    assert "12000-24000 Hz" in res.stopband_rule
    assert res.passband_deviation_db < 0.01  # 24 to 30 fraction bits: the passband barely moves
    # a pole pair pushed onto the unit circle is reported unstable
    bad = np.array(sos)
    bad[-1, 4:] = [-2 * math.cos(0.3), 1.0]
    res = analyse_response(design, _exact_program(bad, fs, 14))
    assert not res.stable and res.max_pole_radius >= 1.0 - 1e-6


def _exact_program(sos, fs, fc):
    ar = Arithmetic(data=QFormat(1, 31), coef=QFormat(2, fc), acc_bits=64)
    ops = [SectionOp(b=tuple(round(v * 2 ** (fc - 6)) for v in row[:3]), a=tuple(round(v * 2 ** fc) for v in row[4:]),
                     shift=0) for row in sos]
    # numerators were scaled by 2^-6; one gain restores them (keeps the test independent of realise)
    ops.append(GainOp(coef=1 << (fc - 2), shift=len(sos) * 6 + 2))  # 2^(fc-2) * 2^(shift-fc) = 2^(6 n)
    return ChannelProgram("p", fs, ar, tuple(ops))


def test_tdf2_state_nodes():
    # the two states of a transposed direct form II section are nodes too; their peak gains
    # come from the float recursion (Oppenheim & Schafer, sec. 6.5, transposed forms) run here
    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32, structure="tdf2")
    b = (0.3, -0.5, 0.25)
    a = (-1.6, 0.8)
    op = SectionOp(b=tuple(round(v * 2 ** 14) for v in b), a=tuple(round(v * 2 ** 14) for v in a), shift=0,
                   structure="tdf2")
    res = analyse_overflow(ChannelProgram("t", 48000.0, ar, (op,)), run_engine=False)
    bq = [c / 2 ** 14 for c in op.b]
    aq = [c / 2 ** 14 for c in op.a]
    s1 = s2 = 0.0
    l1_s1 = l1_s2 = 0.0
    for n in range(20000):
        x = 1.0 if n == 0 else 0.0
        y = bq[0] * x + s1
        s1, s2 = bq[1] * x - aq[0] * y + s2, bq[2] * x - aq[1] * y
        l1_s1 += abs(s1)
        l1_s2 += abs(s2)
    got = {g.node: g.l1 for g in res.nodes}
    assert got["state 1"] == pytest.approx(l1_s1, rel=1e-9)
    assert got["state 2"] == pytest.approx(l1_s2, rel=1e-9)


@pytest.mark.parametrize("rounding", ["add-half", "truncate"])
def test_l1_promise_from_the_realiser_equals_a_fresh_computation(rounding):
    """The l1 bounds the overflow analysis reads from the realiser's sums (shared, keyed by the
    exact ops) are bit for bit the ones it computes itself when nothing is shared."""
    from coefc.analyse import linear, overflow
    from coefc.analyse.limitcycles import error_interval
    from coefc.realise import realise_channel

    sos = signal.ellip(8, 0.1, 80, 0.2, output="sos")  # scipy as the designer of the test filter
    d = ChannelDesign("lp", 48000, (SosBlock(sos),))
    ar = Arithmetic(data=QFormat(1, 23), coef=QFormat(2, 22), acc_bits=56, rounding=rounding, scaling="l1")
    linear._L1_BOUNDS.clear()
    prog = realise_channel(d, ar)
    models = linear.op_models(prog)
    n = linear.response_length(models)
    imps = linear.node_impulses(models, n)
    c, r = error_interval(rounding)
    last = max(m.index for m in models)
    shared = overflow._shared_bounds(models, n, (abs(c) + r) * ar.data.lsb, last)
    assert shared is not None and len(shared) == len(models) - 1
    linear._L1_BOUNDS.clear()
    fresh = overflow.internal_node_bounds(models, imps, n, rounding, ar.data.lsb)
    assert shared == fresh  # exact equality, floats included
