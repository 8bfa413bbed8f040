"""``coefc report FILE [NEW] -o OUT.html``: a description (or two) in, a self-contained visual report out."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from . import app, options


@app.command()
def report(
    file: Annotated[Path, typer.Argument(metavar="FILE", help="Filter description (.toml); with NEW, the OLD one.")],
    new: Annotated[Path | None, typer.Argument(metavar="NEW", help="A second description: the page shows FILE "
                                                                  "as OLD against NEW.", show_default=False)] = None,
    out: Annotated[Path | None, typer.Option("-o", "--output", metavar="OUT.html",
                                             help="HTML file to write (self-contained); required.")] = None,
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
    """Write an HTML report: responses, poles and zeros, noise, checks, integers, limit cycles, sums.

    With two descriptions (OLD NEW) the page overlays both and shows each in full.
    Needs matplotlib (pip install 'coefc[plot]').  The page loads nothing from
    elsewhere.  dBFS per AES17: 0 dBFS is the RMS level of a full-scale sine.
    """
    from ..budget import run_check
    from ..fileio.output import write_atomic
    from ..reports.html import render_comparison, render_report

    if out is None:
        from ..errors import CoefcError

        raise CoefcError("coefc report: name the page to write with -o OUT.html")
    if out.suffix.lower() not in (".html", ".htm"):
        from ..errors import CoefcError

        raise CoefcError(f"{out}: the report is an HTML page; name the output file *.html")
    inputs = [file] + ([new] if new is not None else [])
    options.check_outputs([(out, "report")], inputs)
    runs = []
    for path in inputs:
        loaded, real = options.realisation(path, channel=channel, target=target, target_dir=target_dir,
                                           data=data, coef=coef, acc=acc, rounding=rounding,
                                           overflow=overflow, structure=structure, scaling=scaling)
        runs.append((run_check(real, loaded.description.budget), real))
    if new is None:
        write_atomic(out, render_report(*runs[0]))
        print(f"wrote {out} ({'within budget' if runs[0][0].ok else 'over budget'})")
    else:
        write_atomic(out, render_comparison(runs[0], runs[1]))
        words = ["within budget" if r.ok else "over budget" for r, _ in runs]
        print(f"wrote {out} (OLD {words[0]}, NEW {words[1]})")
