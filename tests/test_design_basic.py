"""Gain, delay, DC blocker, raw coefficients, and the group delay of the design report."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from coefc.blocks import DelayBlock, GainBlock
from coefc.design.acoustics import speed_of_sound
from coefc.design.response_table import group_delay_samples, response_rows
from coefc.errors import DescriptionError

from design_util import design, mag_db


@pytest.mark.parametrize("t,c", [(0.0, 331.286), (20.0, 343.200), (30.0, 349.005)])
def test_speed_of_sound(t, c):
    # ISO 9613-1 (confirmed): 331.286 / 343.200 / 349.005 m/s at 0 / 20 / 30 C.
    assert speed_of_sound(t) == pytest.approx(c, abs=5e-4)


def test_delay_in_metres_uses_the_speed_of_sound():
    # Derived from ISO 9613-1: one sample at 48 kHz is 7.150 mm of path at 20 C.
    ch = design('{ kind = "delay", metres = 0.0715 }')
    assert ch.blocks[0] == DelayBlock(10, label=ch.blocks[0].label)
    hot = design('{ kind = "delay", metres = 3.0, air_temperature_c = 30 }')
    assert hot.blocks[0].samples == round(3.0 / 349.005 * 48000)  # 412.6 -> 413
    assert "residual" in hot.stages[0].text


def test_delay_in_ms_rounds_to_nearest_sample_and_reports_residual():
    ch = design('{ kind = "delay", ms = 0.35 }')  # 16.8 samples
    assert ch.blocks[0].samples == 17
    assert "residual -0.200 sample" in ch.stages[0].text
    assert ch.stages[0].latency_samples == 17


def test_gain_db_linear_and_inversion():
    # 20 log10 |g| = dB (definition of the decibel for amplitude; common practice, no source).
    assert design('{ kind = "gain", db = -6.0206 }').blocks[0].gain == pytest.approx(0.5, rel=1e-5)
    assert design('{ kind = "gain", linear = 2.0, invert = true }').blocks[0] == GainBlock(-2.0, "gain x2, polarity inverted")
    assert design('{ kind = "gain", invert = true }').blocks[0].gain == -1.0


def test_dc_blocker_is_the_bilinear_first_order_highpass():
    # Reference library: scipy.signal.butter(1, fc, 'highpass') is the bilinear
    # transform of s / (s + wc) with pre-warping (Oppenheim & Schafer sec. 7.1).
    ch = design('{ kind = "dc-blocker", cutoff_hz = 5 }')
    np.testing.assert_allclose(ch.sos(), signal.butter(1, 5, "highpass", output="sos", fs=48000), rtol=1e-9,
                               atol=1e-15)
    assert mag_db(ch, [5.0])[0] == pytest.approx(10 * math.log10(0.5), abs=1e-9)
    assert abs(ch.response([0.0])[0]) < 1e-12


def test_pole_near_unit_circle_is_reported():
    ch = design('{ kind = "dc-blocker", cutoff_hz = 1 }')
    assert any("very near the unit circle" in w for w in ch.warnings)


def test_raw_sos_is_normalised_by_a0():
    ch = design('{ kind = "sos", sections = [[2, 4, 2, 2, -1, 0.5]] }')
    np.testing.assert_allclose(ch.sos(), [[1, 2, 1, 1, -0.5, 0.25]])


def test_raw_transfer_keeps_its_response():
    # Reference library: scipy.signal.freqz of the original b/a.
    b, a = [0.2, 0.3, 0.1, 0.05], [1.0, -0.9, 0.5, -0.1]
    ch = design(f'{{ kind = "transfer", b = {b}, a = {a} }}')
    f = np.geomspace(10, 23000, 100)
    np.testing.assert_allclose(ch.response(f), signal.freqz(b, a, worN=f, fs=48000)[1], rtol=1e-9, atol=1e-12)
    assert ch.stages[0].order == 3 and ch.stages[0].sections == 2


def test_raw_unstable_transfer_is_rejected():
    with pytest.raises(DescriptionError, match=r"pole has radius 1\.1"):
        design('{ kind = "transfer", b = [1.0], a = [1.0, -1.1] }')


def test_raw_fir_latency_only_when_linear_phase():
    assert design('{ kind = "fir", taps = [0.25, 0.5, 0.25] }').stages[0].latency_samples == 1.0
    assert design('{ kind = "fir", taps = [0.5, 0.25] }').stages[0].latency_samples == 0.0


def test_group_delay_matches_scipy_away_from_singular_points():
    # Reference library: scipy.signal.group_delay per section, delays add.
    ch = design('{ kind = "highpass", response = "butterworth", order = 2, cutoff_hz = 28 }',
                '{ kind = "lowpass", response = "elliptic", order = 5, cutoff_hz = 3000, ripple_db = 0.5, '
                'attenuation_db = 60 }',
                '{ kind = "peaking", freq_hz = 85, q = 2, gain_db = -4.5 }',
                '{ kind = "delay", samples = 7 }',
                '{ kind = "fir", taps = [0.5, 0.3, 0.2] }')
    f = np.array([20.0, 100.0, 1000.0, 2500.0, 9000.0])
    ref = np.full(f.shape, 7.0)
    for row in ch.sos():
        ref += signal.group_delay((row[:3], row[3:]), w=f, fs=48000)[1]
    ref += signal.group_delay(([0.5, 0.3, 0.2], [1.0]), w=f, fs=48000)[1]
    # scipy evaluates b/a polynomials, which loses a few digits next to the double
    # zero at DC of the high-pass; the root form used by coefc does not, hence 1e-5.
    np.testing.assert_allclose(group_delay_samples(ch, f), ref, rtol=1e-5, atol=1e-9)


def test_group_delay_is_finite_at_a_notch_null():
    # A zero on the unit circle contributes 1/2 sample at every frequency (its
    # limit); the report must not turn into NaN there, nor warn.
    ch = design('{ kind = "notch", freq_hz = 1000, q = 2 }')
    rows = response_rows(ch, [1000.0, 2000.0])
    assert rows[0]["magnitude_db"] is None or rows[0]["magnitude_db"] < -200
    assert all(r["group_delay_samples"] is not None for r in rows)


# ---------------------------------------------------------------- sub-sample delays (Thiran, Lagrange)

import math  # noqa: E402

from coefc.design.fractional_delay import lagrange_taps, thiran_denominator  # noqa: E402


@pytest.mark.parametrize("d", [0.3, 0.6, 1.2])
def test_thiran_first_and_second_order_closed_forms(d):
    # Laakso et al., "Splitting the unit delay", IEEE SP Magazine 1996 (from memory):
    # N = 1: a1 = (1 - d) / (1 + d);  N = 2: a1 = -2 (d - 2) / (d + 1), a2 = (d - 1)(d - 2) / ((d + 1)(d + 2))
    np.testing.assert_allclose(thiran_denominator(d, 1), [1, (1 - d) / (1 + d)], rtol=1e-12)
    d2 = d + 1
    np.testing.assert_allclose(thiran_denominator(d2, 2),
                               [1, -2 * (d2 - 2) / (d2 + 1), (d2 - 1) * (d2 - 2) / ((d2 + 1) * (d2 + 2))],
                               rtol=1e-12)


@pytest.mark.parametrize("order, d, w1", [(1, 0.7, 0.02), (2, 1.6, 0.02), (3, 3.3, 0.02), (5, 4.8, 0.1)])
def test_thiran_group_delay_at_dc_is_the_delay_and_maximally_flat(order, d, w1):
    # Thiran 1971 (from memory): group delay maximally flat at DC with value d.  Reference: scipy.signal.group_delay.
    # (w1 for order 5 is larger: nearer DC its error is below double precision)
    a = thiran_denominator(d, order)
    w = np.array([1e-4, w1, 2 * w1])
    gd = signal.group_delay((a[::-1], a), w=w)[1]
    assert gd[0] == pytest.approx(d, abs=1e-7)
    # maximally flat: the error grows like w^(2N) near DC (halving w divides it by about 2^(2N))
    ratio = (gd[2] - d) / (gd[1] - d)
    assert ratio == pytest.approx(2 ** (2 * order), rel=0.05)


@pytest.mark.parametrize("d", [0.25, 0.5, 0.9])
def test_lagrange_first_order_error_matches_its_closed_form(d):
    # Linear interpolation H = (1 - d) + d e^{-jw} has |H|^2 = 1 - 2 d (1 - d)(1 - cos w) (derived from the taps).
    h = lagrange_taps(d, 1)
    w = np.linspace(0.01, 3.0, 50)
    mag2 = np.abs(signal.freqz(h, 1, worN=w)[1]) ** 2
    np.testing.assert_allclose(mag2, 1 - 2 * d * (1 - d) * (1 - np.cos(w)), rtol=1e-12)


@pytest.mark.parametrize("order", [2, 3, 4, 7])
def test_lagrange_is_exact_for_polynomials_up_to_its_order(order):
    # Lagrange interpolation (Laakso et al. 1996, from memory): sum_n h[n] n^p = d^p for p <= N.
    d = order / 2 + 0.37
    h = lagrange_taps(d, order)
    n = np.arange(order + 1)
    for p in range(order + 1):
        assert float(np.sum(h * n ** p)) == pytest.approx(d ** p, rel=1e-9)


@pytest.mark.parametrize("interp", ["thiran", "lagrange"])
def test_fractional_delay_meets_002_samples_at_1khz(interp):
    # The request (0.3521 ms at 48 kHz = 16.9008 samples); reference: scipy.signal.group_delay of the blocks.
    from coefc.blocks import DelayBlock, FirBlock, SosBlock

    ch = design(f'{{ kind = "delay", ms = 0.3521, interpolation = "{interp}" }}')
    w = np.array([2 * math.pi * 1000 / 48000])
    gd = 0.0
    for b in ch.blocks:
        if isinstance(b, DelayBlock):
            gd += b.samples
        elif isinstance(b, SosBlock):
            for row in b.sos:
                gd += signal.group_delay((row[:3], row[3:]), w=w)[1][0]
        elif isinstance(b, FirBlock):
            gd += signal.group_delay((b.taps, [1.0]), w=w)[1][0]
    assert abs(gd - 0.3521e-3 * 48000) <= 0.02


def test_tighter_accuracy_raises_the_order():
    loose = design('{ kind = "delay", ms = 1.01, interpolation = "lagrange", accuracy_hz = 8000 }')
    tight = design('{ kind = "delay", ms = 1.01, interpolation = "lagrange", accuracy_hz = 8000, '
                   'max_error_samples = 0.0005 }')
    assert tight.stages[0].order > loose.stages[0].order


def test_accuracy_keys_need_an_interpolation():
    with pytest.raises(DescriptionError, match="only applies with interpolation"):
        design('{ kind = "delay", ms = 1.01, max_error_samples = 0.01 }')
