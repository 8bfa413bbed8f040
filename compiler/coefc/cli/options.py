"""Options shared by several commands, declared once (one schema, one meaning)."""

from __future__ import annotations

import functools
import inspect
import json
import sys
from pathlib import Path
from typing import Annotated, Optional

import typer

from ..targetspec import Overrides

#: The option that sets each setting a library message may name (:func:`coefc.errors.setting`):
#: the CLI prints errors with these, the library with the settings' own names.
OPTION_OF_SETTING = {
    "acc_bits": "--acc", "band": "--band", "base": "--base", "channel": "--channel", "coef": "--coef", "data": "--data", "force": "--force",
    "kernel": "--kernel", "search_limit": "--search-limit", "structure": "--structure",
    "target_dirs": "--target-dir", "vectors": "--vectors",
}

def _target_name(value: str | None) -> str | None:
    if value is not None and not value.strip():
        raise typer.BadParameter("the target name is empty; name one such as mcu32 (see coefc targets)")
    return value


Target = Annotated[Optional[str], typer.Option("--target", callback=_target_name, metavar="NAME",
                                               help="Target name (built-in or from --target-dir).")]
TargetDirs = Annotated[
    Optional[list[Path]],
    typer.Option("--target-dir", metavar="DIR", help="Extra folder of targets (repeatable); also COEFC_TARGET_PATH."),
]
Data = Annotated[Optional[str], typer.Option("--data", metavar="Qm.n", help="Data word, Qm.n (sign bit counted in m; Qn = Q1.n).")]
Coef = Annotated[Optional[str], typer.Option("--coef", metavar="Qm.n", help="Coefficient word, Qm.n (sign bit counted in m).")]
Acc = Annotated[Optional[int], typer.Option("--acc", metavar="BITS", help="Accumulator width in bits.")]
Rounding = Annotated[Optional[str], typer.Option("--rounding", metavar="MODE", help="add-half|truncate|half-even|toward-zero")]
Overflow = Annotated[Optional[str], typer.Option("--overflow", metavar="MODE", help="saturate or wrap.")]
Structure = Annotated[Optional[str], typer.Option("--structure", metavar="NAME", help="df1, tdf2, df1ef (DF1 with error feedback), df1-wide-fb (double-word feedback coefficients), df1ef-wide-fb (error feedback and double-word feedback), df1ef-wide (error feedback, double-word numerator and feedback), coupled (coupled form of Rader and Gold) or auto (per section, the cheapest that meets the budget).")]
Scaling = Annotated[Optional[str], typer.Option("--scaling", metavar="NORM", help="Section scaling norm: none, l1, l2 or linf.")]
def _channel_names(value: list[str] | None) -> list[str] | None:
    seen: set[str] = set()
    for name in value or ():
        if name in seen:
            raise typer.BadParameter(f"channel '{name}' is named twice; name each channel once")
        seen.add(name)
    return value


Channel = Annotated[Optional[list[str]], typer.Option("--channel", callback=_channel_names, metavar="NAME",
                                                      help="Only this channel (repeatable).")]
JsonOut = Annotated[Optional[str], typer.Option("--json", metavar="PATH", help="Write the JSON report to PATH ('-' for stdout).")]


def realisation(file, *, channel=None, target=None, target_dir=None, budget_overrides=None, **arithmetic):
    """Load, design and realise *file* as the command line says: ``(loaded, realisation)``.

    *arithmetic* takes the override options (data, coef, acc, rounding, overflow,
    structure, scaling) by their option names; *budget_overrides* the budget
    overrides (budget key -> value or None), which ``structure = "auto"`` meets.
    """
    from ..api import load
    from ..budget import apply_overrides

    loaded = load(file)
    budget = apply_overrides(loaded.description.budget, **(budget_overrides or {}))
    real = loaded.design(channel or None).realise(target, overrides(**arithmetic), target_dir or (), budget=budget)
    impl = loaded.description.implementation
    if (real.programs and real.programs[0].arithmetic.is_float and impl.structure == "df1ef"
            and arithmetic.get("structure") is None):
        print(f"coefc: {file}: target '{real.target.name}' runs the description's df1ef as df1: float32 has no "
              "fixed-point rounding residual to feed back", file=sys.stderr)
    return loaded, real


def overrides(data=None, coef=None, acc=None, rounding=None, overflow=None, structure=None, scaling=None) -> Overrides:
    return Overrides(structure=structure, data=data, coef=coef, acc_bits=acc, rounding=rounding,
                     overflow=overflow, scaling=scaling)


def check_outputs(outputs, inputs=()) -> None:
    """Refuse, before any work, output paths that cannot be written or would overwrite an input.

    *outputs* holds ``(path or None, what)`` pairs; ``None`` and ``'-'`` (stdout)
    are skipped.
    """
    from ..fileio.output import check_output

    for dest, what in outputs:
        if dest is not None and str(dest) != "-":
            check_output(Path(dest), inputs, what)


def write_json(obj, dest: str | None) -> None:
    """Write *obj* as JSON to *dest* ('-' = stdout); the file is replaced atomically."""
    if dest is None:
        return
    text = json.dumps(obj, indent=2, sort_keys=False, allow_nan=False) + "\n"
    if dest == "-":
        sys.stdout.write(text)
    else:
        from ..fileio.output import write_atomic

        write_atomic(Path(dest), text)


def budget_option(key: str):
    """The command-line override option of the budget check *key*, as the table of checks declares it."""
    from ..checks import BY_NAME

    c = BY_NAME[key]
    kind = Optional[str] if c.text_option else Optional[float]
    return Annotated[kind, typer.Option(c.option, metavar=c.metavar, help=c.option_help)]


def with_budget_overrides(command):
    """Give *command* the override option of every check that has one (:data:`coefc.checks.CHECKS`).

    The options are declared once, from the table of checks, for ``check`` and
    ``build`` alike; *command* receives them as one mapping ``budget_overrides``
    (budget key -> value or None), ready for :func:`coefc.budget.apply_overrides`.
    """
    from ..checks import OPTION_CHECKS

    sig = inspect.signature(command, eval_str=True)
    params = [p for p in sig.parameters.values() if p.name != "budget_overrides"]
    keys: dict[str, str] = {}
    for c in OPTION_CHECKS:
        name = c.option.lstrip("-").replace("-", "_")
        params.append(inspect.Parameter(name, inspect.Parameter.POSITIONAL_OR_KEYWORD, default=None,
                                        annotation=budget_option(c.name)))
        keys[name] = c.name

    @functools.wraps(command)
    def wrapper(**kwargs):
        overrides = {keys[k]: kwargs.pop(k) for k in list(kwargs) if k in keys}
        return command(**kwargs, budget_overrides=overrides)

    wrapper.__signature__ = sig.replace(parameters=params)
    wrapper.__annotations__ = {p.name: p.annotation for p in params}
    return wrapper
