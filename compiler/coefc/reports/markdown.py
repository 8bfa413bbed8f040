"""A short Markdown summary of a check, for a CI job summary or a review comment.

One heading line with the count of verdicts, then a table (CommonMark with the
GitHub Flavored Markdown table extension): one row per channel of each file --
file, channel, verdict, the checks over budget -- and one row per file that could
not be checked.  Deterministic: files in the order given, channels in the report's order.

References
----------
GitHub Flavored Markdown Spec, version 0.29-gfm, section 4.10 "Tables (extension)";
https://github.github.com/gfm/
"""

from __future__ import annotations

from collections import Counter


def cell(text) -> str:
    """*text* fit for a table cell: one line, ``|`` escaped."""
    return " ".join(str(text).split()).replace("\\", "\\\\").replace("|", "\\|")


def _value(c) -> str:
    from ..checks import over_budget_text

    return over_budget_text(c["name"], c["value"], c["limit"])


def render_markdown(outcomes) -> str:
    """The Markdown summary of the outcomes of ``coefc check``."""
    from ..review.batch import VERDICT

    counts = Counter(o.code for o in outcomes)
    n = len(outcomes)
    head = f"### coefc check: {counts[0]} of {n} file{'s' if n != 1 else ''} pass"
    if n - counts[0]:
        head += " (" + ", ".join(f"{counts[c]} {VERDICT[c]}" for c in sorted(counts) if c) + ")"
    rows = ["| File | Channel | Verdict | Over budget |", "| --- | --- | --- | --- |"]
    for o in outcomes:
        f = f"`{cell(o.source)}`" if "`" not in o.source else cell(o.source)
        if o.report is None:
            rows.append(f"| {f} | | **{VERDICT[o.code]}** | {cell(o.error or '')} |")
            continue
        for ch in o.report["channels"]:
            bad = [c for c in ch["checks"] if not c["ok"]]
            verdict = "pass" if not bad else "**over budget**"
            rows.append(f"| {f} | {cell(ch['name'])} | {verdict} | {cell('; '.join(_value(c) for c in bad))} |")
    return head + "\n\n" + "\n".join(rows) + "\n"
