"""Measurements in, corrections out: reading, smoothing, the fitted EQ and the inverse FIR.

Outside references:
- R. Bristow-Johnson, "Cookbook formulae for audio EQ biquad filter coefficients"
  (the Audio EQ Cookbook; confirmed source): the peaking and shelving sections
  the synthetic "measurements" are made of, written out below independently of
  coefc's own implementation;
- scipy.signal.sosfreqz / freqz as the reference for responses;
- P. D. Hatziantoniou & J. N. Mourjopoulos, J. Audio Eng. Soc. 48(4), 2000
  (confirmed citation): a fractional-octave window of width 1/b octave;
- A. V. Oppenheim & R. W. Schafer, Discrete-Time Signal Processing, 3rd ed.
  (from memory): a minimum-phase sequence is fixed by its magnitude, and of all
  sequences with one magnitude it has the most energy in its first samples.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy import signal
from scipy.io import wavfile

from coefc.design import design_channel
from coefc.design.correction import minimum_phase_fir
from coefc.errors import DescriptionError
from coefc.fileio.measurement import MeasurementError, log_axis, parse_csv, smooth_fractional_octave
from coefc.spec import parse_description

FS = 48000.0
DENSE = np.unique(np.concatenate([np.geomspace(1.0, FS / 2 * 0.9999, 20000), np.linspace(1, FS / 2 - 1, 8000)]))


def cookbook_peaking(f0, q, gain_db, fs=FS):
    """Peaking EQ from the Audio EQ Cookbook's formulas (written out here, independent of coefc)."""
    a = 10 ** (gain_db / 40)
    w0 = 2 * math.pi * f0 / fs
    alpha = math.sin(w0) / (2 * q)
    b = [1 + alpha * a, -2 * math.cos(w0), 1 - alpha * a]
    den = [1 + alpha / a, -2 * math.cos(w0), 1 - alpha / a]
    return np.array(b + den) / den[0]


def cookbook_lowshelf(f0, slope, gain_db, fs=FS):
    """Low shelf from the Audio EQ Cookbook's formulas (shelf slope S)."""
    a = 10 ** (gain_db / 40)
    w0 = 2 * math.pi * f0 / fs
    c = math.cos(w0)
    alpha = math.sin(w0) / 2 * math.sqrt((a + 1 / a) * (1 / slope - 1) + 2)
    sq = 2 * math.sqrt(a) * alpha
    b = [a * ((a + 1) - (a - 1) * c + sq), 2 * a * ((a - 1) - (a + 1) * c), a * ((a + 1) - (a - 1) * c - sq)]
    den = [(a + 1) + (a - 1) * c + sq, -2 * ((a - 1) + (a + 1) * c), (a + 1) + (a - 1) * c - sq]
    return np.array(b + den) / den[0]


def write_csv(path: Path, sos, level_db=80.0, lo=20.0, hi=20000.0, n=400, phase=False):
    f = np.geomspace(lo, hi, n)
    h = signal.sosfreqz(np.atleast_2d(sos), worN=f, fs=FS)[1]
    rows = ["# synthetic test measurement", "frequency_hz,magnitude_db" + (",phase_deg" if phase else "")]
    for fi, hi_ in zip(f, h):
        rows.append(f"{fi:.9g},{20 * math.log10(abs(hi_)) + level_db:.9g}"
                    + (f",{math.degrees(np.angle(hi_)):.6g}" if phase else ""))
    path.write_text("\n".join(rows) + "\n")


def design_in(tmp_path: Path, *stages: str, fs: float = FS):
    text = (f'name = "t"\nsample_rate_hz = {fs}\n[[channel]]\nname = "c"\nstages = [\n'
            + "".join(f"  {s},\n" for s in stages) + "]\n")
    src = tmp_path / "d.toml"
    src.write_text(text)
    d = parse_description(text.encode(), str(src))
    return design_channel(d.channels[0], d.sample_rate_hz, d.source)


def db(h):
    return 20 * np.log10(np.abs(h))


# ---------------------------------------------------------------- smoothing


def test_smoothing_keeps_a_flat_response_flat():
    # Definition of an average (Hatziantoniou & Mourjopoulos 2000): the mean of a constant is the constant.
    f = np.geomspace(20, 20000, 321)
    for width in (1 / 24, 1 / 6, 1 / 3, 1.0):
        _, m = smooth_fractional_octave(f, np.full(f.size, 87.5), width)
        np.testing.assert_allclose(m, 87.5, atol=1e-9)


@pytest.mark.parametrize("b", [3, 6, 12])
def test_smoothing_spreads_a_single_spike_over_one_window_width(b):
    # A rectangular window 1/b octave wide (Hatziantoniou & Mourjopoulos 2000): a spike at one
    # frequency f0 raises the smoothed response exactly on [f0 2^(-1/2b), f0 2^(1/2b)], i.e. over
    # 1/b octave, to the window's mean power.  The axis has 96 points per octave (grid step 1/96 oct).
    f = log_axis(100.0, 10000.0, 96)
    base = np.full(f.size, -60.0)
    k = f.size // 2
    base[k] = 0.0
    g, m = smooth_fractional_octave(f, base, 1 / b)
    np.testing.assert_allclose(g, f)
    raised = np.flatnonzero(m > -60 + 1e-6)
    width_oct = math.log2(g[raised[-1]] / g[raised[0]])
    step = math.log2(f[1] / f[0])
    assert abs(width_oct - 1 / b) <= step + 1e-9
    # the raised part is the window's mean power: (1 + (n - 1) 1e-6) / n for a window of n points
    n = raised.size
    np.testing.assert_allclose(10 ** (m[raised] / 10), (1 + (n - 1) * 1e-6) / n, rtol=1e-9)


# ---------------------------------------------------------------- CSV and WAV reading


def test_csv_reads_comments_and_phase():
    text = "# a comment\nfrequency_hz,magnitude_db,phase_deg\n" + "".join(
        f"{100 * (i + 1)},{-i},{i * 10}  # row {i}\n" for i in range(12))
    m = parse_csv(text.encode(), "x.csv", 48000)
    assert list(m.freqs_hz[:3]) == [100, 200, 300] and m.magnitude_db[2] == -2 and m.phase_deg[3] == 30


BAD_CSV = [
    ("frequency_hz,magnitude_db\n" + "".join(f"{f},0\n" for f in [10, 20, 30, 25, 40, 50, 60, 70, 80, 90, 100]),
     "line 5: frequency_hz 25 is not above the previous row's 30"),
    ("frequency_hz,magnitude_db\n" + "".join(f"{f},0\n" for f in [10, 20, 20, 40, 50, 60, 70, 80, 90, 100]),
     "line 4: frequency_hz 20 is not above"),
    ("frequency_hz,magnitude_db\n" + "".join(f"{f},{'nan' if f == 40 else 0}\n" for f in range(10, 130, 10)),
     "line 5: magnitude_db is nan"),
    ("frequency_hz,magnitude_db\n" + "".join(f"{f},0\n" for f in range(10, 100, 10)), "9 data rows"),
    ("freq,mag\n" + "".join(f"{f},0\n" for f in range(10, 130, 10)), "line 1: the first row must be the header"),
    ("frequency_hz,magnitude_db\n10,0,5\n", "line 2: 3 values, the header names 2"),
    ("frequency_hz,magnitude_db\n10,abc\n", "line 2: magnitude_db 'abc' is not a number"),
    ("frequency_hz,magnitude_db\n0,0\n", "line 2: frequency_hz 0 must be above 0 Hz"),
    ("frequency_hz,magnitude_db\n30000,0\n", "above Nyquist (24000 Hz"),
    ("# only a comment\n", "no header row"),
    ("frequency_hz,magnitude_db\n10,1e6\n", "beyond +-300 dB"),
]


@pytest.mark.parametrize("text, fragment", BAD_CSV)
def test_bad_csv_names_the_line_and_the_fix(text, fragment):
    with pytest.raises(MeasurementError) as e:
        parse_csv(text.encode(), "m.csv", 48000)
    assert str(e.value).startswith("m.csv")
    assert fragment in str(e.value)
    assert "\n" not in str(e.value)


def test_wav_impulse_response_gives_the_filters_response(tmp_path):
    # scipy.signal.freqz as the reference: the WAV holds the impulse response of a known peaking section
    sos = cookbook_peaking(1000, 2.0, -6.0)
    x = np.zeros(8192)
    x[0] = 0.5
    h = signal.sosfilt(sos[None, :], x)
    wavfile.write(tmp_path / "ir.wav", int(FS), h.astype(np.float64))
    ch = design_in(tmp_path, '{ kind = "correction", measurement = "ir.wav", range_hz = [100, 10000], '
                             'sections = 1, max_boost_db = 8 }')
    st = ch.stages[0]
    sec = st.requirement["sections"]
    assert len(sec) == 1 and sec[0]["kind"] == "peaking"
    # the correction inverts the section: +6 dB at 1 kHz, Q 2 (within 0.1 dB and 1 %)
    assert sec[0]["gain_db"] == pytest.approx(6.0, abs=0.1)
    assert sec[0]["freq_hz"] == pytest.approx(1000, rel=0.01)
    assert sec[0]["q"] == pytest.approx(2.0, rel=0.02)


@pytest.mark.parametrize("channels, rate, fragment", [(2, 48000, "2 channels; an impulse response must be mono"),
                                                      (1, 44100, "recorded at 44100 Hz but the description runs "
                                                                 "at 48000 Hz; resample")])
def test_bad_wav_is_refused(tmp_path, channels, rate, fragment):
    data = np.zeros((256, channels) if channels > 1 else 256, dtype=np.float32)
    data[0] = 1
    wavfile.write(tmp_path / "ir.wav", rate, data)
    with pytest.raises(DescriptionError) as e:
        design_in(tmp_path, '{ kind = "correction", measurement = "ir.wav", range_hz = [100, 10000] }')
    msg = str(e.value)
    assert fragment in msg and "ir.wav" in msg and "stage 1, key 'measurement'" in msg


@pytest.mark.parametrize("name, fragment", [
    ("missing.csv", "missing.csv: file not found; the path is relative to the description's folder"),
    ("/etc/hostname.csv", "an absolute path; name the file relative to the description's folder"),
    ("m.txt", "unsupported measurement format '.txt'"),
])
def test_bad_measurement_names(tmp_path, name, fragment):
    with pytest.raises(DescriptionError) as e:
        design_in(tmp_path, f'{{ kind = "correction", measurement = "{name}", range_hz = [100, 10000] }}')
    assert fragment in str(e.value)


def test_range_beyond_the_measurement_is_refused(tmp_path):
    write_csv(tmp_path / "m.csv", cookbook_peaking(1000, 1, -3), lo=100, hi=5000)
    with pytest.raises(DescriptionError) as e:
        design_in(tmp_path, '{ kind = "correction", measurement = "m.csv", range_hz = [50, 4000] }')
    assert "does not cover range_hz [50, 4000]; narrow range_hz" in str(e.value)


# ---------------------------------------------------------------- the fitted EQ


def test_fit_recovers_known_cookbook_sections(tmp_path):
    # The measurement is two cookbook peaking sections; the exact correction is their inverse, which is
    # again two cookbook sections with negated gains (the cookbook's peaking form: H(-g) = 1 / H(g)).
    meas = np.array([cookbook_peaking(400, 2.0, 6.0), cookbook_peaking(3000, 1.2, -5.0)])
    write_csv(tmp_path / "m.csv", meas, level_db=0.0)
    ch = design_in(tmp_path, '{ kind = "correction", measurement = "m.csv", range_hz = [30, 15000], '
                             'sections = 4, max_boost_db = 6, target_db = 0 }')
    sec = sorted(ch.stages[0].requirement["sections"], key=lambda s: s["freq_hz"])
    assert [s["kind"] for s in sec] == ["peaking", "peaking"]
    for s, (f0, q, g) in zip(sec, [(400, 2.0, -6.0), (3000, 1.2, 5.0)]):
        assert s["freq_hz"] == pytest.approx(f0, rel=0.005)
        assert s["q"] == pytest.approx(q, rel=0.01)
        assert s["gain_db"] == pytest.approx(g, abs=0.1)
    # measured x correction is flat within 0.1 dB over the range (scipy.signal.sosfreqz as reference)
    f = np.geomspace(30, 15000, 2000)
    total = db(signal.sosfreqz(meas, worN=f, fs=FS)[1] * ch.response(f))
    assert np.max(np.abs(total)) < 0.1


def test_correction_flattens_a_measurement_of_peaks_and_a_shelf(tmp_path):
    meas = np.array([cookbook_lowshelf(150, 0.8, 4.0), cookbook_peaking(900, 3.0, -4.0),
                     cookbook_peaking(2500, 1.5, 3.0)])
    write_csv(tmp_path / "m.csv", meas, level_db=84.0)
    ch = design_in(tmp_path, '{ kind = "correction", measurement = "m.csv", range_hz = [40, 12000], '
                             'sections = 5, max_boost_db = 6 }')
    st = ch.stages[0]
    f = np.geomspace(40, 12000, 3000)
    total = db(signal.sosfreqz(meas, worN=f, fs=FS)[1] * ch.response(f)) + 84.0
    target = np.median(total)  # flat at a level: the shape matters
    assert np.max(np.abs(total - target)) < 0.25
    assert st.requirement["residual_max_db"] < 0.25


def test_boost_never_exceeds_max_boost_anywhere(tmp_path):
    # A deep, wide dip asks for +12 dB; max_boost_db = 3 must hold on a dense grid 1 Hz .. Nyquist
    meas = np.array([cookbook_peaking(800, 1.0, -12.0), cookbook_peaking(1300, 2.0, -6.0)])
    write_csv(tmp_path / "m.csv", meas)
    for boost in (0, 3):
        ch = design_in(tmp_path, '{ kind = "correction", measurement = "m.csv", range_hz = [50, 10000], '
                                 f'sections = 6, max_boost_db = {boost} }}')
        assert np.max(db(ch.response(DENSE))) <= boost + 0.011
        assert ch.stages[0].requirement["largest_boost_db"] <= boost + 0.011


def test_cut_never_exceeds_max_cut_anywhere(tmp_path):
    meas = np.array([cookbook_peaking(500, 1.5, 12.0), cookbook_peaking(700, 1.5, 8.0)])
    write_csv(tmp_path / "m.csv", meas)
    ch = design_in(tmp_path, '{ kind = "correction", measurement = "m.csv", range_hz = [50, 10000], '
                             'sections = 6, max_cut_db = 5, max_boost_db = 2 }')
    c = db(ch.response(DENSE))
    assert np.min(c) >= -5.011 and np.max(c) <= 2.011


def test_q_stays_within_its_bounds(tmp_path):
    meas = np.array([cookbook_peaking(1000, 12.0, 6.0)])
    write_csv(tmp_path / "m.csv", meas)
    ch = design_in(tmp_path, '{ kind = "correction", measurement = "m.csv", range_hz = [50, 10000], '
                             'sections = 3, q_min = 0.7, q_max = 4, max_boost_db = 3 }')
    qs = [s["q"] for s in ch.stages[0].requirement["sections"] if s["kind"] == "peaking"]
    assert qs and all(0.7 * (1 - 1e-9) <= q <= 4 * (1 + 1e-9) for q in qs)


def test_fit_is_deterministic(tmp_path):
    meas = np.array([cookbook_lowshelf(200, 1.0, -3.0), cookbook_peaking(1100, 2.5, 5.0)])
    write_csv(tmp_path / "m.csv", meas)
    stage = ('{ kind = "correction", measurement = "m.csv", range_hz = [60, 8000], sections = 4, '
             'max_boost_db = 3, smoothing_oct = 0.1667 }')
    a, b = design_in(tmp_path, stage), design_in(tmp_path, stage)
    assert np.array_equal(a.sos(), b.sos())


def test_target_db_sets_the_level_and_a_curve_sets_the_shape(tmp_path):
    write_csv(tmp_path / "m.csv", np.array([cookbook_peaking(1000, 1, 0.0)]), level_db=80.0)  # flat 80 dB
    ch = design_in(tmp_path, '{ kind = "correction", measurement = "m.csv", range_hz = [100, 10000], '
                             'target_db = 74 }')
    np.testing.assert_allclose(db(ch.response([100, 1000, 10000])), -6.0, atol=0.01)
    # a target curve: -1 dB per octave; its median over the range goes to the level
    f = np.geomspace(20, 20000, 61)
    (tmp_path / "t.csv").write_text("frequency_hz,magnitude_db\n"
                                    + "".join(f"{x:.6g},{-math.log2(x / 1000):.6g}\n" for x in f))
    ch = design_in(tmp_path, '{ kind = "correction", measurement = "m.csv", range_hz = [100, 10000], '
                             'target = "t.csv", target_db = 80, sections = 4, max_boost_db = 4, max_cut_db = 4 }')
    g = np.geomspace(150, 7000, 50)
    np.testing.assert_allclose(db(ch.response(g)), -np.log2(g / 1000), atol=0.35)


# ---------------------------------------------------------------- the inverse FIR


def test_minimum_phase_from_magnitude_recovers_a_minimum_phase_fir():
    # Oppenheim & Schafer (from memory): a minimum-phase sequence is determined by its magnitude.
    h0 = np.convolve([1.0, -0.5], [1.0, 0.3, 0.2])  # zeros inside the unit circle
    assert np.all(np.abs(np.roots(h0)) < 1)
    mag = np.abs(np.fft.rfft(h0, 8192))
    h = minimum_phase_fir(mag, 16)
    np.testing.assert_allclose(h[:4], h0, atol=1e-9)
    np.testing.assert_allclose(h[4:], 0, atol=1e-9)


def test_fir_correction_flattens_and_leaves_the_outside_alone(tmp_path):
    meas = np.array([cookbook_peaking(1000, 2.0, -6.0), cookbook_peaking(4000, 1.5, 5.0)])
    write_csv(tmp_path / "m.csv", meas)
    ch = design_in(tmp_path, '{ kind = "fir-correction", measurement = "m.csv", range_hz = [300, 8000], '
                             'taps = 1024, max_boost_db = 6 }')
    f = np.geomspace(400, 7000, 500)
    total = db(signal.sosfreqz(meas, worN=f, fs=FS)[1] * ch.response(f))
    assert np.max(np.abs(total - np.median(total))) < 0.3
    # two octaves beyond the range the regularisation leaves the response (nearly) alone
    assert np.max(np.abs(db(ch.response([40, 60, 20000, 23000])))) < 0.3
    assert np.max(db(ch.response(DENSE))) <= 6.011


def test_fir_correction_phases(tmp_path):
    meas = np.array([cookbook_peaking(2000, 2.0, -8.0)])
    write_csv(tmp_path / "m.csv", meas)
    base = '{ kind = "fir-correction", measurement = "m.csv", range_hz = [200, 10000], taps = 255, max_boost_db = 9'
    lin = design_in(tmp_path, base + ', phase = "linear" }')
    mini = design_in(tmp_path, base + ' }')
    h_lin, h_min = lin.blocks[0].taps, mini.blocks[0].taps
    assert np.array_equal(h_lin, h_lin[::-1]) and lin.stages[0].latency_samples == 127
    # Oppenheim & Schafer (from memory): of sequences with (nearly) one magnitude, the minimum-phase one
    # has the most partial energy; the linear-phase FIR has the same magnitude target.
    e_lin, e_min = np.cumsum(h_lin ** 2), np.cumsum(h_min ** 2)
    assert np.all(e_min[:100] / e_min[-1] >= e_lin[:100] / e_lin[-1] - 1e-9)
    f = np.geomspace(500, 8000, 200)
    # tolerances measured with these 255 taps: the Hann window of the linear-phase design smooths the
    # inverse of a Q 2 section by about 0.6 dB; the minimum-phase design keeps within 0.1 dB
    for ch, tol in ((lin, 0.7), (mini, 0.1)):
        total = db(signal.sosfreqz(meas, worN=f, fs=FS)[1] * ch.response(f))
        assert np.max(np.abs(total - np.median(total))) < tol


# ---------------------------------------------------------------- the budget check and the boost caution


def test_correction_error_check_bounds_the_realised_error(tmp_path):
    from types import SimpleNamespace

    from coefc.budget import _boost_cautions, channel_checks
    from coefc.spec import Budget

    meas = np.array([cookbook_peaking(800, 1.0, -6.0)])
    write_csv(tmp_path / "m.csv", meas)
    ch = design_in(tmp_path, '{ kind = "correction", measurement = "m.csv", range_hz = [100, 8000], '
                             'sections = 1, max_boost_db = 3 }')
    residual = ch.stages[0].requirement["residual_max_db"]
    f = np.geomspace(10, 23000, 400)
    float_db = db(ch.response(f))
    quantised = float_db + np.where((f > 1000) & (f < 1200), 0.05, 0.0)  # a known quantisation deviation
    m = SimpleNamespace(response=SimpleNamespace(freqs_hz=f, float_db=float_db, quantised_db=quantised,
                                                 stable=True, max_pole_radius=0.9),
                        limit_cycles=None, overflow=None)
    # triangle inequality (arithmetic): realised error <= float residual + |quantised - float|
    for lim, ok in ((residual + 0.06, True), (residual + 0.04, False)):
        checks, why = channel_checks(m, Budget(correction_error_db=lim), design=ch)
        c = next(c for c in checks if c.name == "correction_error_db")
        assert c.value == pytest.approx(residual + 0.05, abs=1e-12) and c.ok is ok
    # the boost the correction needed (close to the 3 dB limit) is a caution that states it
    boost = ch.stages[0].requirement["largest_boost_db"]
    assert 2 < boost <= 3.01
    (caution,) = _boost_cautions([SimpleNamespace(name="c", stages=ch.stages)])
    assert f"boosts by up to {boost:+.2f} dB" in caution and "excursion and thermal limits" in caution


def test_correction_error_is_not_applicable_without_a_correction():
    from types import SimpleNamespace

    from coefc.budget import channel_checks
    from coefc.spec import Budget
    from design_util import design

    ch = design('{ kind = "gain", db = -3 }')
    m = SimpleNamespace(response=SimpleNamespace(freqs_hz=np.array([1.0]), float_db=np.zeros(1),
                                                 quantised_db=np.zeros(1), stable=True, max_pole_radius=0.0),
                        limit_cycles=None, overflow=None)
    checks, why = channel_checks(m, Budget(correction_error_db=0.5), design=ch)
    c = next(c for c in checks if c.name == "correction_error_db")
    assert c.value is None and c.ok and "not applicable" in why["correction_error_db"]


def test_report_overlays_measured_correction_corrected_and_target(tmp_path):
    pytest.importorskip("matplotlib")
    from coefc.reports.html import _pyplot, correction_svgs

    write_csv(tmp_path / "m.csv", np.array([cookbook_peaking(800, 1.0, 4.0)]))
    ch = design_in(tmp_path, '{ kind = "correction", measurement = "m.csv", range_hz = [100, 8000], sections = 1 }',
                   '{ kind = "gain", db = -1 }')
    curves = ch.stages[0].requirement["curves"]
    # corrected = measured + correction on the stage's own grid (what the plot draws)
    corrected = np.array(curves["measured_db"]) + np.array(curves["correction_db"])
    assert np.max(np.abs(corrected - np.array(curves["target_db"]))) == pytest.approx(
        ch.stages[0].requirement["residual_max_db"], abs=1e-3)
    plt = _pyplot()
    (fig,) = correction_svgs(plt, ch)
    plt.close("all")
    assert fig["title"].startswith("Stage 1: correction")
    for label in ("measured (smoothed)", "corrected", "target"):
        assert label in fig["svg"]


def test_header_banner_names_each_input_file_with_its_sha256(tmp_path):
    import hashlib

    import coefc
    from coefc.emit.header import render

    write_csv(tmp_path / "m.csv", np.array([cookbook_peaking(800, 1.0, -4.0)]))
    (tmp_path / "d.toml").write_text('name = "t"\nsample_rate_hz = 48000\n[[channel]]\nname = "c"\nstages = [\n'
                                     '  { kind = "correction", measurement = "m.csv", range_hz = [100, 8000], '
                                     'sections = 1, max_boost_db = 3 },\n]\n')
    real = coefc.load(str(tmp_path / "d.toml")).design().realise(target="mcu32")
    files = render(real, header_name="t.h")
    sha = hashlib.sha256((tmp_path / "m.csv").read_bytes()).hexdigest()  # FIPS 180-4 via hashlib
    assert f"input        m.csv (sha256 {sha})" in files["t.h"]
