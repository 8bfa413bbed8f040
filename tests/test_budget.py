"""The budget gate: overrides, the pass rules of each check, cautions and the JSON contract."""

from __future__ import annotations

import json
from types import SimpleNamespace

import pytest

import coefc
from coefc.analyse import AnalysisOptions
from coefc.analyse.limitcycles import LimitCycleAnalysis, SectionLimitCycles
from coefc.budget import apply_overrides, channel_checks, run_check
from coefc.errors import DescriptionError
from coefc.spec import Budget

from conftest import FILTERS


def fake_metrics(status="none", amplitude=None, bound=3.0, complete=True, overflow_count=0, osc="none",
                 sections=None):
    sec = SectionLimitCycles(0, status, bound, complete, 0, amplitude_lsb=amplitude,
                             period=2 if amplitude else None, start_state=(3, -3) if amplitude else None,
                             overflow_status=osc, overflow_note="x")
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
    s1 = SectionLimitCycles(0, "found", 3.0, True, 10, amplitude_lsb=1, period=1, start_state=(1, 1),
                            output_amplitude_lsb=1, output_bound_lsb=3.0)
    s2 = SectionLimitCycles(1, "unproven", 275460.0, False, 0, output_bound_lsb=275460.0)
    m = fake_metrics(sections=[s1, s2])
    assert m.limit_cycles.status == "unproven" and m.limit_cycles.amplitude_lsb == 1
    for limit in ("none", 2.0):
        res, why = verdict(m, limit_cycles=limit)
        assert res["limit_cycles"] is False
        assert "section 1" in why["limit_cycles"] and "section 2 unproven, bound 275460" in why["limit_cycles"]
    assert verdict(fake_metrics(sections=[s1, s2]), limit_cycles=3e5)[0]["limit_cycles"] is True


def test_limit_is_applied_at_the_channel_output():
    # a 2 LSB cycle in its section that the later sections carry to 40 LSB fails a 4 LSB limit
    s = SectionLimitCycles(0, "found", 3.0, True, 10, amplitude_lsb=2, period=1, start_state=(2, 2),
                           output_amplitude_lsb=40, output_bound_lsb=60.0)
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
    assert iir.metrics["float_stopband_attenuation_db"] == pytest.approx(60.0, abs=0.05)
    assert iir.metrics["stopband_attenuation_db"] == pytest.approx(60.0, abs=0.5)
    assert fir.metrics["float_stopband_attenuation_db"] == pytest.approx(80.0, abs=1.5)
    assert all(c.ok for c in iir.checks if c.name == "stopband_attenuation_db")
