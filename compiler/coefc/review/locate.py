"""Lines of a description's keys, found by a light scan of the TOML text.

:mod:`tomllib` returns values without positions; an annotation on a review needs
the line of the ``[budget]`` key or of the stage a finding concerns.  This scan
follows only what descriptions use: table headers (``[budget]``, ``[[channel]]``,
``[channel.budget]``, ``[[channel.stages]]``), ``key = value`` lines (dotted keys
such as ``budget.overflow`` inside a channel), inline tables, and arrays that span
lines (a ``stages = [ ... ]`` array: each ``{`` at its top level starts a stage).
Strings and comments are skipped when brackets are counted.  It never decides
what a value is -- the description was validated by :mod:`coefc.spec` first -- so
a construct it does not follow costs only a less precise line, never a wrong verdict.

References
----------
TOML v1.0.0, https://toml.io/en/v1.0.0 (tables, arrays of tables, inline tables,
dotted keys).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

_BARE_KEY = r'[A-Za-z0-9_-]+|"[^"\\]*"|\'[^\']*\''
_KEY = re.compile(rf'^\s*((?:{_BARE_KEY})(?:\s*\.\s*(?:{_BARE_KEY}))*)\s*=')
_HEADER = re.compile(r'^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?')
_NAME = re.compile(r'name\s*=\s*(?:"((?:[^"\\]|\\.)*)"|\'([^\']*)\')')


@dataclass
class ChannelLines:
    """Lines of one ``[[channel]]``: its header, ``name``, ``stages`` and each stage, its budget keys."""

    header: int
    name: str | None = None
    name_line: int | None = None
    stages_line: int | None = None
    stage_lines: list[int] = field(default_factory=list)
    budget_line: int | None = None
    budget_keys: dict[str, int] = field(default_factory=dict)

    @property
    def line(self) -> int:
        """The line that names the channel (its ``name``, else its header)."""
        return self.name_line or self.header

    def stage(self, index: int) -> int:
        """The line of stage *index* (1-based), or of the channel when it cannot be told."""
        if 1 <= index <= len(self.stage_lines):
            return self.stage_lines[index - 1]
        return self.stages_line or self.line


@dataclass
class Lines:
    """Where the keys of one description stand (1-based line numbers)."""

    budget_line: int | None = None
    budget_keys: dict[str, int] = field(default_factory=dict)
    top_keys: dict[str, int] = field(default_factory=dict)
    channels: list[ChannelLines] = field(default_factory=list)
    #: ``[budget.when_data_bits.N]``: N (as written) -> {key: line}
    width_keys: dict[str, dict[str, int]] = field(default_factory=dict)

    def channel(self, name: str) -> ChannelLines | None:
        for ch in self.channels:
            if ch.name == name:
                return ch
        return None

    def budget_key(self, key: str, channel: str | None = None, data_bits: int | None = None) -> int | None:
        """The line that sets budget *key* for *channel*: its own ``[channel.budget]``, else the
        ``[budget.when_data_bits.N]`` table of its data word's width *data_bits*, else ``[budget]``."""
        ch = self.channel(channel) if channel is not None else None
        if ch is not None and key in ch.budget_keys:
            return ch.budget_keys[key]
        if data_bits is not None and key in self.width_keys.get(str(data_bits), {}):
            return self.width_keys[str(data_bits)][key]
        return self.budget_keys.get(key)


def _unquote(part: str) -> str:
    part = part.strip()
    return part[1:-1] if len(part) >= 2 and part[0] == part[-1] and part[0] in "\"'" else part


def _split_key(key: str) -> list[str]:
    return [_unquote(p) for p in re.findall(_BARE_KEY, key)]


def _code(line: str) -> str:
    """*line* with string contents blanked and any comment removed (brackets inside strings do not count)."""
    out = []
    i, n = 0, len(line)
    while i < n:
        c = line[i]
        if c == "#":
            break
        if c in "\"'":
            j = i + 1
            while j < n and line[j] != c:
                j += 2 if c == '"' and line[j] == "\\" else 1
            out.append(c + " " * (min(j, n) - i - 1) + c)
            i = j + 1
            continue
        out.append(c)
        i += 1
    return "".join(out)


def scan(text: str) -> Lines:
    """Scan description *text* for the lines of its budget keys, channels and stages."""
    lines = Lines()
    table: tuple[str, ...] = ()
    depth = 0  # open [ and { of a value that spans lines
    in_stages = False  # that value is a channel's stages array
    inline_budget = False  # that value is a channel's inline budget table

    def channel() -> ChannelLines | None:
        return lines.channels[-1] if lines.channels else None

    def record_key(path: list[str], lineno: int) -> None:
        ch = channel()
        if len(table) == 3 and table[:2] == ("budget", "when_data_bits"):
            lines.width_keys.setdefault(table[2], {}).setdefault(path[0], lineno)
        elif table == ("budget",) or (not table and path[:1] == ["budget"]):
            sub = path if table else path[1:]
            if sub:
                lines.budget_keys.setdefault(sub[0], lineno)
        elif table == ("channel",) and ch is not None and path[:1] == ["budget"] and len(path) > 1:
            ch.budget_keys.setdefault(path[1], lineno)
        elif table == ("channel", "budget") and ch is not None:
            ch.budget_keys.setdefault(path[0], lineno)
        elif not table:
            lines.top_keys.setdefault(path[0], lineno)

    for lineno, raw in enumerate(text.splitlines(), 1):
        code = _code(raw)
        start = 0
        if depth == 0:
            h = _HEADER.match(code)
            if h and not _KEY.match(code):
                parts = tuple(_split_key(raw[h.start(2):h.end(2)]))
                table = parts
                if h.group(1) == "[[" and parts == ("channel",):
                    lines.channels.append(ChannelLines(header=lineno))
                elif h.group(1) == "[[" and parts == ("channel", "stages") and channel() is not None:
                    channel().stage_lines.append(lineno)
                elif parts == ("channel", "budget") and channel() is not None:
                    channel().budget_line = lineno
                elif parts == ("budget",):
                    lines.budget_line = lineno
                continue
            k = _KEY.match(code)
            if not k:
                continue
            path = _split_key(raw[k.start(1):k.end(1)])
            record_key(path, lineno)
            ch = channel()
            in_stages = table == ("channel",) and path == ["stages"] and ch is not None
            inline_budget = table == ("channel",) and path == ["budget"] and ch is not None
            if in_stages:
                ch.stages_line = lineno
            if inline_budget:
                ch.budget_line = lineno
            if table == ("channel",) and path == ["name"] and ch is not None and ch.name is None:
                m = _NAME.search(raw)
                if m:
                    ch.name, ch.name_line = (m.group(1) if m.group(1) is not None else m.group(2)), lineno
            start = k.end()
        ch = channel()
        for i in range(start, len(code)):
            c = code[i]
            if c in "[{":
                depth += 1
                if in_stages and c == "{" and depth == 2 and ch is not None:
                    ch.stage_lines.append(lineno)
            elif c in "]}":
                depth = max(0, depth - 1)
        if inline_budget and ch is not None:
            for m in re.finditer(rf'(?:^|[{{,])\s*({_BARE_KEY})\s*=', code[start:]):
                ch.budget_keys.setdefault(_unquote(raw[start + m.start(1):start + m.end(1)]), lineno)
        if depth == 0:
            in_stages = inline_budget = False
    return lines
