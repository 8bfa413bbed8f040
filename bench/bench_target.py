"""Instructions per section-sample (or per tap) of generated code on 32-bit ARM.

Counts executed instructions under qemu (``-singlestep -d exec,nochain`` logs one
line per executed instruction) for the code ``coefc build --kernel`` writes, and
for a plain specialised C loop written here (states in locals, coefficients from
a const table, section-major, the shift a constant, the target's sums, add-half
rounding and saturation as a firmware engineer would write them), both compiled
with the same gcc -O2.  Each figure is the difference of two runs (2 x N and N
samples), so start-up and the harness cancel; divided by sections (or taps) and
samples.  Before counting, every plain loop and its generated code are built
natively (under UBSan where it works) and must give bit-identical outputs, in
irregular blocks, on the benchmark's input and on white noise at half full scale.

Rows: DF1, tdf2, df1ef, FIR per tap and folded (symmetric) FIR per tap in the
arithmetic of each built-in fixed-point target: mcu32 (Q1.31, 64-bit sums), mcu16
(Q1.15, 32-bit sums), dsp24 (Q1.23, 56-bit sums held in int64_t) and mcu32hw
(products rounded by 2^29 into 32-bit words summed modulo 2^32).  mcu32hw never
folds symmetric taps (a rounded product of a sum is not the sum of rounded
products), so it has no folded FIR row; the bench says so.

Platforms: user-mode 32-bit ARM (arm-linux-gnueabihf-gcc -O2 -mthumb, qemu-arm)
and bare-metal Cortex-M4 (arm-none-eabi-gcc -O2 -mcpu=cortex-m4, qemu-system-arm
-M mps2-an386).  Goal: the 8-section Q1.31 / 64-bit add-half saturating DF1 cascade
at <= 36 instructions per section-sample (parity with the plain loop; stretch 25);
every other row within 1.1x of its plain loop (a row above is marked).  Generated
code size is printed.

Run:  python bench/bench_target.py [--samples N]
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO / "tests"))

from c_build import BAREMETAL, M4_FLAGS, UBSAN, generated_files, ubsan_works  # noqa: E402
from coefc.program import ChannelProgram, FirOp, SectionOp  # noqa: E402
from coefc.targetspec import build_info, find_target  # noqa: E402

HARNESS = r"""
#include <stddef.h>
#include <stdint.h>
#include "%(header)s"
void bench_plain(const %(D)s *in, %(D)s *out, size_t n);
static %(D)s buf[64];
static %(state)s st;
int main(void);
int main(void)
{
    size_t t, m;
    uint32_t seed = 1u;
    for (t = 0u; t < (size_t)%(N)s; t += m) {
        size_t i;
        m = 64u;
        for (i = 0u; i < m; i++) {
            seed = seed * 1664525u + 1013904223u;
            buf[i] = (%(D)s)((int32_t)((seed >> 8) & 0xFFFFu) - 32768);
        }
#if PLAIN
        bench_plain(buf, buf, m);
#else
        %(process)s(&st, buf, buf, m);
#endif
    }
    return buf[3] == 12345 ? 1 : 0;
}
"""

# The plain loops.  One template per structure family, filled in with the target's data
# type, accumulator type, product (exact, or rounded by 2^P into a 32-bit word summed
# modulo 2^32 as a high-word kernel does), one constant final shift with add-half
# rounding, and saturation to the data word; the per-structure text is the
# states kept between blocks, their loads and stores, and the per-sample body.
PLAIN_SECTIONS = r"""
#include <stddef.h>
#include <stdint.h>
/* A plain specialised %(what)s loop: b0 b1 b2 -a1 -a2 per section, states in locals,
   %(D)s data, %(ACC)s sums, add-half rounding by a constant shift, saturation. */
#define MUL(c, v) %(MUL)s
static const %(D)s co[%(S)d][5] = {
%(rows)s
};
%(keep)s
void bench_plain(const %(D)s *in, %(D)s *out, size_t n);
void bench_plain(const %(D)s *in, %(D)s *out, size_t n)
{
    int s;
    for (s = 0; s < %(S)d; s++) {
        const %(D)s b0 = co[s][0], b1 = co[s][1], b2 = co[s][2], na1 = co[s][3], na2 = co[s][4];
%(load)s
        const %(D)s *src = s ? out : in;
        size_t t;
        for (t = 0; t < n; t++) {
            const %(D)s x = src[t];
            %(ACC)s acc, v;
            %(D)s y;
%(body)s
            out[t] = y;
        }
%(save)s
    }
}
"""

#: per structure: (states kept between blocks, their loads, per-sample body, their stores)
SECTION_PARTS = {
    "df1": (
        "static %(D)s st[%(S)d][4];",
        "        %(D)s x1 = st[s][0], x2 = st[s][1], y1 = st[s][2], y2 = st[s][3];",
        "            acc = (%(ACC)s)(MUL(b0, x) + MUL(b1, x1) + MUL(b2, x2) + MUL(na1, y1) + MUL(na2, y2));\n"
        "            v = %(ROUND)s;\n"
        "            y = %(SAT)s;\n"
        "            x2 = x1; x1 = x; y2 = y1; y1 = y;",
        "        st[s][0] = x1; st[s][1] = x2; st[s][2] = y1; st[s][3] = y2;"),
    "tdf2": (
        "static %(ACC)s st[%(S)d][2];",
        "        %(ACC)s s1 = st[s][0], s2 = st[s][1];",
        "            acc = (%(ACC)s)(MUL(b0, x) + s1);\n"
        "            v = %(ROUND)s;\n"
        "            y = %(SAT)s;\n"
        "            s1 = (%(ACC)s)(MUL(b1, x) + MUL(na1, y) + s2);\n"
        "            s2 = (%(ACC)s)(MUL(b2, x) + MUL(na2, y));",
        "        st[s][0] = s1; st[s][1] = s2;"),
    "df1ef": (
        "static %(D)s st[%(S)d][4];\nstatic %(ACC)s er[%(S)d];",
        "        %(D)s x1 = st[s][0], x2 = st[s][1], y1 = st[s][2], y2 = st[s][3];\n        %(ACC)s e = er[s];",
        "            acc = (%(ACC)s)(MUL(b0, x) + MUL(b1, x1) + MUL(b2, x2) + MUL(na1, y1) + MUL(na2, y2) + e);\n"
        "            v = %(ROUND)s;\n"
        "            e = acc - v * ((%(ACC)s)1 << %(K)d); /* the rounding residual, added next sample */\n"
        "            y = %(SAT)s;\n"
        "            x2 = x1; x1 = x; y2 = y1; y1 = y;",
        "        st[s][0] = x1; st[s][1] = x2; st[s][2] = y1; st[s][3] = y2; er[s] = e;"),
}

PLAIN_FIR = r"""
#include <stddef.h>
#include <stdint.h>
/* A plain %(what)s: history kept twice (contiguous), coefficients in a const table,
   %(D)s data, %(ACC)s sum, add-half rounding by a constant shift, saturation. */
#define MUL(c, v) %(MUL)s
static const %(D)s h[%(H)d] = { %(taps)s };
static %(D)s z[2 * %(T)d];
static unsigned p;
void bench_plain(const %(D)s *in, %(D)s *out, size_t n);
void bench_plain(const %(D)s *in, %(D)s *out, size_t n)
{
    size_t t;
    for (t = 0; t < n; t++) {
        %(ACC)s acc = 0, v;
        unsigned j;
        p = p ? p - 1u : %(T)du - 1u;
        z[p] = z[p + %(T)du] = in[t];
        for (j = 0; j < %(H)du; j++) {
            acc += %(TERM)s;
        }
        v = %(ROUND)s;
        out[t] = %(SAT)s;
    }
}
"""

VERIFY = r"""
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include "%(header)s"
void bench_plain(const %(D)s *in, %(D)s *out, size_t n);
static %(D)s a[64], b[64];
static %(state)s st;
int main(void)
{
    size_t t, m, i;
    uint32_t seed = 1u;
    int pass;
    %(reset)s(&st);
    /* the benchmark's own input first, then white noise at half the data word's full scale;
       irregular block lengths */
    for (pass = 0; pass < 2; pass++) {
        for (t = 0; t < (size_t)%(N)s; t += m) {
            m = 1u + (size_t)((seed >> 9) %% 64u);
            for (i = 0u; i < m; i++) {
                seed = seed * 1664525u + 1013904223u;
                a[i] = b[i] = (%(D)s)(pass == 0 ? (int32_t)((seed >> 8) & 0xFFFFu) - 32768
                                                : (int32_t)seed / (int32_t)(1L << (33 - %(BITS)d)));
            }
            bench_plain(a, a, m);
            %(process)s(&st, b, b, m);
            for (i = 0u; i < m; i++) {
                if (a[i] != b[i]) {
                    printf("sample %%lu: plain %%ld, generated %%ld\n", (unsigned long)(t + i), (long)a[i], (long)b[i]);
                    return 1;
                }
            }
        }
    }
    return 0;
}
"""


def c_arith(ar) -> dict:
    """The C pieces of a target's arithmetic for the plain loops: types, product, rounding, saturation."""
    acc = "int32_t" if ar.acc_bits <= 32 else "int64_t"
    if ar.product_shift:
        # a high-word product: rounded by 2^P into a 32-bit word, summed modulo 2^32
        assert ar.acc_bits == 32 and ar.product_rounding in ("add-half", "truncate")
        half = f" + ((int64_t)1 << {ar.product_shift - 1})" if ar.product_rounding == "add-half" else ""
        mul = f"((uint32_t)(int32_t)(((int64_t)(c) * (v){half}) >> {ar.product_shift}))"
    else:
        mul = f"(({acc})(c) * (v))"
    assert ar.rounding == "add-half" and ar.overflow == "saturate"
    dmax = (1 << (ar.data.width - 1)) - 1
    return {"ACC": acc, "MUL": mul, "BITS": ar.data.width,
            "SAT": f"(%(D)s)(v > {dmax} ? {dmax} : v < ({-dmax} - 1) ? ({-dmax} - 1) : v)"}


def rounding(acc: str, k: int) -> str:
    return "acc" if k == 0 else f"(acc + (({acc})1 << ({k} - 1))) >> {k}"


def plain_sections(structure: str, ar, data_type: str, casc: ChannelProgram) -> str:
    shifts = {op.shift for op in casc.ops}
    assert len(shifts) == 1, "the plain loop has one constant shift"
    k = ar.final_shift(shifts.pop())
    c = c_arith(ar)
    keep, load, body, save = SECTION_PARTS[structure]
    fill = {"D": data_type, "S": len(casc.ops), "K": k, "ACC": c["ACC"], "ROUND": rounding(c["ACC"], k)}
    fill["SAT"] = c["SAT"] % fill
    return PLAIN_SECTIONS % {**fill, "what": structure.upper(), "MUL": c["MUL"],
                             "rows": ",\n".join("    {%d, %d, %d, %d, %d}" % (*op.b, -op.a[0], -op.a[1])
                                                for op in casc.ops),
                             "keep": keep % fill, "load": load % fill, "body": body % fill, "save": save % fill}


def plain_fir(ar, data_type: str, taps: tuple, shift: int, folded: bool) -> str:
    c = c_arith(ar)
    k = ar.final_shift(shift)
    T = len(taps)
    H = T // 2 if folded else T
    term = (f"MUL(h[j], ({c['ACC']})z[p + j] + z[p + {T}u - 1u - j])" if folded else "MUL(h[j], z[p + j])")
    return PLAIN_FIR % {"what": "folded (symmetric) FIR: mirrored samples added before one multiply per tap pair"
                        if folded else "FIR", "D": data_type, "ACC": c["ACC"], "MUL": c["MUL"], "T": T, "H": H,
                        "taps": ", ".join(map(str, taps[:H])), "TERM": term, "ROUND": rounding(c["ACC"], k),
                        "SAT": c["SAT"] % {"D": data_type}}


def _fake(programs, name, target: str = "mcu32"):
    return generated_files(programs, target, name)


def df1_cascade(arith, sections: int = 8, structure: str = "df1", shift_all: int | None = None) -> ChannelProgram:
    """An 8-section low-pass cascade (elliptic, 3 kHz at 48 kHz) in Q2.30, shift 0 or 1."""
    from scipy import signal

    sos = signal.ellip(2 * sections, 0.1, 90, 3000, fs=48000, output="sos")
    ops = []
    for row in sos:
        b, a = row[:3], row[4:]
        shift = (1 if max(abs(np.r_[b, a])) >= 2 else 0) if shift_all is None else shift_all
        scale = 2.0 ** (arith.coef.frac_bits - shift)
        ops.append(SectionOp(tuple(int(round(v * scale)) for v in b), tuple(int(round(v * scale)) for v in a),
                             shift, structure))
    return ChannelProgram("cascade", 48000.0, arith, tuple(ops))


def count(cmd: list[str], log: Path) -> int:
    subprocess.run(cmd, check=True, capture_output=True, timeout=1200)
    n = 0
    with open(log, "rb") as f:
        for line in f:
            if line.startswith(b"Trace"):
                n += 1
    log.unlink()
    return n


def build_and_count(work: Path, platform: str, files: dict, header: str, process: str, state: str,
                    plain: str, samples: int, data_type: str = "int32_t") -> tuple[float, float, int]:
    """(generated, plain) instructions per sample and the generated code's .text bytes."""
    for name, text in files.items():
        (work / name).write_text(text)
    (work / "plain.c").write_text(plain)
    src = [str(work / n) for n in files if n.endswith(".c")]
    out = {}
    for is_plain in (0, 1):
        counts = []
        for n in (samples, 2 * samples):
            (work / "main.c").write_text(HARNESS % {"header": header, "D": data_type, "state": state,
                                                    "process": process, "N": n})
            exe = work / f"b{is_plain}_{n}"
            common = ["-std=c99", "-O2", "-ffp-contract=off", f"-DPLAIN={is_plain}", "-I", str(work),
                      str(work / "main.c"), str(work / "plain.c"), *src, "-o", str(exe)]
            log = work / "trace.log"
            if platform == "arm":
                subprocess.run(["arm-linux-gnueabihf-gcc", "-mthumb", "-static", *common], check=True)
                counts.append(count(["qemu-arm", "-singlestep", "-d", "exec,nochain", "-D", str(log), str(exe)], log))
            else:
                subprocess.run(["arm-none-eabi-gcc", *M4_FLAGS, "-nostartfiles", "--specs=nosys.specs", "-T",
                                str(BAREMETAL / "mps2.ld"), str(BAREMETAL / "startup.c"), *common], check=True)
                counts.append(count(["qemu-system-arm", "-M", "mps2-an386", "-nographic", "-semihosting",
                                     "-singlestep", "-d", "exec,nochain", "-D", str(log), "-kernel", str(exe)], log))
        out[is_plain] = (counts[1] - counts[0]) / samples
    cc = "arm-linux-gnueabihf-gcc" if platform == "arm" else "arm-none-eabi-gcc"
    flags = ["-mthumb"] if platform == "arm" else M4_FLAGS
    obj = work / "gen.o"
    subprocess.run([cc, *flags, "-std=c99", "-O2", "-c", src[0], "-o", str(obj)], check=True)
    size = subprocess.run([cc.replace("gcc", "size"), str(obj)], capture_output=True, text=True).stdout
    text_bytes = int(size.splitlines()[1].split()[0])
    return out[0], out[1], text_bytes


def verify(work: Path, files: dict, process: str, state: str, plain: str, data_type: str, bits: int,
           samples: int) -> None:
    """Build the generated code and the plain loop natively (under the undefined-behaviour sanitizer
    where it works, so neither agrees by an accident of undefined behaviour) and require
    bit-identical outputs."""
    for name, text in files.items():
        (work / name).write_text(text)
    (work / "plain.c").write_text(plain)
    (work / "verify.c").write_text(VERIFY % {"header": "bench.h", "D": data_type, "state": state, "process": process,
                                             "reset": process.replace("_process", "_reset"), "N": samples,
                                             "BITS": bits})
    exe = work / "verify"
    subprocess.run(["cc", "-std=c99", "-O2", "-ffp-contract=off", *(UBSAN if ubsan_works("cc") else []),
                    "-I", str(work), str(work / "verify.c"),
                    str(work / "plain.c"), *[str(work / n) for n in files if n.endswith(".c")], "-o", str(exe)],
                   check=True)
    r = subprocess.run([str(exe)], capture_output=True, text=True)
    if r.returncode != 0:
        sys.exit(f"plain loop and generated code differ ({process}): {r.stdout.strip()}")


def row(platform: str, prog: ChannelProgram, target: str, plain: str, samples: int) -> tuple[float, float, int]:
    """Verify, then count: (generated, plain) instructions per sample and the generated .text bytes."""
    t = find_target(target)
    d_t = build_info(t).data_type
    files = _fake([prog], "bench", target)
    process, state = f"bench_{prog.name}_process", f"bench_{prog.name}_state_t"
    with tempfile.TemporaryDirectory() as tmp:
        verify(Path(tmp), files, process, state, plain, d_t, t.arithmetic.data.width, samples)
    with tempfile.TemporaryDirectory() as tmp:
        return build_and_count(Path(tmp), platform, files, "bench.h", process, state, plain, samples,
                               data_type=d_t)


def flag(ratio: float) -> str:
    return " [ABOVE 1.1]" if ratio > 1.1 else ""


def words(ar) -> str:
    """A target's arithmetic as each row names it."""
    first = f"products rounded by 2^{ar.product_shift}" if ar.product_shift else f"{ar.data} data"
    return f"{first}, {ar.acc_bits}-bit accumulator"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=2048)
    args = ap.parse_args()
    platforms = []
    if shutil.which("arm-linux-gnueabihf-gcc") and shutil.which("qemu-arm"):
        if Path("/usr/arm-linux-gnueabihf/lib/crt1.o").exists():
            platforms.append("arm")
        else:
            print("32-bit ARM skipped: its C library is missing (Debian: libc6-dev-armhf-cross)")
    if shutil.which("arm-none-eabi-gcc") and shutil.which("qemu-system-arm"):
        platforms.append("m4")
    if not platforms:
        sys.exit("needs gcc-arm-linux-gnueabihf + qemu-user or gcc-arm-none-eabi + qemu-system-arm")
    if not shutil.which("cc"):
        sys.exit("needs a native C compiler (cc) to check that the plain loops and the generated code agree")
    arith = find_target("mcu32").arithmetic  # Q1.31, Q2.30, 64-bit, add-half, saturate
    S = len(df1_cascade(arith).ops)
    rng = np.random.default_rng(5)
    tap_values = rng.uniform(-0.3, 0.3, 32)
    print(f"{S}-section Q1.31 DF1 cascade, 64-bit accumulator, add-half, saturate; FIR of {len(tap_values)} taps "
          f"(Q2.30, shift 1); {args.samples} samples, gcc -O2; every plain loop's outputs checked identical "
          f"to the generated code's (native cc{', UBSan' if ubsan_works('cc') else ''}, irregular blocks)")
    for platform in platforms:
        label = "32-bit ARM Thumb-2, qemu-arm" if platform == "arm" else "Cortex-M4, qemu-system-arm mps2-an386"
        for target in ("mcu32", "mcu16", "dsp24", "mcu32hw"):
            ar = find_target(target).arithmetic
            d_t = build_info(find_target(target)).data_type
            on = "" if target == "mcu32" else f" on {target} ({words(ar)})"
            for structure in ("df1", "tdf2", "df1ef"):
                # mcu32: the cascade's own shifts (all 0); mcu16, dsp24 and DF1 on mcu32hw: one shift 1 for all
                # sections; tdf2 and df1ef on mcu32hw: shift 0, so the final shift is 1 (at 0 df1ef's residual
                # would be 0 and it would be DF1)
                shift_all = None if target == "mcu32" else 0 if (target, structure) in (
                    ("mcu32hw", "tdf2"), ("mcu32hw", "df1ef")) else 1
                casc = df1_cascade(ar, S, structure, shift_all)
                g, p, size = row(platform, casc, target, plain_sections(structure, ar, d_t, casc), args.samples)
                if target == "mcu32":
                    goal = " goal <= 36, stretch <= 25;" if structure == "df1" else " goal ratio <= 1.1;"
                    print(f"[{label}] {structure.upper()}: generated {g / S:.1f}, plain loop {p / S:.1f} instructions "
                          f"per section-sample (ratio {g / p:.2f};{goal} generated .text {size} bytes){flag(g / p)}")
                else:
                    goal = "" if target == "mcu32hw" and structure == "df1" else "; goal <= 1.1"
                    print(f"[{label}] {structure.upper()}{on}: generated {g / S:.1f}, plain loop {p / S:.1f} "
                          f"instructions per section-sample (ratio {g / p:.2f}{goal}); generated .text {size} bytes"
                          f"{flag(g / p)}")
            taps = tuple(int(round(v * 2 ** (ar.coef.frac_bits - 1))) for v in tap_values)
            half = taps[:16]
            sym = tuple(half) + tuple(reversed(half))  # a linear-phase FIR of 32 taps: generated code folds it
            for name, prog in (("FIR", ChannelProgram("fir", 48000.0, ar, (FirOp(taps, 1),))),
                               ("folded FIR", ChannelProgram("folded", 48000.0, ar, (FirOp(sym, 1, symmetric=True),)))):
                if name == "folded FIR" and ar.product_shift:
                    print(f"[{label}] folded FIR{on}: refused, no row: with rounded products "
                          f"q(C*(x1+x2)) != q(C*x1) + q(C*x2), so the generated code never folds symmetric taps "
                          f"(it runs them as the FIR row above)")
                    continue
                op = prog.ops[0]
                g, p, size = row(platform, prog, target, plain_fir(ar, d_t, op.taps, 1, op.symmetric), args.samples)
                n_taps = len(op.taps)
                print(f"[{label}] {name}{on}: generated {g / n_taps:.2f}, plain loop {p / n_taps:.2f} instructions "
                      f"per tap-sample (ratio {g / p:.2f}; goal <= 1.1); generated .text {size} bytes{flag(g / p)}")


if __name__ == "__main__":
    main()
