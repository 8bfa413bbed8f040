"""What every stage designer shares: the stage's context in, a StageResult out.

A designer receives a :class:`StageContext` (validated parameters, sample rate and
the place in the file for error messages) and returns a :class:`StageResult`
(float blocks plus the facts the design report prints).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field

from ..blocks import Block
from ..errors import DescriptionError

#: Stopband attenuation (dB) a design given by requirements keeps beyond ``attenuation_db``
#: for coefficient quantisation, unless the stage says otherwise with ``margin_db``.
DEFAULT_MARGIN_DB = 0.5
#: Largest ``margin_db`` accepted: a margin is for coefficient rounding, not a second requirement.
MAX_MARGIN_DB = 20.0


@dataclass(frozen=True)
class StageContext:
    """One stage of one channel, as the designers see it."""

    source: str
    channel: str
    index: int  # 1-based
    kind: str
    fs: float
    params: Mapping

    @property
    def nyquist(self) -> float:
        return self.fs / 2

    def error(self, message: str, key: str | None = None) -> DescriptionError:
        """A DescriptionError placed at this stage (and *key*, if given)."""
        return DescriptionError(self.source, message, channel=self.channel, stage=self.index, key=key)

    def has(self, key: str) -> bool:
        return key in self.params

    def get(self, key: str, default=None):
        return self.params.get(key, default)

    def require(self, key: str, hint: str):
        """The value of *key*, or an error saying it is missing and what to write."""
        if key not in self.params:
            raise self.error(f"missing; {hint}", key)
        return self.params[key]

    def only(self, allowed: Iterable[str], why: str) -> None:
        """Reject any given key outside *allowed* (``kind`` is always allowed)."""
        allowed = set(allowed)
        for key in self.params:
            if key not in allowed:
                raise self.error(f"does not apply {why}; remove it", key)

    def margin_db(self) -> float:
        """The quantisation margin of a design given by requirements (``margin_db``, default 0.5 dB)."""
        m = float(self.get("margin_db", DEFAULT_MARGIN_DB))
        if m > MAX_MARGIN_DB:
            raise self.error(f"{m:g} dB is more than coefficient rounding needs; use at most {MAX_MARGIN_DB:g} dB "
                             f"(the default is {DEFAULT_MARGIN_DB:g} dB), or raise attenuation_db instead",
                             "margin_db")
        return m

    def one_of(self, keys: tuple[str, ...], required: bool = True) -> str | None:
        """The single key of *keys* that is given (error on none when required, or several)."""
        given = [k for k in keys if k in self.params]
        if len(given) > 1:
            raise self.error(f"give only one of {', '.join(given)}", given[1])
        if not given:
            if required:
                raise self.error(f"needs one of {', '.join(keys)}")
            return None
        return given[0]


@dataclass(frozen=True)
class StageResult:
    """A designed stage: its blocks in signal order and what the report says about it."""

    blocks: tuple[Block, ...]
    text: str
    order: int = 0
    sections: int = 0
    taps: int = 0
    latency_samples: float = 0.0
    warnings: tuple[str, ...] = field(default_factory=tuple)
    #: For designs given by requirements: what was asked, the quantisation margin kept,
    #: what the float design reaches (dense grid) and how the margin was paid for.
    requirement: Mapping | None = None
