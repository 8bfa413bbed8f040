"""Generated code (``coefc build --kernel``) reproduces coefc's bit-true engine
exactly, wherever it is compiled.

The golden vectors inside each generated source are the output of
coefc.simulate, which tests/test_simulate.py proves against the independent exact
model in tests/exact_model.py.  The generated C is a third, separate
implementation of the arithmetic of coefc.program (specialised per channel), so a
pass is an agreement of independent implementations.  ``NAME_selftest()`` runs
every channel in blocks of irregular length (1 to 64 samples, every other block
in place) and returns the number of mismatching channels.

Builds are strict C99 (-Wall -Wextra -Werror -pedantic -Wconversion -Wshadow,
-ffp-contract=off), once optimised and once under the undefined-behaviour
sanitizer, with gcc and clang, natively and -m32; then on 32-bit ARM hard-float
and big-endian s390x under qemu-user, bare metal on an emulated Cortex-M4, and
compiled for Cortex-M0.  A platform whose Debian packages are missing is skipped
with a message naming them.
"""

from __future__ import annotations

import re

import pytest

from c_build import (CROSS, Platform, compilers, generated_files, hand_programs, m32_works, run_generated,
                     ubsan_works)
from conftest import example_files, examples_for
from coefc.api import load
from coefc.emit.codegen import CNames
from coefc.emit.header import c_identifier, render
from coefc.errors import DescriptionError
from coefc.qformat import ROUNDING_MODES
from coefc.targetspec import Overrides, find_target

TARGETS = ("mcu16", "mcu32", "dsp24", "float32", "mcu32hw")
NARROW_ACC = {"mcu16": 24, "mcu32": 40, "dsp24": 44, "mcu32hw": 30}


def _units(target_name: str, every_mode: bool = True, examples: bool = True):
    target = find_target(target_name)
    base = target.arithmetic
    out = []
    if base.is_float:
        out.append(("gen_f32", generated_files(hand_programs(base, target.structures), target_name, "gen_f32")))
    else:
        modes = [(r, o) for r in ROUNDING_MODES for o in ("saturate", "wrap")]
        if not every_mode:  # a representative set: each rounding mode once, both overflow modes
            modes = [(r, ("saturate", "wrap")[i % 2]) for i, r in enumerate(ROUNDING_MODES)]
        for j, (r, o) in enumerate(modes):
            name = f"gen_{r.replace('-', '_')}_{o}"
            out.append((name, generated_files(hand_programs(base.with_(rounding=r, overflow=o), target.structures,
                                                           seed=j + 1), target_name, name)))
        out.append(("gen_narrow", generated_files(
            hand_programs(base.with_(acc_bits=NARROW_ACC[target_name], overflow="wrap"), target.structures, seed=99),
            target_name, "gen_narrow")))
    if examples:
        for path in examples_for(target):
            for s in target.structures:
                real = load(path).design().realise(target, Overrides(structure=s))
                name = f"{path.stem}_{s}"
                files = render(real, None, header_name=f"{name}.h", vectors=128, generated=True)
                out.append((c_identifier(real.design.loaded.description.name, "name", name), files))
    return out


@pytest.fixture(scope="module", params=TARGETS)
def units(request):
    return request.param, _units(request.param)


def _native(cc: str, *flags: str) -> Platform:
    return Platform(f"{cc} {' '.join(flags)}", cc, flags)


@pytest.mark.parametrize("cc", compilers())
def test_generated_code_bit_exact(units, cc, tmp_path):
    target_name, us = units
    # examples of one description name in different structures go into separate builds
    for i, group in enumerate(_by_name(us)):
        rc, out = run_generated(tmp_path / str(i), group, _native(cc, "-O2"))
        assert rc == 0, out
        assert "MISMATCH" not in out and out.count(": ok") == len(group), out


@pytest.mark.parametrize("cc", compilers())
def test_generated_code_clean_under_ubsan(units, cc, tmp_path):
    if not ubsan_works(cc):
        pytest.skip(f"{cc} has no undefined-behaviour sanitizer runtime here")
    target_name, us = units
    for i, group in enumerate(_by_name(us)):
        rc, out = run_generated(tmp_path / str(i), group, _native(cc, "-O1", "-fsanitize=undefined",
                                                                  "-fno-sanitize-recover=all"))
        assert rc == 0, out
        assert "runtime error" not in out


@pytest.mark.parametrize("cc", compilers())
def test_generated_code_32_bit_build(units, cc, tmp_path):
    if not m32_works(cc):
        pytest.skip(f"{cc} cannot link -m32 programs here (Debian: gcc-multilib, or libc6-dev-i386 and "
                    "lib32gcc-12-dev)")
    target_name, us = units
    extra = ("-m32", "-msse2", "-mfpmath=sse") if target_name == "float32" else ("-m32",)
    for i, group in enumerate(_by_name(us)):
        rc, out = run_generated(tmp_path / str(i), group, _native(cc, "-O2", *extra))
        assert rc == 0, out


@pytest.mark.parametrize("platform", CROSS, ids=lambda p: p.name.split()[0])
def test_generated_code_on_other_machines(platform, tmp_path):
    """32-bit ARM hard-float and big-endian s390x (qemu-user), bare-metal Cortex-M4
    (qemu-system-arm, semihosting), Cortex-M0 (compile only): the hand-built
    programs of every target, each rounding mode once, and the bundled examples
    of mcu32 and float32 (the representative set keeps CI time short)."""
    missing = platform.missing()
    if missing:
        pytest.skip(f"{platform.name}: {', '.join(missing)} not installed (Debian packages gcc-arm-linux-gnueabihf, "
                    "libc6-dev-armhf-cross, gcc-s390x-linux-gnu, libc6-dev-s390x-cross, qemu-user, gcc-arm-none-eabi, libnewlib-arm-none-eabi, qemu-system-arm)")
    i = 0
    for t in TARGETS:
        group = _units(t, every_mode=False, examples=t in ("mcu32", "float32"))
        for sub in _by_name(group):
            rc, out = run_generated(tmp_path / f"{t}{i}", sub, platform)
            i += 1
            assert rc == 0, f"{platform.name}, target {t}:\n{out}"
            if platform.runner is not None:
                assert out.count(": ok") == len(sub), out


def _by_name(us):
    """Split units so no build holds two of the same C name."""
    groups: list[list] = []
    for u in us:
        for g in groups:
            if all(u[0] != v[0] for v in g):
                g.append(u)
                break
        else:
            groups.append([u])
    return groups


@pytest.mark.parametrize("target_name", TARGETS)
def test_a_wrong_golden_value_is_caught(target_name, tmp_path):
    """The self test can fail: one altered expected sample makes it return 1 (one
    channel), and the harness reports it."""
    target = find_target(target_name)
    files = generated_files(hand_programs(target.arithmetic, target.structures), target_name, "bent")
    text = files["bent.c"]
    marker = "bent_sec_df1_golden_out[256] = {\n    "
    at = text.index(marker) + len(marker)
    end = text.index(",", at)
    first = text[at:end]
    bent = "0x1p-3f" if target.arithmetic.is_float and first != "0x1p-3f" else ("1" if first != "1" else "2")
    files["bent.c"] = text[:at] + bent + text[end:]
    files["probe.c"] = '#include "bent.h"\nint probe(void);\nint probe(void) { return bent_selftest(); }\n'
    rc, out = run_generated(tmp_path, [("bent", files)], _native("gcc", "-O2"))
    assert rc == 1 and "bent: MISMATCH" in out, out


def test_contract_names_and_specialisation():
    """The header states the contract of the README; the source has no operation
    table and no run-time switch on modes: shifts and coefficients are literals."""
    target = find_target("mcu32")
    files = generated_files(hand_programs(target.arithmetic, target.structures), "mcu32", "demo")
    h, c = files["demo.h"], files["demo.c"]
    assert "typedef int32_t demo_data_t;" in h
    for ch in ("sec_df1", "sec_tdf2", "sec_df1ef", "fir", "gain", "delay", "mixed"):
        assert f"}} demo_{ch}_state_t;" in h
        assert f"void demo_{ch}_reset(demo_{ch}_state_t *s);" in h
        assert (f"void demo_{ch}_process(demo_{ch}_state_t *s, const demo_data_t *in, demo_data_t *out, "
                "size_t n);") in h
    assert "int demo_selftest(void);" in h
    assert '#ifdef __cplusplus\nextern "C" {' in h
    assert "switch" not in c and "_ops" not in c
    assert "g >> 30" in c  # the rounding shift of a section without coefficient shift is a literal
    # rounding and saturation by one added constant and one compare of the high word (a + 2^29 + 2^61)
    assert "const uint64_t g = acc + UINT64_C(0x2000000020000000);" in c
    assert "(uint32_t)(g >> 32) < UINT32_C(0x40000000) ?" in c
    # error feedback keeps E (|E| < 2^30) in 32 bits; tdf2 states are 64-bit (the accumulator's precision)
    assert re.search(r"int32_t op\d+_e; /\* E, the previous rounding residual \*/", h)
    assert re.search(r"uint64_t op\d+_s\[2\]; /\* S1, S2", h)
    # the df1 state words are data words
    assert re.search(r"int32_t op1_x\[2\]; /\* x\[n-1\], x\[n-2\] \*/", h)


def test_cost_figures_in_the_header():
    """Cost macros count the generated arithmetic: a df1 section has 5 multiplies
    and 4 adds per sample (b0 b1 b2 a1 a2; common practice, no source)."""
    target = find_target("mcu32")
    files = generated_files(hand_programs(target.arithmetic, target.structures), "mcu32", "demo")
    h = files["demo.h"]
    assert "#define DEMO_SEC_DF1_MULS_PER_SAMPLE 15" in h  # three sections
    assert "#define DEMO_SEC_DF1_ADDS_PER_SAMPLE 12" in h
    assert "#define DEMO_SEC_DF1_COEF_BYTES 60" in h  # 15 words of 4 bytes
    assert "#define DEMO_SEC_DF1_STATE_BYTES 48" in h  # 3 x 4 data words of 4 bytes
    assert "#define DEMO_SEC_DF1EF_STATE_BYTES 60" in h  # 3 x (4 data words + E in an int32_t, |E| < 2^30)
    assert "#define DEMO_SEC_TDF2_STATE_BYTES 48" in h  # 3 x 2 states of the 64-bit accumulator
    assert "#define DEMO_SYM17_MULS_PER_SAMPLE 9" in h  # folded: ceil(17 / 2)


def test_cost_figures_of_error_feedback_with_double_word_feedback():
    """df1ef-wide-fb: per section the 5 products of df1 and the 2 of the low feedback words, 7 adds (the 6 of
    df1-wide-fb and E), 7 stored coefficient words, state: 4 data words and E in the accumulator container
    (coefc.program's recurrence; counting as for df1, common practice, no source)."""
    target = find_target("mcu16")
    files = generated_files(hand_programs(target.arithmetic, ("df1ef-wide-fb",)), "mcu16", "demo")
    h, c = files["demo.h"], files["demo.c"]
    ident = c_identifier("sec_df1ef-wide-fb", "channel", "x").upper()
    assert f"#define DEMO_{ident}_MULS_PER_SAMPLE 21\n" in h  # three sections
    assert f"#define DEMO_{ident}_ADDS_PER_SAMPLE 21\n" in h
    assert f"#define DEMO_{ident}_COEF_BYTES 42\n" in h  # 21 words of 2 bytes
    assert f"#define DEMO_{ident}_STATE_BYTES 36\n" in h  # 3 x (4 data words of 2 bytes + E of 4 bytes)
    # the low products are floored on their own, the sum starts from E, and E is the residual of the
    # accumulator that holds the floored term (sums modulo the container: the order of the adds is free)
    body = c[c.index("uint32_t acc = e;"):]
    assert body.index("const int32_t lq =") < body.index("acc -= (uint32_t)lq;") < body.index("e = (g & ")


def test_cost_figures_of_double_word_numerator_and_feedback():
    """df1ef-wide: per section the 5 products of df1, the 2 low feedback and the 3 low numerator products
    (10 multiplies); 10 adds (the 7 of df1ef-wide-fb, 2 to sum the low numerator products and 1 to add their
    floor); 10 stored coefficient words; state as df1ef-wide-fb (coefc.program's recurrence; counting as for df1,
    common practice, no source)."""
    target = find_target("mcu16")
    files = generated_files(hand_programs(target.arithmetic, ("df1ef-wide",)), "mcu16", "demo")
    h, c = files["demo.h"], files["demo.c"]
    ident = c_identifier("sec_df1ef-wide", "channel", "x").upper()
    assert f"#define DEMO_{ident}_MULS_PER_SAMPLE 30\n" in h  # three sections
    assert f"#define DEMO_{ident}_ADDS_PER_SAMPLE 30\n" in h
    assert f"#define DEMO_{ident}_COEF_BYTES 60\n" in h  # 30 words of 2 bytes
    assert f"#define DEMO_{ident}_STATE_BYTES 36\n" in h  # 3 x (4 data words of 2 bytes + E of 4 bytes)
    # the sum starts from E, both low sums are floored on their own and added, and E is the residual of that
    # accumulator (sums modulo the container: the order of the adds is free)
    body = c[c.index("uint32_t acc = e;"):]
    assert body.index("const int32_t nq =") < body.index("acc += (uint32_t)nq;") \
        < body.index("acc -= (uint32_t)lq;") < body.index("e = (g & ")


def _df1ef_wide_units():
    """Hand-built df1ef-wide channels on mcu16, every rounding and overflow mode and a wrapping 24-bit accumulator."""
    base = find_target("mcu16").arithmetic
    out = []
    for j, r in enumerate(ROUNDING_MODES):
        for o in ("saturate", "wrap"):
            name = f"w_{r.replace('-', '_')}_{o}"
            out.append((name, generated_files(hand_programs(base.with_(rounding=r, overflow=o), ("df1ef-wide",),
                                                            seed=40 + j), "mcu16", name)))
    out.append(("w_narrow", generated_files(hand_programs(base.with_(acc_bits=24, overflow="wrap"), ("df1ef-wide",),
                                                          seed=99), "mcu16", "w_narrow")))
    return out


def _wide_platforms():
    out = []
    for cc in compilers():
        out.append(pytest.param(_native(cc, "-O2"), id=f"{cc}-O2"))
        out.append(pytest.param(_native(cc, "-O1", "-fsanitize=undefined", "-fno-sanitize-recover=all"),
                                id=f"{cc}-ubsan"))
        out.append(pytest.param(_native(cc, "-O2", "-m32"), id=f"{cc}-m32"))
    out += [pytest.param(p, id=p.name.split()[0]) for p in CROSS]
    return out


@pytest.mark.parametrize("platform", _wide_platforms())
def test_df1ef_wide_generated_code_bit_exact(platform, tmp_path):
    """df1ef-wide (double-word numerator and feedback, error feedback) in generated code equals the engine's
    golden vectors on every platform here: gcc and clang natively, under UBSan and -m32, and the cross
    platforms (skipped where their packages are missing)."""
    if "-fsanitize=undefined" in platform.flags and not ubsan_works(platform.cc):
        pytest.skip(f"{platform.cc} has no undefined-behaviour sanitizer runtime here")
    if "-m32" in platform.flags and not m32_works(platform.cc):
        pytest.skip(f"{platform.cc} cannot link -m32 programs here")
    missing = platform.missing()
    if missing:
        pytest.skip(f"{platform.name}: {', '.join(missing)} not installed")
    units = _df1ef_wide_units()
    rc, out = run_generated(tmp_path, units, platform)
    assert rc == 0, out
    assert "runtime error" not in out and "MISMATCH" not in out
    if platform.runner is not None:
        assert out.count(": ok") == len(units), out


def test_generated_names_that_collide_are_refused():
    """The one place that builds the C names refuses two channels that would
    define the same identifier (here: the same channel name twice)."""
    CNames("x", ("a", "b")).validate("x.toml")
    with pytest.raises(DescriptionError, match="also uses; rename the channel"):
        CNames("x", ("a", "a")).validate("x.toml")


def test_cpp_firmware_links_generated_code(tmp_path):
    """The generated header carries extern "C" guards: C++ compiled with g++ links
    the generated C compiled with gcc and its self test passes."""
    import shutil
    import subprocess

    if shutil.which("g++") is None or shutil.which("gcc") is None:
        pytest.skip("g++ is not installed")
    target = find_target("mcu32")
    for name, text in generated_files(hand_programs(target.arithmetic, target.structures), "mcu32", "cpp").items():
        (tmp_path / name).write_text(text)
    (tmp_path / "main.cpp").write_text('#include "cpp.h"\nint main() { return cpp_selftest(); }\n')
    for cmd in (["gcc", "-std=c99", "-O2", "-c", "cpp.c", "-o", "cpp.o"],
                ["g++", "-std=c++11", "-Wall", "-Wextra", "-Werror", "-I.", "main.cpp", "cpp.o", "-o", "fw"],
                ["./fw"]):
        p = subprocess.run(cmd, cwd=tmp_path, capture_output=True, text=True, timeout=120)
        assert p.returncode == 0, " ".join(cmd) + "\n" + p.stdout + p.stderr


def test_cost_figures_in_check_json_and_text(tmp_path):
    """check states the cost of each channel; the figures agree with the header's."""
    import json

    from test_emit_cli import coefc

    path = next(p for p in example_files() if p.stem == "three_way_monitor")
    r = coefc("check", path, "--json", tmp_path / "r.json")
    assert r.returncode == 0, r.stderr
    assert "generated code costs per sample" in r.stdout
    chans = {c["name"]: c["metrics"]["cost"] for c in json.loads((tmp_path / "r.json").read_text())["channels"]}
    real = load(path).design().realise(find_target("mcu32"), Overrides())
    h = render(real, None, header_name="m.h", vectors=0, generated=True)["m.h"]
    for name, cost in chans.items():
        ident = c_identifier(name, "channel", "x").upper()
        assert f"_{ident}_MULS_PER_SAMPLE {cost['muls_per_sample']}\n" in h
        assert f"_{ident}_STATE_BYTES {cost['state_bytes']}\n" in h
