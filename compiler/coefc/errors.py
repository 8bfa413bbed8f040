"""Error types of the library: every user-facing failure is a CoefcError.

The CLI catches ``CoefcError`` (never a bare ``Exception``), prints ``str(err)`` as
one line on stderr and exits with code 2.  A message names the file, the place in
it (channel, stage index, key) and what to do about it, e.g.::

    filters/x.toml: channel 'woofer', stage 2, key 'cutoff_hz': 30000 Hz is at or
    above Nyquist (sample_rate_hz=48000 -> 24000 Hz); use a cutoff below 24000 Hz
"""

from __future__ import annotations

import difflib
import re
from collections.abc import Iterable, Mapping

_SETTING = re.compile(r"@\{(\w+)\}")


def setting(name: str) -> str:
    """A reference to the setting *name* inside a message, in the library's words or the CLI's.

    *name* is the setting as the library and the description know it (``coef``,
    ``acc_bits``, ``target_dirs``, ``search_limit`` ...).  ``str(err)`` prints it
    as that name; the CLI prints it as its own option (:meth:`CoefcError.spoken`
    with the table ``coefc.cli.options.OPTION_OF_SETTING``), so library messages
    never name command-line flags.

    >>> str(CoefcError(f"give the coefficient word more integer bits ({setting('coef')})"))
    'give the coefficient word more integer bits (coef)'
    >>> CoefcError(f"raise it ({setting('coef')})").spoken({"coef": "--coef"})
    'raise it (--coef)'
    """
    return "@{" + name + "}"


class CoefcError(Exception):
    """Base class of every error the library raises on purpose.

    ``source`` names the file the error is about, when known (``None``: not yet);
    :meth:`placed` adds it without changing the error's type.
    """

    source: str | None = None

    def __str__(self) -> str:
        return self.spoken({})

    def spoken(self, names: Mapping[str, str]) -> str:
        """The message with each :func:`setting` named by *names* (default: its own name)."""
        text = super().__str__()
        return _SETTING.sub(lambda m: names.get(m.group(1), m.group(1)), text)

    def placed(self, source: str) -> "CoefcError":
        """This error (same type) with *source* set and named at the start of its message."""
        self.source = source
        self.args = (f"{source}: {super().__str__()}",) + self.args[1:]
        return self


class DescriptionError(CoefcError):
    """A filter description (or override) is malformed or impossible.

    Parameters
    ----------
    source : str
        The file (as the user named it) or ``"<command line>"``.
    message : str
        What is wrong and how to fix it, one sentence.
    channel, stage, key : optional
        Where in the description; printed in that order when given.
    line : optional
        Line number in the file, for syntax errors.
    """

    def __init__(
        self,
        source: str,
        message: str,
        *,
        channel: str | None = None,
        stage: int | None = None,
        key: str | None = None,
        line: int | None = None,
    ) -> None:
        self.source = source
        self.message = message
        self.channel = channel
        self.stage = stage
        self.key = key
        self.line = line
        super().__init__(self.format())

    def format(self) -> str:
        where = [self.source + (f":{self.line}" if self.line is not None else "")]
        if self.channel is not None:
            where.append(f"channel '{self.channel}'")
        if self.stage is not None:
            where.append(f"stage {self.stage}")
        if self.key is not None:
            where.append(f"key '{self.key}'")
        return ", ".join(where) + ": " + " ".join(self.message.split())


class TargetError(CoefcError):
    """A target folder, its target.toml or one of its templates is unusable."""


class DataError(CoefcError):
    """Input samples (WAV or text) cannot be read or converted."""


def close_match(word: str, choices: Iterable[str], stems: Iterable[tuple[str, str]] = ()) -> str:
    """Return ``" (did you mean 'x'?)"`` for the closest of *choices*, or ``""``.

    *stems* pairs a word stem with the choice it means (``("trunc", "truncate")``):
    a word containing the stem is pointed at that choice, for names whose close
    spelling is not close in meaning.  A hint only: the word is still refused.
    """
    low = str(word).lower()
    for stem, choice in stems:
        if stem in low:
            return f" (did you mean '{choice}'?)"
    hits = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean '{hits[0]}'?)" if hits else ""


def internal_error_line(exc: BaseException) -> str:
    """The one line of an internal error (a bug in coefc): its type, where it was raised and its message."""
    where = ""
    tb = exc.__traceback__
    while tb is not None and tb.tb_next is not None:
        tb = tb.tb_next
    if tb is not None:
        where = f" at {tb.tb_frame.f_code.co_filename.rsplit('/', 1)[-1]}:{tb.tb_lineno}"
    msg = " ".join(str(exc).split())[:300]
    return (f"internal error (a bug in coefc; please report it with the input that caused it): "
            f"{type(exc).__name__}{where}: {msg}")
