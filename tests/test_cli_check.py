"""``coefc check`` end to end: the project's own examples gate themselves, a starved word
length fails with exit 1, bad input exits 2 with one line, and the reports are well formed."""

from __future__ import annotations

import json
import subprocess
import sys
import xml.etree.ElementTree as ET

import pytest

from conftest import FILTERS, example_files

MAIN = "from coefc.cli import main; main()"


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-c", MAIN, "check", *map(str, args)], capture_output=True, text=True,
                          cwd=cwd, timeout=300)


@pytest.mark.parametrize("path", example_files(), ids=lambda p: p.stem)
def test_every_example_passes_its_own_budget(path):
    r = run(path)
    assert r.returncode == 0, r.stdout + r.stderr
    assert "all checks pass" in r.stdout


def test_starved_word_length_fails_and_names_the_check(tmp_path):
    junit = tmp_path / "check.xml"
    r = run(FILTERS / "three_way_monitor.toml", "--data", "Q1.11", "--coef", "Q2.10", "--channel", "mid",
            "--json", "-", "--junit", junit)
    assert r.returncode == 1, r.stderr
    report = json.loads(r.stdout)
    assert report["ok"] is False
    (ch,) = report["channels"]
    failed = {c["name"] for c in ch["checks"] if not c["ok"]}
    assert "output_noise_dbfs" in failed  # 12-bit data cannot reach the -130 dBFS budget
    assert ch["arithmetic"]["data"] == "Q1.11" and ch["arithmetic"]["coef"] == "Q2.10"
    # JUnit: one suite per channel, one case per check, failures marked
    root = ET.parse(junit).getroot()
    (suite,) = root.findall("testsuite")
    cases = suite.findall("testcase")
    assert len(cases) == len(ch["checks"])
    bad = {c.get("name") for c in cases if c.find("failure") is not None}
    assert bad == failed


def test_human_table_puts_failures_first_with_reasons():
    r = run(FILTERS / "three_way_monitor.toml", "--data", "Q1.11", "--coef", "Q2.10", "--channel", "tweeter",
            "--max-noise-dbfs", "-140", "--limit-cycles", "1000", "--overflow-budget", "allow")
    assert r.returncode == 1
    rows = [ln for ln in r.stdout.splitlines() if ln.startswith("  ")]
    marks = [ln.split()[0] for ln in rows]
    assert marks[0] == "FAIL" and marks == sorted(marks, key=lambda m: m != "FAIL")
    noise = next(ln for ln in rows if "output_noise_dbfs" in ln)
    assert "above the -140 dBFS limit" in noise
    assert "AES17" in r.stdout
    # the budget tolerates overflow and limit cycles: the caution is shown
    assert "caution" in r.stderr and "amplifier" in r.stderr


def test_overrides_can_relax_a_failing_budget():
    r = run(FILTERS / "three_way_monitor.toml", "--channel", "tweeter", "--data", "Q1.11", "--coef", "Q2.10",
            "--max-noise-dbfs", "-40", "--max-passband-deviation-db", "3", "--limit-cycles", "100000",
            "--overflow-budget", "allow")
    assert r.returncode == 0, r.stdout + r.stderr


@pytest.mark.parametrize("args, words", [
    (["missing.toml"], ["missing.toml"]),
    ([FILTERS / "three_way_monitor.toml", "--limit-cycles", "few"], ["--limit-cycles", "none"]),
    ([FILTERS / "three_way_monitor.toml", "--data", "Q1.x"], ["Q1.x"]),
    ([FILTERS / "three_way_monitor.toml", "--channel", "wofer"], ["wofer", "woofer"]),
    ([FILTERS / "three_way_monitor.toml", "--target", "mcu99"], ["mcu99"]),
])
def test_bad_input_exits_2_with_one_line(args, words):
    r = run(*args)
    assert r.returncode == 2, r.stdout + r.stderr
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in r.stderr
    for w in words:
        assert w in lines[0]


def test_json_to_a_file_is_written_whole(tmp_path):
    out = tmp_path / "report.json"
    r = run(FILTERS / "three_way_monitor.toml", "--channel", "tweeter", "--json", out, "--limit-cycles", "10",
            "--overflow-budget", "allow")
    assert r.returncode in (0, 1)
    d = json.loads(out.read_text())
    assert d["schema"] == 1 and d["channels"][0]["name"] == "tweeter"
    assert "channel tweeter" in r.stdout  # the human table still goes to stdout


def test_without_a_budget_hazards_gate_by_default(tmp_path):
    # IEC 61672 A weighting in DF1 with 16-bit data on mcu32: a low section's dead band exceeds
    # full scale (dead-band bound (q/2)/(1 - |a|), Jones, OpenStax CNX m11928 [confirmed]), so a
    # description without [budget] must fail, and say which defaults it applied
    p = tmp_path / "aw.toml"
    p.write_text('name = "aw"\nsample_rate_hz = 48000\n[implementation]\ntarget = "mcu32"\n'
                 '[[channel]]\nname = "a"\nstages = [ { kind = "weighting", weighting = "A" } ]\n')
    r = run(p, "--data", "Q1.15", "--json", tmp_path / "r.json")
    assert r.returncode == 1, r.stdout + r.stderr
    assert r.stdout.strip().splitlines()[-1].endswith(
        "over budget (defaults applied: limit_cycles = none, overflow = none, tone_gain_error_db = 0.5)")
    d = json.loads((tmp_path / "r.json").read_text())
    assert d["defaults_applied"] == {"limit_cycles": "none", "overflow": "none", "tone_gain_error_db": 0.5}
    (ch,) = d["channels"]
    assert not next(c for c in ch["checks"] if c["name"] == "limit_cycles")["ok"]


def test_reports_name_peaks_re_full_scale_and_the_offset_apart(tmp_path):
    out = tmp_path / "r.json"
    r = run(FILTERS / "three_way_monitor.toml", "--channel", "tweeter", "--rounding", "truncate",
            "--max-offset-lsb", "1000", "--json", out)
    d = json.loads(out.read_text())
    m = d["channels"][0]["metrics"]
    for key in ("output_offset_lsb", "output_offset_lsb_simulated", "output_offset_dbfs",
                "worst_case_input_peak_db_re_full_scale", "design_peak_gain", "worst_case_input_peak_lsb"):
        assert key in m, key
    assert "worst_case_input_peak_dbfs" not in m
    # truncate rounding leaves a negative DC offset (mean -q/2 per rounding point; Widrow &
    # Kollar 2008 [confirmed]); the analytic and measured offsets agree within 5 standard errors
    assert m["output_offset_lsb"] < 0
    assert abs(m["output_offset_lsb_simulated"] - m["output_offset_lsb"]) < 5 * m["output_offset_lsb_simulated_stderr"] + 0.05
    assert d["budget"]["output_offset_lsb"] == 1000
    assert "dBFS peak" not in r.stdout and "dB re full-scale peak" in r.stdout
    assert "output_offset_lsb" in r.stdout


def _vibration_copy(tmp_path, budget_lines: str, channel_extra: str = "", implementation: str = "") -> object:
    """filters/vibration_sensor.toml with its [budget] (and channel, [implementation]) rewritten."""
    text = (FILTERS / "vibration_sensor.toml").read_text()
    head, rest = text.split("[budget]", 1)
    body = rest[rest.index("[[channel]]"):]
    if implementation:
        head = head[:head.index("[implementation]")] + implementation + "\n"
    body = body.replace('name = "accel"\n', 'name = "accel"\n' + channel_extra)
    f = tmp_path / "vib.toml"
    f.write_text(head + "[budget]\n" + budget_lines + "\n" + body)
    return f


def test_auto_meets_the_budget_as_overridden_on_the_command_line(tmp_path):
    # structure = "auto" chooses against the budget the check gates on, command-line overrides
    # included: an impossible override stops auto with its one line (exit 2) ...
    r = run(FILTERS / "vibration_sensor.toml", "--max-noise-dbfs", "-200")
    assert r.returncode == 2, r.stdout + r.stderr
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "channel 'accel'" in lines[0] and "nearest miss: output noise" in lines[0]
    assert "-200 dBFS limit" in lines[0]
    # ... and a reachable override rescues a description whose own budget auto cannot meet
    f = _vibration_copy(tmp_path, 'passband_deviation_db = 0.05\noutput_noise_dbfs = -200\nlimit_cycles = "none"\n'
                        'overflow = "none"\npassband = [[10, 1000]]')
    assert run(f).returncode == 2
    r = run(f, "--max-noise-dbfs", "-80", "--json", "-")
    assert r.returncode == 0, r.stdout + r.stderr
    (ch,) = json.loads(r.stdout)["channels"]
    assert ch["budget"]["output_noise_dbfs"] == -80
    assert all("chosen" in s for s in ch["sections"])


def test_channel_structure_overrides_the_implementation_and_the_command_line_wins(tmp_path):
    f = _vibration_copy(tmp_path, 'output_noise_dbfs = -60\nlimit_cycles = 1000\noverflow = "allow"\n'
                        'tone_gain_error_db = "off"',
                        channel_extra='structure = "df1ef"\n',
                        implementation='[implementation]\ntarget = "mcu16"\nstructure = "tdf2"\nscaling = "l1"')
    r = run(f, "--json", "-")
    assert r.returncode == 0, r.stdout + r.stderr
    (ch,) = json.loads(r.stdout)["channels"]
    assert ch["arithmetic"]["structure"] == "df1ef"
    assert {s["structure"] for s in ch["sections"]} == {"df1ef"}
    r = run(f, "--structure", "df1", "--json", "-")
    (ch,) = json.loads(r.stdout)["channels"]
    assert {s["structure"] for s in ch["sections"]} == {"df1"}


def test_channel_structure_the_target_cannot_run_is_one_line(tmp_path):
    f = _vibration_copy(tmp_path, 'output_noise_dbfs = -60', channel_extra='structure = "coupled"\n',
                        implementation='[implementation]\ntarget = "mcu32hw"')
    r = run(f)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in r.stderr
    assert str(f) in lines[0] and "channel 'accel'" in lines[0] and "key 'structure'" in lines[0]
    assert "does not support structure 'coupled'" in lines[0] and "it supports df1, tdf2, df1ef" in lines[0]


def test_budget_by_data_word_width(tmp_path):
    # [budget.when_data_bits.16] applies where the data word is 16 bits wide (mcu16), not on a
    # 32-bit word (mcu32), and a command-line override wins over it
    f = _vibration_copy(tmp_path, 'passband_deviation_db = 0.05\noutput_noise_dbfs = -130\nlimit_cycles = "none"\n'
                        'overflow = "none"\npassband = [[10, 1000]]\n[budget.when_data_bits.16]\noutput_noise_dbfs = -80')
    r = run(f, "--json", "-")
    assert r.returncode == 0, r.stdout + r.stderr
    (ch,) = json.loads(r.stdout)["channels"]
    assert ch["budget"]["output_noise_dbfs"] == -80
    r = run(f, "--target", "mcu32", "--structure", "df1ef", "--json", "-")
    (ch,) = json.loads(r.stdout)["channels"]
    assert ch["budget"]["output_noise_dbfs"] == -130
    r = run(f, "--max-noise-dbfs", "-70", "--json", "-")
    (ch,) = json.loads(r.stdout)["channels"]
    assert ch["budget"]["output_noise_dbfs"] == -70


def test_a_target_states_what_a_structure_costs_and_auto_orders_by_it(tmp_path):
    # [arithmetic] section_cost: a chip where error feedback is dear (here 12 multiplies a section) makes
    # auto reach for it last; the note names the cost it paid
    import shutil

    root = tmp_path / "targets"
    shutil.copytree(FILTERS.parent / "targets" / "mcu16", root / "dear16")
    toml = root / "dear16" / "target.toml"
    toml.write_text(toml.read_text().replace('structure = "df1"\n', 'structure = "df1"\n'
                                             'section_cost = { "df1ef" = 12 }\n', 1))
    r = run(FILTERS / "vibration_sensor.toml", "--json", "-")
    (ch,) = json.loads(r.stdout)["channels"]
    assert ch["sections"][0]["structure"] == "df1ef"  # on mcu16 (5 multiplies) auto takes it for the 0.5 Hz pole
    r = run(FILTERS / "vibration_sensor.toml", "--target-dir", root, "--target", "dear16", "--json", "-")
    assert r.returncode in (0, 1), r.stderr
    (ch,) = json.loads(r.stdout)["channels"]
    assert "df1ef" not in [s["structure"] for s in ch["sections"]]
    assert all("multiplies per sample" in s["chosen"] for s in ch["sections"])
    # a cost for a structure the target does not list is one line naming the file and the fix
    toml.write_text(toml.read_text().replace('section_cost = { "df1ef" = 12 }', 'section_cost = { "df1e" = 12 }'))
    r = run(FILTERS / "vibration_sensor.toml", "--target-dir", root, "--target", "dear16")
    assert r.returncode == 2
    (line,) = r.stderr.strip().splitlines()
    assert str(toml) in line and "section_cost names 'df1e'" in line and "did you mean 'df1ef'" in line
