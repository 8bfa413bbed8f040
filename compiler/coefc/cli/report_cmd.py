"""``coefc report FILE -o OUT.html``: a description in, a self-contained visual report out."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from . import app, options


@app.command()
def report(
    file: Annotated[Path, typer.Argument(metavar="FILE", help="Filter description (.toml).")],
    out: Annotated[Path, typer.Option("-o", "--output", metavar="OUT.html", help="HTML file to write (self-contained).")],
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
) -> None:
    """Write an HTML report: responses, poles and zeros, noise, checks, integers, limit cycles.

    Needs matplotlib (pip install 'coefc[plot]').  The page loads nothing from
    elsewhere.  dBFS per AES17: 0 dBFS is the RMS level of a full-scale sine.
    """
    from ..budget import run_check
    from ..fileio.output import write_atomic
    from ..reports.html import render_report

    if out.suffix.lower() not in (".html", ".htm"):
        from ..errors import CoefcError

        raise CoefcError(f"{out}: the report is an HTML page; name the output file *.html")
    options.check_outputs([(out, "report")], [file])
    loaded, real = options.realisation(file, channel=channel, target=target, target_dir=target_dir,
                                       data=data, coef=coef, acc=acc, rounding=rounding,
                                       overflow=overflow, structure=structure, scaling=scaling)
    rep = run_check(real, loaded.description.budget)
    write_atomic(out, render_report(rep, real))
    print(f"wrote {out} ({'within budget' if rep.ok else 'over budget'})")
