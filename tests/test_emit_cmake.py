"""Firmware-build integration: the CMake project in tests/cmake_project regenerates
its header with `coefc build` when the description changes, compiles a firmware
file against it and the reference kernel, and passes the golden-vector self test."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

PROJECT = Path(__file__).resolve().parent / "cmake_project"

pytestmark = pytest.mark.skipif(shutil.which("cmake") is None or shutil.which("ctest") is None,
                                reason="cmake is not installed")


def _coefc_launcher(tmp_path: Path) -> Path:
    """A `coefc` executable for CMake that runs this interpreter's coefc."""
    exe = shutil.which("coefc", path=str(Path(sys.executable).parent))
    if exe:
        return Path(exe)
    script = tmp_path / "coefc"
    script.write_text(f'#!/bin/sh\nexec "{sys.executable}" -c "from coefc.cli import main; main()" "$@"\n')
    script.chmod(0o755)
    return script


def _run(cmd, cwd):
    r = subprocess.run([str(c) for c in cmd], cwd=cwd, capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, f"{' '.join(map(str, cmd))}\n{r.stdout}\n{r.stderr}"
    return r.stdout + r.stderr


# one target here keeps the suite fast; every target's kernel is proven in test_c_kernels.py
@pytest.mark.parametrize("target", ["mcu32"])
def test_cmake_build_regenerates_and_self_tests(tmp_path, target):
    src = tmp_path / "src"
    shutil.copytree(PROJECT, src)
    build = tmp_path / "build"
    _run(["cmake", "-S", src, "-B", build, f"-DCOEFC_EXECUTABLE={_coefc_launcher(tmp_path)}",
          f"-DCOEFC_TARGET={target}"], tmp_path)
    log = _run(["cmake", "--build", build], tmp_path)
    assert "coefc: generating probe_front_end.h" in log
    header = build / "generated" / "probe_front_end.h"
    assert "#define PROBE_FRONT_END_GENERATED_CODE 1" in header.read_text()
    assert (build / "generated" / "probe_front_end.c").is_file()
    log = _run(["ctest", "--test-dir", build, "--output-on-failure"], tmp_path)
    assert "100% tests passed" in log
    out = _run([build / "firmware", "--selftest"], tmp_path)
    assert "2 channels, 256 golden samples each: bit-exact" in out

    # nothing changed: no regeneration
    log = _run(["cmake", "--build", build], tmp_path)
    assert "coefc: generating" not in log

    # a changed description regenerates the header and rebuilds the firmware
    desc = src / "filters" / "probe_front_end.toml"
    desc.write_text(desc.read_text().replace("cutoff_hz = 2000", "cutoff_hz = 2500"))
    st = desc.stat()
    os.utime(desc, (st.st_atime + 5, st.st_mtime + 5))
    before = header.read_text()
    log = _run(["cmake", "--build", build], tmp_path)
    assert "coefc: generating probe_front_end.h" in log
    assert header.read_text() != before
    assert "100% tests passed" in _run(["ctest", "--test-dir", build], tmp_path)
