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
