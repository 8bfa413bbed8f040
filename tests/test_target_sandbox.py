"""A target folder is a sandbox: every file it names or a template loads stays inside
it, its templates cannot step around StrictUndefined or run without bounds, and hostile
values in target.toml are bad input (exit 2), never a traceback or a leaked file.
Facts of the trade behind the cases: path traversal through ``../``, absolute paths
and symbolic links (common practice, no source)."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import REPO

MAIN = "from coefc.cli import main; main()"
# one Butterworth section: the refusals are about the target, so the filter stays small
SMALL = ('name = "probe"\nsample_rate_hz = 48000\n[implementation]\nstructure = "df1ef"\n'
         '[[channel]]\nname = "main"\n'
         'stages = [{ kind = "lowpass", response = "butterworth", order = 2, cutoff_hz = 1000 }]\n')


def coefc(*args):
    return subprocess.run([sys.executable, "-c", MAIN, *map(str, args)], capture_output=True, text=True,
                          timeout=300)


def _board(tmp_path: Path, edit=None) -> Path:
    from c_build import write_kernel

    dst = tmp_path / "targets" / "board"
    shutil.copytree(REPO / "targets" / "mcu32", dst)
    # a board with its own kernel files (rendered once from the shared templates): the
    # files a target names are what these cases are about
    write_kernel(dst / "kernel", "mcu32")
    shutil.copytree(REPO / "targets" / "_common" / "templates", dst / "templates")
    toml = dst / "target.toml"
    toml.write_text("\n".join(line for line in toml.read_text().splitlines() if not line.startswith("family")) + "\n")
    if edit:
        toml = dst / "target.toml"
        toml.write_text(edit(toml.read_text()))
    return dst


def _build_refused(tmp_path, *fragments):
    out = tmp_path / "out"
    out.mkdir(exist_ok=True)
    desc = tmp_path / "probe.toml"
    desc.write_text(SMALL)
    r = coefc("build", desc, "--target-dir", tmp_path / "targets", "--target", "board", "--reference-kernel",
              "-o", out / "f.h")
    assert r.returncode == 2, r.stdout + r.stderr
    assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr
    for f in fragments:
        assert f in r.stderr, r.stderr
    assert list(out.iterdir()) == []  # nothing written, nothing copied
    return r.stderr


@pytest.mark.parametrize("path", ["/proc/self/environ", "../../../../etc/hostname", "/etc/hostname"])
def test_kernel_file_outside_the_folder_is_refused(tmp_path, path):
    _board(tmp_path, lambda t: t.replace('sources = ["kernel/coefc_mcu32.c"]', f'sources = ["{path}"]'))
    _build_refused(tmp_path, "outside the target folder")


def test_kernel_file_symlinked_out_of_the_folder_is_refused(tmp_path):
    board = _board(tmp_path)
    secret = tmp_path / "secret.c"
    secret.write_text("/* not the kernel */\n")
    (board / "kernel" / "coefc_mcu32.c").unlink()
    (board / "kernel" / "coefc_mcu32.c").symlink_to(secret)
    _build_refused(tmp_path, "outside the target folder")


def test_templates_folder_symlinked_out_is_refused(tmp_path):
    board = _board(tmp_path)
    elsewhere = tmp_path / "elsewhere"
    shutil.move(board / "templates", elsewhere)
    (board / "templates").symlink_to(elsewhere, target_is_directory=True)
    _build_refused(tmp_path, "outside the target folder")


def test_kernel_output_names_must_be_c_files(tmp_path):
    board = _board(tmp_path, lambda t: t.replace('sources = ["kernel/coefc_mcu32.c"]', 'sources = ["kernel/Makefile"]'))
    (board / "kernel" / "Makefile").write_text("all:\n")
    _build_refused(tmp_path, "ending in .c")


def test_template_cannot_bypass_strict_undefined_with_get(tmp_path):
    board = _board(tmp_path)
    tpl = board / "templates" / "header.h.j2"
    tpl.write_text("{{ arithmetic.get('no_such_value') }}\n" + tpl.read_text())
    _build_refused(tmp_path)


def test_recursive_template_is_refused(tmp_path):
    board = _board(tmp_path)
    tpl = board / "templates" / "header.h.j2"
    tpl.write_text("{% macro f(n) %}{{ f(n + 1) }}{% endmacro %}{{ f(0) }}\n" + tpl.read_text())
    _build_refused(tmp_path, "recurse")


def test_rendering_limits_on_size_and_time(tmp_path):
    """The limits themselves, with small bounds so the test is quick."""
    from coefc.templating import TemplateLimitError, environment, render_bounded

    (tmp_path / "big.j2").write_text("{% for i in range(100000) %}xxxxxxxxxx{% endfor %}")
    (tmp_path / "slow.j2").write_text("{% for i in range(100000) %}{% for j in range(100000) %}"
                                      "{% endfor %}{% endfor %}")
    env = environment(tmp_path)
    with pytest.raises(TemplateLimitError, match="MiB"):
        render_bounded(env.get_template("big.j2"), {}, max_bytes=1 << 19)
    with pytest.raises(TemplateLimitError, match="longer than"):
        render_bounded(env.get_template("slow.j2"), {}, seconds=0.5)


@pytest.mark.parametrize("value", ["1267650600228229401496703205376", "1979-05-27", "nan", "3"],
                         ids=["2^100", "date", "nan", "not-power-of-two"])
def test_hostile_alignment_is_bad_input_for_build_and_targets(tmp_path, value):
    _board(tmp_path, lambda t: t.replace("alignment = 4", f"alignment = {value}"))
    _build_refused(tmp_path, "alignment")
    r = coefc("targets", "--target-dir", tmp_path / "targets")
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "alignment" in r.stderr


def test_width_past_the_container_is_bad_input(tmp_path):
    _board(tmp_path, lambda t: t.replace("max_data_bits = 32", "max_data_bits = 40"))
    _build_refused(tmp_path, "max_data_bits")
    r = coefc("targets", "--target-dir", tmp_path / "targets")
    assert r.returncode == 2 and "max_data_bits" in r.stderr
