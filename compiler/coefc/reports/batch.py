"""Reporters of a check of several files: the closing summary, one JSON document, one JUnit document.

Each takes the :class:`coefc.review.batch.FileOutcome` list in the order the files
were named.
"""

from __future__ import annotations

from collections import Counter
from xml.sax.saxutils import escape, quoteattr

from ..review.batch import VERDICT, worst

BATCH_SCHEMA = 1


def render_summary(outcomes) -> str:
    """A count of verdicts, then one line per file: ``FILE: pass (3 channels)`` / ``FILE: over budget: ...``."""
    counts = Counter(o.code for o in outcomes)
    parts = [f"{counts[c]} {VERDICT[c]}" for c in sorted(counts)]
    lines = [f"coefc check: {len(outcomes)} files: {', '.join(parts)}"]
    lines += [o.summary() for o in outcomes]
    return "\n".join(lines) + "\n"


def batch_json(outcomes) -> dict:
    """The JSON of several files: ``{"schema", "ok", "exit_code", "files": [...]}``.

    Each entry of ``files`` holds ``source``, ``exit_code``, ``verdict`` (``pass``,
    ``over budget``, ``bad input``, ``internal error``), ``error`` (the one line,
    or null) and ``report`` (the single-file JSON report, or null).
    """
    code = worst(o.code for o in outcomes)
    return {
        "schema": BATCH_SCHEMA,
        "ok": code == 0,
        "exit_code": code,
        "files": [{"source": o.source, "exit_code": o.code, "verdict": o.verdict, "error": o.error,
                   "report": o.report} for o in outcomes],
    }


def render_junit_files(outcomes, name: str = "coefc check") -> str:
    """One JUnit document: every channel of every file a test suite; a bad file a suite with one error."""
    suites: list[str] = []
    tests = failures = errors = 0
    for o in outcomes:
        if o.report is not None:
            suites.extend(o.junit_suites)
            for ch in o.report["channels"]:
                tests += len(ch["checks"])
                failures += sum(1 for c in ch["checks"] if not c["ok"])
        else:
            tests += 1
            errors += 1
            suites.append(f'  <testsuite name={quoteattr(o.source)} tests="1" failures="0" errors="1">')
            suites.append(f'    <testcase classname={quoteattr(o.source)} name="load">'
                          f'<error message={quoteattr(o.error or "")}>{escape(o.error or "")}</error></testcase>')
            suites.append("  </testsuite>")
    head = (f'<testsuites name={quoteattr(name)} tests="{tests}" failures="{failures}" errors="{errors}">')
    return "\n".join(['<?xml version="1.0" encoding="UTF-8"?>', head, *suites, "</testsuites>"]) + "\n"
