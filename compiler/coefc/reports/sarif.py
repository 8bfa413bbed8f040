"""SARIF 2.1.0 of a check: one result per failing check, at the line of its budget key or stage.

The Static Analysis Results Interchange Format is an OASIS standard that code
hosts show as annotations on the lines of a merge request.  The log has one run
(tool ``coefc``); each rule is a check of :data:`coefc.checks.CHECKS` that failed
(plus ``bad-input`` and ``internal-error`` for files that could not be checked);
each result names the file by its path as given (relative to the working folder,
as a relative URI) and the line the finding concerns.  The output is
deterministic: no time stamps, no absolute paths of relative inputs, files in the
order given, results in the order of the report.

References
----------
OASIS, *Static Analysis Results Interchange Format (SARIF) Version 2.1.0*, Plus
Errata 01, OASIS Standard, 2023; https://docs.oasis-open.org/sarif/sarif/v2.1.0/
"""

from __future__ import annotations

import json
from pathlib import PurePath
from urllib.parse import quote

SARIF_VERSION = "2.1.0"
SARIF_SCHEMA = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"

_OTHER_RULES = {
    "bad-input": "The description could not be checked (a bad file, key or option).",
    "internal-error": "coefc failed on this file (a bug in coefc).",
}


def artifact_uri(source: str) -> str:
    """*source* as a URI reference: a relative path stays relative (forward slashes, percent-encoded)."""
    p = PurePath(source)
    if p.is_absolute():
        return "file://" + quote(p.as_posix())
    return quote(p.as_posix())


def _rule(rule_id: str) -> dict:
    from ..checks import BY_NAME

    if rule_id in BY_NAME:
        c = BY_NAME[rule_id]
        text = f"{c.title[0].upper()}{c.title[1:]}: passes when {c.passes_when}."
    else:
        text = _OTHER_RULES.get(rule_id, rule_id)
    return {"id": rule_id, "shortDescription": {"text": text}}


def sarif_log(outcomes) -> dict:
    """The SARIF log (a dict) of the outcomes of ``coefc check``."""
    from .. import __version__

    rules: list[str] = []
    results = []
    for o in outcomes:
        for f in o.findings:
            if f.rule not in rules:
                rules.append(f.rule)
            loc: dict = {"artifactLocation": {"uri": artifact_uri(o.source)}}
            if f.line is not None:
                loc["region"] = {"startLine": int(f.line)}
            results.append({"ruleId": f.rule, "ruleIndex": rules.index(f.rule), "level": "error",
                            "message": {"text": f.message}, "locations": [{"physicalLocation": loc}]})
    return {
        "$schema": SARIF_SCHEMA,
        "version": SARIF_VERSION,
        "runs": [{
            "tool": {"driver": {"name": "coefc", "version": __version__, "rules": [_rule(r) for r in rules]}},
            "results": results,
        }],
    }


def render_sarif(outcomes) -> str:
    """The SARIF log as JSON text (keys in a fixed order, two-space indent)."""
    return json.dumps(sarif_log(outcomes), indent=2, allow_nan=False) + "\n"
