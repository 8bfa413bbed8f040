"""Can this target's kernel run this program?  Every refusal rule of ``coefc build``, in one place.

``coefc build`` (through :func:`coefc.emit.header.render`), ``coefc check`` and
``coefc sweep`` call :func:`validate`, so a configuration the build would refuse
fails the check with exit code 2 and is never offered by the sweep.  The rules:

- the target's build tables are whole and valid, and it states a kernel interface
  this coefc writes (:func:`coefc.targetspec.kernel_info`);
- data, coefficient and accumulator words are no wider than its kernel computes
  (``[limits]``; :func:`coefc.targetspec.check_kernel_words`);
- the description and channel names make distinct C identifiers, none a C keyword;
- every op is one the kernel interface knows, on a structure the target has;
- every coefficient, stored in the target's memory order and sign convention
  (``-a1`` stores the negated term), fits the coefficient word;
- every op's rounding shift ``k = Fc - coefficient shift`` is within what the
  kernels compute (1 to 62 bits; a section's below its state word, where df1ef
  keeps the residual), and a target without a coefficient shift gets none.

:func:`kernel_program` also returns the ops in the kernel's terms (the words the
header stores), so the header is written from exactly what was validated.

A check-only target (one that states no build table) has no kernel: nothing here
applies to it, and ``coefc build`` refuses it for that reason alone.

References
----------
ISO/IEC 9899:1999, section 6.4.1 (C keywords); section 7.1.3 (reserved names).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass, field

from ..errors import CoefcError, DescriptionError, TargetError, setting
from ..program import ChannelProgram, CicOp, DelayOp, FirOp, GainOp, PolyFirOp, RateOp, SectionOp, STRUCTURE_TABLE
from ..spec import C99_KEYWORDS
from ..targetspec import BuildInfo, Target, check_kernel_words, kernel_info

__all__ = ["EmitError", "C_KEYWORDS", "c_identifier", "c_names", "KernelOp", "kernel_program",
           "validate", "refusal", "SUPPORTED_ABI", "FOLDED_FIR_ABI", "MAX_RSHIFT"]

#: The kernel interface versions this coefc writes.
SUPPORTED_ABI = (1, 2)
#: The first interface with the folded symmetric FIR operation.
FOLDED_FIR_ABI = 2
#: Largest rounding shift the kernels (and coefc's engine) compute.
MAX_RSHIFT = 62

STATE_WORDS = {s.name: s.state_words for s in STRUCTURE_TABLE.values()}

# C99 keywords (ISO/IEC 9899:1999, 6.4.1): one set, coefc.spec's, for descriptions and headers alike.
C_KEYWORDS = C99_KEYWORDS


def _std_names() -> frozenset:
    """Names a header must not declare: those of <stdint.h>, <stddef.h> and <stdbool.h>
    (ISO/IEC 9899:1999, 7.17, 7.16 and 7.18), upper-cased so that any case collides."""
    widths = ("8", "16", "32", "64")
    kinds = [f"{w}" for w in widths] + [f"_LEAST{w}" for w in widths] + [f"_FAST{w}" for w in widths]
    names = {"INTMAX_T", "UINTMAX_T", "INTPTR_T", "UINTPTR_T", "SIZE_T", "PTRDIFF_T", "WCHAR_T", "WINT_T",
             "SIG_ATOMIC_T", "MAX_ALIGN_T", "NULL", "OFFSETOF", "BOOL", "TRUE", "FALSE",
             "INTMAX_MIN", "INTMAX_MAX", "UINTMAX_MAX", "INTPTR_MIN", "INTPTR_MAX", "UINTPTR_MAX",
             "PTRDIFF_MIN", "PTRDIFF_MAX", "SIZE_MAX", "SIG_ATOMIC_MIN", "SIG_ATOMIC_MAX", "WCHAR_MIN",
             "WCHAR_MAX", "WINT_MIN", "WINT_MAX", "INTMAX_C", "UINTMAX_C"}
    for k in kinds:
        names |= {f"INT{k}_T", f"UINT{k}_T", f"INT{k}_MIN", f"INT{k}_MAX", f"UINT{k}_MAX"}
    names |= {f"INT{w}_C" for w in widths} | {f"UINT{w}_C" for w in widths}
    return frozenset(names)


STD_NAMES = _std_names()


class EmitError(CoefcError):
    """A realised program cannot be written for the chosen target."""


# ---------------------------------------------------------------------------
# C names
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Names:
    """Every C identifier of a table header, made once here: the template lays them out and the
    collision check of :func:`c_names` runs over exactly these."""

    name: str  # description prefix, sanitised
    channels: tuple[str, ...]  # "<name>_<channel>"
    ids: Mapping[str, str] = field(default_factory=dict)  # the description's identifiers by role
    channel_ids: tuple[Mapping[str, str], ...] = ()  # each channel's identifiers by role


#: the description's identifiers of a table header: role -> suffix after ``<name>`` (arrays)
HEADER_ARRAYS = {"channels": "_channels", "channel_names": "_channel_names", "golden_in": "_golden_in",
                 "golden_out": "_golden_out"}
#: ... and its macros: role -> suffix after ``<NAME>_``
HEADER_MACROS = ("COEFC_H", "COEF_ATTR", "N_CHANNELS", "MAX_STATE_WORDS", "GOLDEN_LEN", "DATA_BITS",
                 "DATA_FRAC_BITS", "COEF_BITS", "COEF_FRAC_BITS", "ACC_BITS", "SAMPLE_RATE_HZ", "OVER_BUDGET")
#: a channel's identifiers: role -> suffix after ``<name>_<channel>`` (its kernel table, arrays) ...
CHANNEL_ARRAYS = {"table": "", "coefs": "_coefs", "ops": "_ops", "golden_out": "_golden_out"}
#: ... and its macros: role -> suffix after ``<NAME>_<CHANNEL>_``
CHANNEL_MACROS = ("N_OPS", "N_COEFS", "STATE_WORDS")


def c_identifier(text: str, what: str, source: str) -> str:
    """Sanitise *text* into a C identifier fragment or raise DescriptionError.

    Runs of characters other than letters, digits and ``_`` become one ``_``;
    leading and trailing ``_`` are dropped.  A fragment must start with a letter
    and must not be a C keyword.

    >>> c_identifier("mid-high 2", "channel", "x.toml")
    'mid_high_2'
    """
    ident = re.sub(r"[^A-Za-z0-9_]+", "_", str(text)).strip("_")
    if not ident or not ident[0].isalpha():
        raise DescriptionError(source, f"{what} '{text}' cannot become a C identifier (it must start "
                               "with a letter); rename it", key="name")
    if ident in C_KEYWORDS:
        raise DescriptionError(source, f"{what} '{text}' is a C keyword; rename it", key="name")
    return ident


def c_names(desc_name: str, channel_names, source: str, kernel_prefix: str = "") -> Names:
    """The C names of a description and its channels; collisions raise DescriptionError.

    Every identifier and macro the header makes is compared, upper-cased, with the
    others, with the standard headers' names (:data:`STD_NAMES`: ``int32`` with a
    channel ``t`` would declare ``int32_t``) and with the kernel's own names (anything
    starting with *kernel_prefix*).
    """
    name = c_identifier(desc_name, "description name", source)
    seen: dict[str, str] = {}
    chans = []
    for ch in channel_names:
        ident = f"{name}_{c_identifier(ch, 'channel name', source)}"
        key = ident.upper()  # macros are upper case: 'Mid' and 'mid' collide there
        if key in seen:
            raise DescriptionError(source, f"channel names '{seen[key]}' and '{ch}' both become the C name "
                                   f"'{ident}'; rename one of them", channel=ch, key="name")
        seen[key] = ch
        chans.append(ident)
    # Every generated identifier (and macro) must be unique, e.g. a channel
    # 'woofer_ops' would collide with the operation table of channel 'woofer'.
    ids = {**{r: name + s for r, s in HEADER_ARRAYS.items()}, **{m: f"{name.upper()}_{m}" for m in HEADER_MACROS}}
    made: dict[str, str] = {v.upper(): "the description" for v in ids.values()}
    channel_ids = []
    for ch, ident in zip(channel_names, chans):
        cids = {**{r: ident + s for r, s in CHANNEL_ARRAYS.items()},
                **{m: f"{ident.upper()}_{m}" for m in CHANNEL_MACROS}}
        for v in cids.values():
            key = v.upper()
            if key in made:
                raise DescriptionError(source, f"channel '{ch}' makes the C name '{v}', which "
                                       f"{made[key]} also uses; rename the channel", channel=ch, key="name")
            made[key] = f"channel '{ch}'"
        channel_ids.append(cids)
    kp = kernel_prefix.upper()
    for key, who in made.items():
        if key in STD_NAMES or key in C_KEYWORDS or (kp and (key == kp or key.startswith(kp + "_"))):
            what = "a name of the C standard headers" if key in STD_NAMES or key in C_KEYWORDS else \
                f"a name of the target's kernel ({kernel_prefix}_...)"
            raise DescriptionError(source, f"{who} makes the C name '{key}' (case ignored), which is {what}; "
                                   "rename the description or the channel", key="name")
    return Names(name, tuple(chans), ids, tuple(channel_ids))


# ---------------------------------------------------------------------------
# ops in the kernel's terms
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class KernelOp:
    """One entry of the kernel's operation table, with the coefficient words it stores."""

    kind: str  # DF1, TDF2, DF1EF, FIR, FIR_SYM, GAIN, DELAY
    rshift: int
    count: int
    coefs: tuple  # stored words in memory order (int, or float for float32)
    state_words: int
    comment: str


def kernel_program(program: ChannelProgram, info: BuildInfo, target: Target,
                   source: str = "<description>", generated: bool = False) -> tuple[KernelOp, ...]:
    """*program* as the target's kernel runs it; EmitError naming the op and the fix when it cannot.

    *generated*: the program is written as generated code (``coefc build --kernel``),
    which also runs the structures the reference kernels' interface lacks
    (``df1-wide-fb``); without it those are refused.
    """
    arith = program.arithmetic
    fixed = not arith.is_float
    fc = arith.coef.frac_bits if fixed else 0
    cbits = arith.coef.width if fixed else 32
    state_bits = {"int16_t": 16, "int32_t": 32, "int64_t": 64}.get(info.state_type, 32)
    at = f"{source}, channel '{program.name}'"

    def fail(msg: str):
        raise EmitError(f"{at}: {msg}")

    def rshift(shift: int, what: str, section: bool) -> int:
        if not fixed:
            if shift:
                fail(f"{what} has coefficient shift {shift}, which float32 arithmetic does not use; "
                     "realise the channel again")
            return 0
        if shift and not info.coef_shift:
            fix = ("give the coefficient word more integer bits (" + setting("coef") + ")" if shift > 0 else
                   "set [layout] coef_shift = true in the target if its kernel shifts, or choose such a target")
            fail(f"{what} needs coefficient shift {shift} but target '{target.name}' has none "
                 f"([layout] coef_shift = false); {fix}")
        P = arith.product_shift  # rounded products: the accumulator holds units of 2^P
        k = fc - shift - P
        top = min(MAX_RSHIFT, state_bits - 2) if section else MAX_RSHIFT
        if not (0 if P else 1) <= k <= top:
            room = (f"the kernel of target '{target.name}' rounds a section by 1..{top} bits "
                    f"(below its {state_bits}-bit state word)" if section and top < MAX_RSHIFT
                    else f"the kernels round by 1..{MAX_RSHIFT} bits")
            fix = ("give the coefficient word more fractional bits (" + setting("coef") + ")" if k < 1 else
                   "give the coefficient word fewer fractional bits (" + setting("coef") + ")")
            fail(f"{what} needs a right shift of {k} bits ({fc} fractional coefficient bits minus "
                 f"coefficient shift {shift}{f' minus product shift {P}' if P else ''}); {room}; {fix}")
        return k

    def words(values, what: str) -> tuple:
        out = []
        for v in values:
            if fixed:
                if isinstance(v, float) and not float(v).is_integer():
                    fail(f"{what} coefficient {v!r} is not an integer; realise the channel again")
                v = int(v)
                if not -(1 << (cbits - 1)) <= v < (1 << (cbits - 1)):
                    fail(f"{what} coefficient {v} does not fit {'an' if cbits in (8, 11, 18) else 'a'} {cbits}-bit word as target "
                         f"'{target.name}' stores it; give the coefficient word one more integer bit ({setting('coef')})")
            out.append(v)
        return tuple(out)

    ops: list[KernelOp] = []
    n_sec = 0
    for i, op in enumerate(program.ops, 1):
        if isinstance(op, SectionOp):
            n_sec += 1
            what = f"section {n_sec}"
            if op.structure not in STATE_WORDS:
                fail(f"{what} has structure '{op.structure}', which the kernel interface does not know; "
                     f"use one of {', '.join(STATE_WORDS)}")
            if op.structure not in target.structures:
                fail(f"target '{target.name}' has no kernel for structure '{op.structure}'; it supports "
                     f"{', '.join(target.structures)} ({setting('structure')})")
            if not STRUCTURE_TABLE[op.structure].reference_kernel and not generated:
                fail(f"{what} is {op.structure} ({STRUCTURE_TABLE[op.structure].description}), which the "
                     f"reference kernel of target '{target.name}' does not run; write generated code "
                     f"({setting('kernel')}) or choose another structure ({setting('structure')})")
            if STRUCTURE_TABLE[op.structure].state_space:  # generated code only (checked above)
                k = rshift(op.shift, what, True)
                ops.append(KernelOp(op.structure.upper(), k, 1, words((*op.b, *op.a), what),
                                    STATE_WORDS[op.structure], f"{what}, {op.structure}, coefficient shift {op.shift}"))
                continue
            terms = {"b0": op.b[0], "b1": op.b[1], "b2": op.b[2], "a1": op.a[0], "a2": op.a[1]}
            values = [-terms[t[1:]] if t.startswith("-") else terms[t] for t in info.section_layout]
            k = rshift(op.shift, what, True)
            if STRUCTURE_TABLE[op.structure].wide_feedback:  # generated code only (checked above)
                values = list(values) + [int(v) for v in (op.a_lo or (0, 0))]
            if STRUCTURE_TABLE[op.structure].wide_numerator:  # df1ef-wide: the numerator's low words too
                values = list(values) + [int(v) for v in (op.b_lo or (0, 0, 0))]
            ops.append(KernelOp(op.structure.upper().replace("-", "_"), k, 1, words(values, what),
                                STATE_WORDS[op.structure], f"{what}, {op.structure}, coefficient shift {op.shift}"))
        elif isinstance(op, FirOp):
            taps = list(op.taps)
            what = f"FIR (op {i})"
            if not taps:
                fail(f"op {i} is an FIR without taps; realise the channel again")
            k = rshift(op.shift, what, False)
            n = len(taps)
            if op.symmetric and fixed and info.kernel_abi >= FOLDED_FIR_ABI:
                if taps != taps[::-1]:
                    fail(f"op {i} is marked as a symmetric FIR but its taps are not symmetric; "
                         "realise the channel again")
                stored = (n + 1) // 2
                ops.append(KernelOp("FIR_SYM", k, n, words(taps[:stored], what), n + 1,
                                    f"FIR, {n} taps, symmetric: {stored} stored, folded, "
                                    f"coefficient shift {op.shift}"))
            else:
                ops.append(KernelOp("FIR", k, n, words(taps, what), n + 1,
                                    f"FIR, {n} taps{' (symmetric)' if op.symmetric else ''}, "
                                    f"coefficient shift {op.shift}"))
        elif isinstance(op, GainOp):
            what = f"gain (op {i})"
            k = rshift(op.shift, what, False)
            ops.append(KernelOp("GAIN", k, 1, words([op.coef], what), 0, f"gain, coefficient shift {op.shift}"))
        elif isinstance(op, DelayOp):
            d = int(op.samples)
            if d < 0:
                fail(f"op {i} is a negative delay ({d} samples); fix the delay")
            ops.append(KernelOp("DELAY", 0, d, (), d + 1 if d else 0, f"delay, {d} samples"))
        elif isinstance(op, (PolyFirOp, RateOp)):
            how = f"decimating by {op.down}" if op.down > 1 else f"interpolating by {op.up}"
            what = (f"polyphase FIR (op {i}, {how})" if isinstance(op, PolyFirOp) else f"rate change (op {i}, {how})")
            if not generated:
                fail(f"op {i} is a {what}, which the reference kernel of target '{target.name}' does not run "
                     f"(a multirate channel); write generated code ({setting('kernel')})")
            if isinstance(op, PolyFirOp):
                taps = list(op.taps)
                if not taps:
                    fail(f"op {i} is an FIR without taps; realise the channel again")
                k = rshift(op.shift, what, False)
                ops.append(KernelOp("POLYFIR", k, len(taps), words(taps, what), len(taps) + 1,
                                    f"polyphase FIR, {len(taps)} taps, {how}, coefficient shift {op.shift}"))
            else:
                ops.append(KernelOp("RATE", 0, op.factor, (), 0, f"rate change, {how}"))
        elif isinstance(op, CicOp):
            what = f"CIC decimator (op {i}, decimating by {op.factor})"
            if not generated:
                fail(f"op {i} is a {what}, which the reference kernel of target '{target.name}' does not run "
                     f"(a multirate channel); write generated code ({setting('kernel')})")
            if not fixed or arith.product_shift:
                fail(f"op {i} is a {what}, which runs in a wrap-around integer register with exact products "
                     "only; choose a fixed-point target without product_shift")
            k = fc - op.shift  # the CIC's output shift (its own, not a coefficient shift of the target)
            if not 1 <= k <= 62 or not 2 <= op.register_bits <= 64:
                fail(f"op {i}: the {what} needs an output shift of 1..62 bits and a register of at most 64 bits; "
                     "realise the channel again")
            ops.append(KernelOp("CIC", k, op.factor, words([op.coef], what), 2 * op.stages * (1 + op.delay),
                                f"CIC decimator by {op.factor}, {op.stages} stages, differential delay {op.delay}, "
                                f"{op.register_bits}-bit register"))
        else:
            fail(f"op {i} ({type(op).__name__}) has no C form")
    return tuple(ops)


# ---------------------------------------------------------------------------
# the whole realisation
# ---------------------------------------------------------------------------

def validate(realisation, generated: bool = False) -> tuple[BuildInfo, Names, tuple[tuple[KernelOp, ...], ...]] | None:
    """Apply every refusal rule of ``coefc build`` to *realisation*.

    *generated*: the rules of ``coefc build --kernel`` (generated code), which runs
    every structure of the target; ``coefc check`` applies these.

    Returns ``(build info, C names, kernel ops per channel)``, or ``None`` for a
    check-only target (no build tables: nothing to build, nothing to refuse).
    Raises TargetError, DescriptionError or EmitError (all CoefcError): one line
    naming the file, the place and the fix.
    """
    desc = realisation.design.loaded.description
    target: Target = realisation.target
    programs = tuple(realisation.programs)
    info = kernel_info(target)
    if info is None:
        return None
    if info.kernel_abi not in SUPPORTED_ABI:
        raise TargetError(f"{target.folder / 'target.toml'}: [kernel] abi = {info.kernel_abi}; this coefc "
                          f"writes interface {', '.join(map(str, SUPPORTED_ABI))}")
    if not programs:
        raise EmitError(f"{desc.source}: no channel to write")
    names = c_names(desc.name, [p.name for p in programs], desc.source, info.kernel_prefix)
    arith = programs[0].arithmetic
    if any(p.arithmetic != arith for p in programs):
        raise EmitError(f"{desc.source}: channels were realised in different arithmetic; one header holds one")
    places = {"data": desc.source, "coef": desc.source, "acc_bits": desc.source}
    check_kernel_words(arith, target, places)
    return info, names, tuple(kernel_program(p, info, target, desc.source, generated) for p in programs)


#: structures the reference kernels (the operation table) run; the others only as generated code
KERNEL_STRUCTURES = tuple(s.name for s in STRUCTURE_TABLE.values() if s.reference_kernel)


def refusal(realisation, generated: bool = False) -> str | None:
    """Why ``coefc build`` would refuse *realisation* (one line), or ``None`` when it would not."""
    try:
        validate(realisation, generated)
    except CoefcError as e:
        return str(e)
    return None
