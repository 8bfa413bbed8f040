"""``coefc check FILE...``: descriptions in, the quantisation verdict of each against its budget out.

Realises every channel on the target, analyses it (response error, roundoff noise,
overflow, limit cycles) and compares with ``[budget]`` (overridable here).  Several
files run in parallel processes (``-j``); each is reported on its own and a bad
file does not stop the others.  Exit codes: the worst over the files -- 0 every
check passes, 1 something is over budget, 2 bad input (including a configuration
the target's kernel cannot run, which ``coefc build`` would refuse:
:mod:`coefc.emit.buildable` holds those rules for both), 3 an internal error.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated, Optional

import typer

from . import app, options

# single options of the table of checks, for commands that take only some (sweep)
MaxDeviation = options.budget_option("passband_deviation_db")
MinStopband = options.budget_option("stopband_attenuation_db")
MaxNoise = options.budget_option("output_noise_dbfs")
LimitCycles = options.budget_option("limit_cycles")
OverflowBudget = options.budget_option("overflow")
JUnit = Annotated[Optional[str], typer.Option("--junit", metavar="PATH", help="Also write a JUnit XML report to PATH.")]
Sarif = Annotated[Optional[str], typer.Option(
    "--sarif", metavar="PATH", help="Also write SARIF 2.1.0 to PATH: one result per failing check, at its line.")]
Markdown = Annotated[Optional[str], typer.Option(
    "--markdown", metavar="PATH", help="Also write a Markdown summary table to PATH (CI job summary, review comment).")]
Jobs = Annotated[Optional[int], typer.Option(
    "-j", "--jobs", metavar="N", min=1, max=1024, help="Check up to N files at once (default: the processors available).")]
NoiseSamples = Annotated[int, typer.Option(
    "--noise-samples", metavar="N", min=1024, max=1 << 22, help="Length of the measured-noise stimulus in samples (1024 to 4194304).")]
SearchLimit = Annotated[int, typer.Option(
    "--search-limit", metavar="STATES", min=1, max=1 << 28, help="Largest number of states searched exhaustively per section for limit cycles (at most 2^28).")]


@app.command()
@options.with_budget_overrides
def check(
    files: Annotated[list[Path], typer.Argument(metavar="FILE...", help="Filter descriptions (.toml).")],
    target: options.Target = None,
    target_dir: options.TargetDirs = None,
    data: options.Data = None,
    coef: options.Coef = None,
    acc: options.Acc = None,
    rounding: options.Rounding = None,
    overflow: options.Overflow = None,
    structure: options.Structure = None,
    scaling: options.Scaling = None,
    channel: options.Channel = None,
    json_out: options.JsonOut = None,
    junit: JUnit = None,
    sarif: Sarif = None,
    markdown: Markdown = None,
    jobs: Jobs = None,
    noise_samples: NoiseSamples = 1 << 15,
    search_limit: SearchLimit = 1 << 24,
    budget_overrides: dict = None,
) -> None:
    """Realise, analyse and gate against the budget (exit 0 pass, 1 over budget, 2 bad input; several files: the worst).

    With several files, --json writes {"files": [...]} (see the README) and the text
    ends with one summary line per file.  dBFS per AES17: 0 dBFS is the RMS level
    of a full-scale sine.
    """
    from ..budget import apply_overrides
    from ..fileio.output import write_atomic
    from ..reports.batch import batch_json, render_junit_files, render_summary
    from ..review.batch import CheckSettings, check_files, worst
    from ..spec import Budget

    options.check_outputs([(json_out, "JSON report"), (junit, "JUnit report"), (sarif, "SARIF log"),
                           (markdown, "Markdown summary")], files)
    apply_overrides(Budget(), **budget_overrides)  # a bad option value: one line, before any file
    settings = CheckSettings(
        target=target, target_dirs=tuple(str(d) for d in target_dir or ()),
        arithmetic=tuple((k, v) for k, v in dict(data=data, coef=coef, acc=acc, rounding=rounding, overflow=overflow,
                                                 structure=structure, scaling=scaling).items() if v is not None),
        channels=tuple(channel or ()), budget_overrides=tuple(budget_overrides.items()),
        noise_samples=noise_samples, max_states=search_limit,
        setting_names=tuple(options.OPTION_OF_SETTING.items()))
    outcomes = []
    for o in check_files(files, settings, jobs):
        outcomes.append(o)
        if o.error is not None:
            print(f"coefc: {'error: ' if o.code == 2 else ''}{o.error}", file=sys.stderr)
            continue
        if json_out != "-":
            sys.stdout.write(o.text)
        for note in o.notes:
            print(f"coefc: {note}", file=sys.stderr)
    several = len(outcomes) > 1
    if json_out:
        if several:
            options.write_json(batch_json(outcomes), json_out)
        elif outcomes[0].report is not None:
            options.write_json(outcomes[0].report, json_out)
    if junit and (several or outcomes[0].report is not None):
        write_atomic(Path(junit), render_junit_files(outcomes, "coefc check" + ("" if several else
                                                                              " " + outcomes[0].source)))
    if sarif:
        from ..reports.sarif import render_sarif

        write_atomic(Path(sarif), render_sarif(outcomes))
    if markdown:
        from ..reports.markdown import render_markdown

        write_atomic(Path(markdown), render_markdown(outcomes))
    if several and json_out != "-":
        sys.stdout.write(render_summary(outcomes))
    code = worst(o.code for o in outcomes)
    if code:
        raise typer.Exit(code)
