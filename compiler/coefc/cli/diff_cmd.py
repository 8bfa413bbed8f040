"""``coefc diff OLD.toml NEW.toml`` / ``coefc diff --base REV FILE``: what changed between two descriptions.

Realises and checks both (:mod:`coefc.review.compare` computes the differences,
:mod:`coefc.reports.diff` renders them).  Exit code: the new description's verdict
(0 pass, 1 over budget); 2 bad input, on either side.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated, Optional

import typer

from ..errors import CoefcError
from . import app, options

Base = Annotated[Optional[str], typer.Option(
    "--base", metavar="REV", help="Take the old description from git revision REV of the same file (git show REV:FILE).")]
Markdown = Annotated[Optional[str], typer.Option(
    "--markdown", metavar="PATH", help="Also write a Markdown table of the changes to PATH.")]


@app.command()
def diff(
    files: Annotated[list[Path], typer.Argument(metavar="OLD.toml NEW.toml | FILE",
                                                help="Old and new description; with --base, the file only.")],
    base: Base = None,
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
    markdown: Markdown = None,
) -> None:
    """Compare two descriptions channel by channel: stages, integers, checks, metrics, response (exit: NEW's verdict).

    dBFS per AES17: 0 dBFS is the RMS level of a full-scale sine.
    """
    from ..api import Loaded
    from ..reports.diff import render_diff_markdown, render_diff_text
    from ..review.batch import CheckSettings, check_loaded
    from ..review.compare import compare
    from ..spec import parse_description

    if base is None and len(files) != 2:
        raise CoefcError(f"<command line>: coefc diff takes OLD.toml NEW.toml ({len(files)} file(s) given); "
                         "or --base REV FILE to compare FILE with its version in git revision REV")
    if base is not None and len(files) != 1:
        raise CoefcError(f"<command line>: with --base, coefc diff takes one file ({len(files)} given): the "
                         "new version; the old one is read from the revision")
    new_path = files[-1]
    options.check_outputs([(json_out, "JSON report"), (markdown, "Markdown summary")], files)
    settings = CheckSettings(
        target=target, target_dirs=tuple(str(d) for d in target_dir or ()),
        arithmetic=tuple((k, v) for k, v in dict(data=data, coef=coef, acc=acc, rounding=rounding, overflow=overflow,
                                                 structure=structure, scaling=scaling).items() if v is not None),
        channels=tuple(channel or ()))
    from ..api import load

    new_loaded = load(new_path)  # the new file's own errors first
    if base is not None:
        from ..review.gitbase import read_at_revision

        raw, name = read_at_revision(new_path, base)
        old_loaded = Loaded(parse_description(raw, name)) if raw is not None else None
        if old_loaded is None:
            print(f"coefc: {name}: not in revision {base}; every channel of {new_path} is new", file=sys.stderr)
    else:
        old_loaded = load(files[0])
    old = None
    if old_loaded is not None:
        if channel:  # a channel the old version lacks is new there, not an error
            have = {c.name for c in old_loaded.description.channels}
            settings_old = CheckSettings(**{**settings.__dict__, "channels": tuple(c for c in channel if c in have)})
            old = check_loaded(old_loaded, settings_old)[:2] if settings_old.channels else None
        else:
            old = check_loaded(old_loaded, settings)[:2]
    new_report, new_real, notes = check_loaded(new_loaded, settings)
    comp = compare(old, (new_report, new_real))
    if json_out:
        options.write_json(comp.as_dict(), json_out)
    if markdown:
        from ..fileio.output import write_atomic

        write_atomic(Path(markdown), render_diff_markdown(comp))
    if json_out != "-":
        sys.stdout.write(render_diff_text(comp))
    for n in list(notes) + list(new_report.cautions):
        print(f"coefc: {n}", file=sys.stderr)
    if comp.exit_code:
        raise typer.Exit(comp.exit_code)
