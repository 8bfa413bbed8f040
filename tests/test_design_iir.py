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


ORDFUNCS = [("butterworth", signal.buttord), ("chebyshev1", signal.cheb1ord),
            ("chebyshev2", signal.cheb2ord), ("elliptic", signal.ellipord)]


def _levels(ch, lo, hi):
    # scipy.signal.sosfreqz (reference library), linear and log spaced, edges included
    f = np.unique(np.concatenate([np.linspace(lo, hi, 20001), np.geomspace(max(lo, 1e-3), hi, 20001)]))
    with np.errstate(divide="ignore"):  # all-pole families have their zeros at Nyquist
        return 20 * np.log10(np.abs(signal.sosfreqz(ch.sos(), worN=f, fs=FS)[1]))


@pytest.mark.parametrize("response,ordfunc", ORDFUNCS)
@pytest.mark.parametrize("margin", [None, 0.0, 2.0])
def test_requirements_give_scipy_minimal_order_with_the_margin_and_are_met(response, ordfunc, margin):
    # Reference library: scipy.signal.buttord/cheb1ord/cheb2ord/ellipord at attenuation_db +
    # margin_db (0.5 dB by default).  The requirement plus the margin (loss <= ripple in the
    # passband, >= attenuation + margin in the stopband) is checked by scipy.signal.sosfreqz.
    m = 0.5 if margin is None else margin
    key = "" if margin is None else f", margin_db = {margin}"
    ch = design(f'{{ kind = "lowpass", response = "{response}", passband_hz = 3000, stopband_hz = 4000, '
                f'ripple_db = 0.5, attenuation_db = 60{key} }}')
    n, _ = ordfunc(3000, 4000, 0.5, 60 + m, fs=FS)
    assert ch.stages[0].order == n
    assert np.min(_levels(ch, 0, 3000)) >= -0.5 - 1e-6
    assert np.max(_levels(ch, 4000, FS / 2)) <= -60 - m + 1e-6
    req = ch.stages[0].requirement
    assert req["margin_db"] == m and req["minimal_order"] == ordfunc(3000, 4000, 0.5, 60, fs=FS)[0]
    assert req["reached_attenuation_db"] >= 60 + m - 1e-6


def test_margin_takes_the_next_order_when_the_minimal_one_has_no_room():
    # ellipord (scipy.signal, reference library): 1000 Hz passband, 1220 Hz stopband at 48 kHz,
    # 0.5 dB ripple needs order 7 for 60 dB but order 8 for 60.5 dB.
    assert signal.ellipord(1000, 1220, 0.5, 60, fs=FS)[0] == 7
    assert signal.ellipord(1000, 1220, 0.5, 60.5, fs=FS)[0] == 8
    ch = design('{ kind = "lowpass", response = "elliptic", passband_hz = 1000, stopband_hz = 1220, '
                'ripple_db = 0.5, attenuation_db = 60 }')
    assert ch.stages[0].order == 8
    assert "one order above the minimal 7 for 60 dB, to keep a 0.5 dB margin" in ch.stages[0].text
    req = ch.stages[0].requirement
    assert req["margin_kept_by"] == "higher order" and (req["minimal_order"], req["order"]) == (7, 8)
    assert np.max(_levels(ch, 1220, FS / 2)) <= -60.5 + 1e-6
    # with no margin the minimal order stands, and the stopband sits exactly at 60 dB
    # (an elliptic stopband is equiripple at the attenuation asked: Oppenheim & Schafer 7.3, from memory)
    ch0 = design('{ kind = "lowpass", response = "elliptic", passband_hz = 1000, stopband_hz = 1220, '
                 'ripple_db = 0.5, attenuation_db = 60, margin_db = 0 }')
    assert ch0.stages[0].order == 7 and "no margin for quantisation (margin_db = 0)" in ch0.stages[0].text
    assert np.max(_levels(ch0, 1220, FS / 2)) == pytest.approx(-60, abs=1e-6)


def test_margin_kept_at_the_minimal_order_says_so():
    ch = design('{ kind = "lowpass", response = "elliptic", passband_hz = 1000, stopband_hz = 1200, '
                'ripple_db = 0.5, attenuation_db = 60 }')
    assert ch.stages[0].requirement["margin_kept_by"] == "minimal order"
    assert "the minimal order for 60 dB also keeps a 0.5 dB margin for quantisation" in ch.stages[0].text
    assert np.max(_levels(ch, 1200, FS / 2)) <= -60.5 + 1e-6


def test_margin_does_not_apply_to_a_filter_given_by_order():
    with pytest.raises(DescriptionError, match="key 'margin_db': applies to a filter given by requirements"):
        design('{ kind = "lowpass", response = "butterworth", order = 4, cutoff_hz = 1000, margin_db = 1 }')


def test_bandpass_requirement_counts_both_skirts():
    ch = design('{ kind = "bandpass", response = "elliptic", passband_hz = [1000, 2000], '
                'stopband_hz = [800, 2500], ripple_db = 0.5, attenuation_db = 50 }')
    n, _ = signal.ellipord([1000, 2000], [800, 2500], 0.5, 50.5, fs=FS)  # 0.5 dB default margin
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
