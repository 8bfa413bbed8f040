"""Multirate: polyphase decimating and interpolating FIRs, rate ops (issue 14).

The engine (compiled and Python paths) against the independent exact model of
tests/exact_model.py, and the polyphase results against filter-then-downsample
(decimation) and upsample-then-filter (interpolation) computed with numpy in exact
integers, and scipy.signal.upfirdn on the float side.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import exact_model
from coefc import simulate as sim
from coefc.program import ChannelProgram, FirOp, PolyFirOp, RateOp, decimation, output_length
from coefc.qformat import QFormat, ROUNDING_MODES
from coefc.program import Arithmetic
from test_simulate import SETTINGS, _word, arithmetics, ops


@st.composite
def rate_ops(draw, ar):
    fc = ar.coef.frac_bits
    shift = draw(st.integers(max(fc - 62, -4), fc - 1))
    factor = draw(st.integers(2, 5))
    down = draw(st.booleans())
    if draw(st.integers(0, 3)) == 0:
        return RateOp(down=factor) if down else RateOp(up=factor)
    taps = tuple(_word(draw, ar.coef) for _ in range(draw(st.integers(1, 13))))
    return PolyFirOp(taps=taps, shift=shift, down=factor if down else 1, up=1 if down else factor)


@st.composite
def multirate_programs(draw, max_acc=64, wide=False):
    ar = draw(arithmetics(max_acc, wide))
    seq = []
    for _ in range(draw(st.integers(1, 4))):
        seq.append(draw(st.one_of(rate_ops(ar), ops(ar))))
    prog = ChannelProgram("t", 48000, ar, tuple(seq))
    x = [_word(draw, ar.data) for _ in range(draw(st.integers(0, 30)))]
    return prog, x


def _compare(prog, x, exact=False):
    t = sim.simulate(prog, np.array(x, dtype=np.int64), trace=True, _exact=exact)
    y, nodes, ovf, aovf = exact_model.run_program(prog, x)
    assert t.y.tolist() == y
    assert len(y) == output_length(prog.ops, len(x))
    assert [n.tolist() for n in t.node_outputs] == nodes
    assert t.overflow_counts == ovf
    assert t.acc_overflow_counts == aovf


@settings(**SETTINGS)
@given(multirate_programs())
def test_compiled_engine_equals_exact_model_with_rate_changes(case):
    prog, x = case
    assert sim._fast_ok(prog)
    _compare(prog, x)


@settings(**dict(SETTINGS, max_examples=150))
@given(multirate_programs())
def test_python_path_equals_exact_model_with_rate_changes(case):
    _compare(*case, exact=True)


@settings(**dict(SETTINGS, max_examples=40))
@given(multirate_programs(max_acc=100, wide=True))
def test_wide_words_equal_exact_model_with_rate_changes(case):
    _compare(*case)


def _round_shift_np(acc, k, mode):
    """Rounding of an exact integer array by the four modes, written with numpy floor division."""
    acc = np.asarray(acc, dtype=object)
    if mode == "add-half":
        return (acc + (1 << (k - 1))) // (1 << k)
    if mode == "truncate":
        return acc // (1 << k)
    q, r = np.array([divmod(int(v), 1 << k) for v in acc], dtype=object).T if len(acc) else (acc, acc)
    if mode == "toward-zero":
        return np.array([int(qq) + (1 if (rr and v < 0) else 0) for qq, rr, v in zip(q, r, acc)], dtype=object)
    half = 1 << (k - 1)  # half-even
    return np.array([int(qq) + (1 if rr > half or (rr == half and qq % 2) else 0) for qq, rr in zip(q, r)],
                    dtype=object)


@pytest.mark.parametrize("rounding", ROUNDING_MODES)
@pytest.mark.parametrize("M", [2, 3, 4, 7])
def test_polyphase_decimation_equals_fir_then_downsample_exactly(rounding, M):
    # Reference: numpy.convolve in exact Python integers (object dtype), the full-rate FIR, then
    # every M-th sample kept -- the definition of decimation (Crochiere & Rabiner 1983, ch. 2;
    # from memory).  Wide accumulator and data word, so nothing saturates: the identity is exact.
    rng = np.random.default_rng(M)
    ar = Arithmetic(data=QFormat(1, 23), coef=QFormat(2, 22), acc_bits=64, rounding=rounding)
    taps = tuple(int(v) for v in rng.integers(-(1 << 20), 1 << 20, size=31))
    x = rng.integers(-(1 << 23), 1 << 23, size=997)  # not a multiple of M: ceil(n/M) outputs
    shift = 3
    poly = sim.simulate(ChannelProgram("d", 96000, ar, (PolyFirOp(taps=taps, shift=shift, down=M),)), x)
    full = np.convolve(np.array(x, dtype=object), np.array(taps, dtype=object))[: len(x)]
    ref = _round_shift_np(full, ar.coef.frac_bits - shift, rounding)[::M]
    ref = np.clip(ref.astype(np.int64), ar.data.min_int, ar.data.max_int)
    assert poly.tolist() == ref.tolist()
    # and the engine's own full-rate FIR, then keeping every M-th sample, is the same
    fir = sim.simulate(ChannelProgram("d", 96000, ar, (FirOp(taps=taps, shift=shift),)), x)
    assert poly.tolist() == fir[::M].tolist()


@pytest.mark.parametrize("L", [2, 3, 5])
def test_polyphase_interpolation_equals_upsample_then_fir_exactly(L):
    # Reference: zero insertion then numpy.convolve in exact integers (the definition of
    # interpolation, Crochiere & Rabiner 1983, ch. 2; from memory); float side: scipy.signal.upfirdn.
    from scipy import signal

    rng = np.random.default_rng(L)
    ar = Arithmetic(data=QFormat(1, 23), coef=QFormat(2, 22), acc_bits=64, rounding="add-half")
    taps = tuple(int(v) for v in rng.integers(-(1 << 20), 1 << 20, size=24))
    x = rng.integers(-(1 << 23), 1 << 23, size=301)
    y = sim.simulate(ChannelProgram("i", 48000, ar, (PolyFirOp(taps=taps, shift=0, up=L),)), x)
    u = np.zeros(len(x) * L, dtype=object)
    u[::L] = [int(v) for v in x]
    full = np.convolve(u, np.array(taps, dtype=object))[: len(u)]
    ref = np.clip(_round_shift_np(full, ar.coef.frac_bits, "add-half").astype(np.int64),
                  ar.data.min_int, ar.data.max_int)
    assert y.tolist() == ref.tolist()
    # float side (scipy.signal.upfirdn, the reference library): the same up to the rounding of each output
    f = signal.upfirdn(np.array(taps, float) / 2.0 ** 22, x.astype(float), up=L)[: len(x) * L]
    assert np.max(np.abs(f - y)) <= 0.5 + 1e-9


def test_float_polyphase_decimation_equals_scipy_upfirdn():
    # scipy.signal.upfirdn(h, x, down=M) is filter-then-downsample (the reference library)
    from scipy import signal

    rng = np.random.default_rng(5)
    taps = rng.normal(size=20) / 10
    x = rng.normal(size=200).astype(np.float32) / 4
    ar = Arithmetic(kind="float32", data=None, coef=None, acc_bits=0)
    op = PolyFirOp(taps=tuple(float(np.float32(t)) for t in taps), down=3)
    y = sim.simulate(ChannelProgram("f", 48000, ar, (op,)), x)
    ref = signal.upfirdn(np.array(op.taps), x.astype(float), down=3)[: len(y)]
    assert len(y) == 67
    assert np.allclose(y, ref, rtol=0, atol=1e-5)


def test_block_length_rule_and_output_length():
    ops_ = (PolyFirOp(taps=(1,), down=2), RateOp(down=3))
    assert decimation(ops_) == 6
    assert output_length(ops_, 12) == 2
    assert output_length(ops_, 13) == 3  # ceil(ceil(13/2)/3)
    assert output_length((PolyFirOp(taps=(1,), up=4),), 5) == 20


# ---------------------------------------------------------------- generated code (coefc build --kernel)

def _multirate_programs(arith, seed=3):
    """Decimating channels: a polyphase FIR (plain and symmetric), sections and a gain after it at the
    lower rate, two decimations in a row, and a bare keep-every-M-th (allow_aliasing)."""
    from c_build import _coef, _section

    rng = np.random.default_rng(seed)
    fixed = not arith.is_float
    sh = 1 if fixed else 0
    taps = tuple(_coef(arith, t, sh) for t in rng.uniform(-0.4, 0.4, 23))
    half = [_coef(arith, t, sh) for t in rng.uniform(-0.3, 0.3, 10)]
    sym = tuple(half + half[::-1])
    structure = "df1" if not fixed else "tdf2"
    return [
        ChannelProgram("dec3", 96000.0, arith, (PolyFirOp(taps, sh, down=3),)),
        ChannelProgram("dec2_sym", 96000.0, arith, (PolyFirOp(sym, sh, down=2, symmetric=True),
                                                    _section(rng, arith, structure, 0),
                                                    GainOp(_coef(arith, 1.5, sh), sh))),
        ChannelProgram("dec2x2", 96000.0, arith, (PolyFirOp(taps[:9], sh, down=2), PolyFirOp(sym, sh, down=2))),
        ChannelProgram("keep4", 96000.0, arith, (RateOp(down=4), GainOp(_coef(arith, 0.75, sh), sh))),
    ]


from coefc.program import GainOp  # noqa: E402


@pytest.mark.parametrize("target_name", ["mcu16", "mcu32", "dsp24", "float32"])
def test_generated_code_decimates_bit_exact_at_both_rates(target_name, tmp_path):
    # golden vectors: input at the input rate, outputs at the output rate (n / M), computed by the
    # engine (itself proven against tests/exact_model.py above); blocks of 1..64 times M, some in place
    from c_build import compilers, generated_files, run_generated, ubsan_works
    from coefc.targetspec import find_target
    from test_codegen import _native

    target = find_target(target_name)
    progs = _multirate_programs(target.arithmetic)
    files = generated_files(progs, target_name, "mrate", vectors=240)
    c = files["mrate.c"]
    assert "polyphase FIR decimating by 3" in c and "n = o;" in c
    assert "MRATE_DEC3_DECIMATION 3" in files["mrate.h"]
    for cc in compilers():
        flags = ("-O1", "-fsanitize=undefined", "-fno-sanitize-recover=all") if ubsan_works(cc) else ("-O2",)
        rc, out = run_generated(tmp_path / cc, [("mrate", files)], _native(cc, *flags))
        assert rc == 0, out
        assert "MISMATCH" not in out and "runtime error" not in out, out


def _halfband_ints(arith, n_taps, sh, seed=5):
    """Integer taps of a half-band low-pass of n_taps = 4k + 3 taps (coefc.design.fir.halfband_taps)."""
    from c_build import _coef
    from coefc.design.fir import halfband_taps

    return tuple(_coef(arith, float(t), sh) for t in halfband_taps(n_taps, 9000.0, 48000.0))


def _interpolating_programs(arith, seed=4):
    """Interpolating channels: a polyphase FIR by 2 and 3 (short branches written out, long ones as
    loops), a half-band by 2 (zero taps skipped, long branches), a gain in front (the interpolation
    then works in place in the output array), a bare zero insertion before a section, and an
    interpolation by 2 followed by a decimation by 3 (rate 2/3)."""
    from c_build import _coef, _section

    rng = np.random.default_rng(seed)
    sh = 1
    taps = tuple(_coef(arith, t, sh) for t in rng.uniform(-0.4, 0.4, 23))
    hb = _halfband_ints(arith, 43, sh)
    irregular = tuple(0 if j % 3 == 1 or j in (4, 11) else t for j, t in enumerate(taps + taps))
    sym21 = taps[:10] + (taps[10],) + taps[:10][::-1]
    return [
        ChannelProgram("int2", 48000.0, arith, (PolyFirOp(taps[:11], sh, up=2),)),
        ChannelProgram("int3", 48000.0, arith, (PolyFirOp(taps, sh, up=3), GainOp(_coef(arith, 1.5, sh), sh))),
        ChannelProgram("hb2", 48000.0, arith, (GainOp(_coef(arith, 0.75, sh), sh),
                                               PolyFirOp(hb, sh, up=2, symmetric=True))),
        ChannelProgram("odd2", 48000.0, arith, (PolyFirOp(irregular, sh, up=2),)),
        ChannelProgram("zeros2", 48000.0, arith, (RateOp(up=2), _section(rng, arith, "df1", 0))),
        ChannelProgram("up2dn3", 48000.0, arith, (PolyFirOp(taps, sh, up=2), PolyFirOp(hb, sh, down=3))),
        ChannelProgram("hbdec", 96000.0, arith, (PolyFirOp(hb, sh, down=2, symmetric=True),)),
        # short symmetric branches written out folded; by 3 the middle branch is symmetric with a middle tap
        ChannelProgram("hb11", 48000.0, arith, (PolyFirOp(_halfband_ints(arith, 11, sh), sh, up=2, symmetric=True),)),
        ChannelProgram("sym3", 48000.0, arith, (PolyFirOp(sym21, sh, up=3, symmetric=True),)),
        ChannelProgram("odddec", 96000.0, arith, (PolyFirOp(irregular, sh, down=2),)),
    ]


@pytest.mark.parametrize("target_name", ["mcu16", "mcu32", "dsp24"])
def test_generated_code_interpolates_bit_exact_at_both_rates(target_name, tmp_path):
    # golden vectors: the input at the input rate, each channel's output at its own rate (n L / M),
    # computed by the engine; the engine's interpolation integers equal the exact model (below); blocks of
    # 1..64 times M, every other one in place (the interpolation runs backwards through the block)
    from c_build import compilers, generated_files, m32_works, run_generated, ubsan_works
    from coefc.targetspec import find_target
    from test_codegen import _native

    target = find_target(target_name)
    progs = _interpolating_programs(target.arithmetic)
    for p in progs:  # the golden vectors' source agrees with the exact model
        x = np.random.default_rng(7).integers(-(1 << (p.arithmetic.data.width - 1)),
                                              1 << (p.arithmetic.data.width - 1), size=60)
        assert sim.simulate(p, x).tolist() == exact_model.run_program(p, x)[0], p.name
    files = generated_files(progs, target_name, "irate", vectors=240)
    c, h = files["irate.c"], files["irate.h"]
    assert "polyphase FIR interpolating by 3" in c and "n = n * 2u;" in c and "for (t = n; t-- > 0u;)" in c
    assert "IRATE_INT3_INTERPOLATION 3" in h and "IRATE_UP2DN3_DECIMATION 3" in h
    assert "48000 Hz in, 96000 Hz out" in h and "out must have room for n * 2 samples" in h
    assert "48000 Hz in, 32000 Hz out" in h and "n a multiple of 3" in h
    # the half-band's zero taps are skipped: the decimator's folded loop runs over every other pair
    assert "2u * j" in c and "11 non-zero taps pairs of 21" in c
    assert "branch 0: symmetric, 3 multiplies (pairs folded)" in c  # hb11: 6 taps, 3 pairs
    assert "branch 1: symmetric, 4 multiplies (pairs folded)" in c  # sym3: 7 taps, 3 pairs and the middle
    for cc in compilers():
        flags = ("-O1", "-fsanitize=undefined", "-fno-sanitize-recover=all") if ubsan_works(cc) else ("-O2",)
        rc, out = run_generated(tmp_path / cc, [("irate", files)], _native(cc, *flags))
        assert rc == 0, out
        assert "MISMATCH" not in out and "runtime error" not in out and out.count(": ok") == 1, out
        if m32_works(cc):
            rc, out = run_generated(tmp_path / f"{cc}32", [("irate", files)], _native(cc, "-O2", "-m32"))
            assert rc == 0, out


def test_generated_interpolation_on_other_machines(tmp_path):
    """32-bit ARM and big-endian s390x under qemu-user, Cortex-M4 bare metal (as tests/test_codegen.py)."""
    from c_build import CROSS, generated_files, run_generated
    from coefc.targetspec import find_target

    files = generated_files(_interpolating_programs(find_target("mcu32").arithmetic), "mcu32", "xrate", vectors=120)
    ran = 0
    for platform in CROSS:
        if platform.missing():
            continue
        rc, out = run_generated(tmp_path / platform.name.split()[0], [("xrate", files)], platform)
        assert rc == 0, f"{platform.name}:\n{out}"
        if platform.runner is not None:
            assert out.count(": ok") == 1, out
        ran += 1
    if not ran:
        pytest.skip("no cross compiler or emulator installed")


def test_generated_code_catches_a_wrong_interpolated_golden_value(tmp_path):
    from c_build import compilers, generated_files, off_by_one_golden, run_generated
    from coefc.targetspec import find_target

    from test_codegen import _native

    progs = _interpolating_programs(find_target("mcu32").arithmetic)[:1]
    files = generated_files(progs, "mcu32", "ibad", vectors=120)
    c = off_by_one_golden(files["ibad.c"], "ibad_int2_golden_out[240]", 1)  # the second output: the odd phase
    rc, out = run_generated(tmp_path, [("ibad", dict(files, **{"ibad.c": c}))], _native(compilers()[0], "-O2"))
    assert "compile failed" not in out
    assert rc != 0 and ": ok" not in out, out


def test_float32_interpolation_code_is_bit_exact(tmp_path):
    # float32: every product and sum rounded in the engine's order (coefc.program), bits compared
    from c_build import _coef, compilers, generated_files, run_generated
    from coefc.design.fir import halfband_taps
    from coefc.targetspec import find_target
    from test_codegen import _native

    ar = find_target("float32").arithmetic
    rng = np.random.default_rng(11)
    taps = tuple(_coef(ar, t) for t in rng.uniform(-0.5, 0.5, 23))
    hb = tuple(_coef(ar, float(t) * 2) for t in halfband_taps(43, 9000.0, 48000.0))
    progs = [ChannelProgram("f2", 48000.0, ar, (PolyFirOp(taps[:7], up=2),)),
             ChannelProgram("f3", 48000.0, ar, (GainOp(_coef(ar, 0.5), 0), PolyFirOp(taps, up=3))),
             ChannelProgram("fhb", 48000.0, ar, (PolyFirOp(hb, up=2, symmetric=True),)),
             ChannelProgram("fz", 48000.0, ar, (RateOp(up=2), PolyFirOp(taps, down=2)))]
    files = generated_files(progs, "float32", "fint", vectors=120)
    assert "polyphase FIR interpolating by 3, 23 taps in 3 branches (float32)" in files["fint.c"]
    for cc in compilers():
        rc, out = run_generated(tmp_path / cc, [("fint", files)], _native(cc, "-O2"))
        assert rc == 0 and out.count(": ok") == 1, out


def test_generated_code_catches_a_wrong_decimated_golden_value(tmp_path):
    from c_build import compilers, generated_files, off_by_one_golden, run_generated
    from coefc.targetspec import find_target
    from test_codegen import _native

    progs = _multirate_programs(find_target("mcu32").arithmetic)[:1]
    files = generated_files(progs, "mcu32", "mbad", vectors=240)
    # change the first golden output value of the channel (80 = 240 / 3 outputs) by one LSB
    c = off_by_one_golden(files["mbad.c"], "mbad_dec3_golden_out[80]")
    rc, out = run_generated(tmp_path, [("mbad", dict(files, **{"mbad.c": c}))], _native(compilers()[0], "-O2"))
    assert "compile failed" not in out
    assert rc != 0 and ": ok" not in out, out


def test_golden_length_not_a_multiple_of_the_decimation_is_one_line():
    from c_build import generated_files
    from coefc.emit.codegen import GeneratedCodeError
    from coefc.targetspec import find_target

    progs = _multirate_programs(find_target("mcu32").arithmetic)[:1]
    with pytest.raises(GeneratedCodeError, match="not a multiple of it"):
        generated_files(progs, "mcu32", "modd", vectors=100)


# ---------------------------------------------------------------- everything knows the rate

def _coefc(*args):
    import subprocess
    import sys

    return subprocess.run([sys.executable, "-c", "from coefc.cli import main; main()", *map(str, args)],
                          capture_output=True, text=True, timeout=300)


def _example(name):
    from conftest import FILTERS

    return FILTERS / name


def test_design_json_gives_each_channel_its_output_rate_and_each_stage_its_rate(tmp_path):
    import json

    src = tmp_path / "two.toml"
    src.write_text('name = "two"\nsample_rate_hz = 96000\n\n[[channel]]\nname = "down"\nstages = [\n'
                   '  { kind = "fir-lowpass", passband_hz = 20000, stopband_hz = 24000, attenuation_db = 80 },\n'
                   '  { kind = "decimate", factor = 2 },\n'
                   '  { kind = "lowpass", response = "butterworth", order = 2, cutoff_hz = 8000 },\n]\n\n'
                   '[[channel]]\nname = "full"\nstages = [ { kind = "gain", db = -6 } ]\n')
    r = _coefc("design", src, "--json", "-")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    by = {c["name"]: c for c in d["channels"]}
    assert by["down"]["output_rate_hz"] == 48000 and by["full"]["output_rate_hz"] == 96000
    assert [s["rate_hz"] for s in by["down"]["stages"]] == [96000, 96000, 48000]
    text = _coefc("design", src).stdout
    assert "input 96000 Hz, output 48000 Hz" in text and "[48000 Hz] lowpass" in text
    # channels that end at different rates cannot share one output file: one line, exit 2
    (tmp_path / "in.txt").write_text("\n".join(["0", "1000", "-1000", "5"] * 8) + "\n")
    r = _coefc("run", src, tmp_path / "in.txt", tmp_path / "o.wav")
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "different rates" in r.stderr
    assert not (tmp_path / "o.wav").exists()


def test_run_writes_the_output_rate_and_one_line_per_output_sample(tmp_path):
    from scipy.io import wavfile

    src = _example("decimator_88k2.toml")
    x = np.random.default_rng(2).integers(-(1 << 30), 1 << 30, size=1001)
    (tmp_path / "in.txt").write_text("\n".join(map(str, x)) + "\n")
    r = _coefc("run", src, tmp_path / "in.txt", tmp_path / "o.txt")
    assert r.returncode == 0, r.stderr
    lines = [ln for ln in (tmp_path / "o.txt").read_text().splitlines() if not ln.startswith("#")]
    assert len(lines) == 501  # ceil(1001 / 2)
    r = _coefc("run", src, tmp_path / "in.txt", tmp_path / "o.wav")
    assert r.returncode == 0, r.stderr
    rate, data = wavfile.read(tmp_path / "o.wav")
    assert rate == 44100 and len(data) == 501
    # the samples are the engine's: the realised program run on the same words
    import coefc

    real = coefc.load(src).design().realise()
    y = real.simulate(x)["antialias"]
    assert [int(v) for v in lines] == y.tolist()


def test_check_states_the_rates_and_the_block_length_rule():
    import json

    r = _coefc("check", _example("decimator_192k.toml"), "--json", "-")
    assert r.returncode == 0, r.stderr
    ch = json.loads(r.stdout)["channels"][0]
    assert ch["sample_rate_hz"] == 192000 and ch["output_rate_hz"] == 96000 and ch["block_multiple"] == 2
    text = _coefc("check", _example("decimator_192k.toml")).stdout
    assert "192000 Hz -> 96000 Hz" in text and "multiple of 2" in text


# ---------------------------------------------------------------- analysis

def test_alias_attenuation_equals_scipy_freqz_at_the_folding_frequencies():
    # independent reference: scipy.signal.freqz of the realised taps on every frequency above the
    # output Nyquist whose image |f - k fs_out| lies in 0..20 kHz (the definition of aliasing in
    # decimation, Crochiere & Rabiner 1983, sec. 2.3; from memory)
    from scipy import signal

    import coefc
    from coefc.analyse.response import alias_attenuation

    real = coefc.load(_example("decimator_88k2.toml")).design().realise()
    prog, design = real.programs[0], real.design.channels[0]
    a = alias_attenuation(design, prog, passband=((0.0, 20000.0),))
    fc = prog.arithmetic.coef.frac_bits
    op = prog.ops[0]
    taps = np.array(op.taps, dtype=float) * 2.0 ** (op.shift - fc)
    gain = np.prod([float(o.coef) * 2.0 ** (o.shift - fc) for o in prog.ops[1:]])
    f_alias = np.linspace(44100 - 20000, 44100, 20001)  # folds onto 20 kHz .. 0 at 44.1 kHz
    f_pass = np.linspace(0, 20000, 20001)
    _, h_alias = signal.freqz(taps * gain, worN=f_alias, fs=88200)
    _, h_pass = signal.freqz(taps * gain, worN=f_pass, fs=88200)
    ref = 20 * np.log10(np.max(np.abs(h_pass))) - 20 * np.log10(np.max(np.abs(h_alias)))
    assert abs(a.attenuation_db - ref) < 0.05, (a.attenuation_db, ref)
    assert a.low_rate_hz == 44100 and 24100 <= a.worst_hz <= 44100


def test_single_rate_channel_has_no_alias_figure_and_the_check_is_not_applicable():
    import coefc
    from coefc.analyse.response import alias_attenuation

    real = coefc.load(_example("three_way_monitor.toml")).design().realise()
    assert all(alias_attenuation(d, p) is None for d, p in zip(real.design.channels, real.programs))


def test_alias_budget_fails_a_short_anti_alias_filter(tmp_path):
    src = tmp_path / "short.toml"
    src.write_text('name = "brief"\nsample_rate_hz = 96000\n\n[implementation]\ntarget = "mcu32"\n'
                   'scaling = "l1"\n\n[budget]\nalias_attenuation_db = 80\npassband = [[0, 20000]]\n\n'
                   '[[channel]]\nname = "a"\nstages = [\n'
                   '  { kind = "fir-lowpass", passband_hz = 20000, stopband_hz = 40000, attenuation_db = 60 },\n'
                   '  { kind = "decimate", factor = 2 },\n]\n')
    r = _coefc("check", src)
    assert r.returncode == 1 and "FAIL alias_attenuation_db" in r.stdout, r.stdout


def test_l1_bound_of_a_polyphase_node_is_reached_on_a_kept_sample():
    # the equivalent single-rate model's l1 gain of the decimating FIR is reached by the input
    # sign(h[K - n]) at the kept output K (Jackson's l1 argument; K a multiple of M): the analysis
    # covers the branches, and the engine's output there is that bound (to rounding)
    import coefc
    from coefc.analyse.linear import op_models

    real = coefc.load(_example("decimator_192k.toml")).design().realise()
    prog = real.programs[0]
    m = op_models(prog)[0]
    assert m.kind == "polyfir" and m.down == 2
    h = m.b
    K = 2 * len(h)
    x = np.zeros(K + 2, dtype=np.int64)
    top = prog.arithmetic.data.max_int
    for j in range(len(h)):
        x[K - j] = top if h[j] >= 0 else -top
    from coefc.program import ChannelProgram

    y = coefc.simulate.simulate(ChannelProgram("p", prog.sample_rate_hz, prog.arithmetic, prog.ops[:1]), x)
    bound = float(np.sum(np.abs(h))) * top
    assert abs(y[K // 2] - bound) <= 1.0 + 1e-9 * bound
    assert np.all(np.abs(y) <= bound + 1.0)


# ---------------------------------------------------------------- half-band filters (method = "halfband")

HB = """name = "hb"
sample_rate_hz = {fs}

[implementation]
target = "{target}"
scaling = "{scaling}"

[[channel]]
name = "c"
stages = [
  {stages}
]
"""
FILTER = ('{{ kind = "fir-lowpass", method = "halfband", passband_hz = 20000, stopband_hz = 28000, '
          'attenuation_db = {att} }},')


def _hb(tmp_path, target="mcu32", scaling="l1", att=90, rate="decimate"):
    import coefc

    p = tmp_path / f"hb_{target}_{scaling}_{rate}.toml"
    fir = FILTER.format(att=att).replace("{{", "{").replace("}}", "}")
    rc = '{ kind = "%s", factor = 2 },' % rate
    stages = f"{fir}\n  {rc}" if rate == "decimate" else f"{rc}\n  {fir}"
    p.write_text(HB.format(target=target, scaling=scaling, fs=96000 if rate == "decimate" else 48000,
                           stages=stages))
    return coefc.load(p).design()


@pytest.mark.parametrize("n_taps", [3, 7, 11, 23, 43, 75])
def test_halfband_design_has_every_other_tap_zero_and_the_centre_one_half(n_taps):
    # A half-band filter of N = 4k + 3 taps: h[c + 2m] = 0 for m != 0 and h[c] = 1/2, c = (N - 1)/2
    # (Vaidyanathan 1993, sec. 4.6.1; from memory); hence H(f) + H(fs/2 - f) = 1 for the zero-phase
    # amplitudes (the same source).
    from coefc.design.fir import halfband_taps

    h = halfband_taps(n_taps, 9000.0, 48000.0)
    c = (n_taps - 1) // 2
    zero = [j for j in range(n_taps) if (j - c) % 2 == 0 and j != c]
    assert len(zero) == (n_taps - 3) // 2 and all(h[j] == 0.0 for j in zero)  # exactly, not nearly
    assert h[c] == 0.5 and h[0] != 0.0 and np.array_equal(h, h[::-1])
    w = np.linspace(0, np.pi, 257)
    amp = lambda f: np.real(np.exp(1j * f[:, None] * (np.arange(n_taps) - c)) @ h)  # noqa: E731
    assert np.allclose(amp(w) + amp(np.pi - w), 1.0, atol=1e-12)


@pytest.mark.parametrize("n_taps", [11, 23])
def test_halfband_trick_equals_a_direct_parks_mcclellan_design(n_taps):
    # Reference: scipy.signal.remez of the full length with the symmetric bands [0, fp], [fs/2 - fp, fs/2]
    # and equal weights is the same minimax half-band filter (Vaidyanathan and Nguyen 1987; from memory).
    from scipy import signal
    from coefc.design.fir import halfband_taps

    fs, fp = 96000.0, 20000.0
    direct = signal.remez(n_taps, [0, fp, fs / 2 - fp, fs / 2], [1, 0], fs=fs)
    assert np.max(np.abs(halfband_taps(n_taps, fp, fs) - direct)) < 1e-9


@pytest.mark.parametrize("target", ["mcu16", "mcu32", "dsp24"])
@pytest.mark.parametrize("scaling", ["none", "l1"])
def test_halfband_zero_taps_stay_exactly_zero_when_realised(tmp_path, target, scaling):
    # quantisation keeps the zero taps zero (round(0) = 0 in every rounding mode) and the polyphase op
    # keeps them; the cost figures count only the non-zero taps
    from coefc.emit.codegen import cost_of

    design = _hb(tmp_path, target, scaling, att=70 if target == "mcu16" else 90)
    prog = design.realise().programs[0]
    op = next(o for o in prog.ops if isinstance(o, PolyFirOp))
    n, c = len(op.taps), (len(op.taps) - 1) // 2
    assert n % 4 == 3 and op.down == 2
    assert all(op.taps[j] == 0 for j in range(n) if (j - c) % 2 == 0 and j != c)
    assert all(op.taps[j] != 0 for j in range(0, n, 2)) and op.taps[c] != 0
    only = ChannelProgram("o", prog.sample_rate_hz, prog.arithmetic, (op,))
    nonzero_pairs = (n + 1) // 4 + 1  # (k + 1) folded pairs and the centre tap, N = 4k + 3
    assert cost_of(only)["muls_per_sample"] == -(-nonzero_pairs // 2)


def test_halfband_decimation_matches_scipy_and_the_exact_model(tmp_path):
    # float side: the realised taps through scipy.signal.upfirdn(h, x, down=2) and
    # scipy.signal.resample_poly(x, 1, 2, window=h) (the reference library) equal the engine's output to
    # within the output rounding; integer side: the engine equals tests/exact_model.py
    from scipy import signal

    prog = _hb(tmp_path, "mcu32", "none").realise().programs[0]
    assert len(prog.ops) == 1
    op = prog.ops[0]
    fc = prog.arithmetic.final_shift(op.shift)
    x = np.random.default_rng(3).integers(-(1 << 29), 1 << 29, size=400)
    y = sim.simulate(prog, x)
    assert y.tolist() == exact_model.run_program(prog, x)[0]
    h = np.array(op.taps, dtype=float) / 2.0 ** fc
    ref = signal.upfirdn(h, x.astype(float), down=2)[: len(y)]
    assert np.max(np.abs(ref - y)) <= 0.5 + 1e-6
    # scipy.signal.resample_poly(x, 1, 2, window=h) removes the filter's delay c = (N - 1)/2 (odd for
    # N = 4k + 3) after padding h with one leading zero: its i-th output is the full-rate convolution at
    # 2i + c, which is the engine's output (i + (c + 1)/2) for the input delayed by one sample
    c = (len(h) - 1) // 2
    y1 = sim.simulate(prog, np.concatenate([[0], x]))
    rp = signal.resample_poly(x.astype(float), 1, 2, window=h)
    m = len(y1) - (c + 1) // 2
    assert m > 150
    assert np.max(np.abs(rp[:m] - y1[(c + 1) // 2:])) <= 0.5 + 1e-6


def test_halfband_interpolation_integers_equal_the_exact_model(tmp_path):
    # interpolation by 2 with a half-band image filter (the gain 2 of zero insertion in its taps):
    # the engine's integers equal the exact model's; every other tap of the op is still zero
    prog = _hb(tmp_path, "mcu32", "l1", rate="interpolate").realise().programs[0]
    x = np.random.default_rng(8).integers(-(1 << 31), 1 << 31, size=300)
    y = sim.simulate(prog, x)
    assert len(y) == 600
    assert y.tolist() == exact_model.run_program(prog, x)[0]
    op = next(o for o in prog.ops if isinstance(o, PolyFirOp))
    c = (len(op.taps) - 1) // 2
    assert op.up == 2 and all(op.taps[j] == 0 for j in range(len(op.taps)) if (j - c) % 2 == 0 and j != c)


def test_halfband_search_finds_the_shortest_length(tmp_path):
    # the length found meets attenuation_db + margin_db measured on the dense grid and 4 taps fewer does not
    from coefc.design.fir import halfband_taps, measure

    d = _hb(tmp_path, "mcu32", "none", att=90)
    n = d.channels[0].stages[0].taps
    edges, passbands = [0, 20000, 28000, 48000], [True, False]
    assert measure(halfband_taps(n, 20000.0, 96000.0), edges, passbands, 96000.0)[1] >= 90.5
    assert measure(halfband_taps(n - 4, 20000.0, 96000.0), edges, passbands, 96000.0)[1] < 90.5
