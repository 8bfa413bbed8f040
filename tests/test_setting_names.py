"""Library messages name settings in the library's words; the CLI names them by its options.

Issue 18, item 5: a library user (``coefc.load(...).realise(...)``) never reads a
command-line flag, a CLI user always reads the flag that fixes the problem.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

import coefc
from coefc.cli.options import OPTION_OF_SETTING
from coefc.errors import CoefcError, DescriptionError, setting
from coefc.targetspec import Overrides

ROOT = Path(__file__).resolve().parents[1]
MONITOR = ROOT / "filters" / "three_way_monitor.toml"


def test_every_setting_a_message_names_has_an_option():
    # every setting() used in the library has a command-line option (grep the sources)
    import re
    used = set()
    for p in (ROOT / "compiler" / "coefc").rglob("*.py"):
        used |= set(re.findall(r"setting\(\s*[\"'](\w+)[\"']\s*\)", p.read_text()))
    used.discard("name")  # the doctest's placeholder word is not a setting
    assert used and used <= set(OPTION_OF_SETTING), used - set(OPTION_OF_SETTING)


def test_description_error_key_is_spoken_both_ways():
    e = DescriptionError("<command line>", "accumulator of 1 bits is out of range", key=setting("acc_bits"))
    assert str(e) == "<command line>, key 'acc_bits': accumulator of 1 bits is out of range"
    assert e.spoken(OPTION_OF_SETTING) == "<command line>, key '--acc': accumulator of 1 bits is out of range"
    assert isinstance(e.placed("x.toml"), DescriptionError) and str(e).startswith("x.toml: ")


def test_library_error_has_no_flag_and_cli_names_the_option():
    with pytest.raises(CoefcError) as err:
        coefc.load(MONITOR).design().realise(overrides=Overrides(acc_bits=1))
    assert "--" not in str(err.value) and "acc_bits" in str(err.value)
    cli = subprocess.run([str(Path(sys.executable).parent / "coefc"), "check", str(MONITOR), "--acc", "1"],
                         capture_output=True, text=True)
    assert cli.returncode == 2 and "'--acc'" in cli.stderr and "@{" not in cli.stderr


def test_several_files_name_the_option_too(tmp_path):
    # the multi-file path renders errors in worker processes: they must still speak the CLI's options
    cli = subprocess.run([str(Path(sys.executable).parent / "coefc"), "check", str(MONITOR), str(MONITOR),
                          "--acc", "1", "-j", "1"], capture_output=True, text=True)
    assert cli.returncode == 2 and "'--acc'" in cli.stderr and "@{" not in cli.stderr
