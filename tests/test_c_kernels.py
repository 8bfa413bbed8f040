"""The reference C kernels of every built-in target reproduce coefc's bit-true
engine exactly.

Each emitted header carries golden vectors: a fixed input and the output of
coefc.simulate.  A small C main runs them through the target's reference kernel
(an independent C implementation of the arithmetic stated in coefc.program) and
requires bit-exact equality, for every structure the target supports, FIR,
symmetric FIRs of odd and even length (folded by the fixed-point kernels, stored
whole for float32), gain, delay, every rounding mode, saturation and wrap, narrow accumulators that wrap,
and the example descriptions in filters/.  Builds are strict C99
(-Wall -Wextra -Werror -pedantic), with -ffp-contract=off, once optimised and once
under the undefined-behaviour sanitizer; -m32 and clang when present.
"""

from __future__ import annotations

import pytest

from c_build import (compilers, emit_text, hand_programs, kernel_structures, m32_works, run_headers, ubsan_works)
from coefc.cli.options import OPTION_OF_SETTING
from conftest import example_files, examples_for
from coefc.api import load
from coefc.emit.header import EmitError, render
from coefc.qformat import ROUNDING_MODES
from coefc.targetspec import Overrides, find_target

TARGETS = ("mcu16", "mcu32", "dsp24", "float32", "mcu32hw")
# accumulators narrower than a product plus headroom, so sums wrap
NARROW_ACC = {"mcu16": 24, "mcu32": 40, "dsp24": 44, "mcu32hw": 30}


def _headers(target_name: str) -> list[tuple[str, str, str]]:
    target = find_target(target_name)
    base = target.arithmetic
    structures = kernel_structures(target.structures)  # df1-wide-fb: generated code only
    out = []
    if base.is_float:
        out.append(emit_text(hand_programs(base, structures), target_name, "hand_f32"))
    else:
        for rounding in ROUNDING_MODES:
            for overflow in ("saturate", "wrap"):
                arith = base.with_(rounding=rounding, overflow=overflow)
                out.append(emit_text(hand_programs(arith, structures, seed=len(out) + 1), target_name,
                                     f"hand_{rounding.replace('-', '_')}_{overflow}"))
        arith = base.with_(acc_bits=NARROW_ACC[target_name], overflow="wrap")
        out.append(emit_text(hand_programs(arith, structures, seed=99), target_name, "hand_narrow_acc"))
    return out


def _example_headers(target_name: str):
    """Headers of the example descriptions in every structure the target supports,
    and the (example, structure, error) of any the emitter refused."""
    target = find_target(target_name)
    out, refused = [], []
    for path in examples_for(target):
        for s in kernel_structures(target.structures):
            real = load(path).design().realise(target, Overrides(structure=s))
            name = real.design.loaded.description.name
            fname = f"{path.stem}_{s}.h"
            try:
                text = render(real, None, header_name=fname, vectors=128)[fname]
            except EmitError as e:
                refused.append((path.name, s, e.spoken(OPTION_OF_SETTING)))  # as the CLI prints it
                continue
            out.append((fname, name, text))
    return out, refused


@pytest.fixture(scope="module", params=TARGETS)
def target_headers(request):
    examples, _ = _example_headers(request.param)
    return request.param, _headers(request.param) + examples


@pytest.mark.parametrize("target_name", TARGETS)
def test_every_example_can_be_written_for_every_target(target_name):
    """The realiser keeps every rounding shift k = Fc - s >= 1 (coefc.program), so
    each example realised on each built-in target has a C form."""
    _, refused = _example_headers(target_name)
    # the reference kernels do not run multirate ops (issue 14): a decimating example is refused in
    # one line pointing to generated code, and nothing else is refused
    multirate = [r for r in refused if "multirate" in r[2]]
    assert all("\n" not in e and "--kernel" in e for _, _, e in multirate)
    assert not [r for r in refused if r not in multirate], refused


def test_hand_headers_exercise_the_folded_fir(target_headers):
    """Every hand-built fixed-point header holds folded symmetric FIRs of odd and
    even length (so the bit-exact, UBSan and -m32 runs cover the folded path,
    also with saturation, wrap and a narrow wrapping accumulator); float32 folds
    none."""
    target_name, headers = target_headers
    P = f"COEFC_{target_name.upper()}"
    hand = [text for fname, _, text in headers if fname.startswith("hand_")]
    assert hand
    for text in hand:
        for n in (17, 16, 7, 8, 1, 2):
            folded = f"{{{P}_OP_FIR_SYM, " in text and f"FIR, {n} taps, symmetric: {(n + 1) // 2} stored" in text
            assert folded == (target_name != "float32"), (target_name, n)
    assert any("hand_narrow_acc" == fname[:-2] for fname, _, _ in headers) == (target_name != "float32")


@pytest.mark.parametrize("cc", compilers())
def test_golden_vectors_bit_exact(target_headers, cc, tmp_path):
    target_name, headers = target_headers
    # every header of one build is a separate translation unit: the example
    # descriptions keep their own C names, one structure per unit
    rc, out = run_headers(tmp_path, target_name, headers, cc=cc)
    assert rc == 0, out
    assert out.count("ok ") >= len(headers), out
    assert "MISMATCH" not in out


@pytest.mark.parametrize("cc", compilers())
def test_golden_vectors_clean_under_ubsan(target_headers, cc, tmp_path):
    if not ubsan_works(cc):
        pytest.skip(f"{cc} has no undefined-behaviour sanitizer runtime here")
    target_name, headers = target_headers
    rc, out = run_headers(tmp_path, target_name, headers, cc=cc, extra=("-fsanitize=undefined",
                          "-fno-sanitize-recover=all"), opt="-O1")
    assert rc == 0, out
    assert "runtime error" not in out


@pytest.mark.parametrize("cc", compilers())
def test_golden_vectors_32_bit_build(target_headers, cc, tmp_path):
    if not m32_works(cc):
        pytest.skip(f"{cc} cannot link -m32 programs here (no 32-bit multilib)")
    target_name, headers = target_headers
    extra = ("-m32", "-msse2", "-mfpmath=sse") if target_name == "float32" else ("-m32",)
    rc, out = run_headers(tmp_path, target_name, headers[:6], cc=cc, extra=extra)
    assert rc == 0, out


@pytest.mark.parametrize("target_name", TARGETS)
def test_a_wrong_golden_value_is_caught(target_name, tmp_path):
    """The harness can fail: one altered expected sample must be reported."""
    target = find_target(target_name)
    fname, cname, text = emit_text(hand_programs(target.arithmetic, kernel_structures(target.structures)),
                                   target_name, "bent")
    marker = "bent_sec_df1_golden_out[256] = {\n    "
    at = text.index(marker) + len(marker)
    end = text.index(",", at)
    first = text[at:end]
    bent = "0x1p-3f" if target.arithmetic.is_float and first != "0x1p-3f" else (
        "1" if first != "1" else "2")
    text = text[:at] + bent + text[end:]
    rc, out = run_headers(tmp_path, target_name, [(fname, cname, text)])
    assert rc == 1, out
    assert "MISMATCH bent.h channel sec_df1 at sample 0" in out


def test_reference_kernels_refuse_double_word_feedback_in_one_line():
    # df1-wide-fb runs only in generated code: the operation-table header refuses it, naming the section and the fix
    from coefc.emit.header import EmitError

    # (df1ef-wide-fb, the same with error feedback, likewise)
    for target_name in ("mcu16", "mcu32", "dsp24"):
        target = find_target(target_name)
        path = next(p for p in example_files() if p.stem == "sound_level_meter")  # one with sections
        # (and df1ef-wide, the double-word numerator too, where the target lists it: mcu16)
        for structure in ("df1-wide-fb", "df1ef-wide-fb", *(("df1ef-wide",) if "df1ef-wide" in target.structures
                                                             else ())):
            real = load(path).design().realise(target, Overrides(structure=structure))
            with pytest.raises(EmitError) as e:
                render(real, None, header_name="x.h", vectors=0)
            msg = e.value.spoken(OPTION_OF_SETTING)  # as the CLI prints it: the fix names the option
            assert "\n" not in msg and structure in msg and "--kernel" in msg and "section 1" in msg
