"""Test helper: design one channel from stage tables written as TOML text."""

from __future__ import annotations

import numpy as np

from coefc.design import design_channel
from coefc.spec import parse_description


def design(*stages: str, fs: float = 48000):
    """Design a channel whose stages are the given inline TOML tables."""
    text = (f'name = "t"\nsample_rate_hz = {fs}\n[[channel]]\nname = "c"\nstages = [\n'
            + "".join(f"  {s},\n" for s in stages) + "]\n")
    d = parse_description(text.encode(), "test.toml")
    return design_channel(d.channels[0], d.sample_rate_hz, d.source)


def mag_db(ch, f) -> np.ndarray:
    return 20 * np.log10(np.abs(ch.response(np.atleast_1d(np.asarray(f, dtype=float)))))
