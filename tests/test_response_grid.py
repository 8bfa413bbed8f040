"""The response grid: every band the budget names and every stage edge is checked, down to the lowest."""

from __future__ import annotations

import numpy as np
import pytest

from coefc.analyse.response import analyse_response, grid
from coefc.api import load
from coefc.blocks import chain_response
from coefc.program import Arithmetic
from coefc.qformat import QFormat
from coefc.blocks import as_float_blocks
from coefc.realise import realise_channel

from design_util import design

REPO = __import__("pathlib").Path(__file__).resolve().parents[1]


def test_grid_reaches_a_decade_below_the_lowest_band_and_holds_its_edges():
    # a vibration sensor's 0.3-9 Hz passband at 8 kHz: the old grid began at fs/4800 = 1.67 Hz
    g = grid(8000.0, edges_hz=(0.3, 9.0), bands=((0.3, 9.0),))
    assert g[0] <= 0.03 + 1e-12 and g[-1] == 4000.0
    assert np.all(np.diff(g) > 0)
    assert 0.3 in g and 9.0 in g
    inside = g[(g >= 0.3) & (g <= 9.0)]
    assert inside.size >= 512
    # log spacing in the band: no neighbour ratio above that of 512 log-spaced points
    assert np.max(inside[1:] / inside[:-1]) <= (9.0 / 0.3) ** (1 / 511) * (1 + 1e-12)


def test_grid_holds_stage_edges_without_budget_bands_and_zero_hz_bands():
    g = grid(48000.0, edges_hz=(2.0, 1000.0))
    assert g[0] <= 0.2 + 1e-12 and 2.0 in g and 1000.0 in g
    # a band from 0 Hz reaches down to fs * 1e-6, standing in for DC on a log axis
    g0 = grid(48000.0, bands=((0.0, 20000.0),))
    assert g0[0] == pytest.approx(0.048) and g0[0] > 0 and 20000.0 in g0


def test_fir_grid_samples_every_stopband_lobe_densely():
    # 32 points per 1/N of the sample rate for N FIR taps (a lobe of a length-N FIR is fs/N wide)
    fs, n = 88200.0, 279
    g = grid(fs, bands=((22050.0, 44100.0),), fir_taps=n)
    stop = g[g >= 22050.0]
    assert np.max(np.diff(stop)) <= fs / n / 32 * (1 + 1e-9)


def _deviation(design_, program, f):
    # reference: float design and the realised coefficients' exact values evaluated with
    # scipy.signal.sosfreqz/freqz (through chain_response) on the given frequencies
    df = 20 * np.log10(np.abs(design_.response(f)))
    dq = 20 * np.log10(np.abs(chain_response(as_float_blocks(program), f, design_.sample_rate_hz)))
    return np.abs(dq - df)


def test_sub_hertz_passband_is_checked_down_to_its_lower_edge():
    # Butterworth band-pass 0.3-9 Hz at 8 kHz on 24-bit coefficients: the coefficient error shows
    # most at the lowest frequencies, below where the old grid began.
    ch = design('{ kind = "bandpass", response = "butterworth", order = 2, cutoff_hz = [0.3, 9] }', fs=8000)
    assert ch.edges_hz == (0.3, 9.0)
    ar = Arithmetic(data=QFormat(1, 23), coef=QFormat(2, 22), acc_bits=56)
    prog = realise_channel(ch, ar)
    res = analyse_response(ch, prog, passband=((0.3, 9.0),))
    f = np.geomspace(0.3, 9.0, 20001)
    ref = _deviation(ch, prog, f)
    assert res.passband_deviation_db == pytest.approx(float(np.max(ref)), rel=1e-3)
    # the largest deviation lies below 1.67 Hz, where the old grid did not look
    assert f[int(np.argmax(ref))] < 1.67
    assert float(np.max(ref[f >= 1.67])) < 0.9 * float(np.max(ref))


def test_stage_edges_alone_extend_the_grid():
    ch = design('{ kind = "highpass", response = "butterworth", order = 2, cutoff_hz = 0.5 }', fs=8000)
    prog = realise_channel(ch, Arithmetic(data=QFormat(1, 23), coef=QFormat(2, 22), acc_bits=56))
    res = analyse_response(ch, prog)
    assert res.freqs_hz[0] <= 0.05 + 1e-12 and 0.5 in res.freqs_hz


def test_fir_stopband_attenuation_is_not_overstated():
    # The bundled 88.2 kHz decimator on 16-bit coefficients: the grid's stopband figure against
    # a 2^21-point FFT of the realised taps (numpy.fft as the reference) over the same band.
    d = load(REPO / "filters" / "decimator_88k2.toml").design()
    real = d.realise("mcu16")
    ch, prog = d.channels[0], real.programs[0]
    res = analyse_response(ch, prog, passband=((0.0, 20000.0),), stopband=((22050.0, 44100.0),))
    taps = np.concatenate([b.taps for b in as_float_blocks(prog) if hasattr(b, "taps")])
    gains = np.prod([b.gain for b in as_float_blocks(prog) if hasattr(b, "gain")])
    spec = np.abs(gains * np.fft.rfft(taps, 1 << 21))
    fr = np.arange(spec.size) * 88200.0 / (1 << 21)
    ref_peak = 20 * np.log10(np.max(spec[fr <= 20000.0]))
    ref_stop = 20 * np.log10(np.max(spec[fr >= 22050.0]))
    ref_att = ref_peak - ref_stop
    # a grid can only miss a peak, so it can only overstate the attenuation; by at most 0.05 dB
    assert res.stopband_attenuation_db >= ref_att - 0.01
    assert res.stopband_attenuation_db - ref_att <= 0.05
