"""Targets: the built-in arithmetic, the build tables, user target folders, and
clear one-line errors (file and line) for broken targets."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from coefc.errors import TargetError
from coefc.qformat import QFormat
from coefc.emit.header import kernel_texts
from coefc.targetspec import ENV_VAR, build_info, find_target, key_line, list_targets
from conftest import lab_board_copy

HERE = Path(__file__).resolve().parent
FIXTURES = HERE / "target_fixtures"
USER = FIXTURES / "user"


def _cli(*args, env=None):
    """Run the coefc command line in a fresh process (exit codes and stderr as a user sees them)."""
    return subprocess.run([sys.executable, "-c", "from coefc.cli import main; main()", *map(str, args)],
                          capture_output=True, text=True, env=env, timeout=120)


# Word widths of the built-in targets as the product states them (a Q1.15 word is
# 16 bits, Q2.30 32 bits: the sign bit counted in m -- common practice, no source).
@pytest.mark.parametrize("name, data, coef, acc", [
    ("mcu16", "Q1.15", "Q2.14", 32),
    ("mcu32", "Q1.31", "Q2.30", 64),
    ("dsp24", "Q1.23", "Q2.22", 56),
])
def test_builtin_fixed_targets_state_their_arithmetic(name, data, coef, acc):
    t = find_target(name)
    a = t.arithmetic
    assert (str(a.data), str(a.coef), a.acc_bits) == (data, coef, acc)
    assert (a.rounding, a.overflow) == ("add-half", "saturate")
    info = build_info(t)
    # the C containers hold the words: 16 bits for mcu16, 32 for the others
    width = {"int16_t": 16, "int32_t": 32, "int64_t": 64}
    assert width[info.data_type] >= QFormat.parse(data).width
    assert width[info.coef_type] >= QFormat.parse(coef).width
    assert info.max_acc_bits == acc
    assert info.kernel_family == "fixed"  # rendered from targets/_common/kernel/fixed


def test_float32_target_and_the_default():
    t = find_target("float32")
    assert t.arithmetic.is_float
    assert set(t.structures) == {"df1", "tdf2"}
    assert "-ffp-contract=off" in (t.folder / build_info(t).kernel_header).read_text()


def test_dsp24_stores_negated_a_and_its_kernel_agrees():
    t = find_target("dsp24")
    info = build_info(t)
    assert info.section_layout == ("b0", "b1", "b2", "-a1", "-a2")
    texts = kernel_texts(t, info)
    assert "#define COEFC_DSP24_SECTION_A_NEGATED 1" in texts["coefc_dsp24.h"]
    assert "msub" not in texts["coefc_dsp24.c"]  # MAC only


def test_fixed_point_kernels_come_from_one_set_of_templates():
    """mcu16, mcu32 and dsp24 differ only in what the target states (types, widths, names)."""
    import re

    texts = {}
    for name in ("mcu16", "mcu32", "dsp24"):
        t = find_target(name)
        info = build_info(t)
        assert info.kernel_family == "fixed" and not (t.folder / "kernel").exists()
        src = kernel_texts(t, info)[f"coefc_{name}.c"]
        texts[name] = re.sub(r"coefc_\w+|COEFC_[A-Z0-9]+|u?int\d+_t|\d+", "#", src)
    # the same skeleton once names, types and numbers are masked (the a-term comments differ for dsp24)
    assert texts["mcu16"] == texts["mcu32"]
    assert texts["mcu32"].count("case #_OP_") == texts["dsp24"].count("case #_OP_") == 7


def test_a_target_folder_template_wins_over_the_shared_one(tmp_path):
    """A user target copies one piece of the kernel (or the header template) and changes only that."""
    from c_build import fake_realisation, hand_programs, kernel_structures
    from coefc.emit.header import render
    from coefc.targetspec import common_dir

    board = tmp_path / "board"
    shutil.copytree(find_target("mcu32").folder, board)
    (board / "kernel" / "fixed").mkdir(parents=True)
    fir = (common_dir() / "kernel" / "fixed" / "fir.c.j2").read_text()
    (board / "kernel" / "fixed" / "fir.c.j2").write_text(fir.replace(
        "    case {{ k.PREFIX }}_OP_FIR:\n", "    case {{ k.PREFIX }}_OP_FIR: /* board's own FIR */\n"))
    (board / "templates").mkdir()
    head = (common_dir() / "templates" / "header.h.j2").read_text()
    (board / "templates" / "header.h.j2").write_text(head.replace("#define {{ guard }}\n",
                                                                   "#define {{ guard }}\n/* board's header */\n"))
    t = find_target("board", [tmp_path])
    texts = kernel_texts(t, build_info(t))
    assert "/* board's own FIR */" in texts["coefc_mcu32.c"]
    assert "board's own" not in kernel_texts(find_target("mcu32"), build_info(find_target("mcu32")))["coefc_mcu32.c"]
    real = fake_realisation(hand_programs(t.arithmetic, kernel_structures(t.structures)), "mcu32")
    real = type(real)(real.design, t, real.programs)
    files = render(real, None, header_name="lab.h", vectors=0, with_kernel=True)
    assert "/* board's header */" in files["lab.h"] and "/* board's own FIR */" in files["coefc_mcu32.c"]


def test_every_builtin_is_listed():
    names = [t.name for t in list_targets()]
    assert {"mcu16", "mcu32", "dsp24", "float32"} <= set(names)


def test_user_target_by_dir_and_by_environment(monkeypatch, tmp_path):
    with pytest.raises(TargetError):
        find_target("lab_board")
    t = find_target("lab_board", [lab_board_copy(tmp_path)])
    assert str(t.arithmetic.data) == "Q1.27" and t.arithmetic.rounding == "half-even"
    assert build_info(t).source_template == "templates/lab.c.j2"
    monkeypatch.setenv(ENV_VAR, str(USER))
    assert find_target("lab_board").folder == USER / "lab_board"
    # a user folder may shadow a built-in name; --target-dir comes first
    assert [t.name for t in list_targets()].count("mcu32") == 1


def test_unknown_target_names_a_close_match():
    with pytest.raises(TargetError, match=r"no target 'mcu23'.*did you mean 'mcu32'"):
        find_target("mcu23")


def test_missing_target_dir_is_an_error(tmp_path):
    with pytest.raises(TargetError, match="does not exist"):
        list_targets([tmp_path / "nowhere"])


@pytest.mark.parametrize("fixture, pattern", [
    ("bad_syntax", r"bad_syntax/target\.toml:4: .*fix the TOML syntax"),
    ("bad_layout", r"bad_layout/target\.toml:30: \[layout\] section .* must list each of b0 b1 b2 a1 a2"),
    ("bad_limits", r"bad_limits/target\.toml:23: \[limits\] max_data_bits = 40 does not fit"),
])
def test_broken_target_tables_name_file_and_line(fixture, pattern):
    with pytest.raises(TargetError, match=pattern):
        build_info(find_target(fixture, [FIXTURES / fixture]))


def test_missing_kernel_file_is_named(tmp_path):
    # lab_board ships its kernel as files (no [kernel] family): each must exist
    folder = lab_board_copy(tmp_path)
    (folder / "lab_board" / "kernel" / "coefc_mcu32.c").unlink()
    with pytest.raises(TargetError, match=r"target\.toml:\d+: \[kernel\] sources: file 'kernel/coefc_mcu32\.c' not found"):
        build_info(find_target("lab_board", [folder]))


def test_target_without_build_tables_lists_but_cannot_build(tmp_path):
    folder = tmp_path / "sketch"
    folder.mkdir()
    (folder / "target.toml").write_text('[arithmetic]\ndata = "Q1.15"\ncoef = "Q2.14"\nacc_bits = 40\n'
                                        'rounding = "truncate"\noverflow = "wrap"\n')
    t = find_target("sketch", [tmp_path])
    assert t.arithmetic.acc_bits == 40
    with pytest.raises(TargetError, match=r"has no table \[c\], so it cannot build headers"):
        build_info(t)


def test_key_line_finds_keys_in_their_table(tmp_path):
    p = tmp_path / "t.toml"
    p.write_text("[a]\nx = 1\n[b]\nx = 2\n")
    assert key_line(p, "a", "x") == 2
    assert key_line(p, "b", "x") == 4
    assert key_line(p, "b", "y") is None


def test_targets_command_lists_builtins_and_user_targets(tmp_path):
    r = _cli("targets", "--target-dir", lab_board_copy(tmp_path), "--json", "-")
    assert r.returncode == 0, r.stderr
    rows = {t["name"]: t for t in json.loads(r.stdout)["targets"]}
    assert rows["mcu16"]["arithmetic"]["data"] == "Q1.15"
    assert rows["dsp24"]["arithmetic"]["acc_bits"] == 56
    assert rows["float32"]["arithmetic"]["data"] is None
    assert rows["lab_board"]["arithmetic"]["coef"] == "Q3.29"
    text = _cli("targets").stdout
    assert "mcu32" in text and "Q2.30" in text and "acc 64 bits" in text


def test_targets_command_broken_target_is_one_line_exit_2():
    env = dict(os.environ, **{ENV_VAR: str(FIXTURES / "bad_syntax")})
    r = _cli("targets", env=env)
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1
    assert "bad_syntax/target.toml:4:" in r.stderr


def test_command_line_structure_wins_before_the_target_is_asked():
    """A description asking for df1ef can still be built for float32 with --structure tdf2."""
    from coefc.errors import DescriptionError
    from coefc.spec import Implementation
    from coefc.targetspec import Overrides, resolve_arithmetic

    t = find_target("float32")
    impl = Implementation(structure="df1ef")
    assert resolve_arithmetic(t, impl, Overrides(structure="tdf2"), "x.toml").structure == "tdf2"
    # A description's df1ef means plain df1 on float32 (no rounding residual to feed back) ...
    assert resolve_arithmetic(t, impl, None, "x.toml").structure == "df1"
    # ... but a structure named on the command line is never changed.
    with pytest.raises(DescriptionError, match=r"<command line>, key 'structure': target 'float32' does not "
                                               r"support structure 'df1ef'; it supports df1, tdf2"):
        resolve_arithmetic(t, impl, Overrides(structure="df1ef"), "x.toml")
    mcu16 = find_target("mcu16")
    bad = Implementation(structure="tdf2")
    import dataclasses

    narrow = dataclasses.replace(mcu16, structures=("df1",))
    with pytest.raises(DescriptionError, match=r"x\.toml, key 'structure': target 'mcu16' does not support "
                                               r"structure 'tdf2'; it supports df1"):
        resolve_arithmetic(narrow, bad, None, "x.toml")
    with pytest.raises(DescriptionError, match=r"<command line>, key 'structure': unknown structure 'df2'"):
        resolve_arithmetic(t, impl, Overrides(structure="df2"), "x.toml")
