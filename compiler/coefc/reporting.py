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

DBFS_NOTE = "dBFS per AES17: 0 dBFS = RMS of a full-scale sine (full scale = 1.0)."


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


def _limit(name: str, limit) -> str:
    if isinstance(limit, str):
        return limit
    op = ">=" if name == "stopband_attenuation_db" else "<" if name == "stable" else "<="
    return f"{op} {format_number(limit)}"


def render_text(report) -> str:
    """Compact human table, one block per channel, failing rows first."""
    lines = []
    for ch in report.channels:
        a = ch.arithmetic
        if a.get("kind") == "float32":
            arith = f"float32 {a['structure']}"
        else:
            arith = f"{a['structure']} data {a['data']} coef {a['coef']} acc {a['acc_bits']} {a['rounding']} {a['overflow']}"
        lines.append(f"channel {ch.name}  [{'PASS' if ch.ok else 'FAIL'}]  {ch.sample_rate_hz:g} Hz, "
                     f"{report.target}: {arith}")
        w = max([len(c.name) for c in ch.checks] + [10])
        for c in ch.checks:
            mark = "ok  " if c.ok else "FAIL"
            lines.append(f"  {mark} {c.name:<{w}} {format_number(c.value):>14}  {_limit(c.name, c.limit):<12} "
                         f"{ch.reasons.get(c.name, '')}")
        cost = ch.metrics.get("cost") if isinstance(ch.metrics, dict) else None
        if cost:
            lines.append(f"{ch.name}: generated code costs per sample {cost['muls_per_sample']} multiplies, "
                         f"{cost['adds_per_sample']} adds; coefficients {cost['coef_bytes']} bytes, "
                         f"state {cost['state_bytes']} bytes")
    lines.append(DBFS_NOTE)
    nfail = len(report.failures())
    lines.append(f"{report.source}: {'all checks pass' if report.ok else f'{nfail} check(s) over budget'}")
    return "\n".join(lines) + "\n"


def render_json(report) -> str:
    return json.dumps(report.to_json(), indent=2, allow_nan=False) + "\n"


def render_junit(report) -> str:
    """JUnit XML: a test suite per channel and a test case per check."""
    out = ['<?xml version="1.0" encoding="UTF-8"?>']
    total = sum(len(ch.checks) for ch in report.channels)
    fails = len(report.failures())
    out.append(f'<testsuites name={quoteattr("coefc check " + report.source)} tests="{total}" failures="{fails}">')
    for ch in report.channels:
        nf = sum(1 for c in ch.checks if not c.ok)
        out.append(f'  <testsuite name={quoteattr(ch.name)} tests="{len(ch.checks)}" failures="{nf}" errors="0">')
        for c in ch.checks:
            cls = quoteattr(f"{report.source}.{ch.name}")
            reason = ch.reasons.get(c.name, "")
            msg = f"{c.name} = {format_number(c.value)}, limit {_limit(c.name, c.limit)}: {reason}"
            if c.ok:
                out.append(f'    <testcase classname={cls} name={quoteattr(c.name)}>'
                           f'<system-out>{escape(msg)}</system-out></testcase>')
            else:
                out.append(f'    <testcase classname={cls} name={quoteattr(c.name)}>'
                           f'<failure message={quoteattr(msg)}>{escape(msg)}</failure></testcase>')
        out.append("  </testsuite>")
    out.append("</testsuites>")
    return "\n".join(out) + "\n"


REPORTERS = {"text": render_text, "json": render_json, "junit": render_junit}


def render(report, kind: str) -> str:
    """Render *report* with the reporter named *kind* (text, json or junit)."""
    return REPORTERS[kind](report)
