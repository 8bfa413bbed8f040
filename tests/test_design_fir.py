"""Linear-phase FIR designs against Kaiser's formulas, scipy.signal and their requirements."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from design_util import design, mag_db


def kaiser_taps(a_db: float, width_hz: float, fs: float) -> int:
    # J. F. Kaiser, Proc. IEEE ISCAS 1974, as implemented by scipy.signal.kaiserord
    # (confirmed from scipy source): numtaps = ceil((A - 7.95) / 2.285 / (pi width) + 1),
    # width in units of pi rad/sample.
    return math.ceil((a_db - 7.95) / 2.285 / (math.pi * width_hz / (fs / 2)) + 1)


def kaiser_beta(a_db: float) -> float:
    # Kaiser 1974 (confirmed): beta = 0.1102 (A - 8.7) for A > 50.
    return 0.1102 * (a_db - 8.7)


def test_scipy_kaiser_helpers_match_their_documented_values():
    # scipy.signal docstring values (confirmed).
    assert signal.kaiser_beta(65) == pytest.approx(6.20426, abs=1e-5)
    assert signal.kaiser_atten(211, 0.0375) == pytest.approx(64.48099630593983, rel=1e-12)
    n, beta = signal.kaiserord(65, 24 / 500)
    assert (n, round(beta, 5)) == (167, 6.20426)


def test_kaiser_design_reproduces_the_scipy_docstring_example():
    # kaiserord(65, 24/500) = (167, 6.20426): 1 kHz sample rate, 24 Hz transition.
    ch = design('{ kind = "fir-lowpass", passband_hz = 163, stopband_hz = 187, attenuation_db = 65 }', fs=1000)
    assert ch.stages[0].taps == 167
    ref = signal.firwin(167, 175, window=("kaiser", 6.20426), fs=1000)
    np.testing.assert_allclose(ch.blocks[0].taps, ref, atol=1e-6)


@pytest.mark.parametrize("fs,stop,expected", [
    (88200, 22050, 277),   # derived from Kaiser's formula, A = 100 dB, passband edge 20 kHz
    (96000, 24000, 155),   # derived
    (192000, 48000, 45),   # derived ("about 45")
])
def test_kaiser_tap_counts_for_decimators(fs, stop, expected):
    ch = design(f'{{ kind = "fir-lowpass", passband_hz = 20000, stopband_hz = {stop}, attenuation_db = 100 }}',
                fs=fs)
    assert ch.stages[0].taps == expected == kaiser_taps(100, stop - 20000, fs)
    assert ch.stages[0].latency_samples == (expected - 1) / 2
    assert f"beta {kaiser_beta(100):.3f}" in ch.stages[0].text


def test_oppenheim_schafer_kaiser_example():
    # Oppenheim & Schafer's Kaiser example (from memory): wp = 0.4 pi, ws = 0.6 pi,
    # A = 60 dB -> beta = 5.653, M = 37 (38 taps).  With fs = 2 Hz, Hz = units of pi.
    ch = design('{ kind = "fir-lowpass", passband_hz = 0.4, stopband_hz = 0.6, attenuation_db = 60 }', fs=2)
    assert ch.stages[0].order == 37
    assert "beta 5.653" in ch.stages[0].text


def test_kaiser_design_roughly_meets_its_attenuation():
    # Kaiser's formula is an estimate; the design lands within about 1 dB (Kaiser 1974).
    ch = design('{ kind = "fir-lowpass", passband_hz = 20000, stopband_hz = 22050, attenuation_db = 100 }',
                fs=88200)
    f = np.linspace(22050, 44100, 4000)
    assert -np.max(mag_db(ch, f)) > 99.0
    assert np.max(np.abs(mag_db(ch, np.linspace(0, 20000, 2000)))) < 0.01


@pytest.mark.parametrize("method", ["equiripple", "least-squares"])
@pytest.mark.parametrize("kind,pb,sb,pass_f,stop_f", [
    ("fir-lowpass", "6000", "8000", (0, 6000), [(8000, 24000)]),
    ("fir-highpass", "4000", "2500", (4000, 24000), [(0, 2500)]),
    ("fir-bandpass", "[2000, 5000]", "[1000, 7000]", (2000, 5000), [(0, 1000), (7000, 24000)]),
    ("fir-bandstop", "[1000, 9000]", "[3000, 6000]", (0, 1000), [(3000, 6000)]),
])
def test_optimal_designs_meet_their_requirements(method, kind, pb, sb, pass_f, stop_f):
    # The requirement, measured with scipy.signal.freqz (reference library): at most
    # ripple_db deviation in the passband, at least attenuation_db in the stopband.
    ch = design(f'{{ kind = "{kind}", method = "{method}", passband_hz = {pb}, stopband_hz = {sb}, '
                'attenuation_db = 60, ripple_db = 0.1 }')
    taps = ch.blocks[0].taps
    _, hp = signal.freqz(taps, worN=np.linspace(*pass_f, 500), fs=48000)
    assert np.max(np.abs(20 * np.log10(np.abs(hp)))) <= 0.1 + 1e-6
    for lo, hi in stop_f:
        _, hs = signal.freqz(taps, worN=np.linspace(lo, hi, 1000), fs=48000)
        assert np.max(20 * np.log10(np.abs(hs))) <= -60 + 1e-6
    # Linear phase: symmetric taps, constant group delay (N-1)/2.
    np.testing.assert_allclose(taps, taps[::-1], atol=1e-12)
    assert ch.stages[0].latency_samples == (len(taps) - 1) / 2
    if kind in ("fir-highpass", "fir-bandstop"):
        assert len(taps) % 2 == 1  # odd length: no forced zero at Nyquist


def test_equiripple_is_shorter_than_kaiser_for_the_same_requirement():
    # Parks-McClellan is optimal in the minimax sense (McClellan & Parks 1973), so
    # it needs no more taps than a Kaiser window for the same tolerances.
    k = design('{ kind = "fir-lowpass", passband_hz = 6000, stopband_hz = 7000, attenuation_db = 80, '
               'ripple_db = 0.01 }')
    e = design('{ kind = "fir-lowpass", method = "equiripple", passband_hz = 6000, stopband_hz = 7000, '
               'attenuation_db = 80, ripple_db = 0.01 }')
    assert e.stages[0].taps < k.stages[0].taps


def test_given_taps_are_used():
    ch = design('{ kind = "fir-highpass", method = "equiripple", passband_hz = 2000, stopband_hz = 1000, '
                'attenuation_db = 40, taps = 51 }')
    assert ch.stages[0].taps == 51
