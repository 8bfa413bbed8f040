"""The ``coefc`` command line: a thin layer over the library API.

Each command lives in its own module (``design_cmd``, ``run_cmd``, ``check_cmd``, ``diff_cmd``,
``build_cmd``, ``sweep_cmd``, ``targets_cmd``) and registers itself on the one
Typer app here.  Exit codes: 0 pass, 1 over budget (or stale header), 2 bad input
or usage (one line on stderr), 3 an internal error of coefc itself (one line naming
it as a bug), 130/143 interrupted by SIGINT/SIGTERM (temporary files removed).
"""

from __future__ import annotations

import signal
import sys
import warnings

import typer

from ..errors import CoefcError, internal_error_line
from .options import OPTION_OF_SETTING

app = typer.Typer(
    name="coefc",
    help=(
        "Coefficient compiler and fixed-point quantisation checker for embedded DSP.\n\n"
        "Q formats are written Qm.n with the sign bit counted in m (Q1.15 is a 16-bit "
        "word, Q2.30 a 32-bit one); Qn is shorthand for Q1.n.  Levels in dBFS follow "
        "AES17: 0 dBFS is the RMS level of a full-scale sine.\n\n"
        "Exit codes: 0 pass, 1 over budget (build --check: stale), 2 bad input or usage, "
        "3 internal error (a bug in coefc; please report it)."
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
    diff_cmd,
    build_cmd,
    run_cmd,
    sweep_cmd,
    report_cmd,
    targets_cmd,
    align_cmd,
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


class _Terminated(KeyboardInterrupt):
    """SIGTERM (CI cancel, ``timeout``), raised like Ctrl-C so every clean-up runs."""


_signalled: list[int] = []


def _on_sigterm(signum, frame):
    _signalled.append(signum)
    raise _Terminated()


def main() -> None:
    """Entry point of the ``coefc`` script.

    Library errors (:class:`CoefcError`) and command-line usage errors (unknown
    option, a value of the wrong type) each become one line on stderr starting
    ``coefc: error:`` and exit code 2.  Any other exception is a bug of coefc: one
    line naming it, exit code 3 (never 1, which a merge gate reads as "over
    budget").  SIGTERM unwinds like SIGINT, so temporary files are removed.
    Numerical warnings of numpy and scipy are the library's business and never
    reach stderr.
    """
    signal.signal(signal.SIGTERM, _on_sigterm)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            rv = app(prog_name="coefc", standalone_mode=False)
    except CoefcError as e:
        print(f"coefc: error: {e.spoken(OPTION_OF_SETTING)}", file=sys.stderr)
        sys.exit(2)
    except _TyperError as e:
        if type(e).__name__ == "NoArgsIsHelpError":  # bare `coefc` or `coefc check`: show the help
            e.show()
            sys.exit(2)
        print(_usage_line(e), file=sys.stderr)
        sys.exit(2)
    except (typer.Abort, KeyboardInterrupt):
        term = bool(_signalled)
        print(f"coefc: {'terminated' if term else 'interrupted'}", file=sys.stderr)
        sys.exit(143 if term else 130)
    except MemoryError:
        print("coefc: error: the input needs more memory than this machine has; make it smaller", file=sys.stderr)
        sys.exit(2)
    except Exception as e:  # a bug: one line, its own exit code
        print(f"coefc: {internal_error_line(e)}", file=sys.stderr)
        sys.exit(3)
    if _signalled or rv == 130:  # Typer turns Ctrl-C (and our SIGTERM) into exit code 130
        print(f"coefc: {'terminated' if _signalled else 'interrupted'}", file=sys.stderr)
        sys.exit(143 if _signalled else 130)
    sys.exit(rv if isinstance(rv, int) else 0)
