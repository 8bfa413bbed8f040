"""``coefc check FILE``: a description in, the quantisation verdict against its budget out.

Realises every channel on the target, analyses it (response error, roundoff noise,
overflow, limit cycles) and compares with ``[budget]`` (overridable here).  Exit
codes: 0 every check passes, 1 something is over budget, 2 bad input -- including
a configuration the target's kernel cannot run, which ``coefc build`` would refuse
(:mod:`coefc.emit.buildable` holds those rules for both).
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
NoiseSamples = Annotated[int, typer.Option(
    "--noise-samples", metavar="N", min=1024, max=1 << 22, help="Length of the measured-noise stimulus in samples (1024 to 4194304).")]
SearchLimit = Annotated[int, typer.Option(
    "--search-limit", metavar="STATES", min=1, max=1 << 28, help="Largest number of states searched exhaustively per section for limit cycles (at most 2^28).")]


@app.command()
@options.with_budget_overrides
def check(
    file: Annotated[Path, typer.Argument(metavar="FILE", help="Filter description (.toml).")],
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
    noise_samples: NoiseSamples = 1 << 15,
    search_limit: SearchLimit = 1 << 24,
    budget_overrides: dict = None,
) -> None:
    """Realise, analyse and gate against the budget (exit 0 pass, 1 over budget, 2 bad input).

    dBFS per AES17: 0 dBFS is the RMS level of a full-scale sine.
    """
    from ..analyse import AnalysisOptions
    from ..budget import apply_overrides, run_check
    from ..reports.text import render

    options.check_outputs([(json_out, "JSON report"), (junit, "JUnit report")], [file])
    loaded, real = options.realisation(file, channel=channel, target=target, target_dir=target_dir,
                                       data=data, coef=coef, acc=acc, rounding=rounding,
                                       overflow=overflow, structure=structure, scaling=scaling)
    from ..emit.buildable import validate

    validate(real, generated=True)  # what `coefc build --kernel` would refuse fails here too (exit 2)
    desc = loaded.description
    budget = apply_overrides(desc.budget, **budget_overrides)
    report = run_check(real, budget, options=AnalysisOptions(noise_samples=noise_samples, max_states=search_limit))
    if junit:
        from ..fileio.output import write_atomic

        write_atomic(Path(junit), render(report, "junit"))
    if json_out:
        options.write_json(report.to_json(), json_out)
    if json_out != "-":
        sys.stdout.write(render(report, "text"))
    for c in report.cautions:
        print(f"coefc: {c}", file=sys.stderr)
    if not report.ok:
        raise typer.Exit(1)
