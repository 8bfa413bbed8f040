"""[[sum]] tables: the sum of channels as realised, checked on the float design and bit-true.

References: S. H. Linkwitz, "Active crossover networks for noncoincident drivers",
J. Audio Eng. Soc. 24(1), 1976 -- the low and high outputs of a Linkwitz-Riley
LR4 crossover (each a second-order Butterworth squared) add to an all-pass of flat
magnitude [confirmed: the LR4 sum is |(1 - (s/w)^2)^2 ... | = 1, derived below];
an inverted driver instead subtracts and digs a hole at the crossover.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

import coefc
from coefc.analyse.sums import multisine
from coefc.blocks import chain_response
from coefc.budget import run_check
from coefc.blocks import as_float_blocks
from coefc.errors import DescriptionError
from coefc.spec import load_description

from conftest import FILTERS

TWO_WAY = """
name = "lr4"
sample_rate_hz = 48000

[implementation]
target = "{target}"

[[channel]]
name = "low"
stages = [ {{ kind = "lowpass", response = "linkwitz-riley", order = 4, cutoff_hz = 2000 }} ]

[[channel]]
name = "high"
stages = [ {{ kind = "highpass", response = "linkwitz-riley", order = 4, cutoff_hz = 2000 }} ]

[[sum]]
name = "xover"
channels = ["low", "high"]
target_db = 0
tolerance_db = {tol}
band_hz = [20, 20000]
"""

THREE_WAY = """
name = "three"
sample_rate_hz = 48000

[implementation]
target = "mcu32"

[[channel]]
name = "woofer"
stages = [ {{ kind = "lowpass", response = "linkwitz-riley", order = 4, cutoff_hz = 300 }} ]

[[channel]]
name = "mid"
stages = [
  {{ kind = "highpass", response = "linkwitz-riley", order = 4, cutoff_hz = 300 }},
  {{ kind = "lowpass", response = "linkwitz-riley", order = 4, cutoff_hz = 3000 }},
  {{ kind = "gain", db = 0, invert = {invert} }},
]

[[channel]]
name = "tweeter"
stages = [ {{ kind = "highpass", response = "linkwitz-riley", order = 4, cutoff_hz = 3000 }} ]

[[sum]]
name = "acoustic"
channels = ["woofer", "mid", "tweeter"]
target_db = 0
tolerance_db = 1.0
band_hz = [50, 15000]
"""


def real_programs(rep, tmp_path, name="d.toml"):
    return coefc.load(tmp_path / name).design().realise().programs


def _check(tmp_path, text, name="d.toml"):
    p = tmp_path / name
    p.write_text(text)
    loaded = coefc.load(p)
    real = loaded.design().realise()
    return run_check(real, loaded.description.budget), p


@pytest.mark.parametrize("target", ["mcu32", "mcu16", "float32"])
def test_lr4_sum_is_flat(tmp_path, target):
    rep, _ = _check(tmp_path, TWO_WAY.format(target=target, tol=0.1))
    (s,) = rep.sums
    a = s.analysis
    # Linkwitz 1976: LR4 low + high = all-pass, |sum| = 1 (0 dB) at every frequency, within
    # numerical precision for the float design
    assert a.float_deviation_db < 1e-9
    assert a.overflow_events == 0 and s.ok
    if target == "float32":
        return  # float32 roundoff is relative to the signal, not the additive noise of the model below
    # bit-true: the sum of the realised coefficients' responses (scipy.signal.sosfreqz of the
    # quantised integers) plus the roundoff error at each bin.  Its size follows Jackson's
    # additive noise model (coefc.analyse.noise's one-sided density P(f)): an N-point DFT of noise of density P
    # has E|E_k|^2 = N P(f_k) fs / 2, so the relative error at bin k has standard deviation
    # sqrt(N P fs / 2) / |X_k|; a Gaussian's largest of ~5000 bins stays within 6 of them.
    lin = sum(chain_response(as_float_blocks(p), a.freqs_hz, 48000) for p in real_programs(rep, tmp_path))
    m = a.in_band()
    f, n = a.freqs_hz[m], a.period
    dens = np.zeros(f.shape)
    for ch in rep.channels:
        dens += 0.5 * 10 ** (ch.analysis.noise.spectrum(f, 48000) / 10)
    X = np.abs(np.fft.rfft(multisine(n) * a.input_peak))[m]
    sigma = np.sqrt(n * dens * 48000 / 2) / X
    err = np.abs(np.abs(a.realised_response[m]) / np.abs(lin[m]) - 1)
    assert np.max(err / sigma) < 6, np.max(err / sigma)
    # the bins of the band, all of them measured
    assert a.as_dict()["bins_in_band"] == np.count_nonzero((a.freqs_hz >= 20) & (a.freqs_hz <= 20000))


def test_lr4_sum_check_fails_for_a_tolerance_it_cannot_meet(tmp_path):
    # a 16-bit realisation is not flat to 1e-9 dB: the check compares, and fails
    rep, _ = _check(tmp_path, TWO_WAY.format(target="mcu16", tol=1e-9))
    assert not rep.sums[0].ok and "sum xover" in [f[0] for f in rep.failures()] and not rep.ok


def _lr4_analog(f, fc, high):
    """LR4 = second-order Butterworth squared (Linkwitz 1976), analog, at f."""
    s = 1j * f / fc
    b2 = (s * s if high else 1.0) / (s * s + np.sqrt(2) * s + 1)
    return b2 * b2


def test_inverted_mid_digs_a_hole_at_the_crossover(tmp_path):
    good, _ = _check(tmp_path, THREE_WAY.format(invert="false"), "good.toml")
    bad, path = _check(tmp_path, THREE_WAY.format(invert="true"), "bad.toml")
    assert good.sums[0].ok, good.sums[0].reasons
    (s,) = bad.sums
    assert not s.ok and not bad.ok
    a = s.analysis
    # the analog reference at 300 Hz: woofer LR4 low at its cutoff, mid inverted (LR4 high at 300 Hz times
    # LR4 low of 3 kHz), tweeter LR4 high of 3 kHz (Linkwitz 1976); about -17 dB
    f0 = 300.0
    ref = _lr4_analog(f0, 300, False) - _lr4_analog(f0, 300, True) * _lr4_analog(f0, 3000, False) \
        + _lr4_analog(f0, 3000, True)
    ref_db = 20 * np.log10(abs(ref))
    assert ref_db < -15
    k = int(np.argmin(np.abs(a.freqs_hz - f0)))
    assert abs(20 * np.log10(abs(a.float_response[k])) - ref_db) < 0.3  # bilinear warping at 300 Hz is small
    assert abs(20 * np.log10(abs(a.realised_response[k])) - ref_db) < 0.3
    # the check names the hole: worst level at least as deep as the reference, near the lower crossover
    assert a.realised_worst_level_db <= ref_db + 0.3
    assert min(abs(np.log2(a.realised_worst_hz / fc)) for fc in (300, 3000)) < 1  # within an octave of one
    assert "inverted" in s.reasons["sum_deviation_db"]
    # through the CLI: exit 1, the row in the text and the JSON
    r = subprocess.run([sys.executable, "-c", "from coefc.cli import main; main()", "check", str(path)],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 1 and "FAIL sum_deviation_db" in r.stdout and "sum acoustic  [FAIL]" in r.stdout
    j = json.loads(subprocess.run([sys.executable, "-c", "from coefc.cli import main; main()", "check", str(path),
                                   "--json", "-"], capture_output=True, text=True, timeout=300).stdout)
    (js,) = j["sums"]
    assert js["ok"] is False and js["checks"][0]["name"] == "sum_deviation_db" and j["ok"] is False
    assert js["channels"] == ["woofer", "mid", "tweeter"] and js["checks"][0]["limit"] == 1.0


def test_sum_of_channels_left_out_is_not_checked(tmp_path):
    p = tmp_path / "d.toml"
    p.write_text(TWO_WAY.format(target="mcu32", tol=0.05))
    loaded = coefc.load(p)
    real = loaded.design(["low"]).realise()
    assert run_check(real, loaded.description.budget).sums == ()


def test_three_way_monitor_states_its_sum():
    d = load_description(FILTERS / "three_way_monitor.toml")
    assert [s.channels for s in d.sums] == [("woofer", "mid", "tweeter")]


@pytest.mark.parametrize("sums, fragment", [
    ('[[sum]]\nname = "s"\nchannels = "low"\ntarget_db = 0\ntolerance_db = 1\nband_hz = [20, 200]\n',
     "expected a list of channel names"),
    ('[[sum]]\nname = "s"\nchannels = ["low", "low"]\ntarget_db = 0\ntolerance_db = 1\nband_hz = [20, 200]\n',
     "names a channel twice"),
    ('[[sum]]\nname = "s"\nchannels = ["low", "high"]\ntarget_db = 0\ntolerance_db = 0\nband_hz = [20, 200]\n',
     "must be greater than 0"),
    ('[[sum]]\nname = "s"\nchannels = ["low", "high"]\ntarget_db = 0\ntolerance_db = 1\nband_hz = [200, 20]\n',
     "the low edge must be below the high edge"),
    ('[[sum]]\nchannels = ["low", "high"]\ntarget_db = 0\ntolerance_db = 1\nband_hz = [20, 200]\n',
     "sum[1].name"),
    ('sum = 3\n', "write each sum as [[sum]]"),
])
def test_bad_sums_name_file_and_key(tmp_path, sums, fragment):
    base = TWO_WAY.format(target="mcu32", tol=1).split("[[sum]]")[0]
    p = tmp_path / "bad.toml"
    p.write_text(sums + base if sums.startswith("sum =") else base + sums)
    with pytest.raises(DescriptionError) as info:
        load_description(p)
    assert fragment in str(info.value) and str(p) in str(info.value) and "\n" not in str(info.value)
