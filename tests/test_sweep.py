"""Word-length sweeps and the minimal-width search (coefc.explore.sweep, `coefc sweep`).

References used here:
- one more data bit halves the quantisation step, so roundoff noise power falls by
  a factor 4 = 6.0206 dB per bit (the same law as the full-scale sine SNR
  6.0206 N + 1.7609 dB; Widrow & Kollar, *Quantization Noise*, 2008 [confirmed]);
- scipy.signal.butter as the design reference;
- the minimal-width search is checked against brute-force enumeration of the same
  grid (an independent reference computed here).
"""

from __future__ import annotations

import csv
import io
import json
import re
import subprocess
import sys

import numpy as np
import pytest

import coefc
from coefc.analyse import AnalysisOptions
from coefc.errors import DescriptionError
from coefc.explore.sweep import Config, Sweeper, fewest_bits, parse_widths

LOWPASS = """
name = "sweep_lp"
sample_rate_hz = 48000

[implementation]
target = "mcu32"
structure = "df1"
scaling = "l1"

[budget]
passband_deviation_db = 0.01
output_noise_dbfs = -110
overflow = "allow"
limit_cycles = 4096

[[channel]]
name = "lp"
stages = [ { kind = "lowpass", response = "butterworth", order = 4, cutoff_hz = 4000 } ]

[[channel]]
name = "hp"
stages = [ { kind = "highpass", response = "butterworth", order = 2, cutoff_hz = 200 } ]
"""


@pytest.fixture(scope="module")
def lp_file(tmp_path_factory):
    p = tmp_path_factory.mktemp("sweep") / "lp.toml"
    p.write_text(LOWPASS)
    return p


@pytest.fixture(scope="module")
def sweeper(lp_file):
    d = coefc.load(lp_file).design()
    return Sweeper(d, d.loaded.description.budget, options=AnalysisOptions(measure_noise=False))


def test_parse_widths():
    assert parse_widths("12:16", "--coef") == (12, 13, 14, 15, 16)
    assert parse_widths("16:32:8", "--data") == (16, 24, 32)
    assert parse_widths("32, 16,24", "--acc") == (16, 24, 32)
    for bad in ("16:12", "a:b", "0:4", "16:80", ""):
        with pytest.raises(DescriptionError):
            parse_widths(bad, "--coef")


def test_noise_falls_6dB_per_data_bit(sweeper):
    # 6.0206 dB per bit: quantisation step halves (Widrow & Kollar 2008 [confirmed]).
    n16 = sweeper.evaluate(Config("mcu32", "df1", 64, 16, 32)).channels[0].metrics["output_noise_dbfs"]
    n24 = sweeper.evaluate(Config("mcu32", "df1", 64, 24, 32)).channels[0].metrics["output_noise_dbfs"]
    assert n16 - n24 == pytest.approx(8 * 6.0206, abs=0.3)


def test_config_equals_check_with_same_overrides(sweeper, lp_file):
    # The sweep evaluates exactly what `coefc check` does with the same overrides.
    from coefc.budget import run_check
    from coefc.targetspec import Overrides

    row = sweeper.evaluate(Config("mcu32", "df1", 40, 20, 18))
    d = coefc.load(lp_file).design()
    rep = run_check(d.realise("mcu32", Overrides(data="Q1.19", coef="Q2.16", acc_bits=40)),
                    d.loaded.description.budget, options=AnalysisOptions(measure_noise=False))
    for ch_row, ch in zip(row.channels, rep.channels):
        assert ch_row.ok == ch.ok
        assert ch_row.metrics["output_noise_dbfs"] == ch.metrics["output_noise_dbfs"]
        assert ch_row.metrics["passband_deviation_db"] == ch.metrics["passband_deviation_db"]
        assert ch_row.data == "Q1.19" and ch_row.coef == "Q2.16"


def test_fewest_bits_matches_brute_force(sweeper):
    datas, coefs = tuple(range(16, 33, 4)), tuple(range(12, 29, 4))
    for ci, name in enumerate(("lp", "hp")):
        found = fewest_bits(sweeper, ci, name, "mcu32", "df1", 64, datas, coefs)
        brute = [(d, c) for d in datas for c in coefs
                 if sweeper.evaluate(Config("mcu32", "df1", 64, d, c)).channels[ci].ok]
        assert brute, "the grid must contain a passing point for this test to mean anything"
        best = min(brute, key=lambda p: (p[0] + p[1], p[0]))
        assert (found.data_bits, found.coef_bits) == best
        # Monotone search: far fewer evaluations than the grid.
        assert found.evaluated < found.grid


def test_processes_give_the_same_table_and_minimum(lp_file):
    # Configurations are independent: evaluating them in forked worker processes must
    # give exactly the serial results, in the grid's order (the serial run is the reference).
    def fresh():
        d = coefc.load(lp_file).design()
        return Sweeper(d, d.loaded.description.budget, options=AnalysisOptions(measure_noise=False))

    serial, parallel = fresh(), fresh()
    configs, _ = serial.configs(["mcu32"], None, None, (20, 24, 28), (16, 20, 24))
    one = serial.run(configs, jobs=1)
    two = parallel.run(configs, jobs=2)
    assert [r.config for r in two.results] == [r.config for r in one.results]
    assert two.to_json() == one.to_json()
    for ci, name in enumerate(("lp", "hp")):
        a = fewest_bits(fresh(), ci, name, "mcu32", "df1", 64, (16, 20, 24, 28), (12, 16, 20, 24))
        b = fewest_bits(fresh(), ci, name, "mcu32", "df1", 64, (16, 20, 24, 28), (12, 16, 20, 24), jobs=3)
        assert (a.data_bits, a.coef_bits) == (b.data_bits, b.coef_bits)
        assert a.evaluated <= b.evaluated < a.evaluated + 3


def test_cheapest_is_cheapest(sweeper):
    configs, _ = sweeper.configs(["mcu32"], None, None, (24, 28, 32), (20, 24, 28))
    res = sweeper.run(configs)
    best = res.cheapest()
    assert best is not None and best.ok
    assert all(best.bits <= r.bits for r in res.results if r.ok)


def run_cli(*args):
    return subprocess.run([sys.executable, "-c", "from coefc.cli import main; main()", *args],
                          capture_output=True, text=True, timeout=300)


def test_cli_sweep_json_csv_plot(lp_file, tmp_path):
    png, svg = tmp_path / "s.png", tmp_path / "s.svg"
    r = run_cli("sweep", str(lp_file), "--data", "24:32:4", "--coef", "20:28:8", "--json", str(tmp_path / "s.json"),
                "--csv", str(tmp_path / "s.csv"), "--plot", str(png))
    assert r.returncode == 0, r.stderr
    assert "cheapest passing configuration" in r.stdout
    js = json.loads((tmp_path / "s.json").read_text())
    assert js["ok"] is True and len(js["configurations"]) == 3 * 2
    rows = list(csv.reader(io.StringIO((tmp_path / "s.csv").read_text())))
    assert rows[0][:6] == ["target", "structure", "acc_bits", "data_bits", "coef_bits", "channel"]
    assert len(rows) == 1 + 6 * 2
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    r = run_cli("sweep", str(lp_file), "--data", "32", "--coef", "28", "--plot", str(svg))
    assert r.returncode == 0, r.stderr
    assert "<svg" in svg.read_text()[:500]


def test_cli_sweep_exit_codes(lp_file, tmp_path):
    # Nothing passes with 8-bit data: exit 1.
    r = run_cli("sweep", str(lp_file), "--data", "8", "--coef", "16")
    assert r.returncode == 1
    assert "no configuration passes" in r.stdout
    # Bad range: one line, exit 2, no traceback.
    r = run_cli("sweep", str(lp_file), "--coef", "32:12")
    assert r.returncode == 2 and "Traceback" not in r.stderr
    assert "--coef" in r.stderr and len(r.stderr.strip().splitlines()) == 1


def test_cli_fewest_bits(lp_file):
    r = run_cli("sweep", str(lp_file), "--data", "16:32:2", "--coef", "12:28:2", "--fewest-bits", "--json", "-")
    assert r.returncode == 0, r.stderr
    js = json.loads(r.stdout)
    for m in js["fewest_bits"]:
        assert m["data_bits"] is not None and m["evaluated"] < m["grid"]


# ---------------------------------------------------------------- per-op widths

TWO_SECTIONS = """
name = "per_op"
sample_rate_hz = 48000

[implementation]
target = "mcu32"
structure = "df1ef"
scaling = "l1"

[budget]
passband_deviation_db = 0.05
output_noise_dbfs = -100
limit_cycles = 1200   # LSB at the channel output of the 32-bit word: the df1ef search does not settle here, its bound (1176) decides

[[channel]]
name = "eq"
stages = [
  { kind = "peaking", freq_hz = 30, q = 4.0, gain_db = -6 },
  { kind = "peaking", freq_hz = 6000, q = 0.7, gain_db = 3 },
]
"""


def test_hybrid_is_exactly_the_narrow_op_in_the_wide_format(tmp_path):
    from coefc.explore.opwidths import hybrid
    from coefc.program import SectionOp
    from coefc.blocks import as_float_blocks
    from coefc.targetspec import Overrides

    def rows(prog):  # physical section rows in op order, and the gains
        sos = np.vstack([b.sos for b in as_float_blocks(prog) if hasattr(b, "sos")])
        gains = [b.gain for b in as_float_blocks(prog) if hasattr(b, "gain")]
        return sos, gains

    p = tmp_path / "two.toml"
    p.write_text(TWO_SECTIONS)
    d = coefc.load(p).design()
    wide = d.realise("mcu32", Overrides(coef="Q2.30")).programs[0]
    narrow = d.realise("mcu32", Overrides(coef="Q2.14")).programs[0]
    section_ops = [k for k, op in enumerate(wide.ops) if isinstance(op, SectionOp)]
    (ws, wg), (ns, _) = rows(wide), rows(narrow)
    done = 0
    for i in section_ops:
        h = hybrid(wide, narrow, i)
        assert h is not None
        hs, hg = rows(h)
        r = section_ops.index(i)
        expect = ws.copy()
        expect[r] = ns[r]
        assert np.array_equal(hs, expect) and hg == wg  # same physical values, exactly
        assert not np.array_equal(ns[r], ws[r])  # and the narrow op really differs
        done += 1
    assert done == 2


def test_low_frequency_section_needs_the_longer_coefficient_word(tmp_path):
    # Fact of the trade (common practice, no source; direct-form pole sensitivity
    # grows as poles crowd towards z = 1 -- Oppenheim & Schafer, finite-precision
    # chapter, from memory): a 30 Hz peaking section at 48 kHz needs more
    # coefficient bits than a 6 kHz one for the same response error.
    from coefc.explore.opwidths import fewest_op_widths

    p = tmp_path / "two.toml"
    p.write_text(TWO_SECTIONS)
    d = coefc.load(p).design()
    sw = Sweeper(d, d.loaded.description.budget, options=AnalysisOptions(measure_noise=False))
    widths = fewest_op_widths(sw, 0, "mcu32", "df1ef", 64, 32, range(8, 33, 2))
    by_freq = {}
    for w in widths:
        if w.kind == "section":
            op = sw.design.realise("mcu32").programs[0].ops[w.op - 1]
            by_freq[op.a[1]] = w.coef_bits  # A2 ~ r^2: the larger, the closer to the unit circle
    assert len(by_freq) == 2
    (_, narrow_ok), (_, wide_needed) = sorted(by_freq.items())
    assert wide_needed > narrow_ok


def test_data_words_without_two_fractional_bits_are_skipped(sweeper):
    # the rule is check's own (coefc.targetspec.resolve_arithmetic), so its message too
    configs, skipped = sweeper.configs(["mcu32"], None, None, (2, 3, 24), (20,))
    assert [c.data_bits for c in configs] == [3, 24]
    assert any("data word Q1.1 has 1 fractional bit" in s for s in skipped)


# ------------------------------------------------- sweep, check and build agree

SUBSONIC = """
name = "agree"
sample_rate_hz = 48000

[implementation]
structure = "df1"
scaling = "l1"

[budget]
passband_deviation_db = 100
output_noise_dbfs = -20
overflow = "allow"
limit_cycles = 1000000000

[[channel]]
name = "low"
stages = [ { kind = "highpass", response = "butterworth", order = 2, cutoff_hz = 20 },
           { kind = "lowpass", response = "butterworth", order = 2, cutoff_hz = 8000 } ]
"""


@pytest.mark.parametrize("target", ["mcu16", "mcu32", "dsp24"])
def test_sweep_never_offers_what_build_refuses(tmp_path, target):
    from coefc.emit.header import render
    from coefc.errors import CoefcError
    from coefc.targetspec import Overrides, kernel_info

    p = tmp_path / "agree.toml"
    p.write_text(SUBSONIC)
    d = coefc.load(p).design()
    sw = Sweeper(d, d.loaded.description.budget, options=AnalysisOptions(measure_noise=False))
    info = kernel_info(sw.target(target))
    base = sw.base_arithmetic(target)
    # a grid that crosses every limit: words and accumulators beyond the kernel's,
    # and coefficient words narrow enough for a stored -a1 of +2.0 not to fit (dsp24)
    accs = (base.acc_bits, info.max_acc_bits + 8)
    res = sw.run(*sw.configs([target], None, accs, (8, 16, 24, 32), (6, 8, 12, 16, 24, 32)))
    assert res.results, "the grid must offer something for this test to mean anything"
    for r in res.results:  # every configuration offered is one build writes
        c = r.config
        assert c.data_bits <= info.max_data_bits and c.coef_bits <= info.max_coef_bits
        assert c.acc_bits <= info.max_acc_bits
        real = d.realise(sw.target(target), sw.overrides_for(c))
        assert render(real, None, header_name="x.h", vectors=0)
    beyond = [s for s in res.skipped if "wider than the kernel" in s]
    refused = [s for s in res.skipped if "build would refuse it" in s]
    assert beyond  # the words beyond the limits were skipped, with check's own reason
    if target == "dsp24":
        assert any("does not fit" in s for s in refused)
    for s in refused:  # ... and what was skipped after realising, build really refuses
        m = re.match(r"\S+ \S+ data (\d+) coef (\d+) acc (\d+)", s)
        cfg = Config(target, base.structure, int(m.group(3)), int(m.group(1)), int(m.group(2)))
        with pytest.raises(CoefcError):
            render(d.realise(sw.target(target), sw.overrides_for(cfg)), None, header_name="x.h", vectors=0)
    # a skipped word is one check refuses too (the same rule, in resolve_arithmetic)
    with pytest.raises(DescriptionError, match="wider than the kernel"):
        d.realise(target, Overrides(data=f"Q1.{info.max_data_bits}"))
    # the default ranges stay inside the kernel's limits: nothing skipped
    configs, skipped = sw.configs([target], None, None, None, None)
    assert configs and not skipped
    assert max(c.data_bits for c in configs) == info.max_data_bits
    assert max(c.coef_bits for c in configs) == info.max_coef_bits


def _brute_minimum(sw, ci, target, structure, acc, datas, coefs):
    """The exhaustive grid's answer: every offered point evaluated (an independent reference)."""
    passing = []
    for dd in datas:
        for c in coefs:
            if sw.refused(target, structure, acc, dd, c):
                continue
            r = sw.evaluate(Config(target, structure, acc, dd, c))
            if r.refused is None and r.channels[ci].ok:
                passing.append((dd, c))
    return passing, (min(passing, key=lambda q: (q[0] + q[1], q[0])) if passing else None)


@pytest.mark.parametrize("overflow, target, acc, datas, coefs", [
    ("allow", "mcu16", 32, range(8, 17, 2), range(8, 17, 2)),
    ("allow", "mcu16", 16, range(8, 17, 2), range(8, 17, 2)),  # the data word reaches the accumulator
    ("allow", "mcu32", 64, range(16, 33, 4), range(12, 29, 4)),
    ("none", "mcu32", 32, range(16, 33, 4), range(12, 29, 4)),  # ditto; only narrow data words pass
    ("allow", "dsp24", 56, range(12, 25, 2), range(12, 25, 4)),
    ("allow", "dsp24", 24, range(12, 25, 2), range(12, 25, 4)),  # ditto
])
def test_fewest_bits_is_the_exhaustive_grid_minimum(tmp_path, overflow, target, acc, datas, coefs):
    p = tmp_path / "lp.toml"
    p.write_text(LOWPASS.replace("output_noise_dbfs = -110", "output_noise_dbfs = -70")
                 .replace('overflow = "allow"', f'overflow = "{overflow}"')
                 .replace('passband_deviation_db = 0.01', 'passband_deviation_db = 0.05'))
    if acc == 16:
        # a 16-bit accumulator on 16-bit data carries no steady tone within 0.5 dB, so no point
        # of that grid would pass the tone check: compare the walk with the grid without it
        text = p.read_text()
        p.write_text(text.replace('overflow = "', 'tone_gain_error_db = "off"\noverflow = "', 1))
    d = coefc.load(p).design()
    sw = Sweeper(d, d.loaded.description.budget, options=AnalysisOptions(measure_noise=False))
    datas, coefs = tuple(datas), tuple(coefs)
    found_any = False
    for ci, name in enumerate(("lp", "hp")):
        found = fewest_bits(sw, ci, name, target, "df1", acc, datas, coefs)
        passing, best = _brute_minimum(sw, ci, target, "df1", acc, datas, coefs)
        assert (found.data_bits, found.coef_bits) == (best or (None, None)), (name, passing)
        found_any |= best is not None
        if (target, acc) == ("mcu32", 32) and best is not None:
            # the shape a walk from the widest data word misses: that column never passes
            assert not any(q[0] == max(datas) for q in passing)
    assert found_any, "some channel must pass somewhere for this case to mean anything"


HALFBAND_DECIMATOR = """
name = "hbdec"
sample_rate_hz = 96000

[budget]
stopband_attenuation_db = 70
alias_attenuation_db = 70
passband = [[0, 20000]]
stopband = [[28000, 48000]]

[[channel]]
name = "c"
stages = [
  { kind = "fir-lowpass", method = "halfband", passband_hz = 20000, stopband_hz = 28000, attenuation_db = 80 },
  { kind = "decimate", factor = 2 },
]
"""


def test_op_widths_and_memory_cover_the_polyphase_fir(tmp_path):
    # the op-width explorer treats a polyphase FIR's taps like an FIR's (it no longer skips them); the
    # narrow taps written exactly in the wide format keep the half-band's zero taps zero; memory counts
    # its non-zero stored taps only (every other tap of a half-band filter is zero, Vaidyanathan 1993,
    # sec. 4.6.1; from memory)
    from coefc.explore.opwidths import fewest_op_widths, hybrid
    from coefc.explore.sweep import program_memory_bytes
    from coefc.program import PolyFirOp
    from coefc.targetspec import Overrides

    p = tmp_path / "hb.toml"
    p.write_text(HALFBAND_DECIMATOR)
    d = coefc.load(p).design()
    wide = d.realise("mcu32", Overrides(coef="Q2.30")).programs[0]
    narrow = d.realise("mcu32", Overrides(coef="Q2.14")).programs[0]
    i = next(k for k, op in enumerate(wide.ops) if isinstance(op, PolyFirOp))
    h = hybrid(wide, narrow, i)
    assert h is not None and isinstance(h.ops[i], PolyFirOp) and h.ops[i].down == 2
    fc = wide.arithmetic.coef.frac_bits
    got = np.array(h.ops[i].taps, float) * 2.0 ** (h.ops[i].shift - fc)
    want = np.array(narrow.ops[i].taps, float) * 2.0 ** (narrow.ops[i].shift - narrow.arithmetic.coef.frac_bits)
    assert np.array_equal(got, want)  # the same physical values, exactly
    zeros = [j for j, t in enumerate(wide.ops[i].taps) if t == 0]
    assert zeros and all(h.ops[i].taps[j] == 0 for j in zeros)
    n = len(wide.ops[i].taps)
    assert len(zeros) == (n - 3) // 2
    # memory: (non-zero taps of the folded half) coefficient words + (N - 1) data words, 4 bytes each on mcu32
    poly_only = type(wide)(wide.name, wide.sample_rate_hz, wide.arithmetic, (wide.ops[i],))
    stored = sum(1 for t in wide.ops[i].taps[:(n + 1) // 2] if t)
    assert stored == (n + 1) // 4 + 1
    assert program_memory_bytes(poly_only) == 4 * stored + 4 * (n - 1)
    sw = Sweeper(d, d.loaded.description.budget, options=AnalysisOptions(measure_noise=False))
    widths = fewest_op_widths(sw, 0, "mcu32", "df1", 64, 32, range(8, 33, 4))
    poly = [w for w in widths if w.kind == "polyphase-fir"]
    assert len(poly) == 1 and poly[0].coef_bits is not None and 8 < poly[0].coef_bits <= 32


def test_hybrid_refuses_sections_with_low_words(tmp_path):
    # double-word sections (df1-wide-fb, df1ef-wide-fb, df1ef-wide): the low words weigh 2^-(Wc - 1) of their own
    # coefficient width, so no exact rewrite into another width is claimed (the op is left unjudged, never guessed)
    from coefc.explore.opwidths import hybrid
    from coefc.program import SectionOp
    from coefc.targetspec import Overrides

    p = tmp_path / "two.toml"
    p.write_text(TWO_SECTIONS)
    d = coefc.load(p).design()
    for s in ("df1ef-wide-fb", "df1ef-wide"):
        wide = d.realise("mcu16", Overrides(structure=s)).programs[0]
        narrow = d.realise("mcu16", Overrides(structure=s, coef="Q2.10")).programs[0]
        for i, op in enumerate(wide.ops):
            if isinstance(op, SectionOp):
                assert op.a_lo and hybrid(wide, narrow, i) is None
