"""Reporters of a base-against-head comparison (:class:`coefc.review.compare.Comparison`): text and Markdown.

The JSON of a comparison is :meth:`Comparison.as_dict`.  The text names, per
channel, whether it changed and its verdict old -> new, then the stages, the
arithmetic, the realised integers, every check (value old -> new, its delta,
verdict), the metrics that changed, and the largest response difference at the
check frequencies.
"""

from __future__ import annotations

from .text import format_number

_OK = {True: "PASS", False: "FAIL", None: "-"}


def _v(x) -> str:
    if isinstance(x, (list, dict)):
        return str(x)
    return format_number(x) if not isinstance(x, str) else x


def _delta(d) -> str:
    if d is None or d == 0:
        return ""
    return f"  ({'+' if d > 0 else ''}{format_number(d)})"


def _stage(s) -> str:
    ko, kn = s["kind"]["old"], s["kind"]["new"]
    if s["status"] == "added":
        return f"stage {s['index']}: added ({kn})"
    if s["status"] == "removed":
        return f"stage {s['index']}: removed ({ko})"
    kind = f"{ko} -> {kn}" if ko != kn else kn
    keys = ", ".join(f"{k} {_v(v['old'])} -> {_v(v['new'])}" for k, v in s["keys"].items())
    return f"stage {s['index']} ({kind}): changed" + (f": {keys}" if keys else "")


def _op(o) -> str:
    what = f"section {o['section']} (op {o['op']})" if o["section"] else f"{o['kind']} (op {o['op']})"
    return f"{what} {o['status']}: {o['integers_changed']}"


def render_diff_text(comp) -> str:
    """The comparison for people: one block per channel, then the new verdict."""
    d = comp.as_dict()
    lines = [f"coefc diff: {d['old']['source'] or '(no old version)'} -> {d['new']['source']}"]
    for k, v in d["description"].items():
        lines.append(f"  {k}: {_v(v['old'])} -> {_v(v['new'])}")
    for k, v in d["budget"].items():
        lines.append(f"  budget {k}: {_v(v['old'])} -> {_v(v['new'])}")
    for ch in d["channels"]:
        vo, vn = _OK[ch["verdict"]["old"]], _OK[ch["verdict"]["new"]]
        state = {"added": "added", "removed": "removed"}.get(ch["status"], "changed" if ch["changed"] else "unchanged")
        lines.append(f"channel {ch['name']}: {state}  [{vo} -> {vn}]" if vo != vn
                     else f"channel {ch['name']}: {state}  [{vn}]")
        if not ch["changed"]:
            continue
        lines += [f"  {_stage(s)}" for s in ch["stages"]]
        for k, v in ch["arithmetic"].items():
            lines.append(f"  arithmetic {k}: {_v(v['old'])} -> {_v(v['new'])}")
        n = ch["integers"]
        if n["changed"] or n["old"] != n["new"]:
            ops = ", ".join(_op(o) for o in n["ops"])
            lines.append(f"  realised integers: {n['changed']} differ (old {n['old']}, new {n['new']})"
                         + (f": {ops}" if ops else ""))
        else:
            lines.append(f"  realised integers: all {n['new']} identical")
        w = max([len(c["name"]) for c in ch["checks"]] + [10])
        for c in ch["checks"]:
            o, nw = c["old"], c["new"]
            verdict = f"{_OK[o['ok']]} -> {_OK[nw['ok']]}" if o["ok"] != nw["ok"] else _OK[nw["ok"]]
            limit = _v(nw["limit"]) if o["limit"] == nw["limit"] else f"{_v(o['limit'])} -> {_v(nw['limit'])}"
            lines.append(f"  {verdict:<12} {c['name']:<{w}} {_v(o['value']):>10} -> {_v(nw['value']):<10}"
                         f"{_delta(c['delta'])}  limit {limit}")
        changed = [m for m in ch["metrics"] if m["changed"]]
        if changed:
            lines.append(f"  metrics changed: {len(changed)} of {len(ch['metrics'])} (all in --json)")
            for m in changed:
                lines.append(f"    {m['name']}: {_v(m['old'])} -> {_v(m['new'])}{_delta(m['delta'])}")
        r = ch["response"]
        if r:
            lines.append(f"  response of the realised coefficients at {len(r['freq_hz'])} {r['frequencies']}: "
                         f"largest change {format_number(r['max_abs_delta_db'])} dB at {format_number(r['at_hz'])} Hz")
    if d["new"]["ok"]:
        verdict = "all checks pass"
    else:
        nfail = sum(1 for ch in d["channels"] for c in ch["checks"] if c["new"]["ok"] is False)
        verdict = f"{nfail} check(s) over budget"
    was = {True: "all checks passed", False: "over budget", None: "no old version"}[d["old"]["ok"]]
    lines.append(f"{d['new']['source']}: {verdict} (old: {was})")
    return "\n".join(lines) + "\n"


def _check_change(c) -> str:
    o, n = c["old"], c["new"]
    parts = []
    if o["value"] != n["value"]:
        parts.append(f"{_v(o['value'])} → {_v(n['value'])}")
    if o["limit"] != n["limit"]:
        parts.append(f"limit {_v(o['limit'])} → {_v(n['limit'])}")
    return f"{c['name']} " + ", ".join(parts or [f"{_OK[o['ok']]} → {_OK[n['ok']]}"])


def render_diff_markdown(comp) -> str:
    """A table for a review comment: per channel, what changed and the verdict old -> new."""
    from .markdown import cell

    d = comp.as_dict()
    rows = [f"### coefc diff: `{cell(d['new']['source'])}` {'passes' if d['new']['ok'] else 'is over budget'}", "",
            "| Channel | Change | Verdict | Checks that changed | Largest response change |",
            "| --- | --- | --- | --- | --- |"]
    for ch in d["channels"]:
        vo, vn = _OK[ch["verdict"]["old"]], _OK[ch["verdict"]["new"]]
        parts = []
        if ch["stages"]:
            parts.append(f"{len(ch['stages'])} stage(s)")
        if ch["integers"]["changed"]:
            parts.append(f"{ch['integers']['changed']} integer(s)")
        if ch["arithmetic"]:
            parts.append("arithmetic")
        if any(c["old"]["limit"] != c["new"]["limit"] for c in ch["checks"]):
            parts.append("budget")
        change = ch["status"] if ch["status"] != "both" else (", ".join(parts) or
                                                              ("changed" if ch["changed"] else "none"))
        checks = "; ".join(_check_change(c) for c in ch["checks"] if c["changed"])
        r = ch["response"]
        resp = f"{format_number(r['max_abs_delta_db'])} dB at {format_number(r['at_hz'])} Hz" if r else ""
        verdict = f"{vo} → {vn}" if vo != vn else vn
        rows.append(f"| {cell(ch['name'])} | {cell(change)} | {verdict} | {cell(checks)} | {resp} |")
    return "\n".join(rows) + "\n"
