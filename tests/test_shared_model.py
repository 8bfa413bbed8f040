"""One linear model per realised program, shared by the noise, overflow and limit-cycle analyses."""

from __future__ import annotations

import numpy as np
from scipy import signal

import coefc
from coefc.analyse import analyse_channel, linear
from coefc.analyse.linear import noise_impulse, node_impulses, op_models, response_length, tail_impulse


def program_and_design():
    real = coefc.load("filters/three_way_monitor.toml").design().realise(target="mcu32")
    return real.design.channels[0], real.programs[0]  # the woofer: four sections and a gain


def test_the_model_is_built_once_per_check(monkeypatch):
    design, program = program_and_design()
    linear._MODELS.clear()
    calls = []
    real_build = linear._build_models
    monkeypatch.setattr(linear, "_build_models", lambda p: calls.append(p) or real_build(p))
    analyse_channel(design, program)
    assert len(calls) == 1  # noise, overflow and the limit cycles at the channel output share it


def test_shared_responses_match_the_cascade_in_signal_order():
    # Reference: scipy.signal.lfilter of each operation in signal order, from a unit impulse.
    _, program = program_and_design()
    models = op_models(program)
    assert [id(m) for m in op_models(program)] == [id(m) for m in models]
    n = response_length(models)
    for j, m in enumerate(models):
        g = np.zeros(n)
        g[0] = 1.0
        g = signal.lfilter(m.noise_b, m.noise_a, g)
        t = np.zeros(n)
        t[0] = 1.0
        for later in models[j + 1:]:
            g = signal.lfilter(later.b, later.a, g)
            t = signal.lfilter(later.b, later.a, t)
        scale = max(1.0, float(np.max(np.abs(g))))
        assert np.max(np.abs(noise_impulse(models, j, n) - g)) <= 1e-12 * scale
        assert np.max(np.abs(tail_impulse(models, j + 1, n) - t)) <= 1e-12 * max(1.0, float(np.max(np.abs(t))))
    h = np.zeros(n)
    h[0] = 1.0
    for m, node in zip(models, node_impulses(models, n)):
        h = signal.lfilter(m.b, m.a, h)
        assert np.array_equal(node, h)
    assert not noise_impulse(models, 0, n).flags.writeable  # shared arrays cannot be changed by a caller
