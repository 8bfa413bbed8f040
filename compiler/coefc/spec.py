"""Filter descriptions: TOML text in, a validated :class:`Description` out.

Every problem is raised as :class:`coefc.errors.DescriptionError` naming the file,
channel, stage (1-based) and key, what is wrong and how to fix it.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType


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
    """``[budget]``: the limits ``coefc check`` gates on; ``None`` = not checked."""

    passband_deviation_db: float | None = None
    stopband_attenuation_db: float | None = None
    output_noise_dbfs: float | None = None
    limit_cycles: str | float | None = None  # "none" or a maximum amplitude in LSB
    overflow: str | None = None  # "none" or "allow"
    extra: Mapping = field(default_factory=lambda: MappingProxyType({}))  # keys added by later checks


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

    def channel(self, name: str) -> ChannelSpec:
        for ch in self.channels:
            if ch.name == name:
                return ch
        from .errors import DescriptionError, close_match

        raise DescriptionError(
            "<command line>",
            f"no channel '{name}' in {self.source}; channels are "
            + ", ".join(c.name for c in self.channels)
            + close_match(name, [c.name for c in self.channels]),
            key="--channel",
        )


def load_description(path) -> Description:
    """Read and validate a description file."""
    raise NotImplementedError("spec parsing: issue 2")
