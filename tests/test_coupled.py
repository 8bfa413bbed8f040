"""The coupled (normal) form: realiser pole grid, limit-cycle verdicts against brute force."""

from __future__ import annotations

import numpy as np
import pytest

import coefc
from coefc.analyse.coupled_cycles import analyse_coupled, step
from coefc.program import Arithmetic, SectionOp, section_transfer
from coefc.qformat import QFormat
from coefc.realise.coupled import fit_coupled
from coefc.targetspec import Overrides

from conftest import FILTERS

Q15, Q14 = QFormat(1, 15), QFormat(2, 14)


def test_quantised_poles_lie_on_the_uniform_grid():
    # Rader & Gold 1967 (from memory): the coupled form stores Re and Im of the pole, so a
    # rounded pole is within half an LSB in each part, |p - p_q| <= LSB / sqrt(2);
    # reference poles from numpy.roots of the design denominator
    rng = np.random.default_rng(3)
    for _ in range(200):
        r, th = 1.0 - 10 ** rng.uniform(-4.5, -1), rng.uniform(1e-3, 0.3)
        a = [1.0, -2 * r * np.cos(th), r * r]
        g = (1 + a[1] + a[2]) / 4  # a low-pass numerator of unit DC gain: C and D near 1, shift 0
        bi, ai, s, sat = fit_coupled([g, 2 * g, g], a, Q14, "add-half", Q15, "l2", 0.5)
        assert not sat
        p = np.roots(a)
        pq = np.roots(section_transfer(SectionOp(bi, ai, s, "coupled"), 14)[1])
        err = max(min(abs(pq - z)) for z in p)
        assert err <= 2.0 ** (s - 14) / np.sqrt(2) + 1e-12


def test_weighting_filters_on_16_bits_keep_their_poles_inside():
    # issue 13 (measured there): on mcu16 every A- and C-weighting realisation in df1 puts a
    # pole on z = 1; IEC 61672-1 A weighting has a double pole at 20.6 Hz (from memory)
    real = {s: coefc.load(FILTERS / "sound_level_meter.toml").design().realise("mcu16", Overrides(structure=s))
            for s in ("df1", "coupled")}
    from coefc.analyse import instability

    assert all(instability(p) is not None for p in real["df1"].programs)
    assert all(instability(p) is None for p in real["coupled"].programs)


def _brute_cycles(A, k, ar):
    """Every state of the whole data-word space, iterated until the set stops shrinking."""
    lo, hi = ar.data.min_int, ar.data.max_int
    g1, g2 = np.meshgrid(np.arange(lo, hi + 1), np.arange(lo, hi + 1))
    s1, s2 = g1.ravel(), g2.ravel()
    while True:
        t1, t2, _ = step(s1, s2, A, k, ar)
        codes = np.unique((t1 - lo) * (hi - lo + 1) + (t2 - lo))
        old = np.unique((s1 - lo) * (hi - lo + 1) + (s2 - lo))
        if np.array_equal(codes, old):
            return {(int(a), int(b)) for a, b in zip(s1, s2)}
        s1, s2 = codes // (hi - lo + 1) + lo, codes % (hi - lo + 1) + lo


@pytest.mark.parametrize("rounding", ["add-half", "truncate", "half-even", "toward-zero"])
@pytest.mark.parametrize("overflow", ["saturate", "wrap"])
def test_limit_cycle_verdicts_agree_with_the_whole_state_space(rounding, overflow):
    # exhaustive enumerator (every state of 7-bit data words) as the reference
    ar = Arithmetic(data=QFormat(1, 6), coef=QFormat(2, 8), acc_bits=24, rounding=rounding, overflow=overflow,
                    structure="coupled")
    rng = np.random.default_rng(11)
    for _ in range(6):
        r, th = rng.uniform(0.85, 0.995), rng.uniform(0.02, 1.0)
        al, be = round(r * np.cos(th) * 256), round(r * np.sin(th) * 256)
        op = SectionOp((64, 100, -50, 30), (al, -be, be, al), 0, "coupled")
        res = analyse_coupled(op, 0, ar)
        cyc = _brute_cycles(op.a, 8, ar)
        small = {c for c in cyc if max(map(abs, c)) < ar.data.max_int}
        if res.status == "none":
            assert small <= {(0, 0)}, (res, small)
        elif res.status == "found":
            assert small - {(0, 0)} and res.start_state in cyc
        if res.overflow_status == "none":
            big = {c for c in cyc if max(map(abs, c)) > (res.bound_lsb or 0) * 4 + 64}
            assert not big
        if rounding == "toward-zero" and overflow == "saturate":
            assert res.status == "none" and cyc == {(0, 0)}
