"""CIC decimators (Hogenauer 1981) and their compensator (issue 14, CIC part).

Outside references, named beside each check: Hogenauer's register growth
N*log2(R*D) and his frequency response (sin(pi f R D)/sin(pi f D))^N (written with
the DC gain removed); numpy's convolution and scipy.signal's lfilter/upfirdn as the
reference filter-then-downsample; the modulo property of two's complement arithmetic
proven exhaustively over a small word.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import exact_model
from coefc import simulate as sim
from coefc.program import (Arithmetic, ChannelProgram, CicOp, cic_gain, cic_growth, cic_impulse, output_length)
from coefc.qformat import ROUNDING_MODES, QFormat
from test_simulate import SETTINGS, _word, arithmetics, ops


def _cic(R, N, D, ar: Arithmetic, coef=None, k=None) -> CicOp:
    """A CicOp as the realiser makes it (shift alone for a power-of-two gain), or with coef and k given."""
    g, G = cic_gain(R, N, D), cic_growth(R, N, D)
    if coef is None:
        if g == 1 << G:
            coef, k = 1, G
        else:
            c = min(ar.coef.width - 1, 64 - ar.data.width - G)
            k = c + g.bit_length() - 1
            coef = (1 << k) // g
    return CicOp(R, N, D, ar.data.width + G, coef, ar.coef.frac_bits - k)


# ------------------------------------------------------------------ Hogenauer's formulas

@pytest.mark.parametrize("R,N,D", [(2, 1, 1), (16, 5, 1), (10, 3, 1), (25, 4, 1), (8, 4, 2), (3, 7, 3),
                                   (64, 4, 1), (1024, 5, 1), (7, 8, 4)])
def test_register_growth_is_hogenauer_n_log2_rd(R, N, D):
    # Hogenauer 1981, eq. for B_max: the output register needs N log2(R M) bits above the input
    # word (M his differential delay, D here); from memory
    assert cic_growth(R, N, D) == math.ceil(N * math.log2(R * D) - 1e-12)
    # the growth is exactly what the DC gain needs: (R D)^N <= 2^G < 2 (R D)^N
    g = cic_gain(R, N, D)
    assert g <= 1 << cic_growth(R, N, D) < 2 * g


def test_register_width_of_hogenauers_example():
    # Hogenauer 1981, design example: R = 25, M = 1, N = 4, 16-bit input: B_max = ceil(N log2(RM)
    # + B_in - 1) = 34, i.e. a 35-bit register at the integrators; from memory
    op = _cic(25, 4, 1, Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 30)))
    assert op.register_bits == 35


@pytest.mark.parametrize("R,N,D", [(4, 3, 1), (5, 2, 2), (16, 5, 1), (3, 4, 3)])
def test_impulse_response_is_the_boxcar_power(R, N, D):
    # numpy as the reference library: N convolutions of a boxcar of R*D ones
    ref = np.array([1])
    for _ in range(N):
        ref = np.convolve(ref, np.ones(R * D, dtype=np.int64))
    h = cic_impulse(R, N, D)
    assert list(h) == ref.tolist()
    assert sum(h) == (R * D) ** N == cic_gain(R, N, D)
    assert len(h) == N * (R * D - 1) + 1


@pytest.mark.parametrize("R,N,D", [(8, 3, 1), (4, 4, 2), (16, 2, 1)])
def test_realised_response_is_hogenauers_sinc_ratio(R, N, D):
    """The impulse response the engine realises, read back phase by phase through the decimation,
    has the DFT magnitude (sin(pi f R D) / (R D sin(pi f)))^N (f in cycles per input sample)."""
    G = cic_growth(R, N, D)
    ar = Arithmetic(data=QFormat(1, G + 8), coef=QFormat(2, 14), acc_bits=64)
    op = _cic(R, N, D, ar)
    prog = ChannelProgram("t", 48000, ar, (op,))
    n_h = N * (R * D - 1) + 1
    L = (n_h // R + 3) * R
    amp = 1 << (G + 6)  # the impulse lands on exact multiples of 2^G: every output exact
    h = np.zeros(L + R)
    for p in range(R):  # an impulse at input index p + 1 .. R: outputs y[i] = h[i R - p0] amp / (R D)^N
        x = np.zeros(L + R, dtype=np.int64)
        p0 = R - p
        x[p0] = amp
        y = sim.simulate(prog, x)
        for i, v in enumerate(y.tolist()):
            j = i * R - p0
            if 0 <= j < len(h):
                h[j] = v / amp * (1 << G) / cic_gain(R, N, D) if op.coef == 1 else v / amp
    h = h[:n_h]
    assert np.allclose(h * cic_gain(R, N, D), cic_impulse(R, N, D))
    f = np.linspace(1e-4, 0.5, 999)
    H = np.abs(np.exp(-2j * np.pi * np.outer(f, np.arange(n_h))) @ h)
    # Hogenauer 1981, eq. (the power response of the CIC): |H(f)| = |sin(pi f R D) / sin(pi f)|^N,
    # divided here by its DC value (R D)^N; from memory
    ref = np.abs(np.sin(np.pi * f * R * D) / (R * D * np.sin(np.pi * f))) ** N
    assert np.allclose(H, ref, atol=1e-12)


def test_design_block_response_matches_the_formula():
    from coefc.blocks import CicBlock, RateBlock, block_response
    from coefc.design.multirate import cic_magnitude
    from coefc.design import design_channel
    from coefc.spec import ChannelSpec, StageSpec

    ch = ChannelSpec("c", (StageSpec(1, "cic-decimator", {"factor": 16, "stages": 5}),), {})
    d = design_channel(ch, 3_072_000, "<t>")
    cic, rate = d.blocks
    assert isinstance(cic, CicBlock) and isinstance(rate, RateBlock) and rate.down == 16
    f = np.linspace(10.0, 1_500_000.0, 500)
    # Hogenauer 1981 response with the DC gain removed (see above); from memory
    ref = np.abs(np.sin(np.pi * f * 16 / 3_072_000) / (16 * np.sin(np.pi * f / 3_072_000))) ** 5
    assert np.allclose(np.abs(block_response(cic, f, 3_072_000)), ref, atol=1e-12)
    assert np.allclose(cic_magnitude(f, 192_000, 16, 5, 1), ref, atol=1e-12)
    assert d.output_rate_hz == 192_000


# ------------------------------------------------------------------ the modulo property, exhaustively

def _wrap(v, bits):
    half = 1 << (bits - 1)
    return ((v + half) & ((1 << bits) - 1)) - half


def _register_cic(X: np.ndarray, R: int, N: int, D: int, B: int, integ=None, combs=None) -> np.ndarray:
    """Integrators and combs in a B-bit register (every step wrapped), over many sequences at once
    (rows of X), from zero states or the given ones: the comb outputs v at input indices 0, R, 2R, ..."""
    integ = [np.zeros(X.shape[0], dtype=np.int64) for _ in range(N)] if integ is None else list(integ)
    combs = ([[np.zeros(X.shape[0], dtype=np.int64) for _ in range(D)] for _ in range(N)] if combs is None
             else [list(c) for c in combs])
    out, cp = [], 0
    for t in range(X.shape[1]):
        integ[0] = _wrap(integ[0] + X[:, t], B)
        for j in range(1, N):
            integ[j] = _wrap(integ[j] + integ[j - 1], B)
        if t % R == 0:
            c = integ[-1]
            for j in range(N):
                old = combs[j][cp]
                combs[j][cp] = c
                c = _wrap(c - old, B)
            cp = (cp + 1) % D
            out.append(c)
    return np.stack(out, axis=1)


@pytest.mark.parametrize("R,N,D,W,L", [(2, 2, 1, 3, 6), (2, 3, 1, 2, 9), (3, 2, 1, 2, 8), (2, 2, 2, 2, 9)])
def test_modulo_property_exhaustive(R, N, D, W, L):
    """Every input sequence of L words of W bits: the wrap-around register of W + G bits gives the
    exact wide-integer FIR sum (which lies in its range); the register one bit narrower does not
    for some sequence (Hogenauer's growth is needed); and scipy's filter-then-downsample agrees."""
    from scipy import signal

    alphabet = range(-(1 << (W - 1)), 1 << (W - 1))
    X = np.array(list(itertools.product(alphabet, repeat=L)), dtype=np.int64)
    G = cic_growth(R, N, D)
    B = W + G
    h = np.array(cic_impulse(R, N, D), dtype=np.int64)
    # the exact wide-integer result: numpy integer convolution (no wrap anywhere), kept at 0, R, 2R ...
    exact = np.stack([np.convolve(row, h)[:L][::R] for row in X])
    got = _register_cic(X, R, N, D, B)
    assert np.array_equal(got, exact)
    # the exact result reduced modulo 2^B is itself: it lies in the signed B-bit range
    assert np.array_equal(_wrap(exact, B), exact)
    # any wider register gives the same words (the engine computes modulo 2^64)
    assert np.array_equal(_register_cic(X, R, N, D, B + 5), exact)
    # one bit fewer: the extreme input (all most-negative words) already needs all B bits
    assert not np.array_equal(_register_cic(X, R, N, D, B - 1), exact)
    # the float side: scipy.signal.lfilter then keep every R-th, and upfirdn, equal the integers
    # (small integers are exact in float64; scipy.signal as the reference library)
    for row, ex in zip(X[:: max(1, len(X) // 257)], exact[:: max(1, len(X) // 257)]):
        assert np.array_equal(signal.lfilter(h.astype(float), [1.0], row.astype(float))[::R], ex)
        assert np.array_equal(signal.upfirdn(h.astype(float), row.astype(float), down=R)[: len(ex)], ex)


@pytest.mark.parametrize("R,N,D", [(2, 3, 1), (4, 2, 2), (3, 4, 1), (2, 5, 2)])
def test_no_limit_cycle_from_any_state(R, N, D):
    """The limit-cycle argument of budget.cic_cycle_argument: from arbitrary integrator and comb states
    (any soft error, any past), with any input, the output equals the FIR of the input (zero input:
    zero) from output N*D on -- the integrators' drift is a polynomial of degree < N that the N combs
    remove, modulo 2^B as in the integers."""
    rng = np.random.default_rng(7)
    W, rows, L = 6, 4000, 40 * R
    G = cic_growth(R, N, D)
    B = W + G
    lo, hi = -(1 << (B - 1)), 1 << (B - 1)
    integ = [rng.integers(lo, hi, rows) for _ in range(N)]
    combs = [[rng.integers(lo, hi, rows) for _ in range(D)] for _ in range(N)]
    h = np.array(cic_impulse(R, N, D), dtype=np.int64)
    for X in (np.zeros((rows, L), dtype=np.int64), rng.integers(-(1 << (W - 1)), 1 << (W - 1), (rows, L))):
        got = _register_cic(X, R, N, D, B, integ, combs)
        fir = np.stack([np.convolve(row, h)[:L][::R] for row in X])
        assert np.array_equal(got[:, N * D:], fir[:, N * D:])
        assert not np.array_equal(got[:, :N * D], fir[:, :N * D])  # the states did matter before that


def test_engine_register_path_equals_exact_model_exhaustive_small_word():
    """The compiled engine and the Python register path on every 3-bit sequence of length 6 (R = 2,
    N = 2): one long run per sequence, equal to the independent exact model."""
    ar = Arithmetic(data=QFormat(1, 2), coef=QFormat(2, 6), acc_bits=16, rounding="half-even")
    op = _cic(2, 2, 1, ar)
    prog = ChannelProgram("t", 48000, ar, (op,))
    for seq in itertools.product(range(-4, 4), repeat=5):
        x = np.array(seq, dtype=np.int64)
        ref = exact_model.run_program(prog, list(seq))[0]
        assert sim.simulate(prog, x).tolist() == ref
        assert sim.simulate(prog, x, _exact=True).tolist() == ref


# ------------------------------------------------------------------ engine vs the exact model

@st.composite
def cic_programs(draw):
    ar = draw(arithmetics(64))
    R, N, D = draw(st.integers(2, 6)), draw(st.integers(1, 4)), draw(st.integers(1, 2))
    G = cic_growth(R, N, D)
    if ar.data.width + G > 62:
        ar = ar.with_(data=QFormat(1, 62 - G - 1 - 8))
    g = cic_gain(R, N, D)
    if g == 1 << G or draw(st.booleans()):
        op = _cic(R, N, D, ar) if ar.coef.width - 1 >= 1 else None
    else:  # any positive coefficient and shift the register leaves room for
        c = draw(st.integers(1, min(30, 64 - ar.data.width - G)))
        coef = draw(st.integers(1, (1 << c) - 1))
        k = draw(st.integers(1, 62))
        op = _cic(R, N, D, ar, coef=coef, k=k)
    seq = [draw(ops(ar)) for _ in range(draw(st.integers(0, 2)))]
    seq.insert(draw(st.integers(0, len(seq))), op)
    prog = ChannelProgram("t", 48000, ar, tuple(seq))
    x = [_word(draw, ar.data) for _ in range(draw(st.integers(0, 40)))]
    return prog, x


@settings(**SETTINGS)
@given(cic_programs())
def test_engine_equals_exact_model(case):
    prog, x = case
    for exact in (False, True):
        t = sim.simulate(prog, np.array(x, dtype=np.int64), trace=True, _exact=exact)
        y, nodes, ovf, aovf = exact_model.run_program(prog, x)
        assert t.y.tolist() == y
        assert len(y) == output_length(prog.ops, len(x))
        assert [n.tolist() for n in t.node_outputs] == nodes
        assert t.overflow_counts == ovf


def test_realised_cic_output_never_overflows():
    """The realiser's coefficient keeps the gain at most 1: the extreme inputs (full-scale DC of either
    sign) reach the output without saturation, for a power-of-two gain and for another."""
    from coefc.blocks import CicBlock
    from coefc.realise import _cic_op

    for R, N, D in ((16, 5, 1), (10, 3, 1), (6, 4, 2)):
        for rounding in ROUNDING_MODES:
            ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32, rounding=rounding)
            op = _cic_op("t", CicBlock(np.ones(1), factor=R, stages=N, delay=D), ar, 48000.0)
            assert op.coef * op.gain <= 1 << (ar.coef.frac_bits - op.shift)
            prog = ChannelProgram("t", 48000.0 * R, ar, (op,))
            for v in (ar.data.max_int, ar.data.min_int):
                t = sim.simulate(prog, np.full(40 * R * D * N, v, dtype=np.int64), trace=True)
                assert t.overflow_counts == [0]
                assert t.y[-1] == v or abs(int(t.y[-1]) - v) <= 1 + abs(v) * 2.0 ** -7


# ------------------------------------------------------------------ the compensator

def test_compensator_flattens_the_droop():
    from scipy import signal

    from coefc.design import design_channel
    from coefc.spec import ChannelSpec, StageSpec

    ch = ChannelSpec("c", (StageSpec(1, "cic-decimator", {"factor": 16, "stages": 5}),
                           StageSpec(2, "cic-compensator", {"passband_hz": 20000.0, "stopband_hz": 76000.0,
                                                            "attenuation_db": 80.0, "ripple_db": 0.05})), {})
    d = design_channel(ch, 3_072_000, "<t>")
    comp = d.blocks[2].taps
    f = np.linspace(0, 20000, 400)
    _, H = signal.freqz(comp, 1.0, worN=f, fs=192_000)  # scipy.signal.freqz as the reference library
    # Hogenauer's response (above) at the CIC input rate; from memory
    cic = np.abs(np.sin(np.pi * f * 16 / 3_072_000) / (16 * np.sin(np.pi * np.maximum(f, 1e-9) / 3_072_000))) ** 5
    cic[0] = 1.0
    flat = 20 * np.log10(np.abs(H) * cic)
    assert np.max(np.abs(flat)) <= 0.05
    droop = -20 * np.log10(cic[-1])
    assert droop > 0.7  # the compensator really corrects something: 0.77 dB at 20 kHz
    fs_ = np.linspace(76000, 96000, 200)
    _, Hs = signal.freqz(comp, 1.0, worN=fs_, fs=192_000)
    assert np.max(20 * np.log10(np.abs(Hs))) <= -80


# ------------------------------------------------------------------ generated code

def _cic_programs(arith):
    """CIC channels: power-of-two gain (shift only), a gain removed by a coefficient with D = 2, a CIC
    followed by a polyphase FIR at the lower rate, and a gain of 1.5 in front (full-scale steps of the
    golden input saturate it, so the CIC sees the extreme words)."""
    from c_build import _coef
    from coefc.program import PolyFirOp

    rng = np.random.default_rng(5)
    taps = tuple(_coef(arith, t, 1) for t in rng.uniform(-0.4, 0.4, 11))
    return [
        ChannelProgram("cic4", 96000.0, arith, (_cic(4, 3, 1, arith),)),
        ChannelProgram("cic5d2", 96000.0, arith, (_cic(5, 3, 2, arith),)),
        ChannelProgram("cic_fir", 96000.0, arith, (_cic(2, 4, 1, arith), PolyFirOp(taps, 1, down=2))),
        ChannelProgram("gain_cic", 96000.0, arith, (GainOp(_coef(arith, 1.5, 1), 1), _cic(3, 2, 1, arith))),
    ]


from coefc.program import GainOp  # noqa: E402


@pytest.mark.parametrize("target_name", ["mcu16", "mcu32", "dsp24"])
def test_generated_code_runs_the_cic_bit_exact(target_name, tmp_path):
    # golden vectors from the engine (proven against tests/exact_model.py above), blocks of 1..64
    # times the decimation, every rounding mode and both overflow modes, gcc and clang, UBSan
    from c_build import compilers, generated_files, run_generated, ubsan_works
    from coefc.targetspec import find_target
    from test_codegen import _native

    base = find_target(target_name).arithmetic
    units = []
    for r in ROUNDING_MODES:
        for o in ("saturate", "wrap"):
            name = f"cic_{r.replace('-', '_')}_{o}"
            progs = _cic_programs(base.with_(rounding=r, overflow=o))
            units.append((name, generated_files(progs, target_name, name, vectors=240)))
    c = units[0][1]["cic_add_half_saturate.c"]
    assert "CIC decimator by 4" in c and "n = o;" in c and "ig[2] += ig[1];" in c
    for cc in compilers():
        flags = ("-O1", "-fsanitize=undefined", "-fno-sanitize-recover=all") if ubsan_works(cc) else ("-O2",)
        rc, out = run_generated(tmp_path / cc, units, _native(cc, *flags))
        assert rc == 0, out
        assert "MISMATCH" not in out and "runtime error" not in out, out


def test_generated_cic_catches_a_wrong_golden_value(tmp_path):
    from c_build import compilers, generated_files, off_by_one_golden, run_generated
    from coefc.targetspec import find_target
    from test_codegen import _native

    progs = _cic_programs(find_target("mcu32").arithmetic)[:1]
    files = generated_files(progs, "mcu32", "cbad", vectors=240)
    c = off_by_one_golden(files["cbad.c"], "cbad_cic4_golden_out[60]")
    rc, out = run_generated(tmp_path, [("cbad", dict(files, **{"cbad.c": c}))], _native(compilers()[0], "-O2"))
    assert "compile failed" not in out
    assert rc != 0 and ": ok" not in out, out


def test_cost_of_a_cic_chain():
    from coefc.emit.codegen import channel_cost

    ar = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32)
    # R = 16, N = 5: 5 adds per input sample + 5 comb adds per 16 inputs; gain 2^20: no multiply
    c = channel_cost(ChannelProgram("c", 3072000.0, ar, (_cic(16, 5, 1, ar),)), 2, 2)
    assert c["muls_per_sample"] == 0 and c["adds_per_sample"] == 6  # ceil(5 + 5/16)
    # R = 10, N = 3: gain 1000 is removed by one multiply per output sample: 1/10 per input, rounded up
    c = channel_cost(ChannelProgram("c", 480000.0, ar, (_cic(10, 3, 1, ar),)), 2, 2)
    assert c["muls_per_sample"] == 1 and c["coef_bytes"] == 2


def test_pdm_example_realises_a_shift_only_cic_in_a_44_bit_register():
    from pathlib import Path

    import coefc

    real = coefc.load(Path(__file__).resolve().parents[1] / "filters" / "pdm_microphone.toml").design().realise()
    prog = real.programs[0]
    op = prog.ops[0]
    assert isinstance(op, CicOp) and (op.factor, op.stages, op.delay) == (16, 5, 1)
    # 24-bit data word + 5 log2(16) = 20 bits of growth (Hogenauer 1981; from memory); gain 2^20: a shift
    assert op.register_bits == 44 and op.coef == 1 and prog.arithmetic.final_shift(op.shift) == 20
    assert any("44-bit register" in n and "modulo property" in n for n in prog.notes)
    assert prog.output_rate_hz == 48000


@pytest.mark.parametrize("R,N,D", [(10, 3, 1), (5, 4, 2), (3, 6, 1)])
def test_gain_not_a_power_of_two_is_removed_by_a_coefficient(R, N, D):
    from coefc.blocks import CicBlock
    from coefc.realise import _cic_op

    ar = Arithmetic(data=QFormat(1, 23), coef=QFormat(2, 22), acc_bits=56)
    op = _cic_op("t", CicBlock(np.ones(1), factor=R, stages=N, delay=D), ar, 48000.0)
    k = ar.final_shift(op.shift)
    c = min(ar.coef.width - 1, 64 - op.register_bits)
    assert op.coef < 1 << c and op.coef <= (1 << (ar.coef.width - 1)) - 1
    assert op.register_bits + op.coef.bit_length() <= 64  # C v exact in 64 bits
    gain = op.coef * op.gain / 2 ** k
    assert 1 - 2.0 ** (1 - c) < gain <= 1
