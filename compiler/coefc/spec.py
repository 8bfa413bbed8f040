"""Filter descriptions: TOML text in, a validated :class:`Description` out.

Every problem is raised as :class:`coefc.errors.DescriptionError` naming the file,
channel, stage (1-based) and key, what is wrong and how to fix it.

This module checks the *shape* of a description: known keys (a misspelt one gets a
close match), types (a bool is never a number), finite numbers, ranges that do not
depend on the filter mathematics (positive orders, frequencies below Nyquist, band
edges in order), names that can become C identifiers.  Whether a design is
possible (a stable raw section, an order that meets a requirement) is decided by
:mod:`coefc.design`, which raises the same error type.

Frequencies are in Hz.  A band is ``[low_hz, high_hz]``.
"""

from __future__ import annotations

import hashlib
import math
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType

from .checks import BUDGET_CHECKS, LimitError, as_number
from .checks import fmt_number as _fmt
from .checks import type_name as _type_name
from .errors import DescriptionError, close_match, setting
from .stagekinds import (EQ_KINDS, FIR_KINDS, FIR_METHODS, IIR_KINDS, IIR_RESPONSES,  # noqa: F401 (re-exported)
                         DECIMATING_KINDS, MAX_CIC_DELAY, MAX_CIC_GROWTH, MAX_CIC_STAGES, MAX_FIR_TAPS,
                         MAX_IIR_ORDER, MAX_LS_TAPS, MAX_RATE_FACTOR, RATE_KINDS,
                         STAGE_KINDS_TABLE, WEIGHTINGS)
from .stagekinds import FREQ_KEYS as _FREQ_KEYS

# --------------------------------------------------------------------------- model


@dataclass(frozen=True)
class Implementation:
    """``[implementation]`` defaults; ``None`` means "take it from the target"."""

    target: str | None = None
    structure: str | None = None
    data: str | None = None  # Q format text, validated
    coef: str | None = None
    acc_bits: int | None = None
    rounding: str | None = None
    overflow: str | None = None
    scaling: str | None = None


@dataclass(frozen=True)
class Budget:
    """``[budget]``: the limits ``coefc check`` gates on; ``None`` = not checked.

    ``passband`` and ``stopband`` optionally name the bands (tuples of
    ``(low_hz, high_hz)``) where the deviation and attenuation limits apply; when
    absent the checker derives them from the design.
    """

    passband_deviation_db: float | None = None
    stopband_attenuation_db: float | None = None
    alias_attenuation_db: float | None = None  # multirate: what folds into the output passband
    output_noise_dbfs: float | None = None
    limit_cycles: str | float | None = None  # "none" or a maximum amplitude in LSB
    overflow: str | None = None  # "none" or "allow"
    output_offset_lsb: float | None = None  # maximum |DC offset of the output error|, LSB
    tone_gain_error_db: float | str | None = None  # None: the default limit; "off": not checked
    correction_error_db: float | None = None  # largest error of a correction stage against its target
    tone_levels_dbfs: tuple[float, ...] | None = None  # None: the default levels
    passband: tuple[tuple[float, float], ...] | None = None
    stopband: tuple[tuple[float, float], ...] | None = None
    command_line: frozenset = frozenset()  # keys set on the command line: no [channel.budget] overrides them
    #: ``[budget.when_data_bits.N]``: budget keys that apply instead when the data word is N bits
    #: wide, as ``((N, ((key, value), ...)), ...)`` (applied by :func:`coefc.budget.budget_for`)
    when_data_bits: tuple = ()


@dataclass(frozen=True)
class StageSpec:
    """One stage as written: its kind and its validated parameters."""

    index: int  # 1-based
    kind: str
    params: Mapping


@dataclass(frozen=True)
class ChannelSpec:
    name: str
    stages: tuple[StageSpec, ...]
    #: ``[channel.budget]``: the budget keys this channel sets for itself (they override
    #: the description's ``[budget]``; command-line overrides still win)
    budget: Mapping = field(default_factory=lambda: MappingProxyType({}))
    #: the channel's own ``structure`` (a structure name or ``"auto"``; ``None``: ``[implementation]``'s)
    structure: str | None = None


@dataclass(frozen=True)
class SumSpec:
    """A ``[[sum]]`` table: channels whose realised outputs are added, and the level their sum must hold.

    The channels are taken as realised (polarity, gains and delays included); the
    level of the sum must stay within ``target_db +- tolerance_db`` over ``band_hz``.
    """

    name: str
    channels: tuple[str, ...]
    target_db: float
    tolerance_db: float
    band_hz: tuple[float, float]


@dataclass(frozen=True)
class Description:
    """A whole validated filter description."""

    source: str  # path as the user gave it
    name: str  # C identifier prefix
    sample_rate_hz: float
    implementation: Implementation
    budget: Budget
    channels: tuple[ChannelSpec, ...]
    sha256: str  # of the file's bytes, for header banners and staleness checks
    sums: tuple[SumSpec, ...] = ()  # [[sum]] tables: sums of channels checked against a level

    def channel(self, name: str) -> ChannelSpec:
        for ch in self.channels:
            if ch.name == name:
                return ch
        raise DescriptionError(
            "<command line>",
            f"no channel '{name}' in {self.source}; channels are "
            + ", ".join(c.name for c in self.channels)
            + close_match(name, [c.name for c in self.channels]),
            key=setting("channel"),
        )


# ------------------------------------------------------------------ vocabulary

# the stage kinds, their keys, the kind tuples and MAX_IIR_ORDER / MAX_FIR_TAPS are
# declared in coefc.stagekinds (one table per design module) and imported above
MAX_DELAY_SAMPLES = 1 << 20
MAX_COEFFICIENT = 1e6  # raw coefficients (sos, transfer, fir): 120 dB of gain in one coefficient
#: Bounds on the work one description can ask for (a merge gate must finish): the
#: file itself, and per channel the totals after design.  Each is far above what
#: a product needs (the bundled examples use a few percent of each).
MAX_DESCRIPTION_BYTES = 1 << 20
MAX_KEY_DEPTH = 8  # dotted-key segments; descriptions use at most 3
MAX_CHANNELS = 64
MAX_STAGES = 64  # per channel
MAX_CHANNEL_TAPS = 16384  # FIR taps of one channel, all stages together
MAX_CHANNEL_SECTIONS = 64  # second-order sections of one channel
MAX_CHANNEL_DELAY_SAMPLES = 1 << 20  # delay of one channel, all stages together
#: Sample rates accepted: from slow sensors to fast converters; beyond them the
#: header's rate macro and the WAV header cannot state the rate.
MIN_SAMPLE_RATE_HZ = 0.001
MAX_SAMPLE_RATE_HZ = 1e9

#: C99 keywords (ISO/IEC 9899:1999, section 6.4.1); names of descriptions and channels become C identifiers
C99_KEYWORDS = frozenset(
    "auto break case char const continue default do double else enum extern float for goto if "
    "inline int long register restrict return short signed sizeof static struct switch typedef "
    "union unsigned void volatile while _Bool _Complex _Imaginary".split()
)
_C_IDENT = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")

# Value checkers: each takes (value, where) and returns the normalised value or
# raises through where.fail(...).  ``where`` is a _Place.


class _Place:
    """Where a value sits in the file, to build errors."""

    def __init__(self, source: str, channel: str | None = None, stage: int | None = None,
                 key: str | None = None, table: str | None = None) -> None:
        self.source, self.channel, self.stage, self.key, self.table = source, channel, stage, key, table

    def at(self, key: str) -> "_Place":
        return _Place(self.source, self.channel, self.stage, key, self.table)

    def fail(self, message: str) -> DescriptionError:
        key = self.key
        if self.table and key:
            key = f"{self.table}.{key}"
        elif self.table:
            key = self.table
        return DescriptionError(self.source, message, channel=self.channel, stage=self.stage, key=key)


def _number(v, where: _Place) -> float:
    try:
        return as_number(v)
    except LimitError as e:
        raise where.fail(str(e)) from None


def _positive(v, where: _Place) -> float:
    x = _number(v, where)
    if x <= 0:
        raise where.fail(f"must be greater than 0, got {_fmt(x)}; write a positive number")
    return x


def _non_negative(v, where: _Place) -> float:
    x = _number(v, where)
    if x < 0:
        raise where.fail(f"must not be negative, got {_fmt(x)}")
    return x


def _integer(v, where: _Place) -> int:
    if isinstance(v, bool) or not isinstance(v, int):
        if isinstance(v, float) and math.isfinite(v) and v == int(v):
            raise where.fail(f"expected a whole number, got {v}; write it without a decimal point ({int(v)})")
        raise where.fail(f"expected a whole number, got {_type_name(v)}")
    return v


def _positive_int(v, where: _Place) -> int:
    n = _integer(v, where)
    if n <= 0:
        raise where.fail(f"must be a whole number greater than 0, got {n}")
    return n


def _boolean(v, where: _Place) -> bool:
    if not isinstance(v, bool):
        raise where.fail(f"expected true or false, got {_type_name(v)}")
    return v


def _string(v, where: _Place) -> str:
    if not isinstance(v, str):
        raise where.fail(f"expected a string, got {_type_name(v)}; put it in double quotes")
    return v


def _choice(*allowed: str, stems: tuple[tuple[str, str], ...] = ()):
    def check(v, where: _Place) -> str:
        s = _string(v, where)
        if s not in allowed:
            raise where.fail(f"unknown value '{s}'{close_match(s, allowed, stems)}; use one of {', '.join(allowed)}")
        return s

    return check


def _number_list(min_len: int = 1, max_len: int | None = None):
    def check(v, where: _Place) -> tuple[float, ...]:
        if not isinstance(v, list):
            raise where.fail(f"expected a list of numbers, got {_type_name(v)}; write e.g. [1.0, 0.5]")
        if len(v) < min_len:
            raise where.fail(f"needs at least {min_len} number(s), got {len(v)}")
        if max_len is not None and len(v) > max_len:
            raise where.fail(f"has {len(v)} numbers; at most {max_len} are accepted")
        out = []
        for i, x in enumerate(v):
            if isinstance(x, bool) or not isinstance(x, (int, float)):
                raise where.fail(f"item {i + 1} is {_type_name(x)}; every item must be a number")
            if not math.isfinite(float(x)):
                raise where.fail(f"item {i + 1} is {x}; every item must be a finite number")
            if abs(float(x)) > MAX_COEFFICIENT:
                raise where.fail(f"item {i + 1} is {x}; coefficients up to {MAX_COEFFICIENT:g} in magnitude are "
                                 "accepted (scale the filter: a gain stage states the level)")
            out.append(float(x))
        return tuple(out)

    return check


def _sections(v, where: _Place) -> tuple[tuple[float, ...], ...]:
    if not isinstance(v, list) or not v:
        raise where.fail("expected a non-empty list of sections [[b0, b1, b2, a0, a1, a2], ...]")
    if len(v) > MAX_IIR_ORDER:
        raise where.fail(f"{len(v)} sections; at most {MAX_IIR_ORDER} are accepted")
    rows = []
    for i, row in enumerate(v):
        if not isinstance(row, list) or len(row) != 6:
            raise where.fail(f"section {i + 1} must be a list of 6 numbers [b0, b1, b2, a0, a1, a2]")
        rows.append(_number_list(6, 6)(row, where.at(f"{where.key}[{i + 1}]") if where.key else where))
    return tuple(rows)


def _frequency(v, where: _Place) -> float:
    return _positive(v, where)


def _band(v, where: _Place, allow_zero: bool = False) -> tuple[float, float]:
    if not isinstance(v, list) or len(v) != 2:
        got = _type_name(v) if not isinstance(v, list) else f"a list of {len(v)} items"
        raise where.fail(f"expected a band [low_hz, high_hz], got {got}")
    lo = _non_negative(v[0], where) if allow_zero else _frequency(v[0], where)
    hi = _frequency(v[1], where)
    if lo >= hi:
        raise where.fail(f"band [{_fmt(lo)}, {_fmt(hi)}] Hz: the low edge must be below the high edge")
    return (lo, hi)


def _file_name(v, where: _Place) -> str:
    s = _string(v, where)
    if not s.strip():
        raise where.fail("empty file name; name a file relative to the description, e.g. \"woofer.csv\"")
    return s


# Stage schemas: kind -> {key: checker}, built from the tables of stage kinds
# (coefc.stagekinds).  ``kind`` itself is always allowed.  Edge keys (cutoff_hz,
# passband_hz, stopband_hz) are a number for low/high-pass kinds and a band for
# band-pass/stop kinds: the checker is the marker _EDGE, resolved in _stage.
_EDGE = "edge"


def _checker(key):
    """The checker of one key rule of :class:`coefc.stagekinds.Key`."""
    if key.rule == "edge":
        return _EDGE
    if key.rule == "choice":
        return _choice(*key.choices)
    if key.rule == "numbers":
        return _number_list(*key.length)
    return {"frequency": _frequency, "positive": _positive, "non_negative": _non_negative, "number": _number,
            "integer": _integer, "positive_int": _positive_int, "boolean": _boolean,
            "sections": _sections, "band": _band, "file": _file_name}[key.rule]


STAGE_KEYS: dict[str, dict] = {kind: {k: _checker(key) for k, key in sk.keys.items()}
                               for kind, sk in STAGE_KINDS_TABLE.items()}
STAGE_KINDS = tuple(STAGE_KEYS)

_TOP_KEYS = ("name", "sample_rate_hz", "implementation", "budget", "channel", "sum")
_SUM_KEYS = ("name", "channels", "target_db", "tolerance_db", "band_hz")
MAX_SUMS = 16
_IMPL_KEYS = ("target", "structure", "data", "coef", "acc_bits", "rounding", "overflow", "scaling")
#: [budget] keys: one per budget check (coefc.checks.CHECKS), then the keys that shape checks
_BUDGET_KEYS = tuple(c.name for c in BUDGET_CHECKS) + ("passband", "stopband", "tone_levels_dbfs")
_CHANNEL_KEYS = ("name", "stages", "budget", "structure")
#: the table of budgets by data-word width, inside [budget]
WHEN_DATA_BITS = "when_data_bits"


# ------------------------------------------------------------------- loading


def load_description(path) -> Description:
    """Read and validate a description file.

    Parameters
    ----------
    path : str or os.PathLike
        The TOML file, as the user named it (kept verbatim in messages).

    Returns
    -------
    Description
        The validated description (stage parameters normalised: numbers as
        floats, whole numbers as ints, lists as tuples).

    Raises
    ------
    DescriptionError
        For a missing or unreadable file, bad TOML, or any invalid content.
    """
    source = str(path)
    p = Path(path)
    try:
        raw_bytes = p.read_bytes()
    except FileNotFoundError:
        raise DescriptionError(source, "file not found; check the path") from None
    except IsADirectoryError:
        raise DescriptionError(source, "is a directory; name a .toml description file inside it") from None
    except PermissionError:
        raise DescriptionError(source, "permission denied; make the file readable") from None
    except OSError as e:
        raise DescriptionError(source, f"cannot read the file ({e.strerror or e}); check the path") from None
    return parse_description(raw_bytes, source)


def parse_description(raw_bytes: bytes, source: str = "<description>") -> Description:
    """Validate description *raw_bytes* (TOML, UTF-8); *source* names it in errors."""
    try:
        text = raw_bytes.decode("utf-8")
    except UnicodeDecodeError as e:
        line = raw_bytes[: e.start].count(b"\n") + 1
        raise DescriptionError(source, f"not UTF-8 text (byte {e.start + 1}); save the file as UTF-8",
                               line=line) from None
    _check_size(text, len(raw_bytes), source)
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        msg = str(e)
        m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
        line = int(m.group(1)) if m else None
        if m:
            msg = msg[: m.start()].strip() + f" at column {m.group(2)}"
        elif "end of document" in msg:
            line = text.count("\n") + 1
        raise DescriptionError(source, f"TOML syntax error: {msg}; fix the TOML syntax", line=line) from None
    except RecursionError:
        raise DescriptionError(source, "arrays or tables nested too deeply to read; flatten the TOML") from None
    return _validate(doc, source, hashlib.sha256(raw_bytes).hexdigest())


def _check_size(text: str, n_bytes: int, source: str) -> None:
    """Refuse a file too large, or keys dotted too deep, before the TOML parser sees it.

    A key of 20,000 dotted segments (40 KB) costs the parser 1.5 GB and 14 s; the
    scan looks only at what stands before ``=`` and inside ``[table]`` headers.
    """
    if n_bytes > MAX_DESCRIPTION_BYTES:
        raise DescriptionError(source, f"{n_bytes} bytes; a description may have at most "
                               f"{MAX_DESCRIPTION_BYTES >> 10} KiB (keep long tap lists in fewer digits)")
    for lineno, line in enumerate(text.splitlines(), 1):
        s = line.lstrip()
        head = s if s.startswith("[") else s.split("=", 1)[0] if "=" in s else ""
        if head.count(".") >= MAX_KEY_DEPTH:
            raise DescriptionError(source, f"a key with {head.count('.') + 1} dotted parts; descriptions "
                                   f"nest at most {MAX_KEY_DEPTH} deep: write the key plainly", line=lineno)


def _check_keys(table: Mapping, allowed, where: _Place, what: str) -> None:
    for key in table:
        if key not in allowed:
            raise where.at(key).fail(
                f"unknown key in {what}{close_match(key, allowed)}; known keys: {', '.join(allowed)}")


def _c_name(v, where: _Place, what: str) -> str:
    s = _string(v, where)
    if not _C_IDENT.match(s):
        raise where.fail(f"{what} '{s}' cannot become a C identifier; use letters, digits and '_' "
                         "and do not start with a digit")
    if s in C99_KEYWORDS:
        raise where.fail(f"{what} '{s}' is a C keyword; choose another name (e.g. '{s}_filter')")
    return s


def _validate(doc: dict, source: str, sha: str) -> Description:
    top = _Place(source)
    _check_keys(doc, _TOP_KEYS, top, "the file")
    for key in ("name", "sample_rate_hz"):
        if key not in doc:
            raise top.at(key).fail(f"missing; add `{key} = ...` at the top of the file")
    name = _c_name(doc["name"], top.at("name"), "name")
    fs = _positive(doc["sample_rate_hz"], top.at("sample_rate_hz"))
    if not MIN_SAMPLE_RATE_HZ <= fs <= MAX_SAMPLE_RATE_HZ:
        raise top.at("sample_rate_hz").fail(
            f"{_fmt(fs)} Hz is outside {_fmt(MIN_SAMPLE_RATE_HZ)} Hz .. {_fmt(MAX_SAMPLE_RATE_HZ)} Hz; "
            "write the rate the samples arrive at, in Hz")
    impl = _implementation(doc.get("implementation", {}), source)
    budget = _budget(doc.get("budget", {}), source, fs)

    if "channel" not in doc:
        raise top.at("channel").fail("no channels; add at least one [[channel]] table with name and stages")
    chans = doc["channel"]
    if not isinstance(chans, list) or not all(isinstance(c, dict) for c in chans):
        raise top.at("channel").fail("must be an array of tables; write each channel as [[channel]]")
    if not chans:
        raise top.at("channel").fail("no channels; add at least one [[channel]] table with name and stages")
    if len(chans) > MAX_CHANNELS:
        raise top.at("channel").fail(f"{len(chans)} channels; at most {MAX_CHANNELS} per description: split "
                                     "the description into several files")
    channels: list[ChannelSpec] = []
    seen: set[str] = set()
    for i, ch in enumerate(chans):
        channels.append(_channel(ch, i + 1, source, fs, seen))
    sums = _sums(doc.get("sum", []), source, fs, [c.name for c in channels])
    return Description(source=source, name=name, sample_rate_hz=fs, implementation=impl, budget=budget,
                       channels=tuple(channels), sha256=sha, sums=sums)


def _sums(v, source: str, fs: float, channel_names: list[str]) -> tuple[SumSpec, ...]:
    """The ``[[sum]]`` tables, validated: known channels, a band within Nyquist, a positive tolerance."""
    top = _Place(source, key="sum")
    if not isinstance(v, list) or not all(isinstance(t, dict) for t in v):
        raise top.fail("must be an array of tables; write each sum as [[sum]]")
    if len(v) > MAX_SUMS:
        raise top.fail(f"{len(v)} sums; at most {MAX_SUMS} per description")
    out: list[SumSpec] = []
    for i, t in enumerate(v):
        label = f"sum[{i + 1}]"
        if "name" not in t:
            raise _Place(source, key=f"{label}.name").fail("missing; give the sum a name = \"...\"")
        name = _string(t["name"], _Place(source, key=f"{label}.name"))
        if not name.strip() or len(name) > 64:
            raise _Place(source, key=f"{label}.name").fail("write a short name (1 to 64 characters)")
        if any(s.name == name for s in out):
            raise _Place(source, key=f"{label}.name").fail(f"duplicate sum name '{name}'; give every sum its own "
                                                           "name")
        where = _Place(source, table=label)
        _check_keys(t, _SUM_KEYS, where, "[[sum]]")
        for key in ("channels", "target_db", "tolerance_db", "band_hz"):
            if key not in t:
                example = {"channels": 'channels = ["low", "high"]', "target_db": "target_db = 0",
                           "tolerance_db": "tolerance_db = 0.5", "band_hz": "band_hz = [100, 10000]"}[key]
                raise where.at(key).fail(f"missing; add {example}")
        chans = t["channels"]
        w = where.at("channels")
        if not isinstance(chans, list) or not all(isinstance(c, str) for c in chans):
            raise w.fail('expected a list of channel names, e.g. ["low", "high"]')
        if len(chans) < 2:
            raise w.fail(f"names {len(chans)} channel(s); a sum adds at least two channels")
        for c in chans:
            if c not in channel_names:
                raise w.fail(f"no channel '{c}'{close_match(c, channel_names)}; channels are "
                             + ", ".join(channel_names))
        if len(set(chans)) != len(chans):
            raise w.fail("names a channel twice; name each channel once")
        target = _number(t["target_db"], where.at("target_db"))
        if not -200.0 <= target <= 200.0:
            raise where.at("target_db").fail(f"{_fmt(target)} dB is not a level; write the level of the sum in dB, "
                                             "e.g. 0")
        tol = _positive(t["tolerance_db"], where.at("tolerance_db"))
        wb = where.at("band_hz")
        lo, hi = _band(t["band_hz"], wb, allow_zero=True)
        if hi > fs / 2:
            raise wb.fail(f"band edge {_fmt(hi)} Hz is above Nyquist ({_nyq_text(fs)}); end the band at or below "
                          f"{_fmt(fs / 2)} Hz")
        out.append(SumSpec(name, tuple(chans), target, tol, (lo, hi)))
    return tuple(out)


def _table(v, where: _Place, header: str) -> dict:
    if not isinstance(v, dict):
        raise where.fail(f"must be a table; write it as [{header}]")
    return v


def _implementation(t, source: str) -> Implementation:
    from .program import SCALINGS, STRUCTURES
    from .qformat import OVERFLOW_MODES, ROUNDING_HINTS, ROUNDING_MODES, QFormat

    where = _Place(source, table="implementation")
    t = _table(t, _Place(source, key="implementation"), "implementation")
    _check_keys(t, _IMPL_KEYS, where, "[implementation]")
    out: dict = {}
    if "target" in t:
        out["target"] = _string(t["target"], where.at("target"))
        if not out["target"].strip():
            raise where.at("target").fail("is empty; name a target such as mcu32")
    for key, allowed in (("structure", STRUCTURES + ("auto",)), ("rounding", ROUNDING_MODES),
                         ("overflow", OVERFLOW_MODES), ("scaling", SCALINGS)):
        if key in t:
            stems = ROUNDING_HINTS if key == "rounding" else ()
            out[key] = _choice(*allowed, stems=stems)(t[key], where.at(key))
    for key in ("data", "coef"):
        if key in t:
            s = _string(t[key], where.at(key))
            try:
                QFormat.parse(s)
            except ValueError as e:
                raise where.at(key).fail(str(e)) from None
            out[key] = s
    if "acc_bits" in t:
        n = _integer(t["acc_bits"], where.at("acc_bits"))
        if not 2 <= n <= 128:
            raise where.at("acc_bits").fail(f"{n} bits is out of range; use 2..128")
        out["acc_bits"] = n
    return Implementation(**out)


def _budget(t, source: str, fs: float) -> Budget:
    where = _Place(source, table="budget")
    t = _table(t, _Place(source, key="budget"), "budget")
    _check_keys(t, _BUDGET_KEYS + (WHEN_DATA_BITS,), where, "[budget]")
    by_width = t.get(WHEN_DATA_BITS)
    rest = {k: v for k, v in t.items() if k != WHEN_DATA_BITS}
    tables = []
    if by_width is not None:
        w = where.at(WHEN_DATA_BITS)
        if not isinstance(by_width, dict) or not all(isinstance(v, dict) for v in by_width.values()):
            raise w.fail("must hold one table per data-word width; write e.g. [budget.when_data_bits.16] "
                         "with budget keys in it")
        for width, table in by_width.items():
            if not (width.isdigit() and 2 <= int(width) <= 64 and str(int(width)) == width):
                raise w.fail(f"'{width}' is not a data-word width; name the table by the width in bits, "
                             "2 to 64, e.g. [budget.when_data_bits.16]")
            header = f"budget.{WHEN_DATA_BITS}.{width}"
            vals = _budget_values(table, _Place(source, table=header), fs, header)
            tables.append((int(width), tuple(vals.items())))
    return Budget(**_budget_values(rest, where, fs, "budget"), when_data_bits=tuple(sorted(tables)))


def _budget_values(t, where: _Place, fs: float, header: str) -> dict:
    """The budget keys a ``[budget]`` (or ``[channel.budget]``) table sets, validated."""
    t = _table(t, _Place(where.source, where.channel, key="budget"), header)
    _check_keys(t, _BUDGET_KEYS, where, f"[{header}]")
    out: dict = {}
    for check in BUDGET_CHECKS:
        if check.name in t:
            try:
                out[check.name] = check.validate(t[check.name])
            except LimitError as e:
                raise where.at(check.name).fail(str(e)) from None
    if "tone_levels_dbfs" in t:
        w = where.at("tone_levels_dbfs")
        levels = _number_list(1, 8)(t["tone_levels_dbfs"], w)
        for x in levels:
            if not -200.0 <= x <= 0.0:
                raise w.fail(f"{_fmt(x)} dBFS is not a tone level; write levels from -200 to 0 dBFS "
                             "(AES17), e.g. [-20, -60]")
        out["tone_levels_dbfs"] = levels
    nyq = fs / 2
    for key in ("passband", "stopband"):
        if key in t:
            w = where.at(key)
            v = t[key]
            if not isinstance(v, list) or not v:
                raise w.fail("expected a list of bands [[low_hz, high_hz], ...]")
            bands = []
            for b in v:
                lo, hi = _band(b, w, allow_zero=True) if isinstance(b, list) else _band_error(b, w)
                if hi > nyq:
                    raise w.fail(f"band edge {_fmt(hi)} Hz is above Nyquist ({_nyq_text(fs)}); "
                                 f"end the band at or below {_fmt(nyq)} Hz")
                bands.append((lo, hi))
            out[key] = tuple(bands)
    return out


def _band_error(b, w: _Place):
    raise w.fail(f"each band must be a list [low_hz, high_hz], got {_type_name(b)}")


def _nyq_text(fs: float) -> str:
    return f"sample_rate_hz={_fmt(fs)} -> {_fmt(fs / 2)} Hz"


def _channel(ch: dict, number: int, source: str, fs: float, seen: set[str]) -> ChannelSpec:
    where = _Place(source, key=None)
    if "name" not in ch:
        raise _Place(source, key="name").fail(f"channel {number} has no name; add name = \"...\" to it")
    name = _c_name(ch["name"], _Place(source, key="name"), "channel name")
    where = _Place(source, channel=name)
    _check_keys(ch, _CHANNEL_KEYS, where, "[[channel]]")
    if name in seen:
        raise where.at("name").fail("duplicate channel name; give every channel its own name")
    seen.add(name)
    if "stages" not in ch:
        raise where.at("stages").fail("missing; add stages = [ { kind = \"...\", ... }, ... ]")
    stages = ch["stages"]
    if not isinstance(stages, list):
        raise where.at("stages").fail(f"expected a list of stage tables, got {_type_name(stages)}")
    if not stages:
        raise where.at("stages").fail("empty channel; add at least one stage (e.g. { kind = \"gain\", db = 0 })")
    if len(stages) > MAX_STAGES:
        raise where.at("stages").fail(f"{len(stages)} stages; at most {MAX_STAGES} per channel: merge stages "
                                      "or split the channel")
    budget = _budget_values(ch["budget"], _Place(source, channel=name, table="budget"), fs, "channel.budget") \
        if "budget" in ch else {}
    structure = None
    if "structure" in ch:
        from .program import STRUCTURES

        structure = _choice(*STRUCTURES, "auto")(ch["structure"], where.at("structure"))
    return ChannelSpec(name=name, stages=_stages_at_their_rates(stages, source, name, fs),
                       budget=MappingProxyType(budget), structure=structure)


def _stages_at_their_rates(stages, source: str, channel: str, fs: float) -> tuple:
    """Every stage validated at its own rate: a ``decimate``/``interpolate`` stage changes the rate of
    the stages after it (their frequencies are checked against the new Nyquist frequency)."""
    out = []
    for i, s in enumerate(stages):
        st = _stage(s, i + 1, source, channel, fs)
        out.append(st)
        if st.kind in RATE_KINDS:
            w = _Place(source, channel=channel, stage=i + 1).at("factor")
            if "factor" not in st.params:
                raise w.fail(f"missing; give the integer rate factor, e.g. {{ kind = \"{st.kind}\", factor = 2 }}")
            m = st.params["factor"]
            if m < 2 or m > MAX_RATE_FACTOR:
                raise w.fail(f"factor {m} does not change the rate; use an integer from 2 to {MAX_RATE_FACTOR}")
            if st.kind == "cic-decimator":
                _check_cic(st.params, _Place(source, channel=channel, stage=i + 1))
            if st.kind in DECIMATING_KINDS:
                new = fs / m
                if new != int(new) or int(new) * m != fs:
                    raise w.fail(f"{_fmt(fs)} Hz / {m} = {new:g} Hz is not a whole number of hertz; choose a factor "
                                 f"that divides the rate {_fmt(fs)} Hz")
                fs = new
            else:
                fs = fs * m
    return tuple(out)


def _check_cic(params, where: "_Place") -> None:
    """A CIC decimator's stages and differential delay within their limits, and its register growth
    ``N log2(R D)`` (Hogenauer 1981) small enough for a 64-bit register beside the data word."""
    from .program import cic_growth

    if "stages" not in params:
        raise where.at("stages").fail("missing; give the number of integrator/comb pairs, e.g. stages = 4")
    n, d = params["stages"], params.get("differential_delay", 1)
    if n > MAX_CIC_STAGES:
        raise where.at("stages").fail(f"{n} stages; use 1 to {MAX_CIC_STAGES} (each stage adds log2(R*D) bits "
                                      "of register growth)")
    if d > MAX_CIC_DELAY:
        raise where.at("differential_delay").fail(f"{d} samples; use 1 to {MAX_CIC_DELAY} (1 or 2 is usual)")
    g = cic_growth(params["factor"], n, d)
    if g > MAX_CIC_GROWTH:
        raise where.at("stages").fail(f"the register grows by N*log2(R*D) = {g} bits, more than {MAX_CIC_GROWTH} "
                                      "leave room for the data word in 64 bits; use fewer stages or a smaller "
                                      "factor (decimate the rest with FIR stages)")


def _stage(s, index: int, source: str, channel: str, fs: float) -> StageSpec:
    where = _Place(source, channel=channel, stage=index)
    if not isinstance(s, dict):
        raise where.fail(f"expected a table {{ kind = \"...\", ... }}, got {_type_name(s)}")
    if "kind" not in s:
        raise where.at("kind").fail("missing; every stage needs kind = \"...\" "
                                    f"(one of {', '.join(STAGE_KINDS)})")
    kind = _string(s["kind"], where.at("kind"))
    if kind not in STAGE_KEYS:
        raise where.at("kind").fail(f"unknown stage kind '{kind}'{close_match(kind, STAGE_KINDS)}; "
                                    f"use one of {', '.join(STAGE_KINDS)}")
    schema = STAGE_KEYS[kind]
    allowed = ("kind", *schema)
    _check_keys(s, allowed, where, f"a '{kind}' stage")
    banded = kind.endswith("bandpass") or kind.endswith("bandstop")
    params: dict = {}
    for key, value in s.items():
        if key == "kind":
            continue
        check = schema[key]
        w = where.at(key)
        if check is _EDGE:
            if banded:
                if not isinstance(value, list):
                    raise w.fail(f"a {kind} needs a band [low_hz, high_hz], got {_type_name(value)}")
                params[key] = _band(value, w)
            else:
                if isinstance(value, list):
                    raise w.fail(f"a {kind} needs a single frequency in Hz, not a list")
                params[key] = _frequency(value, w)
        else:
            params[key] = check(value, w)
        if key in _FREQ_KEYS:
            edges = params[key] if isinstance(params[key], tuple) else (params[key],)
            for f in edges:
                if f >= fs / 2:
                    raise w.fail(f"{_fmt(f)} Hz is at or above Nyquist ({_nyq_text(fs)}); "
                                 f"use a frequency below {_fmt(fs / 2)} Hz")
    if "order" in params and params["order"] > MAX_IIR_ORDER:
        raise where.at("order").fail(f"order {params['order']} is too high; use at most {MAX_IIR_ORDER} "
                                     "(split the filter or relax the requirement)")
    if kind in FIR_KINDS and "taps" in params and params["taps"] > MAX_FIR_TAPS:
        raise where.at("taps").fail(f"{params['taps']} taps is too many; use at most {MAX_FIR_TAPS}")
    if kind == "delay" and "samples" in params:
        n = params["samples"]
        if n < 0:
            raise where.at("samples").fail(f"{n} samples: a delay cannot be negative")
    return StageSpec(index=index, kind=kind, params=MappingProxyType(params))
