"""The README's commands work when pasted: every bundled file it names exists, every
`coefc` line of its shell blocks runs with the exit code the README gives it, and its
Make snippet generates and then verifies a header with GNU Make."""

from __future__ import annotations

import re
import shlex
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")
BLOCK = re.compile(r"^```(\w*)\n(.*?)^```", re.S | re.M)


def _blocks(*langs):
    return [body for lang, body in BLOCK.findall(README) if lang in langs]


def _launcher(tmp_path: Path) -> Path:
    script = tmp_path / "bin" / "coefc"
    script.parent.mkdir()
    script.write_text(f'#!/bin/sh\nexec "{sys.executable}" -c "from coefc.cli import main; main()" "$@"\n')
    script.chmod(0o755)
    return script


def _workdir(tmp_path: Path) -> Path:
    work = tmp_path / "work"
    shutil.copytree(ROOT / "filters", work / "filters")
    return work


def test_every_bundled_file_the_readme_names_exists():
    lines = [ln for body in _blocks("sh", "") for ln in body.splitlines() if ln.startswith("coefc ")]
    lines += [ln for body in _blocks("make", "cmake") for ln in body.splitlines()]  # commands, not output
    named = {p for ln in lines for p in re.findall(r"\b(filters/[\w.-]+\.toml)\b", ln)}
    assert named, "the README names no example"
    assert sorted(p for p in named if not (ROOT / p).is_file()) == []


def _session_lines():
    """`coefc ...` lines of the shell blocks that use only bundled files."""
    out = []
    for body in _blocks("sh", ""):
        for line in body.splitlines():
            cmd, _, comment = line.partition("#")
            if not cmd.startswith("coefc ") or re.search(r"\b(FILE|OUT\.h|IN|OUT)\b|\[", cmd):
                continue  # a synopsis, not a command
            words = shlex.split(cmd)
            if any(w.endswith(".wav") for w in words):
                continue  # the user's own recording
            out.append((words, 1 if "fails" in comment else 0))
    return out


@pytest.mark.parametrize("words,expected", _session_lines(), ids=lambda v: " ".join(v[:3]) if isinstance(v, list) else None)
def test_readme_session_line_runs(tmp_path, words, expected):
    work = _workdir(tmp_path)
    (work / "firmware").mkdir()
    exe = _launcher(tmp_path)
    if "--plot" in words:
        pytest.importorskip("matplotlib")
    r = subprocess.run([str(exe), *words[1:]], cwd=work, capture_output=True, text=True, timeout=600)
    assert r.returncode == expected, r.stdout[-2000:] + r.stderr


@pytest.mark.skipif(shutil.which("make") is None, reason="GNU Make is not installed")
def test_readme_make_snippet_generates_and_verifies_the_header(tmp_path):
    (snippet,) = _blocks("make")
    work = _workdir(tmp_path)
    (work / "firmware").mkdir()
    (work / "Makefile").write_text(snippet)
    exe = _launcher(tmp_path)
    r = subprocess.run(["make", f"COEFC={exe}", "build/generated/bench_monitor.h"], cwd=work,
                       capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, r.stdout + r.stderr
    assert (work / "build/generated/coefc_mcu32.c").is_file()
    shutil.copy(work / "build/generated/bench_monitor.h", work / "firmware/bench_monitor.h")
    r = subprocess.run(["make", f"COEFC={exe}", "check-headers"], cwd=work, capture_output=True, text=True,
                       timeout=600)
    assert r.returncode == 0, r.stdout + r.stderr
