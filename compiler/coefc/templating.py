"""The Jinja2 environment, built in one place: a template folder in, an environment out.

Sandboxed (a template cannot reach Python internals), ``StrictUndefined`` (a missing
value is an error, never an empty coefficient) and ``keep_trailing_newline``.  C
headers are rendered without escaping; HTML reports with autoescaping.
"""

from __future__ import annotations

from pathlib import Path


def environment(folder: Path, *, autoescape: bool = False):
    """A sandboxed, strict Jinja2 environment loading templates from *folder*."""
    import jinja2
    from jinja2.sandbox import SandboxedEnvironment

    return SandboxedEnvironment(
        loader=jinja2.FileSystemLoader(str(folder)),
        undefined=jinja2.StrictUndefined,
        keep_trailing_newline=True,
        autoescape=autoescape,
        trim_blocks=True,
        lstrip_blocks=True,
    )
