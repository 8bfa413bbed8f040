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
    #: (factor, stages, differential_delay) of the CIC decimator whose output this stage runs at, if any
    #: (no other rate change between them): what a ``cic-compensator`` corrects
    cic: tuple | None = None

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
    #: Further lines the design report prints under the stage (e.g. fitted sections).
    details: tuple[str, ...] = ()


def edges_in_order(ctx: StageContext, wp, ws) -> float:
    """Check that a stage's ``passband_hz`` and ``stopband_hz`` lie in the order of its band.

    The rule of every low/high/band-pass/band-stop kind, IIR (``lowpass``) and FIR
    (``fir-lowpass``) alike.  Returns the narrowest transition width in Hz; raises
    the stage's error at ``stopband_hz`` when the order is wrong.
    """
    band = ctx.kind.removeprefix("fir-")
    if band == "lowpass" and wp < ws:
        return ws - wp
    if band == "highpass" and ws < wp:
        return wp - ws
    if band == "bandpass" and ws[0] < wp[0] < wp[1] < ws[1]:
        return min(wp[0] - ws[0], ws[1] - wp[1])
    if band == "bandstop" and wp[0] < ws[0] < ws[1] < wp[1]:
        return min(ws[0] - wp[0], wp[1] - ws[1])
    rule = {
        "lowpass": "passband_hz must be below stopband_hz",
        "highpass": "passband_hz must be above stopband_hz",
        "bandpass": "the stopband must enclose the passband (stop low < pass low < pass high < stop high)",
        "bandstop": "the passband must enclose the stopband (pass low < stop low < stop high < pass high)",
    }[band]

    def show(e) -> str:
        return f"[{e[0]:g}, {e[1]:g}]" if isinstance(e, tuple) else f"{e:g}"

    raise ctx.error(f"for a {ctx.kind}, {rule}; got passband_hz = {show(wp)}, stopband_hz = {show(ws)}",
                    "stopband_hz")
