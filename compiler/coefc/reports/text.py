"""Reporters of a :class:`coefc.budget.CheckReport`: the report in, text out.

Chosen from :data:`REPORTERS` by name: ``text`` (a compact table per channel,
failing rows first, each with a one-line reason), ``json`` (the JSON report
contract, schema 1) and ``junit`` (JUnit XML: one test suite per channel, one
test case per check, for CI dashboards).
"""

from __future__ import annotations

import json
import math
from xml.sax.saxutils import escape, quoteattr

from ..checks import kind_of

DBFS_NOTE = ("dBFS per AES17: 0 dBFS = RMS of a full-scale sine (full scale = 1.0); "
             "peaks are fractions of full scale (dB re full-scale peak).")



def format_number(v) -> str:
    """A metric for people: 4 significant digits, scientific when very large or small."""
    if v is None:
        return "n/a"
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, float):
        if not math.isfinite(v):
            return "n/a"
        if abs(v) >= 1e5 or (v != 0 and abs(v) < 1e-3):
            return f"{v:.3e}"
        return f"{v:.4g}"
    return str(v)


def _holds(value: float, limit: float, op: str) -> bool:
    return value >= limit if op == ">=" else value < limit if op == "<" else value <= limit


def format_limit(limit) -> str:
    """A limit as written (up to 12 significant digits: the user's own number)."""
    if isinstance(limit, float) and math.isfinite(limit):
        return f"{limit:.12g}"
    return format_number(limit)


def format_against(value, limit, op: str = "<=", ok: bool | None = None) -> str:
    """*value* with enough digits that the printed number compares with *limit* as the check did.

    Four significant digits unless that would show a failing value as passing (or the
    reverse): ``FAIL -120 <= -120`` becomes ``FAIL -119.99996 <= -120``.  When the
    verdict does not rest on this comparison alone, four digits are kept.
    """
    text = format_number(value)
    if (ok is None or isinstance(value, bool) or not isinstance(value, (int, float))
            or not isinstance(limit, (int, float)) or isinstance(limit, bool)
            or not math.isfinite(value) or not math.isfinite(limit)):
        return text
    if _holds(float(value), float(limit), op) != ok:
        return text  # the verdict rests on more than this comparison
    for digits in range(4, 18):
        if abs(value) >= 1e5 or (value != 0 and abs(value) < 1e-3):
            text = f"{value:.{digits - 1}e}"
        else:
            text = f"{value:.{digits}g}"
        if _holds(float(text), float(limit), op) == ok:
            return text
    return repr(float(value))


def _limit(name: str, limit) -> str:
    return kind_of(name).limit_text(limit)


def _value(name: str, c) -> str:
    return kind_of(name).value_text(c.value, c.limit, c.ok)  # the check's own comparison, from the table


def render_text(report) -> str:
    """Compact human table, one block per channel, failing rows first."""
    lines = []
    for ch in report.channels:
        a = ch.arithmetic
        if a.get("kind") == "float32":
            arith = f"float32 {a['structure']}"
        else:
            arith = f"{a['structure']} data {a['data']} coef {a['coef']} acc {a['acc_bits']} {a['rounding']} {a['overflow']}"
        rate = f"{ch.sample_rate_hz:g} Hz"
        out_rate = getattr(ch, "output_rate_hz", None)
        if out_rate is not None and out_rate != ch.sample_rate_hz:
            rate += f" -> {out_rate:g} Hz"
        lines.append(f"channel {ch.name}  [{'PASS' if ch.ok else 'FAIL'}]  {rate}, "
                     f"{report.target}: {arith}")
        if getattr(ch, "block_multiple", 1) > 1:
            lines.append(f"  blocks: the input length of every call must be a multiple of {ch.block_multiple} "
                         "(the decimation factor), so each block starts at the same polyphase phase")
        w = max([len(c.name) for c in ch.checks] + [10])
        for c in ch.checks:
            mark = "ok  " if c.ok else "FAIL"
            lines.append(f"  {mark} {c.name:<{w}} {_value(c.name, c):>14}  {_limit(c.name, c.limit):<12} "
                         f"{ch.reasons.get(c.name, '')}")
        chosen = [s["chosen"] for s in getattr(ch, "sections", ()) if isinstance(s, dict) and s.get("chosen")]
        if chosen:
            lines.append(f"{ch.name}: structure auto: " + "; ".join(chosen))
        cost = ch.metrics.get("cost") if isinstance(ch.metrics, dict) else None
        if cost:
            lines.append(f"{ch.name}: generated code costs per sample {cost['muls_per_sample']} multiplies, "
                         f"{cost['adds_per_sample']} adds; coefficients {cost['coef_bytes']} bytes, "
                         f"state {cost['state_bytes']} bytes")
    for sm in getattr(report, "sums", ()):
        lines.append(f"sum {sm.name}  [{'PASS' if sm.ok else 'FAIL'}]")
        for c in sm.checks:
            lines.append(f"  {'ok  ' if c.ok else 'FAIL'} {c.name:<10} {_value(c.name, c):>14}  "
                         f"{_limit(c.name, c.limit):<12} {sm.reasons.get(c.name, '')}")
    lines.append(DBFS_NOTE)
    lines.append(f"{report.source}: {verdict_line(report)}")
    return "\n".join(lines) + "\n"


def verdict_line(report) -> str:
    """``all checks pass`` or ``N check(s) over budget``, naming the budget defaults applied."""
    nfail = len(report.failures())
    text = "all checks pass" if report.ok else f"{nfail} check(s) over budget"
    defaults = getattr(report, "defaults", None) or {}
    if defaults:
        text += " (defaults applied: " + ", ".join(f"{k} = {v}" for k, v in defaults.items()) + ")"
    return text


def render_json(report) -> str:
    return json.dumps(report.to_json(), indent=2, allow_nan=False) + "\n"


def render_junit(report) -> str:
    """JUnit XML: a test suite per channel and a test case per check."""
    out = ['<?xml version="1.0" encoding="UTF-8"?>']
    total = sum(len(ch.checks) for ch in report.channels) + sum(len(s.checks) for s in getattr(report, "sums", ()))
    fails = len(report.failures())
    out.append(f'<testsuites name={quoteattr("coefc check " + report.source)} tests="{total}" failures="{fails}">')
    out.extend(junit_suites(report))
    out.append("</testsuites>")
    return "\n".join(out) + "\n"


def junit_suites(report) -> list[str]:
    """The ``<testsuite>`` elements of *report* (one per channel), as lines of JUnit XML."""
    out = []
    for ch in report.channels:
        nf = sum(1 for c in ch.checks if not c.ok)
        out.append(f'  <testsuite name={quoteattr(ch.name)} tests="{len(ch.checks)}" failures="{nf}" errors="0">')
        for c in ch.checks:
            cls = quoteattr(f"{report.source}.{ch.name}")
            reason = ch.reasons.get(c.name, "")
            msg = f"{c.name} = {_value(c.name, c)}, limit {_limit(c.name, c.limit)}: {reason}"
            if c.ok:
                out.append(f'    <testcase classname={cls} name={quoteattr(c.name)}>'
                           f'<system-out>{escape(msg)}</system-out></testcase>')
            else:
                out.append(f'    <testcase classname={cls} name={quoteattr(c.name)}>'
                           f'<failure message={quoteattr(msg)}>{escape(msg)}</failure></testcase>')
        out.append("  </testsuite>")
    for sm in getattr(report, "sums", ()):
        nf = sum(1 for c in sm.checks if not c.ok)
        out.append(f'  <testsuite name={quoteattr("sum " + sm.name)} tests="{len(sm.checks)}" failures="{nf}" '
                   'errors="0">')
        for c in sm.checks:
            cls = quoteattr(f"{report.source}.sum.{sm.name}")
            msg = f"{c.name} = {_value(c.name, c)}, limit {_limit(c.name, c.limit)}: {sm.reasons.get(c.name, '')}"
            body = (f'<system-out>{escape(msg)}</system-out>' if c.ok else
                    f'<failure message={quoteattr(msg)}>{escape(msg)}</failure>')
            out.append(f'    <testcase classname={cls} name={quoteattr(c.name)}>{body}</testcase>')
        out.append("  </testsuite>")
    return out


REPORTERS = {"text": render_text, "json": render_json, "junit": render_junit}


def render(report, kind: str) -> str:
    """Render *report* with the reporter named *kind* (text, json or junit)."""
    return REPORTERS[kind](report)
