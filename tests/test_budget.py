"""The budget gate: overrides, the pass rules of each check, cautions and the JSON contract."""

from __future__ import annotations

import json
from types import SimpleNamespace

import pytest

import coefc
from coefc.analyse import AnalysisOptions
from coefc.analyse.limitcycles import (AtOutput, Cycle, GranularVerdict, LimitCycleAnalysis, OverflowVerdict,
                                       SectionLimitCycles)
from coefc.budget import apply_overrides, channel_checks, run_check
from coefc.errors import DescriptionError
from coefc.spec import Budget

from conftest import FILTERS


def fake_metrics(status="none", amplitude=None, bound=3.0, complete=True, overflow_count=0, osc="none",
                 sections=None):
    sec = SectionLimitCycles(0, GranularVerdict(status, bound, complete, 0,
                                                cycle=Cycle(amplitude, 2, (3, -3)) if amplitude else None),
                             OverflowVerdict(osc, "x"))
    lc = LimitCycleAnalysis(tuple(sections) if sections else (sec,), tuple(range(1, 1 + len(sections or [0]))))
    resp = SimpleNamespace(stable=True, max_pole_radius=0.9, passband_deviation_db=0.01, passband_rule="r",
                           stopband_attenuation_db=None, stopband_rule="s", float_stopband_attenuation_db=None)
    ov = SimpleNamespace(overflow_count=overflow_count, runs=1, worst_node="op 1 output", headroom_bits=0.5,
                         input_peak=1.0, output_peak_gain=0.9, overflow_count_full_scale=overflow_count)
    return SimpleNamespace(response=resp, limit_cycles=lc, overflow=ov, noise=None, measured=None,
                           is_float=False, overflow_mode="saturate", structure="df1")


def verdict(metrics, **budget):
    checks, why = channel_checks(metrics, Budget(**budget))
    return {c.name: c.ok for c in checks}, why


@pytest.mark.parametrize("status, amplitude, bound, complete, limit, ok", [
    ("none", None, 3.0, True, "none", True),          # proven none passes "none"
    ("found", 2, 3.0, True, "none", False),           # any cycle fails "none"
    ("unproven", None, 3.0, False, "none", False),    # not proven fails "none"
    ("found", 2, 30.0, True, 2.0, True),              # exhaustive: the amplitude decides
    ("found", 3, 30.0, True, 2.0, False),
    ("unproven", None, 1.5, False, 2.0, True),        # unproven: the bound decides
    ("unproven", None, 2.5, False, 2.0, False),
    ("found", 1, 2.5, False, 2.0, False),             # sampled search only: the bound still decides
])
def test_limit_cycle_rule(status, amplitude, bound, complete, limit, ok):
    res, why = verdict(fake_metrics(status, amplitude, bound, complete), limit_cycles=limit)
    assert res["limit_cycles"] is ok
    assert why["limit_cycles"]


def test_channel_verdict_is_the_worst_section_and_names_each():
    # a 1 LSB cycle found in section 1 and section 2 unproven with a 275460 LSB bound (the case of
    # C weighting at 96 kHz on mcu32): the channel is unproven, fails both "none" and a 2 LSB limit,
    # and the reason names both sections
    s1 = SectionLimitCycles(0, GranularVerdict("found", 3.0, True, 10, cycle=Cycle(1, 1, (1, 1))),
                            OverflowVerdict("none", ""), AtOutput(1, 3.0))
    s2 = SectionLimitCycles(1, GranularVerdict("unproven", 275460.0, False, 0), OverflowVerdict("none", ""),
                            AtOutput(None, 275460.0))
    m = fake_metrics(sections=[s1, s2])
    assert m.limit_cycles.status == "unproven" and m.limit_cycles.amplitude_lsb == 1
    for limit in ("none", 2.0):
        res, why = verdict(m, limit_cycles=limit)
        assert res["limit_cycles"] is False
        assert "section 1" in why["limit_cycles"] and "section 2 unproven, bound 275460" in why["limit_cycles"]
    assert verdict(fake_metrics(sections=[s1, s2]), limit_cycles=3e5)[0]["limit_cycles"] is True


def test_limit_is_applied_at_the_channel_output():
    # a 2 LSB cycle in its section that the later sections carry to 40 LSB fails a 4 LSB limit
    s = SectionLimitCycles(0, GranularVerdict("found", 3.0, True, 10, cycle=Cycle(2, 1, (2, 2))),
                           OverflowVerdict("none", ""), AtOutput(40, 60.0))
    res, why = verdict(fake_metrics(sections=[s]), limit_cycles=4.0)
    assert res["limit_cycles"] is False and "40 LSB at the channel output" in why["limit_cycles"]


def test_overflow_rule():
    assert verdict(fake_metrics(overflow_count=0), overflow="none")[0]["overflow"] is True
    assert verdict(fake_metrics(overflow_count=4), overflow="none")[0]["overflow"] is False
    assert verdict(fake_metrics(overflow_count=0, osc="found"), overflow="none")[0]["overflow"] is False
    assert verdict(fake_metrics(overflow_count=4), overflow="allow")[0]["overflow"] is True


def test_stopband_not_applicable_without_a_stopband():
    res, why = verdict(fake_metrics(), stopband_attenuation_db=80.0)
    assert res["stopband_attenuation_db"] and "not applicable" in why["stopband_attenuation_db"]


def test_overrides():
    b = apply_overrides(Budget(passband_deviation_db=0.05, limit_cycles="none"), passband_deviation_db=0.1,
                        limit_cycles="3", overflow="allow", output_noise_dbfs=-100)
    assert (b.passband_deviation_db, b.limit_cycles, b.overflow, b.output_noise_dbfs) == (0.1, 3.0, "allow", -100)
    for kw, key in [({"limit_cycles": "few"}, "--limit-cycles"), ({"output_noise_dbfs": 3.0}, "--max-noise-dbfs"),
                    ({"overflow": "sometimes"}, "--overflow-budget"),
                    ({"passband_deviation_db": -1.0}, "--max-passband-deviation-db")]:
        with pytest.raises(DescriptionError, match=key):
            apply_overrides(Budget(), **kw)


@pytest.fixture(scope="module")
def tweeter_report():
    real = coefc.load(FILTERS / "three_way_monitor.toml").design(["tweeter"]).realise()
    budget = Budget(passband_deviation_db=0.05, output_noise_dbfs=-120.0, limit_cycles=8.0, overflow="allow",
                    stopband_attenuation_db=30.0)
    return run_check(real, budget, options=AnalysisOptions(noise_samples=1 << 14))


def test_json_contract(tweeter_report):
    d = tweeter_report.to_json()
    text = json.dumps(d, allow_nan=False)  # no NaN or infinity anywhere
    assert json.loads(text) == d
    assert d["schema"] == 1 and d["tool_version"] == coefc.__version__ and d["target"] == "mcu32"
    assert d["source"].endswith("three_way_monitor.toml") and isinstance(d["ok"], bool)
    (ch,) = d["channels"]
    assert ch["name"] == "tweeter" and ch["sample_rate_hz"] == 48000
    assert {"structure", "data", "coef", "acc_bits", "rounding", "overflow"} <= set(ch["arithmetic"])
    for sec in ch["sections"]:
        assert len(sec["b"]) == 3 and len(sec["a"]) == 2 and isinstance(sec["coef_shift"], int)
        assert all(isinstance(v, int) for v in sec["b"] + sec["a"])
    m = ch["metrics"]
    for key in ("passband_deviation_db", "stopband_attenuation_db", "output_noise_dbfs",
                "output_noise_dbfs_simulated", "max_pole_radius", "headroom_bits", "overflow_count"):
        assert key in m
    assert m["limit_cycle"]["status"] in ("none", "found", "unproven")
    # the noise density for reports: integrated over 0..fs/2 it is the analytic output noise
    import numpy as np

    f = np.array([p["freq_hz"] for p in m["noise_spectrum"]])
    dens = 0.5 * 10 ** (np.array([p["dbfs_per_hz"] for p in m["noise_spectrum"]]) / 10)
    assert f[-1] == 24000.0 and np.all(np.isfinite(dens))
    total = 10 * np.log10(np.trapezoid(dens, f) / 0.5)
    assert abs(total - m["output_noise_dbfs"]) < 3.0  # a coarse 48-point grid
    assert {"amplitude_lsb", "period"} <= set(m["limit_cycle"])
    for c in ch["checks"]:
        assert {"name", "value", "limit", "ok"} <= set(c)
    assert {c["name"] for c in ch["checks"]} >= {"passband_deviation_db", "output_noise_dbfs", "limit_cycles",
                                                 "overflow", "stable"}


def test_caution_when_the_budget_tolerates_overflow_or_limit_cycles(tweeter_report):
    (c,) = tweeter_report.cautions
    assert "overflow" in c and "limit cycles up to 8 LSB" in c
    assert "amplifier" in c and "hearing" in c and "machines" in c and "sign-off" in c


def test_failing_rows_come_first(tweeter_report):
    for ch in tweeter_report.channels:
        oks = [c.ok for c in ch.checks]
        assert oks == sorted(oks)


def test_overflow_fails_when_roundoff_alone_can_reach_full_scale(tmp_path):
    # A 1 Hz first-order high-pass at 8 kHz in 16-bit DF1: its pole at radius
    # 1 - 2*pi*1/8000 amplifies the output rounding error by about 1/(1 - r) ~ 1300
    # (the dead-band bound (q/2)/(1 - |a|), Jones, OpenStax CNX m11928 [confirmed]);
    # with a sharp elliptic low-pass and a Q = 30 notch after it, the bounded
    # roundoff fills the 16-bit word: no input level is safe, so zero overflow
    # events at zero level must not pass the check.
    import coefc
    from coefc.budget import run_check

    p = tmp_path / "dc.toml"
    p.write_text("""
name = "dc_only"
sample_rate_hz = 8000
[implementation]
target = "mcu16"
structure = "df1"
[budget]
overflow = "none"
[[channel]]
name = "x"
stages = [
  { kind = "dc-blocker", cutoff_hz = 1.0 },
  { kind = "lowpass", response = "elliptic", passband_hz = 1000, stopband_hz = 1300, ripple_db = 0.1, attenuation_db = 60 },
  { kind = "notch", freq_hz = 50, q = 30 },
]
""")
    loaded = coefc.load(p)
    rep = run_check(loaded.design().realise(), loaded.description.budget)
    ch = rep.channels[0]
    ov = next(c for c in ch.checks if c.name == "overflow")
    assert ch.analysis.overflow.input_peak == 0  # the premise: no safe level exists
    assert ov.value == 0 and not ov.ok
    assert "no input level is safe" in ch.reasons["overflow"]


def test_stopband_defaults_to_the_stages_requirements(tmp_path):
    # With no stopband bands in the budget, the stopband is where the stages asked
    # for one (stopband_hz).  Reference: scipy.signal.ellipord/ellip meet the
    # attenuation at the stopband edge (scipy docs), and a Kaiser design of 100 dB
    # reaches about 100 dB (Kaiser 1974 [confirmed]); quantised to Q2.30 the
    # channel keeps that within a fraction of a dB.
    import coefc
    from coefc.budget import run_check

    p = tmp_path / "req.toml"
    p.write_text("""
name = "req"
sample_rate_hz = 48000
[budget]
stopband_attenuation_db = 59.5
[[channel]]
name = "iir"
stages = [ { kind = "lowpass", response = "elliptic", passband_hz = 4000, stopband_hz = 5000, ripple_db = 0.1, attenuation_db = 60 } ]
[[channel]]
name = "fir"
stages = [ { kind = "fir-highpass", passband_hz = 3000, stopband_hz = 2000, attenuation_db = 80 } ]
""")
    loaded = coefc.load(p)
    d = loaded.design()
    assert d.channels[0].stopbands == ((5000.0, 24000.0),)
    assert d.channels[1].stopbands == ((0.0, 2000.0),)
    rep = run_check(d.realise("mcu32"), loaded.description.budget)
    iir, fir = rep.channels
    assert "stopband_hz of the stages" in iir.metrics["stopband_rule"]
    # both stages are designed for attenuation_db plus the default 0.5 dB quantisation margin
    assert iir.metrics["float_stopband_attenuation_db"] == pytest.approx(60.5, abs=0.05)
    assert iir.metrics["stopband_attenuation_db"] == pytest.approx(60.5, abs=0.5)
    assert 80.5 <= fir.metrics["float_stopband_attenuation_db"] <= 82.0
    assert all(c.ok for c in iir.checks if c.name == "stopband_attenuation_db")


# ---------------------------------------------------------------- programs built by hand

def _program(arith, *ops):
    from coefc.program import ChannelProgram

    return ChannelProgram("t", 48000.0, arith, tuple(ops))


def _design(*rows):
    import numpy as np

    from coefc.blocks import ChannelDesign, SosBlock

    return ChannelDesign("t", 48000.0, (SosBlock(np.array(rows, dtype=float)),))


def test_a_test_input_below_one_lsb_is_no_safe_level():
    # (1 - z^-1)/(1 - r z^-1) in 12-bit data: its rounding error (at most q/2 with add-half)
    # reaches the output through 1/(1 - r z^-1), whose sum |g| is 1/(1 - r) (geometric series),
    # so the roundoff alone can reach (q/2)/(1 - r) = 4095/4096 of full scale (the dead-band
    # bound of Jones, "Limit Cycles", OpenStax CNX m11928 [confirmed]).  The output's l1 gain
    # is 2, so the largest safe input is (1/4096)/2 = 1/8192 of full scale: below one LSB of a
    # 12-bit word (1/2048), so the worst-case input quantises to all zeros and its zero
    # overflow events prove nothing.
    from coefc.analyse import analyse_channel
    from coefc.program import Arithmetic, SectionOp
    from coefc.qformat import QFormat

    ar = Arithmetic(data=QFormat(1, 11), coef=QFormat(2, 30), acc_bits=64, rounding="add-half", overflow="saturate")
    one = 1 << 30
    A1 = -(one - (1 << 18) - (1 << 6))  # r = 1 - 2^-12 - 2^-24
    r = -A1 / one
    m = analyse_channel(_design([1, -1, 0, 1, -r, 0]), _program(ar, SectionOp(b=(one, -one, 0), a=(A1, 0), shift=0)))
    safe = (1 - 0.5 * 2.0 ** -11 / (1 - r)) / 2  # fraction of full scale, derived above
    assert safe * 2047 < 1 and m.overflow.input_peak == pytest.approx(safe, rel=1e-3)
    assert m.overflow.input_peak_lsb == 0 and m.overflow.overflow_count == 0
    checks, why = channel_checks(m, Budget(overflow="none"))
    (ov,) = [c for c in checks if c.name == "overflow"]
    assert not ov.ok
    assert "below one LSB" in why["overflow"] and "quantises to all zeros" in why["overflow"]
    assert m.as_dict()["worst_case_input_peak_lsb"] == 0


@pytest.mark.parametrize("a", [(-(1 << 14), 0), (-(2 << 14), 1 << 14), (0, 1 << 14), (-(1 << 14), -(1 << 14)),
                               (1 << 14, 0)])
def test_unstable_realisation_has_no_finite_figures(a):
    # poles on z = 1 (single and double), a pair on the unit circle, a real pole outside it and
    # one on z = -1: the stability triangle |a2| < 1, |a1| < 1 + a2 fails (Oppenheim & Schafer,
    # DTSP 3rd ed., sec. 6.8; Jury 1964 [confirmed]).  The roundoff of a pole on z = 1
    # accumulates like a random walk: its variance grows with time, so no finite noise,
    # overflow or limit-cycle figure exists (numpy on the engine shows it, below).
    import numpy as np

    from coefc.analyse import analyse_channel
    from coefc.program import Arithmetic, GainOp, SectionOp
    from coefc.qformat import QFormat

    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32, rounding="add-half", overflow="saturate")
    p = _program(ar, GainOp(coef=1 << 10), SectionOp(b=(1 << 14, -(1 << 14), 0), a=a, shift=0))
    m = analyse_channel(_design([1 / 16, -1 / 16, 0, 1, -0.9999, 0]), p)
    d = m.as_dict()
    assert d["stable"] is False and "unit circle" in d["unstable_reason"]
    for key in ("output_noise_dbfs", "output_noise_dbfs_simulated", "output_offset_lsb", "output_offset_dbfs",
                "headroom_bits", "overflow_count", "output_peak_gain", "worst_case_input_peak"):
        assert d[key] is None, key
    assert d["limit_cycle"]["amplitude_lsb"] is None and d["limit_cycle"]["bound_lsb"] is None
    assert d["limit_cycle"]["status"] == "unproven" and "unstable" in d["limit_cycle"]["note"]
    # the design's own gain stays available and is not the realised filter's
    assert d["design_peak_gain"] == pytest.approx(1 / 16 * (1 + 1), rel=1e-2)
    json.dumps(d, allow_nan=False)
    checks, why = channel_checks(m, Budget(output_noise_dbfs=-20.0, output_offset_lsb=100.0,
                                           limit_cycles=1e9, overflow="allow"))
    res = {c.name: c for c in checks}
    for name in ("stable", "output_noise_dbfs", "output_offset_lsb", "limit_cycles", "overflow"):
        assert not res[name].ok, name
    for name in ("output_noise_dbfs", "output_offset_lsb", "limit_cycles", "overflow"):
        assert res[name].value is None and "unstable" in why[name]
    if a == (-(1 << 14), 0):
        # a pole on z = 1 with rounding inside the loop (b0 = 4097/2^14 drops all 14 bits): the
        # engine's error against float64, b0 (1 - z^-1)/(1 - z^-1) x = b0 x, is a random walk
        from coefc.simulate import simulate

        walk = _program(ar, SectionOp(b=(4097, -4097, 0), a=a, shift=0))
        assert "unit circle" in analyse_channel(_design([0.25, -0.25, 0, 1, -0.9999, 0]), walk).unstable
        rng = np.random.default_rng(3)
        x = rng.integers(-20, 21, 1 << 16)
        e = np.asarray(simulate(walk, x), dtype=float) - 4097 / 2 ** 14 * x
        # a random walk of steps of variance 1/12: its mean square grows in proportion to time
        early, late = np.mean(e[:4096] ** 2), np.mean(e[-4096:] ** 2)
        assert late > 8 * early and late > 100


def test_exact_stability_against_numpy_roots_on_every_small_section():
    # every denominator 1 + a1 z^-1 + a2 z^-2 with a1, a2 on a 6-bit grid (Q2.4, step 1/16):
    # numpy.roots is the reference away from the circle; on it, where roots are inexact, the
    # integer test must call it unstable (pole radius >= 1 counts as unstable)
    import numpy as np

    from coefc.analyse import instability
    from coefc.program import Arithmetic, SectionOp
    from coefc.qformat import QFormat

    ar = Arithmetic(data=QFormat(1, 7), coef=QFormat(2, 4), acc_bits=16)
    for A1 in range(-32, 32):
        for A2 in range(-32, 32):
            radius = float(np.max(np.abs(np.roots([1.0, A1 / 16, A2 / 16]))))
            bad = instability(_program(ar, SectionOp(b=(16, 0, 0), a=(A1, A2), shift=0))) is not None
            if abs(radius - 1) > 1e-6:
                assert bad == (radius > 1), (A1, A2, radius)
            else:
                assert bad, (A1, A2, radius)


def test_offset_budget_key():
    # truncate in 1/(1 - a z^-1): offset -(q/2)/(1 - a), Widrow & Kollar 2008 [confirmed]
    import numpy as np

    from coefc.analyse import analyse_channel
    from coefc.program import Arithmetic, SectionOp
    from coefc.qformat import QFormat

    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 30), acc_bits=64, rounding="truncate", overflow="saturate")
    A1 = -round((0.9 + 1e-4 * np.sqrt(2)) * 2 ** 30)
    p = _program(ar, SectionOp(b=((1 << 30) - 1, 0, 0), a=(A1, 0), shift=0))
    m = analyse_channel(_design([1, 0, 0, 1, A1 / 2 ** 30, 0]), p)
    want = 0.5 / (1 + A1 / 2 ** 30)
    for lim, ok in ((want - 0.01, False), (want + 0.01, True)):
        checks, why = channel_checks(m, Budget(output_offset_lsb=lim))
        (c,) = [c for c in checks if c.name == "output_offset_lsb"]
        assert c.ok is ok and c.value == pytest.approx(want, abs=1e-6)
        assert "DC offset" in why["output_offset_lsb"]
    # the noise figure of the same channel is the variance: (q^2/12)/(1 - a^2) in AES17 dBFS
    a = -A1 / 2 ** 30
    assert m.output_noise_dbfs == pytest.approx(10 * np.log10(2.0 ** -30 / 12 / (1 - a * a) / 0.5), abs=1e-6)


def test_offset_budget_key_in_the_description(tmp_path):
    from coefc.spec import load_description

    p = tmp_path / "o.toml"
    p.write_text('name = "o"\nsample_rate_hz = 48000\n[budget]\noutput_offset_lsb = 0.5\n'
                 '[[channel]]\nname = "x"\nstages = [ { kind = "gain", db = -6.0 } ]\n')
    assert load_description(p).budget.output_offset_lsb == 0.5
    p.write_text(p.read_text().replace("0.5", "-1"))
    with pytest.raises(DescriptionError, match="output_offset_lsb"):
        load_description(p)
    assert apply_overrides(Budget(), output_offset_lsb=2).output_offset_lsb == 2.0
    with pytest.raises(DescriptionError, match="--max-offset-lsb"):
        apply_overrides(Budget(), output_offset_lsb=-1.0)


# ---------------------------------------------------------------- figures name what they belong to

@pytest.mark.parametrize("value, limit, op, ok", [
    (-119.99996, -120.0, "<=", False), (-120.00004, -120.0, "<=", True), (0.0500001, 0.05, "<=", False),
    (95.99999, 96.0, ">=", False), (96.00001, 96.0, ">=", True), (-189.2, -130.0, "<=", True),
    (1.2345e-9, 1e-9, "<=", False), (123456.7, 123456.0, "<=", False),
])
def test_printed_values_compare_as_their_verdict(value, limit, op, ok):
    # the printed number, read back, must pass or fail the printed limit exactly as the check did
    # (common practice, no source: a report must not say FAIL -120 <= -120)
    from coefc.reports.text import format_against

    text = format_against(value, limit, op, ok)
    back = float(text)
    assert (back >= limit if op == ">=" else back <= limit) is ok, text
    assert len(text) <= 20


def test_failing_noise_row_shows_why_it_fails():
    from coefc.budget import CheckReport, ChannelReport
    from coefc.reports.text import render_text

    m = fake_metrics()
    m.noise = SimpleNamespace(dbfs=-119.99996)
    checks, why = channel_checks(m, Budget(output_noise_dbfs=-120.0))
    (c,) = [c for c in checks if c.name == "output_noise_dbfs"]
    assert not c.ok
    assert "-119.99996 dBFS" in why["output_noise_dbfs"]
    rep = CheckReport("x.toml", "mcu32", (ChannelReport("c", 48000.0, {"kind": "float32", "structure": "df1"}, [],
                                                        {}, checks, why),), Budget())
    row = next(ln for ln in render_text(rep).splitlines() if "output_noise_dbfs" in ln)
    assert "-119.99996" in row and "<= -120" in row


def test_overflow_reason_names_whose_gain_and_writes_peaks_re_full_scale():
    # a peak level is a fraction of full scale / dB re full-scale peak, not AES17 dBFS (which is
    # an RMS level: AES17, definition of dBFS [confirmed])
    m = fake_metrics()
    m.overflow.input_peak, m.overflow.output_peak_gain = 0.5, 2.0
    m.overflow.input_peak_lsb, m.overflow.design_peak_gain = 16383, 1.58
    checks, why = channel_checks(m, Budget(overflow="none"))
    text = why["overflow"]
    assert "0.5 of full scale (-6.02 dB re full-scale peak)" in text
    assert "realised filter" in text and "peak gain 2" in text and "the float design's 1.58" in text
    assert "dBFS" not in text


# ---------------------------------------------------------------- safe by default

def test_hazards_gate_by_default_and_the_verdict_names_the_defaults(tmp_path):
    # An IEC 61672 A weighting realised in DF1 with 16-bit data: its low-frequency sections have a
    # dead band beyond full scale (the dead-band bound (q/2)/(1 - |a|), Jones, OpenStax CNX
    # m11928 [confirmed]); without a [budget] the check must not pass.
    from coefc.reports.text import render_text

    p = tmp_path / "aw.toml"
    p.write_text('name = "aw"\nsample_rate_hz = 48000\n[implementation]\ntarget = "mcu32"\ndata = "Q1.15"\n'
                 '[[channel]]\nname = "a"\nstages = [ { kind = "weighting", weighting = "A" } ]\n')
    loaded = coefc.load(p)
    rep = run_check(loaded.design().realise(), loaded.description.budget)
    assert rep.defaults == {"limit_cycles": "none", "overflow": "none", "tone_gain_error_db": 0.5}
    assert not rep.ok
    failed = {c.name for _, c, _ in rep.failures()}
    assert "limit_cycles" in failed
    last = render_text(rep).strip().splitlines()[-1]
    assert "over budget (defaults applied: limit_cycles = none, overflow = none, tone_gain_error_db = 0.5)" in last
    d = rep.to_json()
    assert d["defaults_applied"] == {"limit_cycles": "none", "overflow": "none", "tone_gain_error_db": 0.5}
    assert d["budget"]["limit_cycles"] == "none" and d["budget"]["overflow"] == "none"
    assert rep.cautions == ()
    # a budget that names them applies no default, and tolerating them shows the caution
    rep2 = run_check(loaded.design().realise(), Budget(limit_cycles=1e6, overflow="allow", tone_gain_error_db="off"))
    assert rep2.defaults == {} and rep2.ok
    assert "defaults applied" not in render_text(rep2)
    (c,) = rep2.cautions
    assert "amplifier" in c and "sign-off" in c
