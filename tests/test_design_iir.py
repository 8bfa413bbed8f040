"""Classic IIR families and Linkwitz-Riley crossovers against scipy.signal and their definitions."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from coefc.design import section_q
from coefc.errors import DescriptionError

from design_util import design, mag_db

FS = 48000.0


@pytest.mark.parametrize("stage,reference", [
    ('{ kind = "lowpass", response = "butterworth", order = 5, cutoff_hz = 1000 }',
     lambda: signal.butter(5, 1000, "lowpass", output="sos", fs=FS)),
    ('{ kind = "highpass", response = "chebyshev1", order = 4, cutoff_hz = 300, ripple_db = 0.5 }',
     lambda: signal.cheby1(4, 0.5, 300, "highpass", output="sos", fs=FS)),
    ('{ kind = "bandpass", response = "chebyshev2", order = 3, cutoff_hz = [500, 5000], attenuation_db = 50 }',
     lambda: signal.cheby2(3, 50, [500, 5000], "bandpass", output="sos", fs=FS)),
    ('{ kind = "bandstop", response = "elliptic", order = 2, cutoff_hz = [900, 1100], ripple_db = 1, '
     'attenuation_db = 40 }',
     lambda: signal.ellip(2, 1, 40, [900, 1100], "bandstop", output="sos", fs=FS)),
    ('{ kind = "lowpass", response = "bessel", order = 4, cutoff_hz = 2000 }',
     lambda: signal.bessel(4, 2000, "lowpass", output="sos", fs=FS, norm="mag")),
])
def test_family_equals_scipy_design(stage, reference):
    # Reference library: scipy.signal's own designs with output='sos'.
    ch = design(stage)
    np.testing.assert_allclose(ch.sos(), reference(), rtol=1e-12, atol=1e-15)


def test_butterworth_is_3db_down_at_cutoff():
    # |H|^2 = 1/2 at the cutoff of a Butterworth filter (common practice, no source).
    for order in (1, 2, 4, 7):
        ch = design(f'{{ kind = "lowpass", response = "butterworth", order = {order}, cutoff_hz = 1500 }}')
        assert mag_db(ch, 1500)[0] == pytest.approx(10 * np.log10(0.5), abs=1e-9)


def test_bessel_mag_normalised_is_3db_down_at_cutoff():
    # scipy.signal.bessel(norm='mag'): -3 dB at the critical frequency (scipy docs).
    ch = design('{ kind = "lowpass", response = "bessel", order = 6, cutoff_hz = 3000 }')
    assert mag_db(ch, 3000)[0] == pytest.approx(10 * np.log10(0.5), abs=1e-6)


@pytest.mark.parametrize("response,ordfunc", [
    ("butterworth", signal.buttord), ("chebyshev1", signal.cheb1ord),
    ("chebyshev2", signal.cheb2ord), ("elliptic", signal.ellipord),
])
def test_requirements_give_scipy_minimal_order_and_are_met(response, ordfunc):
    # Reference library: scipy.signal.buttord/cheb1ord/cheb2ord/ellipord.  The
    # requirement itself (loss <= ripple in the passband, >= attenuation in the
    # stopband) is checked on the response by scipy.signal.sosfreqz.
    ch = design(f'{{ kind = "lowpass", response = "{response}", passband_hz = 3000, stopband_hz = 4000, '
                'ripple_db = 0.5, attenuation_db = 60 }')
    n, _ = ordfunc(3000, 4000, 0.5, 60, fs=FS)
    assert ch.stages[0].order == n
    f_pass = np.linspace(1, 3000, 400)
    f_stop = np.linspace(4000, FS / 2 - 1, 2000)
    _, hp = signal.sosfreqz(ch.sos(), worN=f_pass, fs=FS)
    _, hs = signal.sosfreqz(ch.sos(), worN=f_stop, fs=FS)
    assert np.min(20 * np.log10(np.abs(hp))) >= -0.5 - 1e-6
    assert np.max(20 * np.log10(np.abs(hs))) <= -60 + 1e-6


def test_bandpass_requirement_counts_both_skirts():
    ch = design('{ kind = "bandpass", response = "elliptic", passband_hz = [1000, 2000], '
                'stopband_hz = [800, 2500], ripple_db = 0.5, attenuation_db = 50 }')
    n, _ = signal.ellipord([1000, 2000], [800, 2500], 0.5, 50, fs=FS)
    assert ch.stages[0].order == 2 * n  # a band-pass of prototype order n has 2n poles
    assert ch.stages[0].sections == n


def test_high_order_requirement_is_reported():
    ch = design('{ kind = "lowpass", response = "butterworth", passband_hz = 1000, stopband_hz = 1500, '
                'ripple_db = 0.1, attenuation_db = 80 }')
    assert 12 < ch.stages[0].order <= 40
    assert any("order of" in w for w in ch.warnings)


def test_impossible_requirement_is_a_description_error():
    with pytest.raises(DescriptionError, match="above the limit of 40"):
        design('{ kind = "lowpass", response = "butterworth", passband_hz = 1000, stopband_hz = 1001, '
               'ripple_db = 0.01, attenuation_db = 120 }')


# ------------------------------------------------------------ Linkwitz-Riley
# S. H. Linkwitz, "Active Crossover Networks for Noncoincident Drivers", J. Audio
# Eng. Soc. 24(1), 1976 (volume from memory): LR(2n) = Butterworth(n) squared; each
# branch -6.0206 dB at the crossover; LR4 branches in phase, LP + HP all-pass;
# LR2 branches 180 degrees apart (derived).

FREQS = np.geomspace(10, 23000, 300)


@pytest.mark.parametrize("order", [2, 4, 8])
def test_linkwitz_riley_branches_are_6db_down_at_crossover(order):
    for kind in ("lowpass", "highpass"):
        ch = design(f'{{ kind = "{kind}", response = "linkwitz-riley", order = {order}, cutoff_hz = 2000 }}')
        assert mag_db(ch, 2000)[0] == pytest.approx(-6.0206, abs=1e-4)
        bw = signal.butter(order // 2, 2000, kind, output="sos", fs=FS)
        _, hb = signal.sosfreqz(bw, worN=FREQS, fs=FS)
        np.testing.assert_allclose(ch.response(FREQS), hb * hb, rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("order", [4, 8])
def test_lr4_and_lr8_sum_to_allpass_and_are_in_phase(order):
    lp = design(f'{{ kind = "lowpass", response = "linkwitz-riley", order = {order}, cutoff_hz = 350 }}')
    hp = design(f'{{ kind = "highpass", response = "linkwitz-riley", order = {order}, cutoff_hz = 350 }}')
    hl, hh = lp.response(FREQS), hp.response(FREQS)
    # Even LR4 outputs are in phase; LR8 outputs are in phase as well (derived).
    np.testing.assert_allclose(np.abs(hl + hh), 1.0, atol=1e-9)
    phase_diff = np.angle(hl / hh)
    np.testing.assert_allclose(phase_diff, 0.0, atol=1e-6)


def test_lr2_sums_to_allpass_with_one_polarity_inverted():
    lp = design('{ kind = "lowpass", response = "linkwitz-riley", order = 2, cutoff_hz = 1000 }')
    hp = design('{ kind = "highpass", response = "linkwitz-riley", order = 2, cutoff_hz = 1000 }',
                '{ kind = "gain", invert = true }')
    hl, hh = lp.response(FREQS), hp.response(FREQS)
    np.testing.assert_allclose(np.abs(hl + hh), 1.0, atol=1e-9)
    hp_plain = design('{ kind = "highpass", response = "linkwitz-riley", order = 2, cutoff_hz = 1000 }')
    # Without the inversion the branches cancel at the crossover (a null).
    assert abs(lp.response([1000.0])[0] + hp_plain.response([1000.0])[0]) < 1e-9


def test_section_q_of_a_high_q_biquad_is_reported():
    # Cookbook notch Q = 50 at 1 kHz: its pole pair has Q close to 50 (the analog
    # prototype's Q; bilinear warping is small at fs/48).  Common practice, no source.
    ch = design('{ kind = "notch", freq_hz = 1000, q = 50 }')
    assert section_q(ch.sos()[0]) == pytest.approx(50, rel=0.02)
    assert any("very high Q" in w for w in ch.warnings)
    calm = design('{ kind = "lowpass", response = "butterworth", order = 2, cutoff_hz = 1000 }')
    assert section_q(calm.sos()[0]) == pytest.approx(1 / np.sqrt(2), rel=0.02)
    assert not calm.warnings
