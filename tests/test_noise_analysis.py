"""Roundoff noise: the analytic model against published values, and against the
bit-true engine on every example description."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from coefc.analyse.linear import op_models
from coefc.analyse.noise import analytic_noise, dbfs, measured_noise, rounding_error_stats
from coefc.program import Arithmetic, ChannelProgram, GainOp, SectionOp
from coefc.qformat import QFormat

from conftest import example_files

Q15 = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 30), acc_bits=64, rounding="add-half", overflow="saturate")


def one_section(a1: float, a2: float, arith: Arithmetic = Q15, b0: float = 1.0) -> ChannelProgram:
    fc = arith.coef.frac_bits
    op = SectionOp(b=(round(b0 * 2 ** fc), 0, 0), a=(round(a1 * 2 ** fc), round(a2 * 2 ** fc)), shift=0,
                   structure=arith.structure)
    return ChannelProgram("t", 48000.0, arith, (op,))


@pytest.mark.parametrize("a, expected", [(0.5, 1.0348e-10), (0.9, 4.0847e-10)])
def test_first_order_one_rounding(a, expected):
    # 1/(1 - a z^-1) with one rounding: (q^2/12)/(1 - a^2), q = 2^-15
    # (REFERENCES: derived; Widrow & Kollar, Quantization Noise, ch. 16 treats this filter [confirmed])
    # b0 = 1 - 2^-30 makes the products use all 30 dropped bits (a = 0.5 alone drops only one)
    res = analytic_noise(one_section(-a, 0.0, b0=1 - 2.0 ** -30))
    assert res.variance == pytest.approx(expected, rel=2e-4)
    assert res.variance == pytest.approx((2.0 ** -15) ** 2 / 12 / (1 - a * a), rel=1e-6)


@pytest.mark.parametrize("r, t, expected", [(0.9, math.pi / 4, 5.752258794), (0.5, 2.0, 1.199626072)])
def test_second_order_all_pole_noise_gain(r, t, expected):
    # sum h^2 of 1/(1 - 2 r cos t z^-1 + r^2 z^-2) = ((1 + r^2)/(1 - r^2)) / (r^4 + 1 - 2 r^2 cos 2t)
    # (REFERENCES: derived from the closed form; values 5.752258794 and 1.199626072)
    res = analytic_noise(one_section(-2 * r * math.cos(t), r * r, b0=1 - 2.0 ** -30))
    assert len(res.sources) == 1
    assert res.sources[0].power_gain == pytest.approx(expected, rel=1e-7)


def test_error_statistics_of_rounding_modes():
    # rounding: mean 0, variance q^2/12; two's-complement truncation: mean -q/2, variance q^2/12;
    # magnitude truncation |e| < q (Oppenheim & Schafer, finite-precision chapter; from memory)
    m, v = rounding_error_stats(40, "add-half")
    assert (m, v) == (0.0, pytest.approx(1 / 12))
    m, v = rounding_error_stats(40, "truncate")
    assert m == -0.5 and v == pytest.approx(1 / 12)
    # the discrete residues approach the continuous values as more bits are dropped
    for mode in ("add-half", "half-even", "truncate"):
        assert rounding_error_stats(16, mode)[1] == pytest.approx(1 / 12, rel=1e-8)
    assert rounding_error_stats(16, "toward-zero")[1] == pytest.approx(1 / 3, rel=1e-4)


def test_full_scale_sine_snr_of_one_rounding():
    # full-scale sine SNR = 6.0206 N + 1.7609 dB: 98.09 dB for N = 16 (REFERENCES [confirmed])
    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 30), acc_bits=64)
    p = ChannelProgram("g", 48000.0, ar, (GainOp(coef=round(2 ** 29.5) | 1),))
    res = analytic_noise(p)
    assert res.snr_db == pytest.approx(6.0206 * 16 + 1.7609, abs=0.01)
    assert res.dbfs == pytest.approx(-98.09, abs=0.01)


def test_dbfs_follows_aes17():
    # AES17: 0 dBFS = RMS level of a full-scale sine, so a power of 0.5 reads 0 dBFS and a
    # full-scale square wave (power 1) reads +3.01 dBFS (common practice, no source)
    assert dbfs(0.5) == pytest.approx(0.0)
    assert dbfs(1.0) == pytest.approx(3.0103, abs=1e-4)


def test_exact_operations_add_no_noise():
    # a gain of 1.0 (2^30 in Q2.30) rounds nothing away; a gain of exactly 0.5 (2^29) drops a
    # single bit, whose error is 0 or 1/2 LSB: variance 1/16, not 1/12 (common practice, no source)
    ar = Q15
    unity = ChannelProgram("u", 48000.0, ar, (GainOp(coef=1 << 30),))
    assert analytic_noise(unity).sources == ()
    half = ChannelProgram("h", 48000.0, ar, (GainOp(coef=1 << 29),))
    (src,) = analytic_noise(half).sources
    assert src.k == 1 and src.variance_lsb2 == pytest.approx(1 / 16)


@pytest.mark.parametrize("rounding", ["add-half", "half-even", "truncate", "toward-zero"])
def test_measured_matches_analytic_on_a_resonator(rounding):
    # the engine's measured noise against Jackson's model within 1 dB (Jackson 1970,
    # N(w) = sigma0^2 sum_j k_j |G_j(w)|^2 [confirmed]); floor adds its mean at DC gain;
    # magnitude truncation adds its signal-correlated part (Bussgang 1952, from memory)
    ar = Q15.with_(rounding=rounding)
    p = one_section(-2 * 0.95 * math.cos(0.3), 0.95 ** 2, ar, b0=0.05)
    an = analytic_noise(p)
    me = measured_noise(p, samples=1 << 15)
    assert me.model_holds
    assert abs(an.dbfs - me.dbfs) < 1.0, (an.dbfs, me.dbfs)
    if rounding == "truncate":
        assert me.mean == pytest.approx(an.mean, rel=0.05)


def test_magnitude_truncation_mean_square_on_a_gain():
    # (the gain is 1/sqrt(2), so the dropped fractions spread evenly; 0.7 would give tenths only)
    # magnitude truncation: |e| < q with the sign opposite to the value (Claasen, Mecklenbrauker
    # & Peek 1976; from memory); for a uniform fraction its mean square is q^2/3 (derived),
    # whatever part of it follows the signal.
    ar = Q15.with_(rounding="toward-zero")
    p = ChannelProgram("g", 48000.0, ar, (GainOp(coef=round(2 ** 29.5) | 1),))
    an = analytic_noise(p)
    me = measured_noise(p, samples=1 << 15)
    assert an.power == pytest.approx((2.0 ** -15) ** 2 / 3, rel=1e-6)
    # white part var(u) + E[u]^2 (1 - 2/pi), correlated part E[u]^2 2/pi (Bussgang 1952, from memory)
    assert an.correlated_variance == pytest.approx((2.0 ** -15) ** 2 / 4 * 2 / math.pi, rel=1e-6)
    assert abs(an.dbfs - me.dbfs) < 0.2


def test_df1ef_shapes_the_noise():
    # first-order error feedback shapes the error by (1 - z^-1) before 1/A(z): for a low
    # resonance the output noise falls by many dB (Oppenheim & Schafer, ch. 6; from memory)
    a1, a2 = -2 * 0.99 * math.cos(0.05), 0.99 ** 2
    plain = analytic_noise(one_section(a1, a2, Q15, b0=0.01))
    ef_ar = Q15.with_(structure="df1ef")
    ef = analytic_noise(one_section(a1, a2, ef_ar, b0=0.01))
    assert ef.dbfs < plain.dbfs - 20
    me = measured_noise(one_section(a1, a2, ef_ar, b0=0.01), samples=1 << 15)
    assert abs(ef.dbfs - me.dbfs) < 1.0


def test_small_stimulus_is_flagged():
    # the uniform model fails for signals below about one LSB (Widrow, Kollar & Liu 1996 [confirmed])
    ar = Arithmetic(data=QFormat(1, 7), coef=QFormat(2, 14), acc_bits=32)
    # a huge-gain resonance forces a tiny stimulus, so the first node sees less than 1 LSB
    p = ChannelProgram("tiny", 48000.0, ar, (
        GainOp(coef=round(0.01 * 2 ** 14)),
        SectionOp(b=(1 << 14, 0, 0), a=(round(-1.98 * 2 ** 14), round(0.985 * 2 ** 14)), shift=0),
    ))
    me = measured_noise(p, samples=4096)
    assert not me.model_holds and "LSB" in me.note


@pytest.mark.parametrize("path", example_files(), ids=lambda p: p.stem)
def test_measured_within_1_db_on_every_example(path):
    # analytic (Jackson 1970) and measured (bit-true engine) output noise agree within 1 dB
    import coefc

    real = coefc.load(path).design().realise()
    for prog in real.programs:
        models = op_models(prog)
        an = analytic_noise(prog, models)
        me = measured_noise(prog, samples=1 << 15, models=models)
        assert an.dbfs is not None and me.dbfs is not None
        assert abs(an.dbfs - me.dbfs) < 1.0, (path.name, prog.name, an.dbfs, me.dbfs)


@pytest.mark.parametrize("rounding", ["add-half", "toward-zero"])
def test_noise_spectrum_integrates_to_the_variance(rounding):
    # Parseval: the one-sided density integrated over 0..fs/2 equals sum_j sigma_j^2 sum g_j^2
    # (plus, for magnitude truncation, the signal-following part); numpy's trapezoid rule is
    # the reference integrator
    ar = Q15.with_(rounding=rounding)
    p = one_section(-2 * 0.9 * math.cos(0.4), 0.81, ar, b0=1 - 2.0 ** -30)
    p = ChannelProgram("s", 48000.0, ar, p.ops + (GainOp(coef=round(2 ** 29.5) | 1),))
    res = analytic_noise(p)
    f = np.linspace(0.0, 24000.0, 200001)
    density = 0.5 * 10 ** (res.spectrum(f, 48000.0) / 10)  # back from dBFS/Hz to full-scale^2/Hz
    assert np.trapezoid(density, f) == pytest.approx(res.variance, rel=1e-4)
    # the resonance shows: the density peaks near the pole angle 0.4 rad = 3056 Hz
    assert abs(f[np.argmax(density)] - 0.4 / (2 * math.pi) * 48000) < 300


# ---------------------------------------------------------------- noise and offset apart

def _first_order_program(a: float, rounding: str) -> ChannelProgram:
    ar = Q15.with_(rounding=rounding)
    # b0 = 1 - 2^-30: the products use all 30 dropped bits, so the continuous formulas apply
    return one_section(-a, 0.0, ar, b0=1 - 2.0 ** -30)


# Mean and variance of the error of dropping many bits, per rounding mode, in LSB and LSB^2:
# rounding to nearest: mean 0, variance 1/12; two's-complement truncation: mean -1/2,
# variance 1/12 (Widrow & Kollar, Quantization Noise, 2008, ch. 12-13 [confirmed];
# Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., sec. 6.9 [confirmed]).
ROUNDING_MEAN_VAR = {"add-half": (0.0, 1 / 12), "half-even": (0.0, 1 / 12), "truncate": (-0.5, 1 / 12)}
A_POLE = 0.9 + 1e-4 * math.sqrt(2)


@pytest.mark.parametrize("rounding", sorted(ROUNDING_MEAN_VAR))
def test_noise_is_the_variance_and_the_offset_is_apart(rounding):
    # 1/(1 - a z^-1), one rounding at the output: the error's mean passes at the DC gain
    # 1/(1 - a) and its variance at the power gain sum a^(2n) = 1/(1 - a^2) (geometric series;
    # Oppenheim & Schafer sec. 6.9, first-order example [confirmed]).
    # a pole of 0.9 exactly would make frac(0.9 y) take only ten values, so the dropped bits
    # would not be uniform (the uniform model's condition, Widrow & Kollar ch. 4); a hair off it
    # they are
    p = _first_order_program(A_POLE, rounding)
    a = -p.ops[0].a[0] * 2.0 ** -30     # the realised pole
    mu, s2 = ROUNDING_MEAN_VAR[rounding]
    want_offset = mu / (1 - a)          # truncate: -5.007 LSB
    want_var = s2 / (1 - a * a)         # 0.4392 LSB^2
    lsb = 2.0 ** -15
    an = analytic_noise(p)
    assert an.offset_lsb == pytest.approx(want_offset, abs=1e-6)
    assert an.variance / lsb ** 2 == pytest.approx(want_var, rel=1e-6)
    # the noise figure is the variance in AES17 dBFS (0 dBFS = power 0.5), not the mean square
    assert an.dbfs == pytest.approx(10 * math.log10(want_var * lsb ** 2 / 0.5), abs=1e-6)
    if rounding == "truncate":
        # the defect this guards against: the mean square (offset included) reads 17.6 dB higher
        assert 10 * math.log10(an.power / 0.5) - an.dbfs > 17.0
        assert an.offset_dbfs == pytest.approx(20 * math.log10(-want_offset * lsb / math.sqrt(0.5)), abs=1e-6)

    # numpy on the bit-true engine's error against scipy.signal.lfilter of the same realised
    # coefficients (scipy as the reference library)
    from scipy import signal

    from coefc.simulate import simulate

    rng = np.random.default_rng(7)
    x = rng.integers(-3000, 3001, 1 << 17)  # l1 gain 10: the output stays below full scale
    y = np.asarray(simulate(p, x), dtype=np.float64)
    (op,) = p.ops
    b0, a1 = op.b[0] * 2.0 ** -30, op.a[0] * 2.0 ** -30
    ref = signal.lfilter([b0], [1.0, a1], x.astype(np.float64))
    e = (y - ref)[200:]
    assert np.mean(e) == pytest.approx(want_offset, abs=0.05)  # standard error about 0.01
    assert np.var(e) == pytest.approx(want_var, rel=0.05)       # standard error about 1.5 %
    # the measured figures of the checker agree with numpy's on the engine
    me = measured_noise(p, samples=1 << 17)
    assert me.offset_lsb == pytest.approx(want_offset, abs=0.05)
    assert me.variance / lsb ** 2 == pytest.approx(want_var, rel=0.05)
    assert me.dbfs == pytest.approx(an.dbfs, abs=0.25)


def test_offset_and_noise_in_the_metrics_json():
    # the metrics carry the variance as output_noise_dbfs and the mean as output_offset_lsb/_dbfs,
    # analytic and simulated (truncate: -q/2 through 1/(1 - a z^-1), Widrow & Kollar 2008 and
    # Oppenheim & Schafer sec. 6.9 [confirmed], as above)
    from coefc.analyse import analyse_channel
    from coefc.blocks import ChannelDesign, SosBlock

    p = _first_order_program(A_POLE, "truncate")
    a = -p.ops[0].a[0] * 2.0 ** -30
    d = ChannelDesign("t", 48000.0, (SosBlock(np.array([[1.0, 0, 0, 1.0, -a, 0]])),))
    m = analyse_channel(d, p).as_dict()
    lsb = 2.0 ** -15
    off = -0.5 / (1 - a)
    assert m["output_offset_lsb"] == pytest.approx(off, abs=1e-6)
    se = m["output_offset_lsb_simulated_stderr"]
    assert 0 < se < 0.05  # sqrt((1/12) (1/(1-a))^2 / N): the noise density at DC over the record
    assert m["output_offset_lsb_simulated"] == pytest.approx(off, abs=5 * se)
    assert m["output_offset_dbfs"] == pytest.approx(10 * math.log10((off * lsb) ** 2 / 0.5), abs=1e-6)
    assert m["output_noise_dbfs"] == pytest.approx(10 * math.log10((1 / 12) / (1 - a * a) * lsb ** 2 / 0.5),
                                                   abs=1e-6)
    assert abs(m["output_noise_dbfs_simulated"] - m["output_noise_dbfs"]) < 0.3


def _wide_section(a1: float, a2: float, ar: Arithmetic, b0: float) -> ChannelProgram:
    from coefc.realise.coefficients import split_feedback

    fc = ar.coef.frac_bits
    hi, lo, bad = split_feedback((1.0, a1, a2), ar.coef, 1)  # coefficient shift 1: |a1| up to 4
    assert not bad
    op = SectionOp(b=(round(b0 * 2 ** (fc - 1)), 0, 0), a=hi, a_lo=lo, shift=1, structure=ar.structure)
    return ChannelProgram("t", 48000.0, ar, (op,))


@pytest.mark.parametrize("rounding", ["add-half", "truncate", "half-even", "toward-zero"])
def test_error_feedback_with_double_word_feedback_two_sources(rounding):
    # df1ef-wide-fb on 16-bit words: the rounding error reaches the output through (1 - z^-1)/A(z), the floor of
    # the low products (not fed back) through 1/A(z) (coefc.program's recurrence; the linear model of Jackson 1970
    # applied to each quantiser).  The power gains are checked against scipy.signal.lfilter impulse responses (a
    # reference library), and the analytic noise against the bit-true engine
    from scipy import signal

    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32, rounding=rounding, overflow="saturate",
                    structure="df1ef-wide-fb")
    r, th = 0.99, 2 * math.pi * 300 / 48000
    p = _wide_section(-2 * r * math.cos(th), r * r, ar, b0=0.02)
    an = analytic_noise(p)
    assert len(an.sources) == 2
    rnd, flo = an.sources
    a = np.array([1.0, *p.ops[0].a_phys(ar.coef)])
    imp = np.zeros(200000)
    imp[0] = 1.0
    g_shaped, g_plain = signal.lfilter([1.0, -1.0], a, imp), signal.lfilter([1.0], a, imp)
    assert rnd.power_gain == pytest.approx(float(np.dot(g_shaped, g_shaped)), rel=1e-6)
    assert flo.power_gain == pytest.approx(float(np.dot(g_plain, g_plain)), rel=1e-6)
    # the floor drops a fraction in [0, 1) of an accumulator LSB: 2^-k output LSB, k = 14 - 1
    assert flo.variance_lsb2 == pytest.approx((1 - 2.0 ** -30) / 12 * 2.0 ** -26, rel=1e-9)
    assert flo.mean_lsb == pytest.approx(0.5 * (1 - 2.0 ** -15) * 2.0 ** -13, rel=1e-9)
    me = measured_noise(p, samples=1 << 16)
    assert abs(an.dbfs - me.dbfs) < 1.0
    # error feedback takes the rounding's share far below plain double-word feedback's
    plain = analytic_noise(_wide_section(-2 * r * math.cos(th), r * r, ar.with_(structure="df1-wide-fb"), 0.02))
    assert an.dbfs < plain.dbfs - 20
@pytest.mark.parametrize("rounding", ["add-half", "truncate", "half-even", "toward-zero"])
def test_double_word_numerator_floor_is_an_unshaped_source(rounding):
    # df1ef-wide on 16-bit words: as df1ef-wide-fb, plus the floor of the low numerator products, an input-side
    # source that E never carries (coefc.program's recurrence): the two floors reach the output through the
    # unshaped 1/A(z) (checked against scipy.signal.lfilter, a reference library), with twice one floor's variance
    # and opposite means that cancel (the linear model of Jackson 1970 applied to each quantiser, taken
    # independent); the analytic noise against the bit-true engine
    from scipy import signal

    from coefc.realise.coefficients import split_numerator

    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32, rounding=rounding, overflow="saturate",
                    structure="df1ef-wide")
    r, th = 0.99, 2 * math.pi * 300 / 48000
    p = _wide_section(-2 * r * math.cos(th), r * r, ar, b0=0.02)
    bh, bl, bad = split_numerator((0.02, -0.013, 0.007), ar.coef, 1)
    assert not bad and all(bl)
    p = ChannelProgram("t", 48000.0, ar, (replace(p.ops[0], b=bh, b_lo=bl),))
    an = analytic_noise(p)
    assert len(an.sources) == 2
    rnd, flo = an.sources
    a = np.array([1.0, *p.ops[0].a_phys(ar.coef)])
    imp = np.zeros(200000)
    imp[0] = 1.0
    g_shaped, g_plain = signal.lfilter([1.0, -1.0], a, imp), signal.lfilter([1.0], a, imp)
    assert rnd.power_gain == pytest.approx(float(np.dot(g_shaped, g_shaped)), rel=1e-6)
    assert flo.power_gain == pytest.approx(float(np.dot(g_plain, g_plain)), rel=1e-6)
    # each floor drops a fraction in [0, 1) of an accumulator LSB (2^-k output LSB, k = 14 - 1); two of them
    assert flo.variance_lsb2 == pytest.approx(2 * (1 - 2.0 ** -30) / 12 * 2.0 ** -26, rel=1e-9)
    assert flo.mean_lsb == 0.0
    me = measured_noise(p, samples=1 << 16)
    assert abs(an.dbfs - me.dbfs) < 1.0


# rounded products ([arithmetic] product_shift): one source per rounded product, all at the
# accumulator (Jackson 1970: rounding after every multiplication, k_j sources of q^2/12 at a
# node [confirmed]); error feedback shapes only the final rounding.
HW = Arithmetic(data=QFormat(1, 27), coef=QFormat(2, 30), acc_bits=32, rounding="add-half", overflow="saturate",
                product_shift=29, product_rounding="add-half")


@pytest.mark.parametrize("structure", ["df1", "tdf2", "df1ef"])
@pytest.mark.parametrize("product_rounding", ["add-half", "half-even", "truncate"])
def test_rounded_products_measured_matches_analytic(structure, product_rounding):
    ar = HW.with_(structure=structure, product_rounding=product_rounding)
    p = one_section(-2 * 0.95 * math.cos(0.3), 0.95 ** 2, ar, b0=0.05)
    an = analytic_noise(p)
    me = measured_noise(p, samples=1 << 15)
    assert me.model_holds
    assert abs(an.dbfs - me.dbfs) < 1.0, (an.dbfs, me.dbfs)
    if product_rounding == "truncate":  # each product's -q/2 passes at the DC gain of 1/A
        assert me.mean == pytest.approx(an.mean, rel=0.05)


def test_rounded_products_add_one_source_per_product():
    # b0 and a1, a2 nonzero (b1 = b2 = 0): three products each dropping 29 bits, q = 2^-1 LSB
    # (k = Fc - P = 1), so 3 (q^2/12) through 1/A beside the final rounding of 1 bit
    p = one_section(-2 * 0.95 * math.cos(0.3), 0.95 ** 2, HW, b0=0.05)
    exact = analytic_noise(one_section(-2 * 0.95 * math.cos(0.3), 0.95 ** 2, HW.with_(product_shift=0), b0=0.05))
    an = analytic_noise(p)
    prod = [s for s in an.sources if s.k == 29]
    assert len(prod) == 1
    assert prod[0].variance_lsb2 == pytest.approx(3 * 0.25 / 12, rel=1e-6)
    assert an.variance > exact.variance


def test_error_feedback_does_not_shape_rounded_products():
    a1, a2 = -2 * 0.99 * math.cos(0.05), 0.99 ** 2
    ef = analytic_noise(one_section(a1, a2, HW.with_(structure="df1ef"), b0=0.01))
    plain = analytic_noise(one_section(a1, a2, HW.with_(structure="df1"), b0=0.01))
    assert ef.dbfs > plain.dbfs - 3  # the products' noise still goes through 1/A(z)
    me = measured_noise(one_section(a1, a2, HW.with_(structure="df1ef"), b0=0.01), samples=1 << 15)
    assert abs(ef.dbfs - me.dbfs) < 1.0, (ef.dbfs, me.dbfs)
