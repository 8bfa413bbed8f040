"""The README's CI recipes: the shell job is valid bash, every coefc command and option in the
recipes exists, the pre-commit file pattern picks descriptions only, and the job run in a real
git repository (git itself as the reference for the changed files) fails the merge on exit 1."""

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
MAIN = "from coefc.cli import main; main()"


def _block(lang: str) -> str:
    (body,) = [b for lg, b in BLOCK.findall(README) if lg == lang]
    return body


def _coefc_commands(text: str) -> list[list[str]]:
    """Every `coefc ...` command of *text* (continued lines joined), as words up to a shell operator."""
    joined = text.replace("\\\n", " ")
    out = []
    for m in re.finditer(r"\bcoefc (\w[\w-]*)([^\n|;&>]*)", joined):
        words = m.group(0).split()
        if words[1] in ("no", "review"):  # prose in an echo or a comment
            continue
        out.append(words)
    return out


def _help(sub: str) -> str:
    r = subprocess.run([sys.executable, "-c", MAIN, sub, "--help"], capture_output=True, text=True, timeout=120,
                       env={"COLUMNS": "200", "PATH": "/usr/bin:/bin"})
    assert r.returncode == 0, r.stderr
    return r.stdout


@pytest.mark.skipif(shutil.which("bash") is None, reason="bash is not installed")
def test_ci_recipe_is_valid_bash():
    r = subprocess.run(["bash", "-n"], input=_block("bash"), capture_output=True, text=True, timeout=60)
    assert r.returncode == 0, r.stderr


def test_every_command_and_option_of_the_recipes_exists():
    cmds = _coefc_commands(_block("bash")) + _coefc_commands(_block("yaml"))
    assert {c[1] for c in cmds} >= {"check", "diff", "report"}
    helps: dict[str, str] = {}
    for words in cmds:
        sub = words[1]
        text = helps.setdefault(sub, _help(sub))
        for w in words[2:]:
            if w.startswith("-"):
                assert re.search(rf"(^|[\s,]){re.escape(w)}([\s,=]|$)", text, re.M), f"coefc {sub}: no option {w}"


def test_pre_commit_pattern_picks_descriptions_only():
    (pattern,) = re.findall(r"^\s*files:\s*(\S+)\s*$", _block("yaml"), re.M)
    # pre-commit matches `files` with Python's re.search (its documentation: "files: (regex)")
    rx = re.compile(pattern)
    assert rx.search("filters/three_way_monitor.toml") and rx.search("filters/sub/x.toml")
    assert not rx.search("src/filters/x.toml") and not rx.search("filters/x.toml.bak") and not rx.search("x.toml")
    assert "require_serial: true" in _block("yaml")


PROBE = """\
name = "probe"
sample_rate_hz = 48000

[implementation]
target = "mcu32"
structure = "df1ef"

[budget]
output_noise_dbfs = -120

[[channel]]
name = "low"
stages = [{ kind = "lowpass", response = "butterworth", order = 2, cutoff_hz = 1000 }]
"""


@pytest.mark.skipif(shutil.which("git") is None or shutil.which("bash") is None, reason="needs git and bash")
def test_ci_recipe_runs_in_a_repository_and_fails_the_merge_on_over_budget(tmp_path):
    pytest.importorskip("matplotlib")  # the recipe writes HTML reports
    repo = tmp_path / "repo"
    (repo / "filters").mkdir(parents=True)
    (repo / "src").mkdir()
    env = {"PATH": f"{tmp_path / 'bin'}:/usr/bin:/bin", "HOME": str(tmp_path), "BASE": "main",
           "CI_ARTIFACTS": str(tmp_path / "uploaded"), "GIT_AUTHOR_NAME": "probe", "GIT_COMMITTER_NAME": "probe",
           "GIT_AUTHOR_EMAIL": "probe@example.invalid", "GIT_COMMITTER_EMAIL": "probe@example.invalid"}
    launcher = tmp_path / "bin" / "coefc"
    launcher.parent.mkdir()
    launcher.write_text(f'#!/bin/sh\nexec "{sys.executable}" -c "{MAIN}" "$@"\n')
    launcher.chmod(0o755)

    def git(*args):
        subprocess.run(["git", *args], cwd=repo, check=True, capture_output=True, env=env)

    (repo / "filters" / "kept.toml").write_text(PROBE)
    (repo / "filters" / "changed.toml").write_text(PROBE)
    git("init", "-q", "-b", "main")
    git("add", ".")
    git("commit", "-qm", "base")
    git("checkout", "-q", "-b", "topic")
    (repo / "filters" / "changed.toml").write_text(PROBE.replace("-120", "-250"))  # now over budget
    (repo / "filters" / "added.toml").write_text(PROBE)
    (repo / "src" / "ignored.toml").write_text("not a description")
    git("add", ".")
    git("commit", "-qm", "topic")
    script = tmp_path / "review.sh"
    script.write_text(_block("bash"))
    r = subprocess.run(["bash", str(script)], cwd=repo, capture_output=True, text=True, timeout=900, env=env)
    assert r.returncode == 1, r.stdout + r.stderr  # over budget fails the merge
    # git says which descriptions changed; the job checked exactly those
    changed = subprocess.run(["git", "diff", "--name-only", "main...HEAD", "--", "filters/*.toml"], cwd=repo,
                             capture_output=True, text=True, env=env).stdout.split()
    assert sorted(changed) == ["filters/added.toml", "filters/changed.toml"]
    up = tmp_path / "uploaded"
    names = sorted(p.name for p in up.iterdir())
    assert names == sorted(["coefc.sarif", "summary.md", "junit.xml", "added.diff.md", "added.diff.txt",
                            "added.html", "changed.diff.md", "changed.diff.txt", "changed.html"])
    summary = (up / "summary.md").read_text()
    assert "`filters/changed.toml` | low | **over budget**" in summary and "`filters/added.toml` | low | pass" in summary
    assert "output_noise_dbfs" in (up / "changed.diff.txt").read_text()
    assert "channel low: added" in (up / "added.diff.txt").read_text()
    assert shlex.quote("filters/kept.toml") not in summary
