"""The rounding and fitting step of generated code, on its own, against the exact model.

``coefc.emit.codegen._Fixed.finish`` writes the C lines that turn an accumulator
container into a data word (and the residual of error feedback).  It has two
forms: the offset form (one added constant, one compare) where its range argument
holds, and the biased form everywhere.  Both are compiled here (strict C99, UBSan)
and run on accumulators at every boundary the argument depends on: the ends of the
A-bit accumulator, the saturation thresholds and the rounding ties around them,
with arbitrary container bits above A, and the residual
both modulo the container and as an int32_t; one small geometry (d = 8, k = 4, A = 16)
is enumerated over all 2^16 accumulator values.  The expected words come from
tests/exact_model.py (rounding through exact rationals, written from the
definitions in coefc.program).
"""

from __future__ import annotations

import random
import subprocess

import pytest

from c_build import STRICT, UBSAN, WARNINGS, compilers, ubsan_works
from coefc.emit.codegen import _Fixed, _narrow_residual
from coefc.program import ChannelProgram
from coefc.qformat import ROUNDING_MODES, QFormat
from coefc.targetspec import find_target
from exact_model import fit, rshift

#: (data bits d, accumulator bits A, container bits C, rounding shift k, product shift P)
GEOMETRIES = [(32, 64, 64, 30, 0), (32, 40, 64, 30, 0), (32, 64, 64, 1, 0), (32, 64, 64, 31, 0),
              (16, 32, 32, 14, 0), (16, 24, 32, 14, 0), (16, 32, 32, 16, 0), (24, 56, 64, 22, 0),
              (28, 32, 32, 0, 29), (8, 16, 32, 4, 0)]
EXHAUSTIVE = (8, 16, 32, 4, 0)


def _fixed(d, A, C, k, P, rounding, overflow) -> _Fixed:
    arith = find_target("mcu32").arithmetic.with_(data=QFormat(1, d - 1), acc_bits=A, rounding=rounding,
                                                  overflow=overflow, product_shift=P)
    return _Fixed(ChannelProgram("c", 48000.0, arith, ()), "int16_t" if d <= 16 else "int32_t")


def _accumulators(d, A, C, k, rng) -> list[int]:
    """Signed A-bit accumulator values at the boundaries (or all of them for the small geometry)."""
    lo, hi = -(1 << (A - 1)), (1 << (A - 1)) - 1
    if (d, A, C, k, 0) == EXHAUSTIVE:
        return list(range(lo, hi + 1))
    h = 1 << max(k - 1, 0)
    deltas = {-(1 << k) - 1, -(1 << k), -h - 1, -h, -h + 1, -1, 0, 1, h - 1, h, h + 1, 1 << k}
    centres = [0, lo, hi, 1 << (d - 1 + k), -(1 << (d - 1 + k)), ((1 << (d - 1)) - 1) << k,
               hi - h, lo + h]
    centres += [rng.randrange(lo, hi + 1) >> k << k for _ in range(40)]
    vals = {min(hi, max(lo, c + dl)) for c in centres for dl in deltas}
    vals |= {rng.randrange(lo, hi + 1) for _ in range(300)}
    return sorted(vals)


def _case_function(name: str, fx: _Fixed, k: int, C: int, form: str) -> str | None:
    U = f"uint{C}_t"
    if form in ("offset", "narrow"):
        lines = fx._finish_offset("acc", k, C, "y", "e", narrow=form == "narrow")
        if lines is None:
            return None
    else:
        lines = fx._finish_biased("acc", k, C, "y", "e")
    body = "\n".join("    " + ln for ln in lines)
    et = "int32_t" if form == "narrow" else U
    return (f"static void {name}({U} acc, long long *yo, unsigned long long *eo)\n{{\n    {et} e;\n{body}\n"
            f"    *yo = (long long)y;\n    *eo = (unsigned long long)e;\n}}\n")


@pytest.mark.parametrize("cc", compilers())
def test_finish_forms_match_the_exact_model(cc, tmp_path):
    sanitize = UBSAN if ubsan_works(cc) else []  # without its runtime (clang here) the build is strict only
    rng = random.Random(12)
    funcs, cases, inputs, expect = [], [], [], []
    for geo in GEOMETRIES:
        d, A, C, k, P = geo
        accs = _accumulators(d, A, C, k, rng)
        for rounding in ROUNDING_MODES:
            for overflow in ("saturate", "wrap"):
                fx = _fixed(d, A, C, k, P, rounding, overflow)
                for form in ("offset", "biased", "narrow"):
                    if form == "biased" and k == 0 and not P:
                        continue
                    if form == "narrow" and not _narrow_residual(ChannelProgram("c", 48000.0, fx.p.arithmetic, ()),
                                                                  k, C):
                        continue
                    name = f"f{len(cases)}"
                    text = _case_function(name, fx, k, C, form)
                    if text is None:
                        continue
                    funcs.append(text)
                    cases.append((name, C, form))
                    idx = len(cases) - 1
                    for a in accs:
                        container = (a + (rng.getrandbits(C - A) << A if C > A else 0)) % (1 << C)
                        v = rshift(a, k, rounding)
                        y, _ = fit(v, d, overflow)
                        inputs.append(f"{idx} {container:x}")
                        # E modulo the container, or (an int32_t) its value sign-extended to 64 bits
                        e = (a - (v << k)) % (1 << (64 if form == "narrow" else C))
                        expect.append((y, e, (geo, rounding, overflow, form, a)))
    # the offset form holds for every geometry but the one with d + k = C (16 + 16 = 32)
    assert sum(1 for c in cases if c[2] == "offset") == (len(GEOMETRIES) - 1) * len(ROUNDING_MODES) * 2
    # a 32-bit residual for the five geometries of a 64-bit container
    assert sum(1 for c in cases if c[2] == "narrow") == 5 * len(ROUNDING_MODES) * 2
    dispatch = "\n".join(f"        case {i}: {name}((uint{C}_t)u, &y, &e); break;"
                         for i, (name, C, _) in enumerate(cases))
    src = ("#include <stdint.h>\n#include <stdio.h>\n\n" + "\n".join(funcs) +
           "\nint main(void)\n{\n    int i;\n    unsigned long long u;\n"
           "    while (scanf(\"%d %llx\", &i, &u) == 2) {\n        long long y = 0;\n"
           "        unsigned long long e = 0;\n        switch (i) {\n" + dispatch +
           "\n        default: return 2;\n        }\n        printf(\"%lld %llx\\n\", y, e);\n    }\n"
           "    return 0;\n}\n")
    (tmp_path / "finish.c").write_text(src)
    exe = tmp_path / "finish"
    r = subprocess.run([cc, *STRICT, *WARNINGS, "-O2", *sanitize, str(tmp_path / "finish.c"), "-o", str(exe)],
                       capture_output=True, text=True)
    assert r.returncode == 0, r.stderr[:4000]
    r = subprocess.run([str(exe)], input="\n".join(inputs) + "\n", capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, r.stderr[:2000]
    got = r.stdout.split("\n")
    assert len(got) - 1 == len(expect)
    bad = []
    for line, (y, e, where) in zip(got, expect):
        gy, ge = line.split()
        if int(gy) != y or int(ge, 16) != e:
            bad.append((where, (int(gy), int(ge, 16)), (y, e)))
    assert not bad, bad[:5]
