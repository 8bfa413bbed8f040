"""Instructions per section-sample (or per tap) of generated code on 32-bit ARM.

Counts executed instructions under qemu (``-singlestep -d exec,nochain`` logs one
line per executed instruction) for the code ``coefc build --kernel`` writes, and
for a plain specialised C loop written here (states in locals, coefficients from
a const table, section-major, the shift a constant, signed 64-bit sums as a
firmware engineer would write them), both compiled with the same gcc -O2.  Each
figure is the difference of two runs (2 x N and N samples), so start-up and the
harness cancel; divided by sections (or taps) and samples.

Platforms: user-mode 32-bit ARM (arm-linux-gnueabihf-gcc -O2 -mthumb, qemu-arm)
and bare-metal Cortex-M4 (arm-none-eabi-gcc -O2 -mcpu=cortex-m4, qemu-system-arm
-M mps2-an386).  Goal: the 8-section Q1.31 / 64-bit add-half saturating DF1 cascade
at <= 36 instructions per section-sample (parity with the plain loop; stretch 25);
tdf2, df1ef, FIR per tap and folded (symmetric) FIR per tap, and DF1 in the data words of
mcu16, dsp24 and mcu32hw, within 1.1x of their plain loops.  Generated code size is printed.

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

from c_build import BAREMETAL, M4_FLAGS, generated_files  # noqa: E402
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

PLAIN_DF1 = r"""
#include <stddef.h>
#include <stdint.h>
/* A plain specialised loop: b0 b1 b2 -a1 -a2 per section, states in locals. */
static const int32_t co[%(S)d][5] = {
%(rows)s
};
static int32_t st[%(S)d][4];
void bench_plain(const int32_t *in, int32_t *out, size_t n);
void bench_plain(const int32_t *in, int32_t *out, size_t n)
{
    int s;
    for (s = 0; s < %(S)d; s++) {
        const int32_t b0 = co[s][0], b1 = co[s][1], b2 = co[s][2], na1 = co[s][3], na2 = co[s][4];
        int32_t x1 = st[s][0], x2 = st[s][1], y1 = st[s][2], y2 = st[s][3];
        const int32_t *src = s ? out : in;
        size_t t;
        for (t = 0; t < n; t++) {
            const int32_t x = src[t];
            int64_t acc = (int64_t)b0 * x + (int64_t)b1 * x1 + (int64_t)b2 * x2 + (int64_t)na1 * y1
                          + (int64_t)na2 * y2;
            int32_t y;
            acc = (acc + ((int64_t)1 << (%(K)d - 1))) >> %(K)d;
            y = acc > INT32_MAX ? INT32_MAX : acc < INT32_MIN ? INT32_MIN : (int32_t)acc;
            x2 = x1; x1 = x; y2 = y1; y1 = y;
            out[t] = y;
        }
        st[s][0] = x1; st[s][1] = x2; st[s][2] = y1; st[s][3] = y2;
    }
}
"""

PLAIN_TDF2 = r"""
#include <stddef.h>
#include <stdint.h>
/* A plain transposed direct form II: b0 b1 b2 -a1 -a2 per section, 64-bit states in locals. */
static const int32_t co[%(S)d][5] = {
%(rows)s
};
static int64_t st[%(S)d][2];
void bench_plain(const int32_t *in, int32_t *out, size_t n);
void bench_plain(const int32_t *in, int32_t *out, size_t n)
{
    int s;
    for (s = 0; s < %(S)d; s++) {
        const int32_t b0 = co[s][0], b1 = co[s][1], b2 = co[s][2], na1 = co[s][3], na2 = co[s][4];
        int64_t s1 = st[s][0], s2 = st[s][1];
        const int32_t *src = s ? out : in;
        size_t t;
        for (t = 0; t < n; t++) {
            const int32_t x = src[t];
            int64_t acc = (int64_t)b0 * x + s1;
            int32_t y;
            acc = (acc + ((int64_t)1 << (%(K)d - 1))) >> %(K)d;
            y = acc > INT32_MAX ? INT32_MAX : acc < INT32_MIN ? INT32_MIN : (int32_t)acc;
            s1 = (int64_t)b1 * x + (int64_t)na1 * y + s2;
            s2 = (int64_t)b2 * x + (int64_t)na2 * y;
            out[t] = y;
        }
        st[s][0] = s1; st[s][1] = s2;
    }
}
"""

PLAIN_DF1EF = r"""
#include <stddef.h>
#include <stdint.h>
/* A plain DF1 with first-order error feedback: the rounding residual is added next sample. */
static const int32_t co[%(S)d][5] = {
%(rows)s
};
static int32_t st[%(S)d][4];
static int64_t er[%(S)d];
void bench_plain(const int32_t *in, int32_t *out, size_t n);
void bench_plain(const int32_t *in, int32_t *out, size_t n)
{
    int s;
    for (s = 0; s < %(S)d; s++) {
        const int32_t b0 = co[s][0], b1 = co[s][1], b2 = co[s][2], na1 = co[s][3], na2 = co[s][4];
        int32_t x1 = st[s][0], x2 = st[s][1], y1 = st[s][2], y2 = st[s][3];
        int64_t e = er[s];
        const int32_t *src = s ? out : in;
        size_t t;
        for (t = 0; t < n; t++) {
            const int32_t x = src[t];
            int64_t acc = (int64_t)b0 * x + (int64_t)b1 * x1 + (int64_t)b2 * x2 + (int64_t)na1 * y1
                          + (int64_t)na2 * y2 + e;
            int64_t v = (acc + ((int64_t)1 << (%(K)d - 1))) >> %(K)d;
            int32_t y;
            e = acc - v * ((int64_t)1 << %(K)d);
            y = v > INT32_MAX ? INT32_MAX : v < INT32_MIN ? INT32_MIN : (int32_t)v;
            x2 = x1; x1 = x; y2 = y1; y1 = y;
            out[t] = y;
        }
        st[s][0] = x1; st[s][1] = x2; st[s][2] = y1; st[s][3] = y2; er[s] = e;
    }
}
"""

PLAIN_FOLDED = r"""
#include <stddef.h>
#include <stdint.h>
/* A plain folded (symmetric) FIR: mirrored samples added before one multiply per tap pair. */
static const int32_t h[%(H)d] = { %(taps)s };
static int32_t z[2 * %(T)d];
static unsigned p;
void bench_plain(const int32_t *in, int32_t *out, size_t n);
void bench_plain(const int32_t *in, int32_t *out, size_t n)
{
    size_t t;
    for (t = 0; t < n; t++) {
        int64_t acc = 0;
        int32_t y;
        unsigned j;
        p = p ? p - 1u : %(T)du - 1u;
        z[p] = z[p + %(T)du] = in[t];
        for (j = 0; j < %(T)du / 2u; j++) {
            acc += (int64_t)h[j] * ((int64_t)z[p + j] + z[p + %(T)du - 1u - j]);
        }
        acc = (acc + ((int64_t)1 << (%(K)d - 1))) >> %(K)d;
        y = acc > INT32_MAX ? INT32_MAX : acc < INT32_MIN ? INT32_MIN : (int32_t)acc;
        out[t] = y;
    }
}
"""

PLAIN_DF1_HW = r"""
#include <stddef.h>
#include <stdint.h>
/* The plain loop of a high-word-product kernel (mcu32hw): each product rounded by
   2^29 into a 32-bit word, the words summed in a 32-bit register. */
#define HW(c, v) ((uint32_t)(int32_t)(((int64_t)(c) * (v) + ((int64_t)1 << 28)) >> 29))
static const int32_t co[%(S)d][5] = {
%(rows)s
};
static int32_t st[%(S)d][4];
void bench_plain(const int32_t *in, int32_t *out, size_t n);
void bench_plain(const int32_t *in, int32_t *out, size_t n)
{
    int s;
    for (s = 0; s < %(S)d; s++) {
        const int32_t b0 = co[s][0], b1 = co[s][1], b2 = co[s][2], na1 = co[s][3], na2 = co[s][4];
        int32_t x1 = st[s][0], x2 = st[s][1], y1 = st[s][2], y2 = st[s][3];
        const int32_t *src = s ? out : in;
        size_t t;
        for (t = 0; t < n; t++) {
            const int32_t x = src[t];
            int32_t a = (int32_t)(HW(b0, x) + HW(b1, x1) + HW(b2, x2) + HW(na1, y1) + HW(na2, y2));
            int32_t y;
            a = %(FINAL)s;
            y = a > 134217727 ? 134217727 : a < -134217728 ? -134217728 : a;
            x2 = x1; x1 = x; y2 = y1; y1 = y;
            out[t] = y;
        }
        st[s][0] = x1; st[s][1] = x2; st[s][2] = y1; st[s][3] = y2;
    }
}
"""

PLAIN_DF1_WORD = r"""
#include <stddef.h>
#include <stdint.h>
/* The plain DF1 loop of another data word: %(D)s data and coefficients, %(ACC)s sums,
   add-half rounding by a constant shift, saturation to %(BITS)d bits. */
static const %(D)s co[%(S)d][5] = {
%(rows)s
};
static %(D)s st[%(S)d][4];
void bench_plain(const %(D)s *in, %(D)s *out, size_t n);
void bench_plain(const %(D)s *in, %(D)s *out, size_t n)
{
    int s;
    for (s = 0; s < %(S)d; s++) {
        const %(D)s b0 = co[s][0], b1 = co[s][1], b2 = co[s][2], na1 = co[s][3], na2 = co[s][4];
        %(D)s x1 = st[s][0], x2 = st[s][1], y1 = st[s][2], y2 = st[s][3];
        const %(D)s *src = s ? out : in;
        size_t t;
        for (t = 0; t < n; t++) {
            const %(D)s x = src[t];
            %(ACC)s acc = (%(ACC)s)b0 * x + (%(ACC)s)b1 * x1 + (%(ACC)s)b2 * x2 + (%(ACC)s)na1 * y1
                          + (%(ACC)s)na2 * y2;
            %(D)s y;
            acc = (acc + ((%(ACC)s)1 << (%(K)d - 1))) >> %(K)d;
            y = (%(D)s)(acc > %(MAX)s ? %(MAX)s : acc < %(MIN)s ? %(MIN)s : acc);
            x2 = x1; x1 = x; y2 = y1; y1 = y;
            out[t] = y;
        }
        st[s][0] = x1; st[s][1] = x2; st[s][2] = y1; st[s][3] = y2;
    }
}
"""

PLAIN_FIR = r"""
#include <stddef.h>
#include <stdint.h>
/* A plain FIR: history kept twice (contiguous), coefficients in a const table. */
static const int32_t h[%(T)d] = { %(taps)s };
static int32_t z[2 * %(T)d];
static unsigned p;
void bench_plain(const int32_t *in, int32_t *out, size_t n);
void bench_plain(const int32_t *in, int32_t *out, size_t n)
{
    size_t t;
    for (t = 0; t < n; t++) {
        int64_t acc = 0;
        int32_t y;
        unsigned j;
        p = p ? p - 1u : %(T)du - 1u;
        z[p] = z[p + %(T)du] = in[t];
        for (j = 0; j < %(T)du; j++) {
            acc += (int64_t)h[j] * z[p + j];
        }
        acc = (acc + ((int64_t)1 << (%(K)d - 1))) >> %(K)d;
        y = acc > INT32_MAX ? INT32_MAX : acc < INT32_MIN ? INT32_MIN : (int32_t)acc;
        out[t] = y;
    }
}
"""


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
    arith = find_target("mcu32").arithmetic  # Q1.31, Q2.30, 64-bit, add-half, saturate
    cascade = df1_cascade(arith)
    S = len(cascade.ops)
    rows = ",\n".join("    {%d, %d, %d, %d, %d}" % (*op.b, -op.a[0], -op.a[1]) for op in cascade.ops)
    k = arith.coef.frac_bits - cascade.ops[0].shift
    if any(op.shift != cascade.ops[0].shift for op in cascade.ops):
        k = None
    rng = np.random.default_rng(5)
    taps = tuple(int(round(v * 2 ** 29)) for v in rng.uniform(-0.3, 0.3, 32))
    fir = ChannelProgram("fir", 48000.0, arith, (FirOp(taps, 1),))
    half = taps[:16]
    sym = tuple(half) + tuple(reversed(half))  # a linear-phase FIR of 32 taps: generated code folds it
    folded = ChannelProgram("folded", 48000.0, arith, (FirOp(sym, 1, symmetric=True),))
    print(f"{S}-section Q1.31 DF1 cascade, 64-bit accumulator, add-half, saturate; FIR of {len(taps)} taps "
          f"(Q2.30, shift 1); {args.samples} samples, gcc -O2")
    for platform in platforms:
        label = "32-bit ARM Thumb-2, qemu-arm" if platform == "arm" else "Cortex-M4, qemu-system-arm mps2-an386"
        for structure, plain in (("df1", PLAIN_DF1), ("tdf2", PLAIN_TDF2), ("df1ef", PLAIN_DF1EF)):
            with tempfile.TemporaryDirectory() as tmp:
                work = Path(tmp)
                files = _fake([df1_cascade(arith, S, structure)], "bench")
                # the plain loop rounds by one shift for all sections: use the cascade's when all agree
                kk = k if k is not None else arith.coef.frac_bits
                g, p, size = build_and_count(work, platform, files, "bench.h", "bench_cascade_process",
                                             "bench_cascade_state_t", plain % {"S": S, "rows": rows, "K": kk},
                                             args.samples)
                goal = " goal <= 36, stretch <= 25;" if structure == "df1" else " goal ratio <= 1.1;"
                print(f"[{label}] {structure.upper()}: generated {g / S:.1f}, plain loop {p / S:.1f} instructions "
                      f"per section-sample (ratio {g / p:.2f};{goal} generated .text {size} bytes)")
        for name, prog, plain, n_taps in (
                ("FIR", fir, PLAIN_FIR % {"T": len(taps), "taps": ", ".join(map(str, taps)), "K": 29}, len(taps)),
                ("folded FIR", folded, PLAIN_FOLDED % {"T": len(sym), "H": len(sym) // 2,
                                                       "taps": ", ".join(map(str, sym[: len(sym) // 2])), "K": 29},
                 len(sym))):
            with tempfile.TemporaryDirectory() as tmp:
                work = Path(tmp)
                g, p, size = build_and_count(work, platform, _fake([prog], "bench"), "bench.h",
                                             f"bench_{prog.name}_process", f"bench_{prog.name}_state_t", plain,
                                             args.samples)
                print(f"[{label}] {name}: generated {g / n_taps:.2f}, plain loop {p / n_taps:.2f} instructions per "
                      f"tap-sample (ratio {g / p:.2f}; goal <= 1.1); generated .text {size} bytes")
        # the other data words: mcu16 (Q1.15, 32-bit sums) and dsp24 (Q1.23, 56-bit sums in int64_t);
        # one coefficient shift for all sections (1) so the plain loop's shift is one constant
        for tname, acc_t in (("mcu16", "int32_t"), ("dsp24", "int64_t")):
            t = find_target(tname)
            ar = t.arithmetic
            casc = df1_cascade(ar, shift_all=1)
            d_t = build_info(t).data_type
            t_rows = ",\n".join("    {%d, %d, %d, %d, %d}" % (*op.b, -op.a[0], -op.a[1]) for op in casc.ops)
            dmax = (1 << (ar.data.width - 1)) - 1
            plain = PLAIN_DF1_WORD % {"S": S, "rows": t_rows, "D": d_t, "ACC": acc_t, "BITS": ar.data.width,
                                      "K": ar.final_shift(1), "MAX": str(dmax), "MIN": f"({-dmax} - 1)"}
            with tempfile.TemporaryDirectory() as tmp:
                work = Path(tmp)
                g, p, size = build_and_count(work, platform, _fake([casc], "bench", tname), "bench.h",
                                             "bench_cascade_process", "bench_cascade_state_t", plain, args.samples,
                                             data_type=d_t)
                print(f"[{label}] DF1 on {tname} ({ar.data} data, {ar.acc_bits}-bit accumulator): generated "
                      f"{g / S:.1f}, plain loop {p / S:.1f} instructions per section-sample (ratio {g / p:.2f}; "
                      f"goal <= 1.1); generated .text {size} bytes")
        # mcu32hw: every product rounded by 2^29 (high-word products), 32-bit accumulator; one
        # coefficient shift for all sections (1: the final shift is 0) so the plain loop matches
        hw = find_target("mcu32hw").arithmetic
        hw_cascade = df1_cascade(hw, shift_all=1)
        hk = hw.final_shift(1)
        hw_rows = ",\n".join("    {%d, %d, %d, %d, %d}" % (*op.b, -op.a[0], -op.a[1]) for op in hw_cascade.ops)
        final = "a" if hk == 0 else f"(int32_t)((a + (1 << {hk - 1})) >> {hk})"
        with tempfile.TemporaryDirectory() as tmp:
            work = Path(tmp)
            files = _fake([hw_cascade], "bench", "mcu32hw")
            g, p, size = build_and_count(work, platform, files, "bench.h", "bench_cascade_process",
                                         "bench_cascade_state_t",
                                         PLAIN_DF1_HW % {"S": S, "rows": hw_rows, "FINAL": final}, args.samples)
            print(f"[{label}] DF1 on mcu32hw (products rounded by 2^29, 32-bit accumulator): generated {g / S:.1f}, "
                  f"plain loop {p / S:.1f} instructions per section-sample (ratio {g / p:.2f}); "
                  f"generated .text {size} bytes")


if __name__ == "__main__":
    main()
