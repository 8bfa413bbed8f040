r"""The library API, one call per arrow of the data flow.

>>> import pathlib, tempfile
>>> import numpy as np, coefc
>>> path = pathlib.Path(tempfile.mkdtemp()) / "probe.toml"
>>> _ = path.write_text('name = "probe"\nsample_rate_hz = 48000\n[[channel]]\nname = "main"\n'
...                     'stages = [{ kind = "gain", db = -6.020599913279624 }]\n')   # x 0.5
>>> desc = coefc.load(path)                                        # validated description
>>> design = desc.design()                                         # float design
>>> real = design.realise(target="mcu32", overrides=None)          # fixed-point program
>>> real.simulate(np.array([1 << 30, -(1 << 30)]))["main"].tolist()   # {channel: output ints}
[536870912, -536870912]

The CLI is a thin layer over these calls.
"""

from __future__ import annotations

import os
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

from .blocks import ChannelDesign
from .program import ChannelProgram
from .spec import Description, load_description
from .targetspec import Overrides, Target, find_target, resolve_arithmetic


@dataclass(frozen=True, eq=False)
class Loaded:
    """A validated description, ready to design."""

    description: Description

    def design(self, channels: Iterable[str] | None = None) -> "Design":
        from .design import design_channel

        d = self.description
        specs = d.channels if channels is None else tuple(d.channel(c) for c in channels)
        return Design(self, tuple(design_channel(ch, d.sample_rate_hz, d.source) for ch in specs))


@dataclass(frozen=True, eq=False)
class Design:
    """Float designs of the chosen channels."""

    loaded: Loaded
    channels: tuple[ChannelDesign, ...]

    def target(self, target: str | None = None, target_dirs: Iterable[str | os.PathLike] = ()) -> Target:
        name = target or self.loaded.description.implementation.target or "mcu32"
        return find_target(name, target_dirs)

    def realise(self, target: str | Target | None = None, overrides: Overrides | None = None,
                target_dirs: Iterable[str | os.PathLike] = (), budget=None) -> "Realisation":
        """The fixed-point (or float32) programs of the channels on *target*.

        The arithmetic is the target's, then ``[implementation]``, then a channel's
        own ``structure``, then *overrides* (:func:`coefc.targetspec.resolve_arithmetic`).
        *budget* is the budget ``structure = "auto"`` must meet: the description's
        ``[budget]`` with command-line overrides applied (:func:`coefc.budget.apply_overrides`);
        ``None`` means the description's own.  Each channel meets it as the check
        applies it: the table of its data word's width, then its ``[channel.budget]``,
        keys set on the command line winning (:func:`coefc.budget.budget_for`).
        """
        from .budget import budget_for
        from .errors import CoefcError, DescriptionError
        from .realise import realise_channel

        tgt = target if isinstance(target, Target) else self.target(target, target_dirs)
        d = self.loaded.description
        budget = d.budget if budget is None else budget
        programs = []
        try:
            for ch in self.channels:
                spec = next((c for c in d.channels if c.name == ch.name), None)
                arith = resolve_arithmetic(tgt, d.implementation, overrides, d.source,
                                           channel=spec.name if spec is not None and spec.structure else None,
                                           channel_structure=spec.structure if spec is not None else None)
                if arith.structure == "auto":  # per section, the cheapest structure that meets the budget
                    from .realise.auto import realise_auto

                    programs.append(realise_auto(ch, arith, tgt.structures, budget_for(budget, spec, arith),
                                                 realise_channel, tgt.section_cost))
                else:
                    programs.append(realise_channel(ch, arith))
        except DescriptionError:
            raise
        except CoefcError as e:  # name the file: realise only knows the channel (the type is kept)
            raise e.placed(d.source) from None
        return Realisation(self, tgt, tuple(programs))


@dataclass(frozen=True, eq=False)
class Realisation:
    """The fixed-point programs of the chosen channels on one target."""

    design: Design
    target: Target
    programs: tuple[ChannelProgram, ...]

    def simulate(self, x: np.ndarray) -> dict[str, np.ndarray]:
        """Push the same input (data-word integers, or float32) through every channel."""
        from .simulate import simulate

        return {p.name: simulate(p, x) for p in self.programs}


def load(path: str | os.PathLike) -> Loaded:
    """Read and validate a description file (raises DescriptionError)."""
    return Loaded(load_description(path))
