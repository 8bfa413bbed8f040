"""The Jinja2 environment, built in one place: a template folder in, an environment out.

Sandboxed (a template cannot reach Python internals), ``StrictUndefined`` (a missing
value is an error, never an empty coefficient) and ``keep_trailing_newline``.  C
headers are rendered without escaping; HTML reports with autoescaping.

A target folder may come from anyone in a merge request, so the sandbox is closed
further: templates load only from files whose real path lies inside the folder
(symbolic links out of it are refused), ``.get()`` and ``.setdefault()`` cannot
step around ``StrictUndefined``, and :func:`render_bounded` limits a rendering's
output size, time and recursion depth.
"""

from __future__ import annotations

import os
import signal
import threading
import time
from pathlib import Path

MAX_OUTPUT_BYTES = 64 << 20  # far beyond any header coefc writes (the largest are a few MB)
MAX_SECONDS = 60.0
_UNSAFE_METHODS = frozenset({"get", "setdefault", "pop", "popitem", "update", "clear"})


class TemplateLimitError(Exception):
    """A template left its folder or exceeded a rendering limit (message says which)."""


def environment(folder: Path, *, autoescape: bool = False, shared: Path | None = None):
    """A sandboxed, strict Jinja2 environment loading templates from inside *folder* only.

    With *shared* (the built-in targets' common templates, ``targets/_common``), a
    template name missing from *folder* is looked up there: the target folder's
    own file of the same name always wins.  Each folder keeps its containment.
    """
    import jinja2
    from jinja2.sandbox import SandboxedEnvironment

    root = os.path.realpath(folder)
    roots = [root] + ([os.path.realpath(shared)] if shared is not None else [])

    class ContainedLoader(jinja2.FileSystemLoader):
        def get_source(self, environment, template):
            for base in roots:
                real = os.path.realpath(os.path.join(base, template))
                if os.path.commonpath([base, real]) != base:
                    raise TemplateLimitError(f"template '{template}' resolves to {real}, outside the target "
                                             f"folder {base}; keep every template file inside it")
                if base == roots[-1] or os.path.isfile(real):
                    return jinja2.FileSystemLoader(base).get_source(environment, template)
            raise jinja2.TemplateNotFound(template)  # pragma: no cover (the last root answers)

    class StrictSandbox(SandboxedEnvironment):
        def is_safe_attribute(self, obj, attr, value):
            if attr in _UNSAFE_METHODS:
                return False  # .get() would turn a missing value into None
            return super().is_safe_attribute(obj, attr, value)

    return StrictSandbox(
        loader=ContainedLoader(root),
        undefined=jinja2.StrictUndefined,
        keep_trailing_newline=True,
        autoescape=autoescape,
        trim_blocks=True,
        lstrip_blocks=True,
    )


def render_bounded(template, context: dict, *, max_bytes: int = MAX_OUTPUT_BYTES,
                   seconds: float = MAX_SECONDS) -> str:
    """Render *template* with *context* within output-size, time and recursion limits.

    Raises
    ------
    TemplateLimitError
        When the output passes *max_bytes*, rendering takes longer than *seconds*
        (checked per output chunk, and by a timer in the main thread for loops that
        write nothing), or macros recurse past Python's recursion limit.
    """
    deadline = time.monotonic() + seconds
    timer = threading.current_thread() is threading.main_thread() and hasattr(signal, "setitimer")

    def on_alarm(signum, frame):
        raise TemplateLimitError(f"rendering took longer than {seconds:g} s; simplify the template")

    old = signal.signal(signal.SIGALRM, on_alarm) if timer else None
    if timer:
        signal.setitimer(signal.ITIMER_REAL, seconds)
    parts, size = [], 0
    try:
        for chunk in template.generate(**context):
            size += len(chunk)
            if size > max_bytes:
                raise TemplateLimitError(f"output passed {max_bytes >> 20} MiB; the template writes "
                                         "far more than any header needs")
            if time.monotonic() > deadline:
                raise TemplateLimitError(f"rendering took longer than {seconds:g} s; simplify the template")
            parts.append(chunk)
    except RecursionError:
        raise TemplateLimitError("macros recurse too deeply; remove the recursion") from None
    finally:
        if timer:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, old)
    return "".join(parts)
