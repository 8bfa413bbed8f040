"""Audio EQ biquads against the Audio EQ Cookbook.

R. Bristow-Johnson, "Cookbook formulae for audio EQ biquad filter coefficients"
(confirmed source).  The numeric checks at fs = 48 kHz, f0 = 1 kHz are derived from
its formulas.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from design_util import design, mag_db

FS = 48000.0


def test_peaking_coefficients_match_the_cookbook_values():
    # Derived from the cookbook: peaking +6 dB, Q = 1, f0 = 1 kHz, fs = 48 kHz.
    ch = design('{ kind = "peaking", freq_hz = 1000, q = 1, gain_db = 6 }')
    row = ch.sos()[0]
    np.testing.assert_allclose(row[:3], [1.04395309, -1.89532072, 0.86772228], atol=1e-8)
    np.testing.assert_allclose(row[3:], [1.0, -1.89532072, 0.91167537], atol=1e-8)


def test_peaking_gain_at_f0_and_flat_far_away():
    # Cookbook (derived): exactly the set gain at f0, 0 dB at DC and Nyquist.
    ch = design('{ kind = "peaking", freq_hz = 1000, q = 1, gain_db = 6 }')
    db = mag_db(ch, [1000, 0, FS / 2])
    assert db[0] == pytest.approx(6.0, abs=1e-9)
    assert db[1] == pytest.approx(0.0, abs=1e-9)
    assert db[2] == pytest.approx(0.0, abs=1e-9)


def test_boost_and_equal_cut_cancel():
    # Cookbook (derived): a boost and an equal cut in cascade are flat.
    ch = design('{ kind = "peaking", freq_hz = 700, bandwidth_oct = 1.5, gain_db = 9 }',
                '{ kind = "peaking", freq_hz = 700, bandwidth_oct = 1.5, gain_db = -9 }')
    f = np.geomspace(10, 23900, 200)
    np.testing.assert_allclose(mag_db(ch, f), 0.0, atol=1e-9)


def test_low_shelf_plateaus_and_midpoint():
    # Cookbook (derived): low shelf +6 dB, S = 1: DC +6 dB, Nyquist 0 dB, f0 +3 dB.
    ch = design('{ kind = "lowshelf", freq_hz = 1000, slope = 1, gain_db = 6 }')
    db = mag_db(ch, [0, FS / 2, 1000])
    assert db[0] == pytest.approx(6.0, abs=1e-9)
    assert db[1] == pytest.approx(0.0, abs=1e-9)
    assert db[2] == pytest.approx(3.0, abs=1e-9)


def test_high_shelf_is_the_mirror_image():
    ch = design('{ kind = "highshelf", freq_hz = 1000, gain_db = 6 }')  # slope defaults to 1
    db = mag_db(ch, [0, FS / 2, 1000])
    assert db[0] == pytest.approx(0.0, abs=1e-9)
    assert db[1] == pytest.approx(6.0, abs=1e-9)
    assert db[2] == pytest.approx(3.0, abs=1e-9)


def test_notch_nulls_f0():
    # Cookbook (derived): |H(f0)| ~ 0.
    ch = design('{ kind = "notch", freq_hz = 1000, q = 4 }')
    assert abs(ch.response([1000.0])[0]) < 1e-9
    assert mag_db(ch, [0])[0] == pytest.approx(0.0, abs=1e-9)


def test_allpass_is_flat_with_minus_180_degrees_at_f0():
    # Cookbook (derived): |H| = 1 everywhere, phase -180 degrees at f0.
    ch = design('{ kind = "allpass", freq_hz = 1000, q = 0.8 }')
    f = np.geomspace(10, 23900, 200)
    np.testing.assert_allclose(np.abs(ch.response(f)), 1.0, atol=1e-12)
    phase = np.degrees(np.angle(ch.response([1000.0])[0]))
    assert abs(abs(phase) - 180.0) < 1e-6


def test_biquad_lowpass_with_butterworth_q_equals_scipy_butter2():
    # Cookbook (derived): low-pass with Q = 1/sqrt(2) equals scipy.signal.butter(2, f0, fs=fs).
    ch = design('{ kind = "lowpass", response = "biquad", freq_hz = 1000, q = 0.7071067811865476 }')
    np.testing.assert_allclose(ch.sos(), signal.butter(2, 1000, output="sos", fs=FS), rtol=1e-10, atol=1e-14)


def test_biquad_highpass_with_butterworth_q_equals_scipy_butter2():
    ch = design('{ kind = "highpass", response = "biquad", freq_hz = 250, q = 0.7071067811865476 }')
    ref = signal.butter(2, 250, "highpass", output="sos", fs=FS)
    f = np.geomspace(10, 23900, 100)
    np.testing.assert_allclose(ch.response(f), signal.sosfreqz(ref, worN=f, fs=FS)[1], rtol=1e-9, atol=1e-12)


def test_biquad_bandpass_peaks_at_0db():
    # Cookbook "constant 0 dB peak gain" band-pass (derived): 0 dB at f0.
    ch = design('{ kind = "bandpass", response = "biquad", freq_hz = 2000, q = 3 }')
    assert mag_db(ch, [2000])[0] == pytest.approx(0.0, abs=1e-9)


def test_notch_bandwidth_in_octaves_between_3db_points():
    # Cookbook: for the notch, BW is the bandwidth in octaves between the -3 dB
    # frequencies, and the sinh form compensates the bilinear warping (from memory).
    ch = design('{ kind = "notch", freq_hz = 3000, bandwidth_oct = 1 }')
    f = np.geomspace(1000, 9000, 20001)
    db = mag_db(ch, f)
    below = f[(db < 10 * np.log10(0.5))]
    assert np.log2(below[-1] / below[0]) == pytest.approx(1.0, abs=0.01)
