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
