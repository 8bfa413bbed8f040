"""The table of checks: every comparison ``coefc check`` makes, declared once.

Each :class:`CheckKind` names a check as JSON and the text report show it, the
``[budget]`` key that sets its limit (if any), the command-line option that
overrides that key (if any), its unit, how its value compares with its limit,
how the limit is validated, and the words people read.  :mod:`coefc.spec`
(``[budget]`` keys), :mod:`coefc.budget` (overrides, defaults, JSON budget),
the CLI (``check`` and ``build`` options), :mod:`coefc.reports.text` (text,
JUnit), :mod:`coefc.reports.html` and :mod:`coefc.emit.header` (the header's banner)
all read :data:`CHECKS`; adding a check is one entry here, its comparison in
:func:`coefc.budget.channel_checks`, and its tests.

A limit validator takes the value as TOML gives it (a number or a string) and
returns the normalised limit or raises :class:`LimitError` with a message that
the caller places (file and key, or the command-line option).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Literal

#: how a check's value compares with its limit
Op = Literal["<=", ">=", "<"]

#: The tone check's limit when the budget names none: |measured - float design| in dB.
DEFAULT_TONE_GAIN_ERROR_DB = 0.5

#: The one caution shown wherever a fixed-point filter could overflow or limit-cycle
#: (common practice, no source: the hazard of a full-scale output to amplifiers,
#: drivers, hearing and machines).
SAFETY_CAUTION = ("a fixed-point filter that overflows or limit-cycles can drive an amplifier or actuator to "
                  "full scale, damage drivers and hearing, and in control loops damage machines; verify on the "
                  "hardware and against the standards and sign-off practice that apply to your product before "
                  "it drives real hardware.")


class LimitError(ValueError):
    """A budget limit that cannot be used; ``str(err)`` says why and what to write."""


def fmt_number(x: float) -> str:
    """A number as the user wrote it, for messages."""
    return f"{x:g}" if abs(x) < 1e15 else f"{x:.6g}"


def type_name(v) -> str:
    """The TOML name of *v*'s type, for messages."""
    if isinstance(v, bool):
        return f"a boolean ({str(v).lower()})"
    if isinstance(v, str):
        return f"a string ({v!r})"
    if isinstance(v, (int, float)):
        return f"a number ({v})"
    if isinstance(v, list):
        return "a list"
    if isinstance(v, dict):
        return "a table"
    return type(v).__name__


def as_number(v) -> float:
    """*v* as a finite float, or :class:`LimitError` (booleans and text are not numbers)."""
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise LimitError(f"expected a number, got {type_name(v)}; write a plain number such as 1000")
    if isinstance(v, float) and not math.isfinite(v):
        raise LimitError(f"{v} is not allowed; write a finite number")
    if isinstance(v, int) and abs(v) > 1e300:
        raise LimitError(f"{v} is too large; write a finite number of sensible size")
    return float(v)


# ------------------------------------------------------------------ limit validators (one per key)

def _number_where(holds: Callable[[float], bool], why: Callable[[float], str]) -> Callable:
    """A validator of a number limit: finite, and *holds* for it (else *why* is the message)."""
    def check(v) -> float:
        x = as_number(v)
        if not holds(x):
            raise LimitError(why(x))
        return x

    return check


def _word_or(word: str, number: Callable, hint: str) -> Callable:
    """A validator of a limit that is either the word *word* or a number *number* accepts."""
    def check(v):
        if isinstance(v, str):
            if v != word:
                raise LimitError(f"'{v}' is not understood; {hint}")
            return word
        return number(v)

    return check


def _positive(example: str) -> Callable:
    return _number_where(lambda x: x > 0,
                         lambda x: f"must be greater than 0, got {fmt_number(x)}; write a positive number such as "
                                   f"{example}")


_noise = _number_where(lambda x: x < 0, lambda x: f"{fmt_number(x)} dBFS is not a noise limit; write a negative "
                                                  "level such as -120")
_offset = _number_where(lambda x: x >= 0, lambda x: f"{fmt_number(x)} LSB: write the largest DC offset allowed, a "
                                                    "non-negative number such as 0.5")
_LC_HINT = "write \"none\" or a maximum amplitude in LSB such as 2"
_limit_cycles = _word_or("none", _number_where(lambda x: x >= 0, lambda x: f"{fmt_number(x)} LSB: an amplitude "
                                               f"cannot be negative; {_LC_HINT}"), _LC_HINT)


def _overflow(v) -> str:
    from .errors import close_match

    if not isinstance(v, str):
        raise LimitError(f"expected none or allow, got {type_name(v)}")
    if v not in ("none", "allow"):
        raise LimitError(f"unknown value '{v}'{close_match(v, ('none', 'allow'))}; use one of none, allow")
    return v


_tone = _word_or("off", _positive("0.5"), "write a largest error in dB (e.g. 0.5) or \"off\"")


# ------------------------------------------------------------------ the table

@dataclass(frozen=True)
class CheckKind:
    """One check: its names, its comparison and its limit.

    ``name`` is the JSON and report name and, for a budget-keyed check, the
    ``[budget]`` key.  ``option`` is the command-line override of that key
    (``text_option``: the option takes text such as ``none|N``).  ``validate``
    checks a limit from TOML or the command line.  ``default`` is the limit
    gated when the budget names none (the hazards: safe by default).
    """

    name: str
    op: Op
    unit: str
    title: str
    passes_when: str
    budget_key: bool = False
    validate: Callable | None = None
    option: str | None = None
    metavar: str | None = None
    option_help: str | None = None
    text_option: bool = False
    default: object = None

    def holds(self, value: float, limit: float) -> bool:
        """*value* passes against the numeric *limit* by this check's comparison."""
        return value >= limit if self.op == ">=" else value < limit if self.op == "<" else value <= limit

    def limit_text(self, limit) -> str:
        """The limit as the reports print it: ``<= 0.05`` (a word limit such as ``none`` as is)."""
        from .reports.text import format_limit

        return limit if isinstance(limit, str) else f"{self.op} {format_limit(limit)}"

    def value_text(self, value, limit, ok) -> str:
        """The value with enough digits to compare with the limit as the check did."""
        from .reports.text import format_against

        return format_against(value, limit, self.op, ok)

    def parse_option(self, text):
        """A command-line value (a float, or text for ``text_option``) made ready for :attr:`validate`."""
        if self.text_option and isinstance(text, str):
            if text.strip().lower() == "none":
                return "none"
            try:
                return float(text)
            except ValueError:
                return text
        return text


CHECKS: tuple[CheckKind, ...] = (
    CheckKind("stable", "<", "", "stability",
              "every realised pole lies inside the unit circle (always checked)"),
    CheckKind("l1_scaling", "<=", "", "l1 scaling",
              "with scaling = \"l1\" on fixed point: every internal node's realised l1 gain plus roundoff "
              "fits the data word (always checked)"),
    CheckKind("passband_deviation_db", "<=", "dB", "passband deviation",
              "max |quantised - float| in the passband <= limit",
              budget_key=True, validate=_positive("0.05"), option="--max-passband-deviation-db", metavar="DB",
              option_help="Budget override: largest |quantised - float| in the passband, dB."),
    CheckKind("stopband_attenuation_db", ">=", "dB", "stopband attenuation",
              "achieved attenuation >= limit (no stopband: not applicable)",
              budget_key=True, validate=_positive("80"), option="--min-stopband-attenuation-db", metavar="DB",
              option_help="Budget override: smallest stopband attenuation, dB."),
    CheckKind("alias_attenuation_db", ">=", "dB", "alias attenuation",
              "multirate channels: the smallest attenuation over every band that folds into the output "
              "passband >= limit (a single-rate channel: not applicable)",
              budget_key=True, validate=_positive("96"), option="--min-alias-attenuation-db", metavar="DB",
              option_help="Budget override: smallest attenuation of what folds into the output passband, dB."),
    CheckKind("output_noise_dbfs", "<=", "dBFS", "output noise",
              "the larger of the analytic and the measured noise <= limit",
              budget_key=True, validate=_noise, option="--max-noise-dbfs", metavar="DBFS",
              option_help="Budget override: largest output roundoff noise, dBFS (AES17)."),
    CheckKind("output_offset_lsb", "<=", "LSB", "output offset",
              "|DC offset of the output error| in LSB <= limit",
              budget_key=True, validate=_offset, option="--max-offset-lsb", metavar="LSB",
              option_help="Budget override: largest DC offset of the output error, LSB."),
    CheckKind("limit_cycles", "<=", "LSB", "limit cycles",
              "\"none\": a proven none; a number N: amplitude (or rigorous bound) <= N",
              budget_key=True, validate=_limit_cycles, option="--limit-cycles", metavar="none|N",
              option_help="Budget override: 'none' (must be proven; the default) or a largest amplitude in LSB.",
              text_option=True, default="none"),
    CheckKind("overflow", "<=", "", "overflow",
              "\"none\": no overflow event under the worst-case inputs and no overflow oscillation found; "
              "\"allow\": always (with a caution)",
              budget_key=True, validate=_overflow, option="--overflow-budget", metavar="none|allow",
              option_help="Budget override: 'none' (no overflow under worst-case input; the default) or 'allow'.",
              text_option=True, default="none"),
    CheckKind("tone_gain_error_db", "<=", "dB", "tone gain error",
              "steady tones through the bit-true engine: max |measured - linear response| gain <= limit "
              "(\"off\" switches it off)",
              budget_key=True, validate=_tone, default=DEFAULT_TONE_GAIN_ERROR_DB),
    CheckKind("correction_error_db", "<=", "dB", "correction error",
              "for each correction stage: its float residual |measured x correction - target| over its range plus "
              "the channel's largest |quantised - float| there (a bound) <= limit; no correction: not applicable",
              budget_key=True, validate=_positive("1.0"), option="--max-correction-error-db", metavar="DB",
              option_help="Budget override: largest error of a measurement-based correction against its target, dB."),
    CheckKind("iec61672_class1_excess_db", "<=", "dB", "IEC 61672-1 class 1 excess",
              "with the tone check, for a weighting stage: largest excess over the class 1 limits <= 0 dB"),
    CheckKind("sum_deviation_db", "<=", "dB", "sum of channels",
              "for each [[sum]]: max |level of the channels' sum - target_db| over band_hz, on the float design "
              "and on the bit-true outputs, <= tolerance_db"),
)

#: the checks by name
BY_NAME: dict[str, CheckKind] = {c.name: c for c in CHECKS}

#: the checks a ``[budget]`` table can set, in table order
BUDGET_CHECKS: tuple[CheckKind, ...] = tuple(c for c in CHECKS if c.budget_key)

#: the checks the command line can override
OPTION_CHECKS: tuple[CheckKind, ...] = tuple(c for c in CHECKS if c.option)

#: the hazards gated when the budget does not name them (overflow and limit cycles can
#: drive an amplifier or actuator to full scale; a realisation that changes the signal,
#: coefc.analyse.tones, is checked by default too)
HAZARD_DEFAULTS: tuple[tuple[str, object], ...] = tuple((c.name, c.default) for c in CHECKS if c.default is not None)


def kind_of(name: str) -> CheckKind:
    """The :class:`CheckKind` named *name* (an unknown name compares ``<=``, as a plain limit)."""
    return BY_NAME.get(name) or CheckKind(name, "<=", "", name.replace("_", " "), "")


def over_budget_text(name: str, value, limit) -> str:
    """``name = value (limit L)``: one failing check as the header's banner and ``build``'s stderr name it."""
    return f"{name} = {_plain(value)} (limit {_plain(limit)})"


def _plain(v) -> str:
    if v is None:
        return "n/a"
    if isinstance(v, float):
        return f"{v:.4g}"
    return f"{v}"
