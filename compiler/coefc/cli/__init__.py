"""The ``coefc`` command line: a thin layer over the library API.

Each command lives in its own module (``design_cmd``, ``run_cmd``, ``check_cmd``,
``build_cmd``, ``sweep_cmd``, ``targets_cmd``) and registers itself on the one
Typer app here.  Library errors (:class:`coefc.errors.CoefcError`) become one line
on stderr and exit code 2; nothing else is caught.
"""

from __future__ import annotations

import sys

import typer

from ..errors import CoefcError

app = typer.Typer(
    name="coefc",
    help=(
        "Coefficient compiler and fixed-point quantisation checker for embedded DSP.\n\n"
        "Q formats are written Qm.n with the sign bit counted in m (Q1.15 is a 16-bit "
        "word, Q2.30 a 32-bit one); Qn is shorthand for Q1.n.  Levels in dBFS follow "
        "AES17: 0 dBFS is the RMS level of a full-scale sine."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)



def _version(value: bool) -> None:
    if value:
        from .. import __version__

        print(f"coefc {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(False, "--version", callback=_version, is_eager=True, help="Print the version."),
) -> None:
    """Coefficient compiler and fixed-point quantisation checker for embedded DSP."""


# Command modules register themselves on the app when imported (order = help order).
from . import (  # noqa: E402,F401
    design_cmd,
    check_cmd,
    build_cmd,
    run_cmd,
    sweep_cmd,
    report_cmd,
    targets_cmd,
)

try:  # Typer 0.2x ships its own copy of click; older releases use click itself
    from typer import TyperException as _TyperError
except ImportError:  # pragma: no cover - older Typer
    from click import ClickException as _TyperError


def _usage_line(e) -> str:
    """One line for a command-line usage error (unknown option, bad integer ...)."""
    msg = " ".join(str(e.format_message()).split()).rstrip(".")
    ctx = getattr(e, "ctx", None)
    where = ctx.command_path if ctx is not None else "coefc"
    return f"coefc: error: {msg}; see '{where} --help'"


def main() -> None:
    """Entry point of the ``coefc`` script.

    Library errors (:class:`CoefcError`) and command-line usage errors (unknown
    option, a value of the wrong type) each become one line on stderr starting
    ``coefc: error:`` and exit code 2; nothing else is caught.
    """
    try:
        rv = app(prog_name="coefc", standalone_mode=False)
    except CoefcError as e:
        print(f"coefc: error: {e}", file=sys.stderr)
        sys.exit(2)
    except _TyperError as e:
        if type(e).__name__ == "NoArgsIsHelpError":  # bare `coefc` or `coefc check`: show the help
            e.show()
            sys.exit(2)
        print(_usage_line(e), file=sys.stderr)
        sys.exit(2)
    except typer.Abort:
        print("coefc: interrupted", file=sys.stderr)
        sys.exit(130)
    sys.exit(rv if isinstance(rv, int) else 0)
