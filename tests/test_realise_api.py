"""The library API end to end: load -> design -> realise -> simulate, on every example.

The bit-true outputs are compared with a float64 reference run through
scipy.signal (sosfilt / lfilter) on the float design (scipy as reference library).
"""

from __future__ import annotations

import numpy as np
import pytest

import coefc
from coefc.blocks import as_float_blocks
from conftest import example_files, examples_for
from exact_model import float_reference

TARGETS = ["mcu16", "mcu32", "dsp24", "float32"]


@pytest.mark.parametrize("path", example_files(), ids=lambda p: p.name)
@pytest.mark.parametrize("target", TARGETS)
def test_every_example_realises_and_simulates(path, target):
    from coefc.targetspec import Overrides

    design = coefc.load(path).design()
    tgt = design.target(target)
    wanted = design.loaded.description.implementation.structure
    # a structure the target lacks (error feedback on float32) falls back to its default
    ov = Overrides(structure=tgt.arithmetic.structure) if wanted and wanted not in tgt.structures else None
    if tgt.arithmetic.is_float and path not in examples_for(tgt):
        # a CIC decimator's exactness rests on its wrap-around integer register: float32 refuses it
        from coefc.realise import RealisationError

        with pytest.raises(RealisationError, match="no float32 realisation"):
            design.realise(target=tgt, overrides=ov)
        return
    real = design.realise(target=tgt, overrides=ov)
    ar = real.programs[0].arithmetic
    fs = design.channels[0].sample_rate_hz
    n = 4096
    xf = 0.25 * np.sin(2 * np.pi * 997.0 / fs * np.arange(n))  # -12 dBFS tone
    if ar.is_float:
        x = xf.astype(np.float32)
        xr = x.astype(float)
        tol = 1e-4
    else:
        x = np.round(xf * 2 ** ar.data.frac_bits).astype(np.int64)
        xr = x / 2 ** ar.data.frac_bits
        tol = 2.0 ** (-ar.data.frac_bits) * 2 ** 12  # roundoff amplified by at most 72 dB
    ys = real.simulate(x)
    assert list(ys) == [c.name for c in design.channels]
    for ch, prog in zip(design.channels, real.programs):
        y = ys[ch.name].astype(float) / (1.0 if ar.is_float else 2 ** ar.data.frac_bits)
        # the quantised coefficients, run in float64, agree with the bit-true output ...
        q_ref = float_reference(as_float_blocks(prog), xr)
        assert np.max(np.abs(y - q_ref)) < tol, ch.name
        # ... and the quantised response stays close to the float design (passband tone)
        f = np.array([997.0])
        hq = abs(ch.response(f)[0])
        from coefc.blocks import chain_response

        hr = abs(chain_response(as_float_blocks(prog), f, fs)[0])
        if hq > 0.1 and not any("unstable" in note for note in prog.notes):
            assert abs(20 * np.log10(hr / hq)) < (0.2 if target == "mcu16" else 0.01)
