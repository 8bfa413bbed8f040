"""``coefc build``: exit codes, atomic and reproducible output, staleness check,
over-budget refusal and --force, as a user runs it."""

from __future__ import annotations

import contextlib
import io
import os
import re
import subprocess
import sys
from pathlib import Path
from types import SimpleNamespace

import pytest

from c_build import run_headers

DESCRIPTION = """\
# Bench-test probe filter (an invented example).
name = "probe_filter"
sample_rate_hz = 48000

[implementation]
target = "mcu32"

[budget]
passband_deviation_db = {deviation}
limit_cycles = 64     # LSB: the DF1 Butterworth section holds a zero-input cycle of 31 LSB on mcu32
overflow = "allow"    # a bench probe; the l2-scaled variant below overflows under worst-case input

[[channel]]
name = "left"
stages = [
  {{ kind = "lowpass", response = "butterworth", order = 2, cutoff_hz = {cutoff} }},
  {{ kind = "gain", db = -6.0 }},
]

[[channel]]
name = "right"
stages = [
  {{ kind = "delay", samples = 3 }},
  {{ kind = "fir", taps = [0.25, 0.5, 0.25] }},
]
"""


def coefc_process(*args, cwd=None):
    """The command in a fresh process, exactly as a user runs it."""
    return subprocess.run([sys.executable, "-c", "from coefc.cli import main; main()", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, timeout=300)


def coefc(*args, cwd=None):
    """The same entry point in this process (faster): exit code, stdout, stderr."""
    from coefc.cli import main

    out, err = io.StringIO(), io.StringIO()
    old_argv, old_cwd = sys.argv, os.getcwd()
    sys.argv = ["coefc", *map(str, args)]
    code = 0
    try:
        if cwd is not None:
            os.chdir(cwd)
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                main()
            except SystemExit as e:
                code = e.code if isinstance(e.code, int) else (0 if e.code is None else 1)
    finally:
        sys.argv = old_argv
        os.chdir(old_cwd)
    return SimpleNamespace(returncode=code, stdout=out.getvalue(), stderr=err.getvalue())


@pytest.fixture()
def desc(tmp_path) -> Path:
    p = tmp_path / "probe.toml"
    p.write_text(DESCRIPTION.format(deviation=0.05, cutoff=1000))
    return p


def test_build_check_and_regenerate(desc, tmp_path):
    out = tmp_path / "probe.h"
    r = coefc("build", desc, "-o", out, "--vectors", "64")
    assert r.returncode == 0, r.stderr
    first = out.read_bytes()
    assert b"verdict      within budget" in first
    # the same inputs give the same bytes, also from another working directory
    other = tmp_path / "elsewhere"
    other.mkdir()
    r = coefc("build", desc, "-o", out, "--vectors", "64", cwd=other)
    assert r.returncode == 0 and out.read_bytes() == first
    assert coefc("build", desc, "-o", out, "--vectors", "64", "--check").returncode == 0
    # a different vector count or description makes it stale; --check writes nothing
    assert coefc("build", desc, "-o", out, "--check").returncode == 1
    desc.write_text(DESCRIPTION.format(deviation=0.05, cutoff=1200))
    r = coefc("build", desc, "-o", out, "--vectors", "64", "--check")
    assert r.returncode == 1 and "stale" in r.stderr
    assert out.read_bytes() == first
    assert not list(tmp_path.glob(".probe*"))  # no temporary files left behind
    assert coefc("build", desc, "-o", tmp_path / "missing.h", "--check").returncode == 1
    assert not (tmp_path / "missing.h").exists()


def test_over_budget_refuses_then_force_writes(desc, tmp_path):
    desc.write_text(DESCRIPTION.format(deviation=1e-12, cutoff=1000))
    out = tmp_path / "probe.h"
    out.write_text("previous header\n")
    r = coefc("build", desc, "--target", "mcu16", "-o", out)
    assert r.returncode == 1
    assert "over budget" in r.stderr and "not written" in r.stderr
    assert out.read_text() == "previous header\n"
    r = coefc("build", desc, "--target", "mcu16", "-o", out, "--force")
    assert r.returncode == 0, r.stderr
    text = out.read_text()
    assert text.startswith("/*\n * !!! OVER BUDGET")
    assert "#define PROBE_FILTER_OVER_BUDGET 1" in text


def test_overrides_and_kernel_files(desc, tmp_path):
    out = tmp_path / "fw" / "probe.h"
    out.parent.mkdir()
    r = coefc("build", desc, "--target", "mcu16", "--structure", "tdf2", "--rounding", "truncate", "--scaling", "l2",
              "-o", out, "--reference-kernel", "--vectors", "200")
    assert r.returncode == 0, r.stderr
    text = out.read_text()
    assert "COEFC_MCU16_OP_TDF2" in text and "COEFC_MCU16_ROUND_TRUNCATE" in text
    assert "static const int16_t probe_filter_left_coefs" in text
    assert (out.parent / "coefc_mcu16.h").is_file() and (out.parent / "coefc_mcu16.c").is_file()
    # the written header runs its golden vectors on the written kernel
    rc, log = run_headers(tmp_path / "run", "mcu16", [("probe.h", "probe_filter", text)])
    assert rc == 0, log


@pytest.mark.parametrize("case, args, pattern", [
    ("bad description", ["broken.toml", "-o", "x.h"], r"broken\.toml:\d+"),
    ("unknown target", ["probe.toml", "--target", "mcu99", "-o", "x.h"], r"no target 'mcu99'"),
    ("bad override", ["probe.toml", "--data", "Q1.x", "-o", "x.h"], r"'Q1\.x' is not a Q format"),
    ("kernel too narrow", ["probe.toml", "--target", "mcu16", "--data", "Q1.23", "-o", "x.h"],
     r"handles: at most 16; narrow it \(--data Q1\.15\)"),
    ("missing folder", ["probe.toml", "-o", "nowhere/x.h"], r"folder 'nowhere' does not exist"),
    ("output is a folder", ["probe.toml", "-o", "."], r"is a folder; give the header's file name"),
    ("output not a header", ["probe.toml", "-o", "x.c"], r"must be a C header ending in \.h"),
])
def test_bad_input_is_one_line_exit_2(desc, tmp_path, case, args, pattern):
    (tmp_path / "broken.toml").write_text('name = "x"\nsample_rate_hz = \n')
    r = (coefc_process if case == "bad description" else coefc)("build", *args, cwd=tmp_path)
    assert r.returncode == 2, (case, r.stdout, r.stderr)
    assert "Traceback" not in r.stderr
    lines = [ln for ln in r.stderr.splitlines() if ln.startswith("coefc: error")]
    assert len(lines) == 1, r.stderr
    assert re.search(pattern, lines[0]), lines[0]
    assert not (tmp_path / "x.h").exists()


# ---------------------------------------------------------------------------
# check and build agree: every refusal rule of build (coefc.emit.buildable) fails
# `coefc check` with exit 2 and one line, and `coefc build` with exit 2 and no file
# ---------------------------------------------------------------------------

LOW_SECTION = """\
# A subsonic filter probe (an invented example).
name = "probe_filter"
sample_rate_hz = 48000

[budget]
passband_deviation_db = 100
output_noise_dbfs = -20
overflow = "allow"
limit_cycles = 1000000000
tone_gain_error_db = "off"      # 16-bit DF1 holds a -20 dBFS 40 Hz tone in a dead band; not the point here

[[channel]]
name = "low"
stages = [ {{ kind = "highpass", response = "butterworth", order = 2, cutoff_hz = {cutoff} }}, {{ kind = "gain", db = {gain} }} ]
{extra}"""


def _user_target(tmp_path, name, edits):
    """A copy of the built-in mcu32 target with *edits* ((old, new) text pairs) to its target.toml."""
    import shutil

    from coefc.targetspec import find_target

    folder = tmp_path / "targets" / name
    shutil.copytree(find_target("mcu32").folder, folder)
    toml = folder / "target.toml"
    text = toml.read_text()
    for old, new in edits:
        assert old in text
        text = text.replace(old, new)
    toml.write_text(text)
    return folder.parent


@pytest.mark.parametrize("case", ["data", "coef", "acc", "shift-low", "shift-high", "no-coef-shift",
                                  "stored-word", "names"])
def test_every_build_refusal_fails_check_with_exit_2(tmp_path, case):
    extra, gain, cutoff, args, pattern = "", -6.0, 200, [], None
    if case == "data":
        args, pattern = ["--target", "mcu16", "--data", "Q1.23"], r"key '--data': .*at most 16; narrow it \(--data Q1\.15\)"
    elif case == "coef":
        args, pattern = ["--target", "mcu16", "--coef", "Q2.22"], r"key '--coef': .*at most 16; narrow it \(--coef Q2\.14\)"
    elif case == "acc":
        args, pattern = ["--target", "dsp24", "--acc", "64"], r"key '--acc': the 64-bit accumulator .*at most 56"
    elif case == "shift-low":  # no fractional coefficient bit: the kernel cannot round by 0 bits
        args, pattern = ["--target", "mcu32", "--coef", "Q16.0"], r"right shift of 0 bits.*more fractional bits"
    elif case == "shift-high":  # a section rounds by 31 bits, but the state word is 32 bits
        tdir = _user_target(tmp_path, "narrowstate", [('state_type = "int64_t"', 'state_type = "int32_t"'),
                                                      ('coef_type = "int32_t"', 'coef_type = "int64_t"'),
                                                      ("max_coef_bits = 32", "max_coef_bits = 40"),
                                                      ("max_acc_bits = 64", "max_acc_bits = 32"),
                                                      ("acc_bits = 64", "acc_bits = 32")])
        args = ["--target", "narrowstate", "--target-dir", tdir, "--coef", "Q2.33"]
        pattern = r"section 1 needs a right shift of 33 bits.*1\.\.30 .*32-bit state word.*fewer fractional bits"
    elif case == "no-coef-shift":  # +12 dB needs a coefficient shift in Q2.30; the target has none
        tdir = _user_target(tmp_path, "noshift", [("coef_shift = true", "coef_shift = false")])
        args, gain = ["--target", "noshift", "--target-dir", tdir], 12.0
        pattern = r"gain \(op 2\) needs coefficient shift \d+ but target 'noshift' has none.*more integer bits"
    elif case == "stored-word":  # a1 rounds to -2.0 in Q2.6; dsp24 stores -a1 = +2.0, which Q2.6 lacks
        args, cutoff = ["--target", "dsp24", "--coef", "Q2.6"], 20
        pattern = r"coefficient 128 does not fit an 8-bit word as target 'dsp24' stores it"
    elif case == "names":  # 'Low' and 'low' make the same C macros
        extra = '\n[[channel]]\nname = "Low"\nstages = [ { kind = "gain", db = -1 } ]\n'
        pattern = r"channel 'Low', key 'name': channel names 'low' and 'Low' both become the C name"
    src = tmp_path / "probe.toml"
    src.write_text(LOW_SECTION.format(gain=gain, cutoff=cutoff, extra=extra))
    out = tmp_path / "probe.h"
    for cmd in (["check", src, *args], ["build", src, *args, "-o", out]):
        r = coefc(*cmd)
        assert r.returncode == 2, (case, cmd[0], r.stdout, r.stderr)
        lines = [ln for ln in r.stderr.splitlines() if ln.startswith("coefc: error")]
        assert len(lines) == 1 and len(r.stderr.strip().splitlines()) == 1, r.stderr
        assert re.search(pattern, lines[0]), (cmd[0], lines[0])
        assert "probe.toml" in lines[0] or "<command line>" in lines[0], lines[0]  # names the place
        assert not out.exists()
    # and without the offending setting both accept it (the rule, not the description, refused)
    if case in ("data", "coef", "acc", "shift-low", "stored-word"):
        keep = args[:2]
        assert coefc("check", src, *keep).returncode == 0
        assert coefc("build", src, *keep, "-o", out).returncode == 0 and out.exists()


def test_every_bundled_example_passes_check_and_builds(tmp_path):
    # check and build agree on the shipped examples: check passes, build writes
    root = Path(__file__).resolve().parents[1] / "filters"
    for src in sorted(root.glob("*.toml")):
        r = coefc("check", src)
        assert r.returncode == 0, (src.name, r.stderr)
        out = tmp_path / (src.stem + ".h")
        r = coefc("build", src, "-o", out, "--vectors", "0")
        if r.returncode == 2 and "multirate" in r.stderr:  # the reference kernels do not decimate (issue 14)
            assert "--kernel" in r.stderr and not out.exists(), (src.name, r.stderr)
            r = coefc("build", src, "-o", out, "--vectors", "0", "--kernel")
        assert r.returncode == 0 and out.exists(), (src.name, r.stderr)
