"""``coefc align``: arrival by cross-correlation with sub-sample refinement, band level, alignment stages.

References: the DFT shift theorem (a delay of t samples multiplies bin k by
e^{-j 2 pi k t / n}; Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed.,
sec. 8.6, from memory) makes band-limited test signals with an exactly known
fractional delay; 20 log10(0.5) = -6.0206 dB is arithmetic.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import signal
from scipy.io import wavfile

from coefc.design.alignment import align, alignment_stages
from coefc.errors import DataError
from test_cli_design import run_cli

FS = 48000


def impulse_response(n=4096, start=200):
    x = np.zeros(n)
    x[start] = 1.0
    b, a = signal.butter(2, [200 / (FS / 2), 6000 / (FS / 2)], "band")
    return signal.lfilter(b, a, x)


def shifted(h, t):
    """*h* delayed by *t* samples (DFT shift theorem: exact for the circular, band-limited signal)."""
    n = h.size
    H = np.fft.rfft(h)
    w = 2 * np.pi * np.arange(H.size) / n
    return np.fft.irfft(H * np.exp(-1j * w * t), n)


@pytest.mark.parametrize("t", [3.37, -12.81, 0.25, 40.5])
def test_alignment_recovers_a_known_delay_within_005_samples_in_noise(tmp_path, t):
    rng = np.random.default_rng(7)
    h = impulse_response()
    noise = 10 ** (-40 / 20) * np.max(np.abs(h))  # noise 40 dB below the peak
    wavfile.write(tmp_path / "a.wav", FS, (h + rng.normal(0, noise, h.size)).astype(np.float32))
    g = shifted(h, t) * 0.5
    wavfile.write(tmp_path / "b.wav", FS, (g + rng.normal(0, noise / 2, h.size)).astype(np.float32))
    fs, arr = align([str(tmp_path / "a.wav"), str(tmp_path / "b.wav")])
    assert abs(arr[1].lag_samples - t) <= 0.05
    assert not arr[1].inverted
    rows = alignment_stages(fs, arr)
    late, early = (rows[1], rows[0]) if t > 0 else (rows[0], rows[1])
    assert late["delay_samples"] == 0 and early["delay_samples"] == pytest.approx(abs(t), abs=0.05)


def test_band_level_and_gain_stage_of_a_halved_response(tmp_path):
    h = impulse_response()
    wavfile.write(tmp_path / "a.wav", FS, h)
    wavfile.write(tmp_path / "b.wav", FS, 0.5 * shifted(h, 1.5))
    fs, arr = align([str(tmp_path / "a.wav"), str(tmp_path / "b.wav")], (300.0, 3000.0))
    # 20 log10(0.5) = -6.0206 dB (the delay does not change the magnitude)
    assert arr[1].level_db - arr[0].level_db == pytest.approx(-6.0206, abs=1e-6)
    rows = alignment_stages(fs, arr)
    assert rows[0]["gain_db"] == pytest.approx(-6.0206, abs=1e-6) and rows[1]["gain_db"] == 0


def test_inverted_polarity_is_found(tmp_path):
    h = impulse_response()
    wavfile.write(tmp_path / "a.wav", FS, h.astype(np.float32))
    wavfile.write(tmp_path / "b.wav", FS, (-shifted(h, 2.5)).astype(np.float32))
    _, arr = align([str(tmp_path / "a.wav"), str(tmp_path / "b.wav")])
    assert arr[1].inverted and abs(arr[1].lag_samples - 2.5) <= 0.05


def test_align_command_prints_the_stages_and_json(tmp_path, capsys, monkeypatch):
    h = impulse_response()
    wavfile.write(tmp_path / "woofer.wav", FS, h.astype(np.float32))
    wavfile.write(tmp_path / "tweeter.wav", FS, (0.5 * shifted(h, -7.25)).astype(np.float32))
    code, out, err = run_cli(["align", tmp_path / "woofer.wav", tmp_path / "tweeter.wav"], capsys, monkeypatch)
    assert code == 0 and err == ""
    assert 'tweeter.wav: { kind = "delay", ms = 0.15104, interpolation = "thiran" }' in out  # 7.25 / 48 ms
    assert '{ kind = "gain", db = -6.02 }' in out
    code, out, _ = run_cli(["align", tmp_path / "woofer.wav", tmp_path / "tweeter.wav", "--json", "-"],
                           capsys, monkeypatch)
    doc = json.loads(out)
    assert code == 0 and doc["ways"][1]["arrival_samples"] == pytest.approx(-7.25, abs=0.01)


def test_align_bad_input_is_one_line(tmp_path, capsys, monkeypatch):
    h = impulse_response().astype(np.float32)
    wavfile.write(tmp_path / "a.wav", FS, h)
    wavfile.write(tmp_path / "b44.wav", 44100, h)
    wavfile.write(tmp_path / "st.wav", FS, np.stack([h, h], axis=1))
    for args, fragment in (([tmp_path / "a.wav", tmp_path / "missing.wav"], "missing.wav: file not found"),
                           ([tmp_path / "a.wav", tmp_path / "b44.wav"], "recorded at 44100 Hz"),
                           ([tmp_path / "a.wav", tmp_path / "st.wav"], "2 channels"),
                           ([tmp_path / "a.wav"], "at least two impulse responses"),
                           ([tmp_path / "a.wav", tmp_path / "a.wav", "--band", "10"], "not a band")):
        code, out, err = run_cli(["align", *args], capsys, monkeypatch)
        assert code == 2 and out == "" and len(err.strip().splitlines()) == 1 and fragment in err, err


def test_align_library_refuses_one_file():
    with pytest.raises(DataError):
        align(["x.wav"])
