"""Steady tones through the bit-true engine (coefc.analyse.tones) and their checks.

Outside references: scipy.signal.sosfreqz of the float design (the reference gain),
numpy.fft (the single-bin value the sine fit must equal), the IEC 61672-1 class 1
limits, the exact integer model of tests/exact_model.py (an independent reading of
the arithmetic), and issue 10's independent measurement of the failing case.
"""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from scipy import signal

import coefc
from coefc.analyse.response import analyse_response
from coefc.analyse.tones import MIN_OUTPUT_LSB, _coherent, _run, analyse_tones, settle_length
from coefc.budget import DEFAULT_TONE_GAIN_ERROR_DB, run_check
from coefc.design.weighting import CLASS1_TABLE
from coefc.program import SectionOp
from coefc.reports.text import render_json, render_text
from coefc.targetspec import Overrides

import exact_model
from conftest import FILTERS

MAIN = "from coefc.cli import main; main()"


def describe(tmp_path, stages, *, fs=48000, budget="", structure=None, target="mcu32", name="t"):
    impl = f'target = "{target}"\n' + (f'structure = "{structure}"\n' if structure else "")
    text = (f'name = "{name}"\nsample_rate_hz = {fs}\n[implementation]\n{impl}'
            + (f"[budget]\n{budget}\n" if budget else "")
            + '[[channel]]\nname = "main"\nstages = [\n' + ",\n".join(stages) + "\n]\n")
    path = tmp_path / f"{name}.toml"
    path.write_text(text)
    return path


def realise(path, **over):
    return coefc.load(path).design().realise(overrides=Overrides(**over) if over else None)


def tones_of(real, i=0, **kw):
    d, p = real.design.channels[i], real.programs[i]
    r = analyse_response(d, p)
    return analyse_tones(d, p, r.freqs_hz, r.float_db, **kw)


A_WEIGHTING = '{ kind = "weighting", weighting = "A" }'


# ------------------------------------------------------------------ the measurement itself

def test_a_plain_gain_measures_its_exact_gain(tmp_path):
    # 20*log10(0.5) = -6.0206 dB: arithmetic. A gain of exactly 0.5 and a delay change no
    # tone's amplitude beyond the rounding of one multiply.
    path = describe(tmp_path, ['{ kind = "gain", linear = 0.5 }', '{ kind = "delay", samples = 3 }'])
    t = tones_of(realise(path))
    assert t.status == "measured" and t.gated_count == len(t.tones) > 0
    for x in t.tones:
        assert x.gain_db == pytest.approx(20 * math.log10(0.5), abs=1e-5)
        assert abs(x.error_db) < 1e-5


def test_the_sine_fit_is_the_single_bin_dft(tmp_path):
    # numpy.fft.fft as the reference: over whole periods the least-squares fit at the
    # known frequency equals 2|X[m]|/N of the DFT (IEEE Std 1057 three-parameter fit).
    from coefc.simulate import simulate

    path = describe(tmp_path, ['{ kind = "peaking", freq_hz = 1000, q = 2.0, gain_db = 6.0 }'])
    real = realise(path)
    prog = real.programs[0]
    f, m, n = _coherent(1234.5, 48000.0)
    assert abs(f - 1234.5) / 1234.5 < 1e-3 and m * 48000.0 / n == f
    settle = 5000
    ain, aout, dc, res_p, ovf, scale = _run(prog, f, m, n, settle, 0.1)
    # rebuild the same input independently: the sine is periodic in n samples
    k = np.arange(settle + n) - settle
    x = np.round(0.1 * scale * np.sin(2 * np.pi * ((m * k) % n) / n)).astype(np.int64)
    y = simulate(prog, x)
    X, Y = np.fft.fft(x[settle:].astype(float)), np.fft.fft(y[settle:].astype(float))
    assert ain == pytest.approx(2 * abs(X[m]) / n, rel=1e-9)
    assert aout == pytest.approx(2 * abs(Y[m]) / n, rel=1e-9)
    assert dc == pytest.approx(Y[0].real / n, abs=1e-9)
    assert ovf == 0


CORRECT_32BIT = [
    ('{ kind = "lowpass", response = "butterworth", order = 4, cutoff_hz = 1000 }', None),
    # poles near z = 1 raise a DF1's low-frequency roundoff noise to where a -60 dBFS tone 30 dB
    # down in the stopband measures 0.2 dB off (still inside the default 0.5 dB); error feedback
    # (df1ef) is the trade's remedy and keeps every tone within 0.01 dB
    ('{ kind = "highpass", response = "butterworth", order = 2, cutoff_hz = 80 }', "df1ef"),
    ('{ kind = "peaking", freq_hz = 100, q = 2.0, gain_db = 6.0 }', None),
    (A_WEIGHTING, "df1ef"),
    ('{ kind = "weighting", weighting = "C" }', "df1ef"),
]


@pytest.mark.parametrize("stage,structure", CORRECT_32BIT, ids=lambda v: str(v)[:40])
def test_a_correct_32bit_realisation_matches_scipy(tmp_path, stage, structure):
    # scipy.signal.sosfreqz of the float design is the reference gain; a 32-bit data word
    # (mcu32, Q1.31) must reproduce it within 0.02 dB at every counted tone.  (The C
    # weighting's realised numerator today is [B, -2B + 1, B]: its double zero sits just off
    # z = 1, issue 10 item 8, which alone moves 10 Hz by 0.011 dB.)
    path = describe(tmp_path, [stage], structure=structure)
    real = realise(path)
    t = tones_of(real)
    sos = real.design.channels[0].sos()
    f = np.array([x.freq_hz for x in t.tones if x.gated])
    ref = 20 * np.log10(np.abs(signal.sosfreqz(sos, worN=f, fs=48000.0)[1]))
    got = np.array([x.gain_db for x in t.tones if x.gated])
    assert len(got) >= 20
    assert np.max(np.abs(got - ref)) < 0.02
    assert t.max_error_db < 0.02 < DEFAULT_TONE_GAIN_ERROR_DB


@pytest.mark.parametrize("stage,outside", [
    ('{ kind = "lowpass", response = "butterworth", order = 6, cutoff_hz = 500 }', False),
    (A_WEIGHTING, True),  # 10 and 12.5 Hz (-70.4, -63.4 dB) are run for the standard, not counted
])
def test_tones_count_exactly_where_the_design_is_within_60_db_of_its_peak(tmp_path, stage, outside):
    # scipy.signal.sosfreqz on the response grid gives the peak; a 32-bit output never hits
    # the resolution floor here, so the 60 dB rule alone decides.
    from coefc.analyse.response import grid

    path = describe(tmp_path, [stage], structure="df1ef")
    real = realise(path)
    t = tones_of(real)
    sos = real.design.channels[0].sos()
    with np.errstate(divide="ignore"):  # the lowpass's zero at Nyquist
        peak = np.max(20 * np.log10(np.abs(signal.sosfreqz(sos, worN=grid(48000.0), fs=48000.0)[1])))
    ref = 20 * np.log10(np.abs(signal.sosfreqz(sos, worN=[x.freq_hz for x in t.tones], fs=48000.0)[1]))
    for x, r in zip(t.tones, ref):
        assert x.gated == (r >= peak - 60.0)
    assert any(x.gated for x in t.tones)
    assert any(not x.gated for x in t.tones) == outside


# ------------------------------------------------------------------ what it must catch

def test_issue_10_failure_case_fails(tmp_path):
    # Issue 10 (items 11 and 12): A weighting with --data Q1.15 on mcu32 passed `check`
    # while a 31.5 Hz tone came out far too low, the output stuck near -709 LSB of DC
    # (an independent measurement reported in the issue).
    path = describe(tmp_path, [A_WEIGHTING])
    r = subprocess.run([sys.executable, "-c", MAIN, "check", str(path), "--data", "Q1.15"],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 1 and "FAIL tone_gain_error_db" in r.stdout  # with the default levels
    # the issue's own tone: 31.5 Hz at -6 dBFS
    path = describe(tmp_path, [A_WEIGHTING], budget="tone_levels_dbfs = [-6, -20, -60]", name="u")
    r = subprocess.run([sys.executable, "-c", MAIN, "check", str(path), "--data", "Q1.15", "--json", "-"],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 1, r.stdout + r.stderr
    rep = json.loads(r.stdout)
    (ch,) = rep["channels"]
    checks = {c["name"]: c for c in ch["checks"]}
    assert checks["tone_gain_error_db"]["ok"] is False and checks["tone_gain_error_db"]["value"] > 20
    assert checks["iec61672_class1_excess_db"]["ok"] is False
    tone = next(x for x in ch["metrics"]["tones"]["tones"] if x.get("nominal_hz") == 31.5 and x["level_dbfs"] == -6)
    assert tone["gated"] and tone["error_db"] < -20
    assert 650 <= abs(tone["dc_lsb"]) <= 750  # the issue: "stuck near -709 LSB"
    # IEC 61672-1 class 1 at 31.5 Hz: +-1.5 dB (the figure issue 10 quotes; from memory for the
    # edition -- a secondary source lists wider 2013 acceptance limits, +-2.0 dB, there)
    assert (tone["standard"]["upper_db"], tone["standard"]["lower_db"]) == (1.5, -1.5)
    assert not tone["standard"]["ok"] and not tone["standard"]["design_outside"]


def test_class1_table_rows_the_check_uses():
    # IEC 61672-1 class 1 tolerance limits: +-0.7 dB at 1 kHz, +-1.5 dB at 31.5 Hz, and no
    # lower limit at 10 Hz (from memory; 31.5 Hz as quoted in issue 10).
    rows = {r[0]: r for r in CLASS1_TABLE}
    assert (rows[1000][3], rows[1000][4]) == (0.7, -0.7)
    assert (rows[31.5][3], rows[31.5][4]) == (1.5, -1.5)
    assert rows[10][4] is None
    # the nominal frequencies are the one-third-octave series 10 Hz .. 20 kHz (IEC 61672-1 Table 3)
    exact = [1000.0 * 10 ** ((n - 20) / 10) for n in range(len(CLASS1_TABLE))]
    for (nominal, *_), e in zip(CLASS1_TABLE, exact):
        assert abs(nominal - e) / e < 0.03


def test_a_tone_below_the_dead_band_is_caught(tmp_path):
    # A 50 Hz lowpass in DF1 with a 16-bit data word on mcu32: from rest the output stays 0
    # as long as |B0 x[n] + B1 x[n-1] + B2 x[n-2]| < 2^(k-1) (add-half rounding of the
    # canonical DF1 recurrence, DESIGN.md), i.e. for every input of peak below
    # P = 2^(k-1) / (|B0|+|B1|+|B2|): the section's dead band for input.
    path = describe(tmp_path, ['{ kind = "lowpass", response = "butterworth", order = 2, cutoff_hz = 50 }'],
                    structure="df1")
    real = realise(path, data="Q1.15")
    prog = real.programs[0]
    sec = prog.ops[0]
    assert isinstance(sec, SectionOp)
    k = prog.arithmetic.coef.frac_bits - sec.shift
    dead = 2 ** (k - 1) / sum(abs(int(b)) for b in sec.b)
    level = -20.0
    peak_lsb = 10 ** (level / 20) * 2 ** 15
    assert peak_lsb < dead  # the -20 dBFS tone lies inside the dead band
    # the independent exact model agrees: a -20 dBFS 20 Hz tone leaves the output at 0
    x = np.round(peak_lsb * np.sin(2 * np.pi * 20 * np.arange(6000) / 48000)).astype(int)
    y, *_ = exact_model.run_program(prog, x)
    assert not any(y)
    rep = run_check(real, coefc.load(path).description.budget)
    (ch,) = rep.channels
    c = next(c for c in ch.checks if c.name == "tone_gain_error_db")
    assert not c.ok and c.value > 40
    t = ch.metrics["tones"]
    low = [x for x in t["tones"] if x["level_dbfs"] == level and x["freq_hz"] < 40 and x["gated"]]
    assert low and all(x["below_resolution"] and x["error_db"] < -40 for x in low)
    # the same filter with a 32-bit data word has no dead band at these levels: its tones pass
    rep32 = run_check(realise(path, data="Q1.31"), coefc.load(path).description.budget)
    c32 = next(c for c in rep32.channels[0].checks if c.name == "tone_gain_error_db")
    assert c32.ok and c32.value < 0.05, render_text(rep32)


def test_low_output_tones_are_reported_not_gated(tmp_path):
    # Q1.15 output: a -60 dBFS tone where the A weighting is -39.4 dB has an ideal output
    # peak of 2^15 * 10^(-99.4/20) = 0.35 LSB, below the floor of 64 LSB.
    path = describe(tmp_path, [A_WEIGHTING], structure="df1ef")
    t = tones_of(realise(path, data="Q1.15"))
    tone = next(x for x in t.tones if x.nominal_hz == 31.5 and x.level_dbfs == -60)
    ideal = 2 ** 15 * 10 ** ((tone.design_gain_db - 60) / 20)
    assert ideal < MIN_OUTPUT_LSB
    assert not tone.gated and "floor" in tone.note and tone.standard["ok"]


def test_weighting_outside_class1_from_the_bilinear_transform_fails(tmp_path):
    # At 16 kHz the bilinear A weighting leaves class 1 near Nyquist (coefc design warns at
    # 5 and 6.3 kHz); the tones at the standard's frequencies must see it, and say the
    # float design itself is outside there.
    path = describe(tmp_path, [A_WEIGHTING], fs=16000, structure="df1ef")
    design = coefc.load(path).design()
    assert any("6300 Hz" in w for w in design.channels[0].warnings)
    rep = run_check(realise(path), coefc.load(path).description.budget)
    (ch,) = rep.channels
    c = next(c for c in ch.checks if c.name == "iec61672_class1_excess_db")
    assert not c.ok and c.value > 0
    assert "float design itself is outside" in ch.reasons[c.name]
    bad = {x["nominal_hz"] for x in ch.metrics["tones"]["tones"]
           if x.get("standard") and not x["standard"]["ok"]}
    assert 6300 in bad and all(f >= 5000 for f in bad)


def test_an_unstable_realisation_is_not_measured(tmp_path):
    # The woofer of the three-way monitor on mcu16: its quantised poles reach the unit circle.
    real = coefc.load(FILTERS / "three_way_monitor.toml").design(["woofer"]).realise("mcu16")
    rep = run_check(real, coefc.load(FILTERS / "three_way_monitor.toml").description.budget)
    (ch,) = rep.channels
    assert not next(c for c in ch.checks if c.name == "stable").ok
    c = next(c for c in ch.checks if c.name == "tone_gain_error_db")
    assert c.value is None and not c.ok
    assert "unstable" in ch.reasons[c.name]
    assert ch.metrics["tones"]["status"] == "not measured" and ch.metrics["tones"]["tones"] == []


# ------------------------------------------------------------------ cost, reporting, budget

def test_settling_follows_the_slowest_pole_and_is_capped_with_a_note():
    real = coefc.load(FILTERS / "sound_level_meter.toml").design(["a_weighted"]).realise()
    n, capped, r, rest = settle_length(real.programs[0])
    # the 2 Hz DC blocker's pole: exp(-2 pi 2 / 48000) to first order (impulse invariance)
    assert r == pytest.approx(math.exp(-2 * math.pi * 2 / 48000), abs=2e-5)
    assert capped and rest == pytest.approx(r ** n)
    rep = run_check(real, coefc.load(FILTERS / "sound_level_meter.toml").description.budget)
    (ch,) = rep.channels
    assert "unproven" in ch.reasons["tone_gain_error_db"] and "capped" in ch.reasons["tone_gain_error_db"]
    assert ch.metrics["tones"]["settle_capped"] is True


def test_json_per_tone_results_and_text_row(tmp_path):
    path = describe(tmp_path, ['{ kind = "peaking", freq_hz = 300, q = 1.0, gain_db = -3.0 }'])
    rep = run_check(realise(path), coefc.load(path).description.budget)
    d = json.loads(render_json(rep))  # allow_nan=False inside: no NaN or infinity
    (ch,) = d["channels"]
    t = ch["metrics"]["tones"]
    assert t["status"] == "measured" and t["levels_dbfs"] == [-20.0, -60.0]
    for x in t["tones"]:
        assert {"freq_hz", "level_dbfs", "gain_db", "design_gain_db", "error_db", "gated"} <= set(x)
        assert x["error_db"] == pytest.approx(x["gain_db"] - x["design_gain_db"])
    row = next(c for c in ch["checks"] if c["name"] == "tone_gain_error_db")
    assert row["ok"] and row["limit"] == DEFAULT_TONE_GAIN_ERROR_DB and row["value"] == t["max_error_db"]
    assert d["defaults_applied"]["tone_gain_error_db"] == DEFAULT_TONE_GAIN_ERROR_DB
    assert d["budget"]["tone_gain_error_db"] == DEFAULT_TONE_GAIN_ERROR_DB
    assert "tone_gain_error_db" in render_text(rep)


def test_budget_switches_and_levels(tmp_path):
    path = describe(tmp_path, ['{ kind = "gain", db = -1 }'], budget='tone_gain_error_db = "off"')
    rep = run_check(realise(path), coefc.load(path).description.budget)
    assert "tone_gain_error_db" not in {c.name for c in rep.channels[0].checks}
    assert "tones" not in rep.channels[0].metrics
    path = describe(tmp_path, ['{ kind = "gain", db = -1 }'], name="u",
                    budget="tone_gain_error_db = 0.01\ntone_levels_dbfs = [-10, -40, -70]")
    rep = run_check(realise(path), coefc.load(path).description.budget)
    row = next(c for c in rep.channels[0].checks if c.name == "tone_gain_error_db")
    assert row.limit == 0.01
    assert sorted({x["level_dbfs"] for x in rep.channels[0].metrics["tones"]["tones"]}) == [-70.0, -40.0, -10.0]


def test_tone_level_is_lowered_where_the_output_would_pass_half_scale(tmp_path):
    # +12 dB: a -20 dBFS tone reaches 0.1 * 10^(12/20) = 0.40 of full scale and runs as asked;
    # a -6 dBFS tone would reach 2.0, so it runs at 20*log10(0.5) - 12 = -18.02 dBFS.
    path = describe(tmp_path, ['{ kind = "gain", db = 12 }'])
    t = tones_of(realise(path), levels_dbfs=(-6.0, -20.0))
    lowered = [x for x in t.tones if "lowered" in x.note]
    kept = [x for x in t.tones if "lowered" not in x.note]
    assert len(lowered) == len(kept) == len(t.tones) // 2
    for x in lowered:
        assert x.level_dbfs == pytest.approx(20 * math.log10(0.5) - 12, abs=1e-3)
    for x in kept:
        assert x.level_dbfs == pytest.approx(-20.0)
    assert all(x.overflow_events == 0 for x in t.tones)


@pytest.mark.parametrize("text,fragment", [
    ('tone_gain_error_db = "loose"', "write a largest error in dB"),
    ("tone_gain_error_db = -1", "must be greater than 0"),
    ("tone_levels_dbfs = [3]", "is not a tone level"),
    ("tone_levels_dbfs = []", "needs at least 1"),
])
def test_bad_tone_budget_values_exit_2(tmp_path, text, fragment):
    path = describe(tmp_path, ['{ kind = "gain", db = -1 }'], budget=text)
    r = subprocess.run([sys.executable, "-c", MAIN, "check", str(path)], capture_output=True, text=True, timeout=120)
    assert r.returncode == 2 and fragment in r.stderr and "Traceback" not in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1 and "tone_" in r.stderr


def test_a_notch_floor_is_judged_by_the_realised_coefficients(tmp_path):
    # A 50 Hz notch (Q 5) on mcu32 with error feedback: near its floor the last bit of a
    # coefficient moves the float-design figure, yet the chip does exactly what its
    # coefficients say; the gate uses the realised coefficients' linear response
    # (coefc.blocks.as_float_blocks, checked against scipy.signal.sosfreqz here).
    from coefc.blocks import as_float_blocks

    path = describe(tmp_path, ['{ kind = "notch", freq_hz = 50, q = 5.0 }'], structure="df1ef")
    real = realise(path)
    t = tones_of(real)
    sos = np.array([b.sos for b in as_float_blocks(real.programs[0]) if hasattr(b, "sos")][0])
    gain = np.prod([b.gain for b in as_float_blocks(real.programs[0]) if hasattr(b, "gain")] or [1.0])
    for x in t.tones:
        ref = 20 * np.log10(abs(gain * signal.sosfreqz(sos, worN=[x.freq_hz], fs=48000.0)[1][0]))
        assert x.linear_gain_db == pytest.approx(ref, abs=1e-9)
        assert x.arithmetic_error_db == pytest.approx(x.gain_db - ref, abs=1e-9)
    assert t.max_error_db < 0.05
