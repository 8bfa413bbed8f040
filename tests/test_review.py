"""Merge review: several files per check (-j), SARIF and Markdown outputs, and base against head (coefc diff).

Outside references: the published SARIF 2.1.0 JSON schema (OASIS, tests/data/sarif-schema-2.1.0.json,
validated with the jsonschema package), a CommonMark/GFM parser from PyPI (markdown-it-py) for the
Markdown table, tomllib (Python's TOML parser) for the line scan, git itself for --base, and
scipy.signal.sosfreqz for the response difference.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
import tomllib
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from conftest import FILTERS, example_files

MAIN = "from coefc.cli import main; main()"
DATA = Path(__file__).resolve().parent / "data"
SCHEMA = DATA / "sarif-schema-2.1.0.json"

# a quick description (one biquad and a gain); df1ef: no limit cycle at 32 bits
GOOD = """\
# a probe: one second-order low-pass
name = "probe"
sample_rate_hz = 48000

[implementation]
target = "mcu32"
structure = "df1ef"

[budget]
passband_deviation_db = 0.1   # [dB] brackets in a comment do not confuse the line scan
output_noise_dbfs = -120

[[channel]]
name = "low"
stages = [
  { kind = "lowpass", response = "butterworth", order = 2, cutoff_hz = 1000 },
  { kind = "gain", db = -1.0 },
]
"""
OVER = GOOD.replace("output_noise_dbfs = -120", "output_noise_dbfs = -250")  # below any 32-bit noise floor
BAD = GOOD.replace("cutoff_hz = 1000 }", "cutof_hz = 1000 }")


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-c", MAIN, *map(str, args)], capture_output=True, text=True,
                          cwd=cwd, timeout=600)


def _line_of(text: str, needle: str) -> int:
    return next(i for i, ln in enumerate(text.splitlines(), 1) if needle in ln)


@pytest.fixture()
def probes(tmp_path):
    for name, text in (("good", GOOD), ("over", OVER), ("bad", BAD)):
        (tmp_path / f"{name}.toml").write_text(text)
    return tmp_path


# ------------------------------------------------------------------ the line scan

@pytest.mark.parametrize("path", example_files(), ids=lambda p: p.stem)
def test_line_scan_agrees_with_tomllib_on_every_example(path):
    from coefc.review.locate import scan

    text = path.read_text()
    doc = tomllib.loads(text)  # reference: Python's TOML parser
    lines = scan(text)
    src = text.splitlines()
    for key, value in doc.get("budget", {}).items():
        if key == "when_data_bits":  # [budget.when_data_bits.N] tables: their keys by width
            for width, table in value.items():
                for k in table:
                    assert src[lines.width_keys[width][k] - 1].lstrip().startswith(k)
                    assert lines.budget_key(k, None, int(width)) == lines.width_keys[width][k]
                    assert lines.budget_key(k, None, int(width) + 1) == lines.budget_keys.get(k)
            continue
        assert src[lines.budget_keys[key] - 1].lstrip().startswith(key)
    assert [c.name for c in lines.channels] == [c["name"] for c in doc["channel"]]
    for cl, ch in zip(lines.channels, doc["channel"]):
        assert len(cl.stage_lines) == len(ch["stages"])
        for ln, stage in zip(cl.stage_lines, ch["stages"]):
            assert re.search(rf'kind\s*=\s*"{re.escape(stage["kind"])}"', src[ln - 1])


def test_line_scan_follows_tables_inline_budgets_and_dotted_keys():
    from coefc.review.locate import scan

    text = """\
name = "x"   # [not a table]
sample_rate_hz = 48000

[budget]
"passband_deviation_db" = 0.1
note = "a ] bracket and a [ bracket in a string"
output_noise_dbfs = -120

[[channel]]
name = 'first'
budget = { output_noise_dbfs = -100, limit_cycles = 2 }
stages = [{ kind = "gain", db = 1 }, { kind = "delay", samples = 2 },
  { kind = "gain", db = -1 },
]

[[channel]]
name = "second"
budget.passband_deviation_db = 0.5

[[channel.stages]]
kind = "gain"
db = 0

[[channel]]
name = "third"

[channel.budget]
output_offset_lsb = 1

[[channel.stages]]
kind = "delay"
samples = 1
"""
    lines = scan(text)
    assert lines.budget_keys == {"passband_deviation_db": 5, "note": 6, "output_noise_dbfs": 7}
    first, second, third = lines.channels
    assert (first.name, first.line, first.stage_lines) == ("first", 10, [12, 12, 13])
    assert first.budget_keys == {"output_noise_dbfs": 11, "limit_cycles": 11}
    assert (second.name, second.stage_lines, second.budget_keys) == ("second", [20], {"passband_deviation_db": 18})
    assert (third.name, third.stage_lines, third.budget_keys) == ("third", [30], {"output_offset_lsb": 28})
    assert lines.budget_key("output_noise_dbfs", "first") == 11  # the channel's own key wins
    assert lines.budget_key("output_noise_dbfs", "second") == 7
    # tomllib reads the same text: the same channels, stages and budget keys
    doc = tomllib.loads(text)
    assert [len(c["stages"]) for c in doc["channel"]] == [len(c.stage_lines) for c in lines.channels]
    assert [sorted(c.get("budget", {})) for c in doc["channel"]] == [sorted(c.budget_keys) for c in lines.channels]
    assert sorted(doc["budget"]) == sorted(lines.budget_keys)


# ------------------------------------------------------------------ several files

def test_worst_exit_code_orders_internal_error_over_bad_input_over_budget():
    from coefc.review.batch import worst

    assert worst([0, 0]) == 0
    assert worst([0, 1, 0]) == 1
    assert worst([1, 2, 0]) == 2
    assert worst([2, 3, 1]) == 3
    assert worst([]) == 0


def test_default_jobs_are_the_processors_this_process_may_use():
    from coefc.review.batch import default_jobs

    expected = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    assert default_jobs() == expected


def test_a_bug_on_one_file_is_that_files_exit_3(monkeypatch, probes):
    from coefc.review import batch

    def boom(loaded, settings):
        raise ZeroDivisionError("probe")

    monkeypatch.setattr(batch, "check_loaded", boom)
    out = batch.run_file(str(probes / "good.toml"), batch.CheckSettings())
    assert out.code == 3 and "internal error" in out.error and "ZeroDivisionError" in out.error


def test_several_files_run_on_each_with_the_worst_exit_code(probes):
    junit = probes / "all.xml"
    r = run("check", "good.toml", "over.toml", "bad.toml", "-j", "2", "--json", "all.json", "--junit", junit,
            cwd=probes)
    assert r.returncode == 2, r.stdout + r.stderr  # bad input is the worst of pass, over budget, bad input
    assert "Traceback" not in r.stderr
    # the bad file: one line naming file, channel, stage and key; the other files still ran
    (err,) = [ln for ln in r.stderr.splitlines() if "error" in ln]
    assert err.startswith("coefc: error: bad.toml, channel 'low', stage 1, key 'cutof_hz'")
    assert "channel low  [PASS]" in r.stdout and "channel low  [FAIL]" in r.stdout
    tail = r.stdout.splitlines()[-4:]
    assert tail[0] == "coefc check: 3 files: 1 pass, 1 over budget, 1 bad input"
    assert tail[1] == "good.toml: pass (1 channel)"
    assert tail[2].startswith("over.toml: over budget: 1 check(s) fail (low.output_noise_dbfs)")
    assert tail[3].startswith("bad.toml: bad input: channel 'low', stage 1")
    doc = json.loads((probes / "all.json").read_text())
    assert doc["exit_code"] == 2 and doc["ok"] is False
    assert [(f["source"], f["exit_code"], f["verdict"]) for f in doc["files"]] == [
        ("good.toml", 0, "pass"), ("over.toml", 1, "over budget"), ("bad.toml", 2, "bad input")]
    assert doc["files"][0]["report"]["ok"] is True and doc["files"][2]["report"] is None
    root = ET.parse(junit).getroot()
    assert len(root.findall("testsuite")) == 3
    assert root.get("errors") == "1" and root.get("failures") == "1"


def test_exit_code_1_when_the_worst_is_over_budget(probes):
    r = run("check", "good.toml", "over.toml", "-j", "1", cwd=probes)
    assert r.returncode == 1, r.stderr


# ------------------------------------------------------------------ SARIF and Markdown

def test_sarif_validates_against_the_published_schema_and_places_each_finding(probes):
    jsonschema = pytest.importorskip("jsonschema")
    if not SCHEMA.is_file():
        pytest.skip(f"{SCHEMA} is missing: fetch the SARIF 2.1.0 schema named in tests/data/README.md")
    r = run("check", "good.toml", "over.toml", "bad.toml", "--sarif", "out.sarif", "--markdown", "out.md",
            "--json", "all.json", cwd=probes)
    assert r.returncode == 2, r.stderr
    log = json.loads((probes / "out.sarif").read_text())
    schema = json.loads(SCHEMA.read_text())
    # reference: OASIS SARIF 2.1.0 Errata 01 schema (draft-04), tests/data/README.md
    jsonschema.Draft4Validator(schema, format_checker=jsonschema.FormatChecker()).validate(log)
    assert log["version"] == "2.1.0"
    (run_,) = log["runs"]
    failing = [(f["source"], c["name"]) for f in json.loads((probes / "all.json").read_text())["files"]
               if f["report"] for ch in f["report"]["channels"] for c in ch["checks"] if not c["ok"]]
    results = run_["results"]
    assert [(r_["locations"][0]["physicalLocation"]["artifactLocation"]["uri"], r_["ruleId"]) for r_ in results] == \
        failing + [("bad.toml", "bad-input")]
    rules = [rule["id"] for rule in run_["tool"]["driver"]["rules"]]
    assert all(rules[r_["ruleIndex"]] == r_["ruleId"] for r_ in results)
    # each finding at the line of what it concerns: the budget key, the bad stage
    lines = {r_["ruleId"]: r_["locations"][0]["physicalLocation"]["region"]["startLine"] for r_ in results}
    assert lines["output_noise_dbfs"] == _line_of(OVER, "output_noise_dbfs =")
    assert lines["bad-input"] == _line_of(BAD, "cutof_hz")


def test_a_bad_budget_key_is_placed_at_its_line(tmp_path):
    from coefc.review.batch import CheckSettings, run_file

    text = GOOD.replace("output_noise_dbfs = -120", "output_noise_dbfs = \"quiet\"")
    (tmp_path / "k.toml").write_text(text)
    out = run_file(str(tmp_path / "k.toml"), CheckSettings())
    assert out.code == 2 and "output_noise_dbfs" in out.error
    assert [f.line for f in out.findings] == [_line_of(text, "output_noise_dbfs =")]


def test_sarif_markdown_and_json_do_not_depend_on_the_number_of_processes(probes):
    outs = []
    for jobs in ("1", "2"):
        d = probes / f"j{jobs}"
        d.mkdir()
        for name in ("good", "over", "bad"):
            shutil.copy(probes / f"{name}.toml", d)
        r = run("check", "good.toml", "over.toml", "bad.toml", "-j", jobs, "--sarif", "o.sarif", "--markdown", "o.md",
                "--json", "o.json", cwd=d)
        assert r.returncode == 2, r.stderr
        outs.append([(d / n).read_bytes() for n in ("o.sarif", "o.md")] + [json.loads((d / "o.json").read_text())])
    assert outs[0][:2] == outs[1][:2]
    for a, b in zip(outs[0][2]["files"], outs[1][2]["files"]):  # tool version aside, the same reports
        assert a == b


def test_markdown_renders_as_a_table_in_a_commonmark_parser(probes):
    markdown_it = pytest.importorskip("markdown_it")
    r = run("check", "good.toml", "over.toml", "bad.toml", "--markdown", "out.md", cwd=probes)
    assert r.returncode == 2
    text = (probes / "out.md").read_text()
    # reference: markdown-it-py (CommonMark) with the GFM table extension enabled
    html = markdown_it.MarkdownIt("commonmark").enable("table").render(text)
    assert html.count("<table>") == 1
    rows = re.findall(r"<tr>(.*?)</tr>", html, re.S)
    cells = [re.findall(r"<t[hd][^>]*>(.*?)</t[hd]>", row, re.S) for row in rows]
    assert cells[0] == ["File", "Channel", "Verdict", "Over budget"]
    assert [c[:3] for c in cells[1:]] == [["<code>good.toml</code>", "low", "pass"],
                                          ["<code>over.toml</code>", "low", "<strong>over budget</strong>"],
                                          ["<code>bad.toml</code>", "", "<strong>bad input</strong>"]]
    assert "output_noise_dbfs" in cells[2][3] and "cutof_hz" in cells[3][3]
    assert "1 of 3 files pass" in html


def test_markdown_cells_escape_the_pipe():
    from coefc.reports.markdown import cell

    markdown_it = pytest.importorskip("markdown_it")
    two_lines = "two\nlines"
    text = f"| a | b |\n| --- | --- |\n| {cell('x | y')} | {cell(two_lines)} |\n"
    html = markdown_it.MarkdownIt("commonmark").enable("table").render(text)
    assert "<td>x | y</td>" in html and "<td>two lines</td>" in html


# ------------------------------------------------------------------ coefc diff

def _realised_db(section_rows, fs, freqs):
    import numpy as np
    import scipy.signal

    # reference: scipy.signal.sosfreqz of the realised coefficients (integers x 2^(shift - Fc))
    sos = np.array(section_rows, dtype=float)
    _, h = scipy.signal.sosfreqz(sos, worN=np.asarray(freqs), fs=fs)
    return 20 * np.log10(np.abs(h))


def test_diff_reports_stages_integers_checks_and_response(tmp_path):
    import numpy as np

    old, new = tmp_path / "old.toml", tmp_path / "new.toml"
    old.write_text(GOOD)
    new.write_text(GOOD.replace("cutoff_hz = 1000", "cutoff_hz = 1200").replace("-120", "-250"))
    r = run("diff", old, new, "--json", tmp_path / "d.json", "--markdown", tmp_path / "d.md")
    assert r.returncode == 1, r.stdout + r.stderr  # the new description is over budget
    d = json.loads((tmp_path / "d.json").read_text())
    assert d["ok"] is False and d["changed"] is True
    assert d["budget"] == {"output_noise_dbfs": {"old": -120.0, "new": -250.0}}
    (ch,) = d["channels"]
    assert ch["name"] == "low" and ch["changed"] is True
    assert ch["verdict"] == {"old": True, "new": False, "changed": True}
    (stage,) = ch["stages"]
    assert stage["index"] == 1 and stage["keys"] == {"cutoff_hz": {"old": 1000, "new": 1200}}
    # realised integers: counted independently from the JSON reports of coefc check
    reps = [json.loads(run("check", p, "--json", "-").stdout)["channels"][0] for p in (old, new)]
    ints = [[x for s in rep["sections"] for x in (*s["b"], *s["a"], s["coef_shift"])] for rep in reps]
    differ = sum(1 for a, b in zip(*ints) if a != b)
    assert differ > 0
    sec = [o for o in ch["integers"]["ops"] if o["kind"] == "section"]
    assert [(o["section"], o["op"]) for o in sec] == [(1, 1)] and sec[0]["integers_changed"] == differ
    noise = next(c for c in ch["checks"] if c["name"] == "output_noise_dbfs")
    assert noise["old"]["ok"] is True and noise["new"]["ok"] is False and noise["new"]["limit"] == -250
    assert noise["delta"] == pytest.approx(noise["new"]["value"] - noise["old"]["value"])
    assert any(m["name"] == "passband_deviation_db" for m in ch["metrics"])
    # the response difference at the check frequencies, against scipy
    resp = ch["response"]
    fc = 30  # mcu32 coefficients are Q2.30
    rows = [[*(x * 2.0 ** (s["coef_shift"] - fc) for x in s["b"]), 1.0,
             *(x * 2.0 ** (s["coef_shift"] - fc) for x in s["a"])] for s in (rep["sections"][0] for rep in reps)]
    import coefc

    gains = []
    for p in (old, new):  # the gain op's integer (the JSON lists sections only): y = coef * 2^(shift - Fc) * x
        (g,) = [op for op in coefc.load(p).design().realise().programs[0].ops if type(op).__name__ == "GainOp"]
        gains.append(20 * np.log10(abs(g.coef) * 2.0 ** (g.shift - fc)))
    ref_old = _realised_db([rows[0]], 48000, resp["freq_hz"]) + gains[0]
    ref_new = _realised_db([rows[1]], 48000, resp["freq_hz"]) + gains[1]
    np.testing.assert_allclose(resp["delta_db"], ref_new - ref_old, atol=1e-9)
    np.testing.assert_allclose(resp["old_db"], ref_old, atol=1e-9)
    assert resp["max_abs_delta_db"] == pytest.approx(max(abs(ref_new - ref_old)), abs=1e-9)
    assert "PASS -> FAIL" in r.stdout and "stage 1 (lowpass): changed: cutoff_hz 1000 -> 1200" in r.stdout
    assert "| low |" in (tmp_path / "d.md").read_text()


def test_diff_of_identical_files_changes_nothing_and_exits_with_the_verdict(tmp_path):
    a, b = tmp_path / "a.toml", tmp_path / "b.toml"
    a.write_text(GOOD)
    b.write_text(GOOD)
    r = run("diff", a, b, "--json", "-")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    assert d["changed"] is False and [c["changed"] for c in d["channels"]] == [False]
    assert d["channels"][0]["integers"]["changed"] == 0
    assert all(m["delta"] in (None, 0) for m in d["channels"][0]["metrics"])


@pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")
def test_diff_base_reads_the_old_version_with_git(tmp_path):
    repo = tmp_path / "repo"
    (repo / "filters").mkdir(parents=True)
    desc = repo / "filters" / "probe.toml"

    def git(*args):
        subprocess.run(["git", "-c", "user.name=probe", "-c", "user.email=probe@example.invalid", *args],
                       cwd=repo, check=True, capture_output=True)

    git("init", "-q")
    desc.write_text(GOOD)
    git("add", ".")
    git("commit", "-qm", "v1")
    desc.write_text(GOOD.replace("db = -1.0", "db = -2.0"))
    r = run("diff", "--base", "HEAD", "filters/probe.toml", "--json", "-", cwd=repo)
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    assert d["old"]["source"] == "HEAD:filters/probe.toml"
    (ch,) = d["channels"]
    (stage,) = ch["stages"]
    assert stage["index"] == 2 and stage["keys"] == {"db": {"old": -1.0, "new": -2.0}}
    assert [(o["kind"], o["status"]) for o in ch["integers"]["ops"]] == [("gain", "changed")]
    # from a subfolder too: the path is taken relative to the repository
    r = run("diff", "--base", "HEAD", "probe.toml", "--json", "-", cwd=repo / "filters")
    assert r.returncode == 0 and json.loads(r.stdout)["old"]["source"] == "HEAD:filters/probe.toml"
    # a file the revision does not hold: every channel is new
    (repo / "filters" / "fresh.toml").write_text(GOOD)
    r = run("diff", "--base", "HEAD", "filters/fresh.toml", "--json", "-", cwd=repo)
    assert r.returncode == 0, r.stderr
    assert [c["status"] for c in json.loads(r.stdout)["channels"]] == ["added"]
    # an unknown revision: one line, exit 2
    r = run("diff", "--base", "no-such-branch", "filters/probe.toml", cwd=repo)
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "no-such-branch" in r.stderr
    assert "Traceback" not in r.stderr


def test_diff_base_outside_a_git_repository_is_one_line(tmp_path):
    if subprocess.run(["git", "-C", str(tmp_path), "rev-parse"], capture_output=True).returncode == 0:
        pytest.skip("the temporary folder lies inside a git repository")
    (tmp_path / "p.toml").write_text(GOOD)
    r = run("diff", "--base", "HEAD", "p.toml", cwd=tmp_path)
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "not inside a git repository" in r.stderr


@pytest.mark.parametrize("args, words", [
    (["one.toml"], ["OLD.toml NEW.toml"]),
    (["--base", "HEAD", "one.toml", "two.toml"], ["one file"]),
    (["bad.toml", "one.toml"], ["bad.toml", "cutof_hz"]),
    (["one.toml", "missing.toml"], ["missing.toml"]),
])
def test_diff_bad_input_exits_2_with_one_line(tmp_path, args, words):
    (tmp_path / "one.toml").write_text(GOOD)
    (tmp_path / "two.toml").write_text(GOOD)
    (tmp_path / "bad.toml").write_text(BAD)
    r = run("diff", *args, cwd=tmp_path)
    assert r.returncode == 2, r.stdout + r.stderr
    assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr
    assert all(w in r.stderr for w in words)
