"""Test helpers: build emitted headers with a target's reference kernel and run
their golden vectors in a small C main (used by test_c_kernels*.py and
test_emit*.py).

The expected outputs inside a header come from coefc's Python/C bit-true engine;
the reference kernel is a separate C implementation written from the arithmetic
stated in coefc.program, so a pass is an agreement of two implementations.
"""

from __future__ import annotations

import functools
import shutil
import subprocess
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from coefc.api import Design, Loaded, Realisation
from coefc.emit.header import render
from coefc.program import STRUCTURE_TABLE, Arithmetic, ChannelProgram, DelayOp, FirOp, GainOp, SectionOp
from coefc.spec import Budget, Description, Implementation
from coefc.targetspec import build_info, find_target

STRICT = ["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-ffp-contract=off"]
UBSAN = ["-fsanitize=undefined", "-fno-sanitize-recover=all"]


@functools.cache
def compilers() -> tuple[str, ...]:
    """gcc and clang, whichever are installed."""
    return tuple(c for c in ("gcc", "clang") if shutil.which(c))


@functools.cache
def m32_works(cc: str) -> bool:
    """True when *cc* can build and link a 32-bit program (multilib present)."""
    tmp = Path(subprocess.run(["mktemp", "-d"], capture_output=True, text=True).stdout.strip())
    try:
        (tmp / "a.c").write_text("int main(void) { return 0; }\n")
        r = subprocess.run([cc, "-m32", str(tmp / "a.c"), "-o", str(tmp / "a")], capture_output=True)
        return r.returncode == 0
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


@functools.cache
def ubsan_works(cc: str) -> bool:
    tmp = Path(subprocess.run(["mktemp", "-d"], capture_output=True, text=True).stdout.strip())
    try:
        (tmp / "a.c").write_text("int main(void) { return 0; }\n")
        r = subprocess.run([cc, *UBSAN, str(tmp / "a.c"), "-o", str(tmp / "a")], capture_output=True)
        return r.returncode == 0
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def fake_realisation(programs, target_name: str, name: str = "bench", source: str = "bench.toml",
                     sample_rate_hz: float = 48000.0) -> Realisation:
    """A Realisation around hand-built programs (no description file needed)."""
    desc = Description(source=source, name=name, sample_rate_hz=sample_rate_hz,
                       implementation=Implementation(), budget=Budget(), channels=(), sha256="0" * 64)
    return Realisation(Design(Loaded(desc), ()), find_target(target_name), tuple(programs))


def write_kernel(folder: Path, target_name: str, target_dirs=()) -> Path:
    """Write the target's reference kernel (rendered from its templates, or its own files) into *folder*."""
    from coefc.emit.header import kernel_texts

    target = find_target(target_name, target_dirs)
    folder.mkdir(parents=True, exist_ok=True)
    for name, text in kernel_texts(target, build_info(target)).items():
        (folder / name).write_text(text)
    return folder


def run_headers(workdir: Path, target_name: str, headers: list[tuple[str, str, str]], *,
                cc: str = "gcc", extra: tuple[str, ...] = (), opt: str = "-O2", target_dirs=(),
                extra_sources=()) -> tuple[int, str]:
    """Compile every header with the target's kernel and run all golden vectors.

    *headers* is a list of ``(file name, description C name, text)``; each header
    goes into its own translation unit.  Returns (exit code, stdout + stderr);
    exit code 0 means every channel of every header matched bit for bit.
    """
    target = find_target(target_name, target_dirs)
    info = build_info(target)
    prefix = info.kernel_prefix
    workdir.mkdir(parents=True, exist_ok=True)
    kdir = write_kernel(workdir / "kernel", target_name, target_dirs)
    sources = [str(kdir / Path(p).name) for p in info.kernel_sources] + [str(p) for p in extra_sources]
    calls = []
    for i, (fname, cname, text) in enumerate(headers):
        (workdir / fname).write_text(text)
        up = cname.upper()
        (workdir / f"tu{i}.c").write_text(f"""#include <stdio.h>
#include "{fname}"
int run{i}(void);
static {prefix}_state_t state[{up}_MAX_STATE_WORDS];
int run{i}(void)
{{
    int c, bad = 0;
    for (c = 0; c < {up}_N_CHANNELS; c++) {{
        long r = {prefix}_selftest({cname}_channels[c], state, {cname}_golden_in,
                                   {cname}_golden_out[c], {up}_GOLDEN_LEN);
        if (r >= 0) {{
            printf("MISMATCH {fname} channel %s at sample %ld\\n", {cname}_channel_names[c], r);
            bad++;
        }} else {{
            printf("ok {fname} channel %s\\n", {cname}_channel_names[c]);
        }}
    }}
    return bad;
}}
""")
        calls.append(i)
    decls = "".join(f"int run{i}(void);\n" for i in calls)
    body = "".join(f"    bad += run{i}();\n" for i in calls)
    (workdir / "main.c").write_text(f"{decls}int main(void)\n{{\n    int bad = 0;\n{body}    return bad ? 1 : 0;\n}}\n")
    exe = workdir / "selftest"
    cmd = [cc, *STRICT, opt, *extra, "-I", str(kdir), "-I", str(workdir), str(workdir / "main.c"),
           *[str(workdir / f"tu{i}.c") for i in calls], *sources, "-o", str(exe)]
    r = subprocess.run(cmd, capture_output=True, text=True)
    if r.returncode != 0:
        return 100, "compile failed: " + " ".join(cmd) + "\n" + r.stdout + r.stderr
    r = subprocess.run([str(exe)], capture_output=True, text=True, timeout=60)
    return r.returncode, r.stdout + r.stderr


# ---------------------------------------------------------------------------
# hand-built programs covering every operation
# ---------------------------------------------------------------------------

def _section(rng, arith: Arithmetic, structure: str, shift: int) -> SectionOp:
    """A stable section with poles of radius 0.6..0.98 and random zeros."""
    r = rng.uniform(0.6, 0.98)
    th = rng.uniform(0.05, 3.0)
    a1, a2 = -2 * r * np.cos(th), r * r
    b = rng.uniform(-0.6, 0.6, 3)
    if arith.is_float:
        f = lambda v: float(np.float32(v))  # noqa: E731
        return SectionOp(tuple(f(v) for v in b), (f(a1), f(a2)), 0, structure)
    scale = 2.0 ** (arith.coef.frac_bits - shift)
    q = lambda v: int(round(v * scale))  # noqa: E731
    if STRUCTURE_TABLE[structure].wide_feedback:
        from coefc.realise.coefficients import split_feedback

        hi, lo, _ = split_feedback((1.0, a1, a2), arith.coef, shift)
        if STRUCTURE_TABLE[structure].wide_numerator:  # df1ef-wide: the numerator in two words too
            from coefc.realise.coefficients import split_numerator

            bh, bl, _ = split_numerator(b, arith.coef, shift)
            return SectionOp(bh, hi, shift, structure, a_lo=lo, b_lo=bl)
        return SectionOp(tuple(q(v) for v in b), hi, shift, structure, a_lo=lo)
    if STRUCTURE_TABLE[structure].state_space:
        # coupled: the rotation of the pole pair (alpha = r cos, beta = r sin), an output combination
        # and an input gain that drives the states into their limits at the golden input's steps
        al, be = r * np.cos(th), r * np.sin(th)
        c = rng.uniform(-0.9, 0.9, 2)
        return SectionOp((q(b[0]), q(c[0]), q(c[1]), q(0.7)), (q(al), q(-be), q(be), q(al)), shift, structure)
    return SectionOp(tuple(q(v) for v in b), (q(a1), q(a2)), shift, structure)


def kernel_structures(structures) -> tuple:
    """The structures a reference kernel runs (df1-wide-fb runs only in generated code)."""
    return tuple(s for s in structures if STRUCTURE_TABLE[s].reference_kernel)


def _coef(arith: Arithmetic, v: float, shift: int = 0):
    if arith.is_float:
        return float(np.float32(v))
    return int(round(v * 2.0 ** (arith.coef.frac_bits - shift)))


def hand_programs(arith: Arithmetic, structures, seed: int = 1) -> list[ChannelProgram]:
    """Channels exercising each structure, FIR, gain (saturating), delay, and a mix."""
    rng = np.random.default_rng(seed)
    fixed = not arith.is_float
    progs = []
    for s in structures:
        ops = tuple(_section(rng, arith, s, shift) for shift in ((0, 1, 0) if fixed else (0, 0, 0)))
        progs.append(ChannelProgram(f"sec_{s}", 48000.0, arith, ops))
    taps = rng.uniform(-0.4, 0.4, 17)
    progs.append(ChannelProgram("fir", 48000.0, arith,
                                (FirOp(tuple(_coef(arith, t, 1 if fixed else 0) for t in taps), 1 if fixed else 0),)))
    # a gain of 1.75 drives the full-scale steps of the golden input into saturation/wrap
    progs.append(ChannelProgram("gain", 48000.0, arith,
                                (GainOp(_coef(arith, 1.75, 1 if fixed else 0), 1 if fixed else 0),)))
    progs.append(ChannelProgram("delay", 48000.0, arith, (DelayOp(5),)))
    progs += symmetric_fir_programs(arith, rng)
    if fixed:
        # very small gains: rounding shifts as wide as or wider than a 32-bit accumulator
        fc = arith.coef.frac_bits
        cmax = (1 << (arith.coef.width - 1)) - 1
        for k, c in ((32, cmax), (40, -cmax), (62, cmax)):
            progs.append(ChannelProgram(f"gain_k{k}", 48000.0, arith, (GainOp(c, fc - k),)))
    mixed = (GainOp(_coef(arith, 0.5), 0), DelayOp(2), _section(rng, arith, structures[0], 0),
             FirOp(tuple(_coef(arith, t) for t in rng.uniform(-0.3, 0.3, 4)), 0),
             _section(rng, arith, structures[-1], 1 if fixed else 0), GainOp(_coef(arith, 1.2, 1 if fixed else 0), 1 if fixed else 0))
    progs.append(ChannelProgram("mixed", 48000.0, arith, mixed))
    return progs


def _symmetric(half: list, n: int) -> tuple:
    """The symmetric taps of length *n* whose first ceil(n/2) are *half*."""
    return tuple(half[:(n + 1) // 2] + half[:n // 2][::-1])


def symmetric_fir_programs(arith: Arithmetic, rng) -> list[ChannelProgram]:
    """Symmetric FIRs (marked ``symmetric``) of odd and even length, so a
    fixed-point header folds them: random taps with a coefficient shift, taps of the
    most negative and largest coefficient word (the folded product
    (x_a + x_b) * h then needs data + coef + 1 bits, 65 on mcu32), gains high
    enough that the full-scale steps saturate (or wrap), and 1 and 2 taps."""
    fixed = not arith.is_float
    sh = 1 if fixed else 0
    progs = []
    for n in (17, 16):
        half = [_coef(arith, t, sh) for t in rng.uniform(-0.4, 0.4, (n + 1) // 2)]
        progs.append(ChannelProgram(f"sym{n}", 48000.0, arith, (FirOp(_symmetric(half, n), sh, True),)))
    if fixed:
        cmin, cmax = -(1 << (arith.coef.width - 1)), (1 << (arith.coef.width - 1)) - 1
        for n in (7, 8):
            half = [cmin, cmax, cmin // 3, cmax][:(n + 1) // 2]
            progs.append(ChannelProgram(f"sym{n}_extreme", 48000.0, arith, (FirOp(_symmetric(half, n), 0, True),)))
    else:
        for n in (7, 8):
            half = [_coef(arith, t) for t in (-1.5, 1.25, 0.75, -0.5)][:(n + 1) // 2]
            progs.append(ChannelProgram(f"sym{n}_extreme", 48000.0, arith, (FirOp(_symmetric(half, n), 0, True),)))
    for n in (1, 2):
        progs.append(ChannelProgram(f"sym{n}", 48000.0, arith,
                                    (FirOp(_symmetric([_coef(arith, 0.9, sh)], n), sh, True),)))
    return progs


def emit_text(programs, target_name: str, name: str, vectors: int = 256) -> tuple[str, str, str]:
    """(file name, C name, header text) of hand-built programs."""
    real = fake_realisation(programs, target_name, name=name, source=f"{name}.toml")
    files = render(real, None, header_name=f"{name}.h", vectors=vectors)
    return f"{name}.h", name, files[f"{name}.h"]


# ---------------------------------------------------------------------------
# generated code (coefc build --kernel): build and run NAME_selftest()
# ---------------------------------------------------------------------------

WARNINGS = ["-Wconversion", "-Wshadow"]
BAREMETAL = Path(__file__).resolve().parent / "baremetal"
M4_FLAGS = ["-mcpu=cortex-m4", "-mthumb", "-mfloat-abi=hard", "-mfpu=fpv4-sp-d16"]


@dataclass(frozen=True)
class Platform:
    """A compiler, its flags and how to run what it builds (None: build only)."""

    name: str
    cc: str
    flags: tuple[str, ...] = ()
    runner: tuple[str, ...] | None = ()  # () runs natively
    needs: tuple[str, ...] = ()  # programs that must be installed
    baremetal: bool = False
    files: tuple[str, ...] = ()  # files that must exist (the C library a qemu-user build links)

    def missing(self) -> list[str]:
        return ([p for p in (self.cc, *self.needs) if shutil.which(p) is None]
                + [f for f in self.files if not Path(f).exists()])


#: Where generated code is proven (Debian packages: gcc-arm-linux-gnueabihf and
#: libc6-dev-armhf-cross, gcc-s390x-linux-gnu and libc6-dev-s390x-cross, qemu-user,
#: gcc-arm-none-eabi, libnewlib-arm-none-eabi, qemu-system-arm).
CROSS = (
    Platform("arm-linux-gnueabihf", "arm-linux-gnueabihf-gcc", ("-O2",),
             ("qemu-arm", "-L", "/usr/arm-linux-gnueabihf"), ("qemu-arm",),
             files=("/usr/arm-linux-gnueabihf/lib/crt1.o",)),
    Platform("s390x (big-endian)", "s390x-linux-gnu-gcc", ("-O2",),
             ("qemu-s390x", "-L", "/usr/s390x-linux-gnu"), ("qemu-s390x",),
             files=("/usr/s390x-linux-gnu/lib/crt1.o",)),
    Platform("cortex-m4 (mps2-an386)", "arm-none-eabi-gcc", ("-O2", *M4_FLAGS),
             ("qemu-system-arm", "-M", "mps2-an386", "-nographic", "-semihosting", "-kernel"),
             ("qemu-system-arm",), baremetal=True),
    Platform("cortex-m0 (compile only)", "arm-none-eabi-gcc", ("-O2", "-mcpu=cortex-m0", "-mthumb"), None),
)


def off_by_one_golden(c: str, array: str, index: int = 0) -> str:
    """Generated C text *c* with value *index* of the golden array that starts ``array = {``
    moved one LSB towards zero (a self test must then fail)."""
    head = f"{array} = {{\n    "
    start = c.index(head) + len(head)
    for _ in range(index):
        start = c.index(",", start) + 2
    end = c.index(",", start)
    v = int(c[start:end])
    return c[:start] + str(v + 1 if v < 0 else v - 1) + c[end:]


def generated_files(programs, target_name: str, name: str, vectors: int = 256) -> dict[str, str]:
    """{file name: text} of generated code (OUT.h, OUT.c) for hand-built programs."""
    real = fake_realisation(programs, target_name, name=name, source=f"{name}.toml")
    return render(real, None, header_name=f"{name}.h", vectors=vectors, generated=True)


def run_generated(workdir: Path, units: list[tuple[str, dict[str, str]]], platform: Platform, *,
                  extra: tuple[str, ...] = ()) -> tuple[int, str]:
    """Build every unit's OUT.c with a main calling each ``<name>_selftest()`` and run it.

    *units* is a list of ``(description C name, files)``.  Returns (exit code,
    output); 0 means every channel matched bit for bit (a build-only platform
    returns 0 when everything compiled).
    """
    workdir.mkdir(parents=True, exist_ok=True)
    sources = []
    decl, calls = [], []
    for name, files in units:
        for fname, text in files.items():
            (workdir / fname).write_text(text)
            if fname.endswith(".c"):
                sources.append(str(workdir / fname))
        decl.append(f'#include "{next(f for f in files if f.endswith(".h"))}"')
        calls.append(f'    bad += report("{name}", {name}_selftest());')
    if platform.baremetal:
        out = "void bm_puts(const char *text);\n#define SAY(s) bm_puts(s)\n"
        sources += [str(BAREMETAL / "startup.c")]
        link = ["-nostartfiles", "--specs=nosys.specs", "-T", str(BAREMETAL / "mps2.ld")]
    else:
        out = "#include <stdio.h>\n#define SAY(s) fputs(s, stdout)\n"
        link = []
    (workdir / "main.c").write_text(
        out + "\n".join(decl) + "\n"
        "static int report(const char *name, int bad)\n{\n    SAY(name);\n    SAY(bad ? \": MISMATCH\\n\" : \": ok\\n\");\n"
        "    return bad;\n}\nint main(void)\n{\n    int bad = 0;\n" + "\n".join(calls) + "\n    return bad != 0;\n}\n")
    exe = workdir / ("selftest.elf" if platform.baremetal else "selftest")
    cmd = [platform.cc, *STRICT, *WARNINGS, *platform.flags, *extra, "-I", str(workdir), str(workdir / "main.c"),
           *sources, *link, "-o", str(exe)]
    if platform.runner is None:
        compile_only = [platform.cc, *STRICT, *WARNINGS, *platform.flags, *extra, "-I", str(workdir), "-c",
                        *sources]
        r = subprocess.run(compile_only, capture_output=True, text=True, cwd=workdir)
        return (0 if r.returncode == 0 else 100), " ".join(compile_only) + "\n" + r.stdout + r.stderr
    r = subprocess.run(cmd, capture_output=True, text=True)
    if r.returncode != 0:
        return 100, "compile failed: " + " ".join(cmd) + "\n" + r.stdout + r.stderr
    r = subprocess.run([*platform.runner, str(exe)], capture_output=True, text=True, timeout=300)
    return r.returncode, r.stdout + r.stderr
