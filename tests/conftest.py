"""Shared pytest fixtures: paths of the repo and its example descriptions."""

from __future__ import annotations

from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
FILTERS = REPO / "filters"


@pytest.fixture(scope="session")
def repo() -> Path:
    return REPO


def example_files() -> list[Path]:
    """Every bundled example description (each is a positive case)."""
    return sorted(FILTERS.glob("*.toml"))


def examples_for(target) -> list[Path]:
    """The examples *target* can realise: a rate change needs exact products (coefc.realise refuses
    it on a target that rounds products), so those examples are left out there; a CIC decimator
    needs integer arithmetic (its wrap-around register), so a float32 target leaves those out."""
    import coefc
    from coefc.stagekinds import RATE_KINDS

    if target.arithmetic.is_float:
        return [p for p in example_files()
                if not any(st.kind == "cic-decimator" for ch in coefc.load(p).description.channels
                           for st in ch.stages)]
    if not target.arithmetic.product_shift:
        return example_files()
    return [p for p in example_files()
            if not any(st.kind in RATE_KINDS for ch in coefc.load(p).description.channels for st in ch.stages)]


def target_copy(tmp_path: Path, fixture: str, abi: int | None = None) -> Path:
    """A copy of the target folder tests/target_fixtures/*fixture* with the built-in
    mcu32 kernel (rendered from the shared templates) written into its kernel/ folder
    (a target folder is self-contained: coefc refuses files outside it), stating
    interface *abi* if given."""
    import re
    import shutil

    src = Path(__file__).resolve().parent / "target_fixtures" / fixture
    dst = tmp_path / fixture
    shutil.copytree(src, dst)
    from c_build import write_kernel

    write_kernel(dst / "kernel", "mcu32")
    if abi is not None:
        toml = dst / "target.toml"
        text = re.sub(r"(?m)^abi = \d+", f"abi = {abi}", toml.read_text())
        assert f"abi = {abi}" in text
        toml.write_text(text)
    return dst


def lab_board_copy(tmp_path: Path, abi: int | None = None) -> Path:
    """The folder holding a copy of the user target lab_board (see :func:`target_copy`)."""
    return target_copy(tmp_path, "user/lab_board", abi).parent
