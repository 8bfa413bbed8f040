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
              "-o", out, "--kernel", "--vectors", "200")
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
     r"handles at most 16"),
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
