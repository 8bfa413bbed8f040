"""``coefc design FILE``: float design summary per channel (issue 2)."""

from __future__ import annotations

from . import app


@app.command()
def design() -> None:
    """Float design summary per channel (placeholder until issue 2 lands)."""
    raise NotImplementedError
