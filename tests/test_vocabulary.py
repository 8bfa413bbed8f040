"""The interface's words are coefc's own (issue: vocabulary of our own): the four
rounding words, the coefficient shift and ``sweep --fewest-bits`` everywhere a user
reads them, and each retired spelling refused with one line that names the new word."""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import FILTERS

ROOT = Path(__file__).resolve().parents[1]
MAIN = "from coefc.cli import main; main()"
RETIRED = {"nearest": "add-half", "floor": "truncate", "convergent": "half-even", "zero": "toward-zero"}


def coefc(*args, cwd=None):
    env = {**os.environ, "COLUMNS": "200"}  # help text unwrapped
    return subprocess.run([sys.executable, "-c", MAIN, *map(str, args)], capture_output=True, text=True,
                          cwd=cwd, timeout=300, env=env)


def _description(tmp_path, rounding):
    p = tmp_path / "d.toml"
    p.write_text(f'name = "d"\nsample_rate_hz = 48000\n[implementation]\nrounding = "{rounding}"\n'
                 '[[channel]]\nname = "main"\nstages = [{ kind = "gain", db = -1 }]\n')
    return p


@pytest.mark.parametrize("old,new", sorted(RETIRED.items()))
def test_retired_rounding_word_in_a_description_names_the_new_one(tmp_path, old, new):
    r = coefc("check", _description(tmp_path, old))
    assert r.returncode == 2
    assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr
    assert f"'{old}'" in r.stderr and f"did you mean '{new}'" in r.stderr and "d.toml" in r.stderr


@pytest.mark.parametrize("old,new", sorted(RETIRED.items()))
def test_retired_rounding_word_on_the_command_line_names_the_new_one(tmp_path, old, new):
    r = coefc("check", _description(tmp_path, "add-half"), "--rounding", old)
    assert r.returncode == 2 and r.stderr.count("\n") == 1
    assert f"did you mean '{new}'" in r.stderr


def test_retired_rounding_word_in_a_target_names_the_new_one(tmp_path):
    folder = tmp_path / "board"
    import shutil
    shutil.copytree(ROOT / "targets" / "mcu32", folder)
    toml = folder / "target.toml"
    toml.write_text(toml.read_text().replace('rounding = "add-half"', 'rounding = "convergent"'))
    r = coefc("check", _description(tmp_path, "add-half"), "--target-dir", tmp_path, "--target", "board")
    assert r.returncode == 2 and "did you mean 'half-even'" in r.stderr


def test_check_help_lists_the_four_rounding_words():
    out = coefc("check", "--help").stdout
    for w in RETIRED.values():
        assert w in out


def test_fewest_bits_is_the_option_and_minimise_is_gone():
    assert "--fewest-bits" in coefc("sweep", "--help").stdout
    r = coefc("sweep", FILTERS / "three_way_monitor.toml", "--minimise")
    assert r.returncode == 2 and "No such option" in r.stderr


def test_json_and_header_speak_of_the_coefficient_shift(tmp_path):
    r = coefc("check", FILTERS / "three_way_monitor.toml", "--channel", "woofer", "--json", "-")
    sec = json.loads(r.stdout)["channels"][0]["sections"][0]
    assert "coef_shift" in sec and "shift" not in sec
    out = tmp_path / "h.h"
    assert coefc("build", FILTERS / "three_way_monitor.toml", "-o", out, "--rounding", "half-even").returncode == 0
    text = out.read_text()
    assert "_ROUND_HALF_EVEN" in text and "coefficient shift" in text


def test_no_retired_word_left_where_users_read():
    """The acceptance grep of the issue, over the files a user reads."""
    pat = re.compile(r"post[-_ ]?shift|convergent|--minimise", re.I)
    hits = []
    for top in ("README.md", "compiler", "targets", "filters"):
        base = ROOT / top
        for f in [base] if base.is_file() else base.rglob("*"):
            if f.is_file() and f.suffix in (".md", ".py", ".toml", ".c", ".h", ".j2", ".html") \
                    and "egg-info" not in str(f):
                hits += [f"{f}:{i}" for i, line in enumerate(f.read_text().splitlines(), 1) if pat.search(line)]
    assert hits == []
