"""``coefc build FILE -o OUT.h``: a description in, a checked C header out.

Runs the check first and refuses to write when it fails (exit 1, the output is
left untouched) unless ``--force``; writes every file atomically; ``--check``
writes nothing and reports whether the output is missing or stale (exit 1) or
current (exit 0).  Bad input exits 2.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

import typer

from ..errors import CoefcError
from . import app, options

Output = Annotated[Path, typer.Option("-o", "--output", metavar="OUT.h", help="Header to write (OUT.h).")]
Vectors = Annotated[int, typer.Option(
    "--vectors", metavar="N", min=0, max=1 << 20, help="Golden-vector samples per channel in the header (0 = none).")]
CheckOnly = Annotated[bool, typer.Option(
    "--check", help="Write nothing; exit 1 if OUT.h is missing or differs from what would be written.")]
Force = Annotated[bool, typer.Option(
    "--force", help="Write the header even when the check fails; its first lines then say so.")]
Kernel = Annotated[bool, typer.Option(
    "--kernel", help="Write generated code specialised to each channel: OUT.h and OUT.c (no reference kernel needed).")]
ReferenceKernel = Annotated[bool, typer.Option(
    "--reference-kernel", help="Write the operation-table header and copy the target's reference kernel (.h and .c) "
    "beside it.")]


@app.command()
@options.with_budget_overrides
def build(
    file: Annotated[Path, typer.Argument(metavar="FILE", help="Filter description (.toml).")],
    output: Output,
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
    vectors: Vectors = 256,
    check_only: CheckOnly = False,
    force: Force = False,
    kernel: Kernel = False,
    reference_kernel: ReferenceKernel = False,
    budget_overrides: dict = None,
) -> None:
    """Check, then write the C header: generated code (--kernel) or the operation table (exit 0 / 1 / 2).

    The header is byte-identical for identical inputs: its banner names the coefc
    version and the SHA-256 of the description and of the target.toml, never a time.
    """
    from ..budget import apply_overrides, run_check
    from ..checks import over_budget_text
    from ..emit.header import render
    from ..fileio.output import check_output, write_atomic
    from ..emit.buildable import validate
    from ..targetspec import build_info

    if output.is_dir():
        raise CoefcError(f"{output}: is a folder; give the header's file name, e.g. -o {output / 'filters.h'}")
    if output.suffix != ".h":
        raise CoefcError(f"{output}: the output must be a C header ending in .h")
    if kernel and reference_kernel:
        raise CoefcError("<command line>: --kernel (generated code) and --reference-kernel (operation table and "
                         "the target's kernel) exclude each other; choose one")
    if not check_only:
        check_output(output, [file], "header")
    loaded, real = options.realisation(file, channel=channel, target=target, target_dir=target_dir,
                                       budget_overrides=budget_overrides,
                                       data=data, coef=coef, acc=acc, rounding=rounding,
                                       overflow=overflow, structure=structure, scaling=scaling)
    validate(real, generated=kernel)  # every refusal rule (shared with check) before the (slower) check
    info = build_info(real.target)  # a check-only target: names the build table it lacks
    # the target's own files are inputs too: writing into the target folder must not replace them
    inputs = [file, real.target.folder / "target.toml",
              *(info.kernel_files(real.target.folder) if info.kernel_family is None else ())]
    if not check_only:
        check_output(output, inputs, "header")
    budget = apply_overrides(loaded.description.budget, **budget_overrides)
    report = run_check(real, budget)
    for c in report.cautions:
        print(f"coefc: {c}", file=sys.stderr)
    for ch, chk, why in report.failures():  # said whether or not --force writes the header anyway
        where = ch if ch.startswith("sum ") else f"channel '{ch}'"  # a [[sum]] is named "sum NAME"
        print(f"coefc: over budget: {where}: {over_budget_text(chk.name, chk.value, chk.limit)}"
              + (f": {why}" if why else ""), file=sys.stderr)
    if not report.ok and not force:
        print(f"coefc: {output}: not written (the check failed; --force writes it anyway)", file=sys.stderr)
        raise typer.Exit(1)
    if not report.ok:
        print(f"coefc: {output}: written although over budget (--force); the header's banner lists the failing "
              "checks", file=sys.stderr)
    files = render(real, report, header_name=output.name, vectors=vectors, forced=not report.ok,
                   with_kernel=reference_kernel, generated=kernel)
    folder = output.parent
    paths = {folder / name: text for name, text in files.items()}
    if check_only:
        stale = []
        for path, text in paths.items():
            try:
                current = path.read_bytes() == text.encode("utf-8")
            except OSError:
                current = False
            if not current:
                stale.append(str(path))
        if stale:
            print(f"coefc: stale or missing: {', '.join(stale)}; run coefc build", file=sys.stderr)
            raise typer.Exit(1)
        print(f"{output}: up to date")
        return
    for path in paths:
        check_output(path, inputs, "header")
    for path, text in paths.items():
        write_atomic(path, text)
        print(f"wrote {path}" + ("  (OVER BUDGET, forced)" if not report.ok else ""))
