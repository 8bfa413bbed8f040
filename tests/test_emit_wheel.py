"""The built wheel carries every built-in target (target.toml, templates, reference
kernels), the report template and the compiled engine core, so every command works
from an installed package."""

from __future__ import annotations

import importlib.util
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
BUILTINS = ("mcu16", "mcu32", "dsp24", "float32", "mcu32hw")


@pytest.mark.skipif(importlib.util.find_spec("build") is None, reason="the 'build' package is not installed")
def test_wheel_contains_targets_templates_and_kernels(tmp_path):
    src = tmp_path / "src"
    src.mkdir()
    # build from a clean copy so the shared work tree gets no build/ folder
    ignore = shutil.ignore_patterns("__pycache__", "*.so", "*.egg-info", "build")
    for name in ("compiler", "targets"):
        shutil.copytree(REPO / name, src / name, ignore=ignore)
    for name in ("pyproject.toml", "setup.py", "README.md"):
        shutil.copy2(REPO / name, src / name)
    cmd = [sys.executable, "-m", "build", "--wheel", "--outdir", str(tmp_path / "dist"), str(src)]
    if importlib.util.find_spec("wheel") is not None:
        cmd.insert(4, "--no-isolation")
    r = subprocess.run(cmd, capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, r.stdout[-3000:] + r.stderr[-3000:]
    (wheel,) = (tmp_path / "dist").glob("coefc-*.whl")
    names = set(zipfile.ZipFile(wheel).namelist())
    for t in BUILTINS:
        assert f"coefc/_builtin_targets/{t}/target.toml" in names, f"{t}/target.toml missing from {wheel.name}"
    # float32 ships its kernel as files; the fixed-point kernels and every header are
    # rendered from the shared templates of targets/_common
    for rel in ("float32/kernel/coefc_float32.h", "float32/kernel/coefc_float32.c", "_common/templates/header.h.j2",
                *(f"_common/kernel/fixed/{n}.j2" for n in ("kernel.h", "kernel.c", "arith.c", "sections.c", "fir.c"))):
        assert f"coefc/_builtin_targets/{rel}" in names, f"{rel} missing from {wheel.name}"
    assert "coefc/emit/header.py" in names and "coefc/cli/build_cmd.py" in names
    assert "coefc/reports/templates/report.html.j2" in names  # coefc report's page template
    assert any(n.startswith("coefc/_engine") and n.endswith(".so") for n in names)  # the compiled engine core
    assert not any("target_fixtures" in n or "cmake_project" in n for n in names)
