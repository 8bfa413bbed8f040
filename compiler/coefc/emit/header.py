"""C header emission: a realised description (and its check report) in,
``{filename: text}`` out.

Everything the header holds is computed here, in Python: the coefficient words in
the target's memory order and sign convention, the operation table the target's
reference kernel interprets, the state sizes, and the golden vectors (a fixed,
deterministic input and the bit-exact output of :func:`coefc.simulate.simulate`).
The target's Jinja2 template receives finished integers and strings and does no
arithmetic.  Templates are rendered in a sandbox with undefined variables as
errors, so a missing value can never become an empty coefficient.

Nothing here writes a file; the CLI writes the returned texts atomically.  For
identical inputs the text is byte-identical: the banner carries the tool version
and the SHA-256 of the description and of the target.toml, never a time.

The operation table written here is the kernel interface (``[kernel] abi``).
Interface 2 is interface 1 plus one operation kind, the folded symmetric FIR
(``<PREFIX>_OP_FIR_SYM = 7``): for a fixed-point FIR the realisation marks
symmetric (``taps[k] == taps[N-1-k]``), the coefficient array holds only the
first ceil(N/2) taps, the op's ``count`` is still N, and the kernel computes
``sum(h[k] * (x[n-k] + x[n-N+1-k]), k < N/2)`` plus the middle tap for odd N.
In wrapping accumulator arithmetic that is the same integer as the unfolded
sum, so the golden vectors (computed unfolded) still match bit for bit.
Float32 FIRs are never folded (the pre-add would round differently), and a
target that states interface 1 gets every FIR unfolded, as before.  The state
words each operation uses are the same in both interfaces:

====================  ===========================================================
operation             state words
====================  ===========================================================
section, df1          4  (x[n-1], x[n-2], y[n-1], y[n-2])
section, tdf2         2  (S1, S2 at accumulator precision)
section, df1ef        5  (as df1, then the previous rounding residual E)
section, df1-wide-fb  generated code only (``build --kernel``); the reference
                      kernels refuse it (coefc.emit.buildable); likewise
                      df1ef-wide-fb and df1ef-wide
FIR of N taps         N + 1  (position of the newest sample, then N samples),
                      folded or not
gain                  0
delay of D samples    D + 1  (position, then D samples)
====================  ===========================================================

References
----------
The generated-code habits (version and source hash in the banner, compile-time
guards against the wrong kernel or word width, byte-identical regeneration)
follow common practice of code generators for microcontrollers (common practice,
no source).
"""

from __future__ import annotations

import hashlib
import math
import sys
from pathlib import Path

import numpy as np

from .buildable import (C_KEYWORDS, FOLDED_FIR_ABI, SUPPORTED_ABI, EmitError, KernelOp, c_identifier,
                        validate)
from ..checks import SAFETY_CAUTION, over_budget_text
from ..errors import CoefcError, TargetError, setting
from ..program import DelayOp, FirOp, GainOp, SectionOp
from ..targetspec import BuildInfo, Target, common_dir
from ..templating import TemplateLimitError, environment, render_bounded

__all__ = ["render", "c_identifier", "golden_input", "GOLDEN_DEFAULT", "EmitError", "C_KEYWORDS",
           "SUPPORTED_ABI", "FOLDED_FIR_ABI"]

#: Default number of golden-vector samples per channel.
GOLDEN_DEFAULT = 256
#: Most golden-vector samples per channel (each is a line of C; a million already
#: makes a header of tens of megabytes).
GOLDEN_MAX = 1 << 20
# The refusal rules (kernel limits, C names, shifts, coefficient words) live in
# coefc.emit.buildable, which `coefc check` and `coefc sweep` call too; C_KEYWORDS,
# c_identifier, EmitError, SUPPORTED_ABI and FOLDED_FIR_ABI are re-exported here.


# ---------------------------------------------------------------------------
# literals
# ---------------------------------------------------------------------------

def _int_literal(v: int) -> str:
    v = int(v)
    if v == -(1 << 31):
        return "(-2147483647 - 1)"
    if not -(1 << 31) < v < (1 << 31):
        return f"INT64_C({v})" if v != -(1 << 63) else "(-INT64_C(9223372036854775807) - 1)"
    return str(v)


def _float_literal(v: float) -> str:
    f = float(np.float32(v))
    if not math.isfinite(f):
        raise EmitError(f"value {v!r} is not finite and cannot be written as a float32 constant")
    return f.hex() + "f"


def _lines(literals: list[str], per_line: int = 8) -> list[str]:
    """Group literals into comma-terminated lines."""
    return [", ".join(literals[i:i + per_line]) + "," for i in range(0, len(literals), per_line)]


# ---------------------------------------------------------------------------
# golden vectors
# ---------------------------------------------------------------------------

def golden_input(n: int, width: int) -> list[int]:
    """The deterministic golden input: *n* integers of a signed *width*-bit word.

    Four parts of (about) equal length, computed with integers only, so the
    sequence is identical on every machine:

    1. a full-scale impulse, then silence (the impulse response);
    2. a triangle-wave chirp at half scale, its frequency rising linearly;
    3. pseudo-random noise at a quarter of full scale (xorshift32, fixed seed);
    4. full-scale steps alternating between the largest and the smallest word
       every 16 samples, to drive saturation (or wrapping).

    >>> golden_input(8, 16)[:3]    # the impulse, silence, the chirp's first (lowest) point
    [32767, 0, -16383]
    """
    hi, lo = (1 << (width - 1)) - 1, -(1 << (width - 1))
    q = max(1, n // 4)
    out: list[int] = []
    phase, inc = 0, 1 << 24
    dinc = max(1, ((1 << 31) - inc) // max(1, q))
    state = 0x2545F491
    for t in range(n):
        part = min(3, t // q)
        i = t - part * q
        if part == 0:
            v = hi if i == 0 else 0
        elif part == 1:
            p = (phase >> 16) & 0xFFFF  # 16-bit phase
            tri = (p << 1) if p < 0x8000 else ((0xFFFF - p) << 1)  # 0 .. 65534
            v = ((tri - 32767) * (hi >> 1)) // 32767
            phase = (phase + inc) & 0xFFFFFFFF
            inc = min(inc + dinc, 1 << 31)
        elif part == 2:
            state ^= (state << 13) & 0xFFFFFFFF
            state ^= state >> 17
            state ^= (state << 5) & 0xFFFFFFFF
            v = ((state & 0xFFFF) - 0x8000) * (hi >> 2) // 0x8000
        else:
            v = hi if (i // 16) % 2 == 0 else lo
        out.append(max(lo, min(hi, int(v))))
    return out


def _golden(programs, n: int, fixed: bool, data_bits: int):
    from ..simulate import simulate

    if fixed:
        x_int = golden_input(n, data_bits)
        x = np.asarray(x_int, dtype=np.int64)
        inputs = [_int_literal(v) for v in x_int]
    else:
        x = (np.asarray(golden_input(n, 24), dtype=np.float64) / float(1 << 23)).astype(np.float32)
        inputs = [_float_literal(v) for v in x]
    outs = []
    for p in programs:
        y = np.asarray(simulate(p, x.copy()))
        if fixed:
            outs.append([_int_literal(int(v)) for v in y])
        else:
            if not np.all(np.isfinite(y)):
                raise EmitError(f"channel '{p.name}': the float32 golden output is not finite; the realised "
                                "filter is unstable, fix the design before building")
            outs.append([_float_literal(float(v)) for v in y])
    return inputs, outs


# ---------------------------------------------------------------------------
# the operation table
# ---------------------------------------------------------------------------

def _ops(kops: tuple[KernelOp, ...], fixed: bool, prefix: str):
    """Op initialisers, coefficient literals and state size of one validated channel."""
    P = prefix.upper()
    lit = _int_literal if fixed else _float_literal
    coefs: list[str] = []
    ops = []
    state = 0
    for op in kops:
        at = len(coefs) if op.coefs else 0
        coefs += [lit(v) for v in op.coefs]
        ops.append((f"{P}_OP_{op.kind}", op.rshift, op.count, at, state, op.comment))
        state += op.state_words
    return ops, coefs, state


# ---------------------------------------------------------------------------
# rendering
# ---------------------------------------------------------------------------

def _template_line(tb, template_path: Path) -> int | None:
    """The template line of the innermost traceback frame inside the template."""
    line = None
    name = str(template_path)
    while tb is not None:
        if tb.tb_frame.f_code.co_filename == name:
            line = tb.tb_lineno
        tb = tb.tb_next
    return line


def render_template(folder: Path, rel: str, context: dict) -> str:
    """Render ``folder/rel`` with *context*; errors become TargetError with file:line."""
    import jinja2

    path = folder / rel
    if not path.is_file() and (common_dir() / rel).is_file():
        path = common_dir() / rel  # the shared template (messages name the file used)
    env = environment(folder, shared=common_dir())
    try:
        template = env.get_template(Path(rel).as_posix())
    except jinja2.TemplateSyntaxError as e:
        raise TargetError(f"{path}:{e.lineno}: template syntax error: {e.message}; fix the template") from None
    except jinja2.TemplateNotFound:
        raise TargetError(f"{path}: template not found; fix [templates] in target.toml") from None
    except TemplateLimitError as e:
        raise TargetError(f"{path}: {e}") from None
    try:
        return render_bounded(template, context)
    except TemplateLimitError as e:
        raise TargetError(f"{path}: {e}") from None
    except jinja2.exceptions.SecurityError as e:
        raise TargetError(f"{path}: template error: {e}; templates may not call that") from None
    except jinja2.UndefinedError as e:
        line = _template_line(sys.exc_info()[2], path.resolve()) or _template_line(sys.exc_info()[2], path)
        at = f"{path}:{line}" if line else str(path)
        raise TargetError(f"{at}: {e.message}; the template uses a value coefc does not provide "
                          "(see the README section on writing a target)") from None
    except jinja2.TemplateError as e:
        line = _template_line(sys.exc_info()[2], path.resolve()) or _template_line(sys.exc_info()[2], path)
        at = f"{path}:{line}" if line else str(path)
        raise TargetError(f"{at}: template error: {e}") from None


def _fmt(v) -> str:
    if isinstance(v, bool) or v is None:
        return str(v).lower() if isinstance(v, bool) else "-"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return f"{v:.4g}"
    if isinstance(v, dict):
        return ", ".join(f"{k} {_fmt(x)}" for k, x in v.items())
    return str(v)


def _check_rows(ch_report):
    """(name, value, limit, ok) rows of one channel of a CheckReport."""
    rows = []
    for c in getattr(ch_report, "checks", ()) or ():
        if isinstance(c, dict):
            rows.append((c["name"], c.get("value"), c.get("limit"), bool(c.get("ok"))))
        elif isinstance(c, (tuple, list)):
            rows.append((c[0], c[1], c[2], bool(c[3])))
        else:
            rows.append((c.name, c.value, c.limit, bool(c.ok)))
    return rows


_KEY_METRICS = ("passband_deviation_db", "stopband_attenuation_db", "output_noise_dbfs",
                "headroom_bits", "overflow_count", "max_pole_radius")

CAUTION = "Caution: " + SAFETY_CAUTION


def _input_files(realisation) -> list[dict]:
    """The files the description's stages read (measurements, target curves), once each, in stage order."""
    seen, out = set(), []
    for ch in realisation.design.channels:
        for st in ch.stages:
            for i in (st.requirement or {}).get("inputs", ()):
                if i["file"] not in seen:
                    seen.add(i["file"])
                    out.append(i)
    return out


def _wrap(text: str, width: int = 76, indent: str = "") -> list[str]:
    import textwrap

    return textwrap.wrap(text, width, subsequent_indent=indent) or [""]


def render(realisation, report=None, *, header_name: str = "filters.h",
           vectors: int = GOLDEN_DEFAULT, forced: bool = False,
           with_kernel: bool = False, generated: bool = False) -> dict[str, str]:
    """Render the C header (and the target's optional companion source).

    Parameters
    ----------
    realisation : coefc.api.Realisation
        The realised channels, their target and the description they came from.
    report : coefc.budget.CheckReport, optional
        The check of *realisation*; its verdict and key metrics go into the
        banner.  ``None`` writes "not checked".
    header_name : str
        File name of the header (a bare name; it also names the companion source).
    vectors : int
        Golden-vector samples per channel (0 = none).
    forced : bool
        The report is over budget and the caller insists: the header says so in
        its first lines and defines ``<NAME>_OVER_BUDGET 1``.
    with_kernel : bool
        Also return the target's reference kernel files (header and sources,
        unchanged, under their own names) so a firmware build can take them
        from the same place as the header.
    generated : bool
        Write generated code specialised to each channel instead of the
        operation table (``OUT.h`` and ``OUT.c``, :mod:`coefc.emit.codegen`); the
        same refusals apply.

    Returns
    -------
    dict
        ``{file name: text}``: the header, and ``<stem>.c`` when the target has a
        ``[templates] source``.
    """
    from .. import __version__

    desc = realisation.design.loaded.description
    target: Target = realisation.target
    programs = tuple(realisation.programs)
    if not 0 <= vectors <= GOLDEN_MAX:
        raise CoefcError(f"<command line>: {setting('vectors')} {vectors}: use 0 (none) up to {GOLDEN_MAX} samples "
                         "per channel")
    header_name = Path(header_name).name
    checked = validate(realisation, generated)  # every refusal rule, shared with coefc check and coefc sweep
    if checked is None:
        from ..targetspec import build_info

        build_info(target)  # a check-only target: says which build table it lacks
        raise TargetError(f"{target.folder / 'target.toml'}: target '{target.name}' states no build tables")
    info, names, kernel_ops = checked
    arith = programs[0].arithmetic
    fixed = not arith.is_float

    prefix = info.kernel_prefix
    P = prefix.upper()
    NAME = names.name.upper()
    toml_bytes = (target.folder / "target.toml").read_bytes()
    over = report is not None and not bool(report.ok)
    if over and not forced:
        raise EmitError(f"{desc.source}: over budget; the header is not written (use {setting('force')} to write it anyway)")

    golden = None
    golden_outs: list[list[str]] = [[] for _ in programs]
    if vectors:
        inputs, golden_outs = _golden(programs, vectors, fixed, arith.data.width if fixed else 32)
        golden = {
            "n": vectors,
            "input_lines": _lines(inputs),
            "summary": (f"{vectors} samples: impulse, triangle chirp, noise, full-scale steps; "
                        "expected output is coefc's bit-true simulation"),
        }

    report_channels = {c.name: c for c in getattr(report, "channels", ())} if report is not None else {}
    channels = []
    banner_metrics: list[str] = []
    for p, ident, cids, gout, kops in zip(programs, names.channels, names.channel_ids, golden_outs, kernel_ops):
        ops, coefs, state = _ops(kops, fixed, prefix)
        n_sec = sum(isinstance(o, SectionOp) for o in p.ops)
        taps = sum(len(o.taps) for o in p.ops if isinstance(o, FirOp))
        folded = [op[2] for op in ops if op[0] == f"{P}_OP_FIR_SYM"]  # their tap counts
        stored = taps - sum(n // 2 for n in folded)
        delay = sum(o.samples for o in p.ops if isinstance(o, DelayOp))
        parts = [f"{n_sec} section{'s' if n_sec != 1 else ''} ({p.arithmetic.structure})"] if n_sec else []
        if taps and folded:
            parts += [f"FIR {taps} taps ({stored} stored, symmetric taps folded)"]
        elif taps:
            parts += [f"FIR {taps} taps"]
        parts += [f"{sum(isinstance(o, GainOp) for o in p.ops)} gain"] if any(isinstance(o, GainOp) for o in p.ops) else []
        parts += [f"delay {delay} samples"] if delay else []
        summary = ", ".join(parts) or "pass-through"
        channels.append({
            "name": p.name,
            "ident": ident,
            "IDENT": ident.upper(),
            "ids": cids,  # every identifier of the channel, made (and checked) by buildable.c_names
            "summary": summary,
            "n_ops": len(ops),
            "n_coefs": len(coefs),
            "state_words": max(1, state),
            "coef_lines": _lines(coefs, 5),
            "ops": [{"init": f"{{{kind}, {k}u, {cnt}u, {at}u, {st}u}}", "comment": cm}
                    for kind, k, cnt, at, st, cm in ops],
            "ops_ref": cids["ops"] if ops else "0",
            "coefs_ref": cids["coefs"] if coefs else "0",
            "data_bits": arith.data.width if fixed else 32,
            "acc_bits": arith.acc_bits if fixed else 32,
            "rounding": f"{P}_ROUND_{arith.rounding.upper().replace('-', '_')}" if fixed else "0",
            "overflow": f"{P}_OVERFLOW_{arith.overflow.upper()}" if fixed else "0",
            "golden_lines": _lines(gout),
        })
        rc = report_channels.get(p.name)
        if rc is not None:
            metrics = getattr(rc, "metrics", {}) or {}
            shown = [f"{k} {_fmt(metrics[k])}" for k in _KEY_METRICS if k in metrics]
            lc = metrics.get("limit_cycle")
            if isinstance(lc, dict) and "status" in lc:
                shown.append(f"limit cycles {lc['status']}")
            banner_metrics += _wrap(f"'{p.name}': {summary}; " + "; ".join(shown), indent="    ")
            rows = _check_rows(rc)
            for name, value, limit, ok in rows:
                if not ok:
                    banner_metrics.append(f"  OVER BUDGET '{p.name}': {over_budget_text(name, value, limit)}")
            checked = {r[0] for r in rows}
            risks = []
            if (metrics.get("overflow_count") or 0) > 0 and "overflow" not in checked:
                risks.append("overflow under the worst-case input")
            if isinstance(lc, dict) and lc.get("status") in ("found", "unproven") and "limit_cycles" not in checked:
                risks.append(f"limit cycles {lc['status']}")
            if risks:
                banner_metrics += _wrap(f"  NOTE '{p.name}': {' and '.join(risks)}, which the budget does not "
                                        "limit; see the caution below", indent="    ")
        else:
            banner_metrics.append(f"'{p.name}': {summary}")

    if report is None:
        verdict = "not checked"
    elif over:
        verdict = "OVER BUDGET (written with --force)"
    else:
        verdict = "within budget"
    if fixed:
        fmt_text = (f"data {arith.data} ({arith.data.width}-bit), coefficients {arith.coef}, "
                    f"{arith.acc_bits}-bit accumulator, rounding {arith.rounding}, overflow {arith.overflow}, "
                    f"structure {arith.structure}, scaling {arith.scaling}")
    else:
        fmt_text = f"float32 (IEEE 754 single, no fused multiply-add), structure {arith.structure}"
    lines: list[str] = []
    if over:
        lines += ["!!! OVER BUDGET: this header was written with --force although the check",
                  "!!! failed; do not ship it without a review of the failed checks below."]
    lines += [
        f"{header_name}: generated by coefc {__version__}; do not edit, regenerate with coefc build.",
        f"description  {Path(desc.source).name} (sha256 {desc.sha256})",
        *(f"input        {i['file']} (sha256 {i['sha256']})" for i in _input_files(realisation)),
        f"target       {target.name} (target.toml sha256 {hashlib.sha256(toml_bytes).hexdigest()})",
        (f"code         generated by coefc, specialised to each channel ({Path(header_name).stem}.c)"
         if generated else f"kernel       {Path(info.kernel_header).name}, interface {info.kernel_abi}"),
    ]
    lines += _wrap("arithmetic   " + fmt_text, indent="             ")
    lines += [f"verdict      {verdict}", "channels:"]
    lines += ["  " + m for m in banner_metrics]
    for c in getattr(report, "cautions", ()) or ():
        lines += _wrap(f"Caution from the check: {c}", indent="  ")
    lines += ["Levels in dBFS: 0 dBFS is the RMS level of a full-scale sine (AES17)."]
    lines += _wrap(CAUTION)
    banner = [(" * " + line).rstrip() for line in lines]

    if generated:
        from .codegen import CNames, render_kernel

        return render_kernel(
            programs=programs, names=CNames(names.name, tuple(i[len(names.name) + 1:] for i in names.channels)),
            source=desc.source, banner=banner, header_name=header_name, data_type=info.data_type,
            coef_type=info.coef_type, arith=arith,
            sample_rate_hz=str(int(desc.sample_rate_hz)) if float(desc.sample_rate_hz).is_integer()
            else repr(float(desc.sample_rate_hz)),
            over_budget=over, golden_inputs=inputs if vectors else None, golden_outs=golden_outs)
    attrs = []
    if info.alignment:
        attrs.append(f"aligned({info.alignment})")
    if info.linker_section:
        attrs.append(f'section("{info.linker_section}")')
    coef_attr_gnu = f"__attribute__(({', '.join(attrs)}))" if attrs else ""
    sr = float(desc.sample_rate_hz)
    context = {
        "banner": banner,
        "header_name": header_name,
        "guard": names.ids["COEFC_H"],
        "ids": names.ids,  # every identifier of the description, made (and checked) by buildable.c_names
        "name": names.name,
        "NAME": NAME,
        "fixed": fixed,
        "over_budget": 1 if over else 0,
        "sample_rate_hz": str(int(sr)) if sr.is_integer() else repr(sr),
        "kernel": {"prefix": prefix, "PREFIX": P, "abi": info.kernel_abi,
                   "include": Path(info.kernel_header).name,
                   "a_negated": 1 if any(t.startswith("-") for t in info.section_layout) else 0},
        "types": {"data": info.data_type, "coef": info.coef_type, "state": info.state_type},
        "arithmetic": {
            "data_bits": arith.data.width if fixed else 32,
            "data_frac_bits": arith.data.frac_bits if fixed else 0,
            "coef_bits": arith.coef.width if fixed else 32,
            "coef_frac_bits": arith.coef.frac_bits if fixed else 0,
            "acc_bits": arith.acc_bits if fixed else 32,
            "structure": arith.structure,
        },
        "coef_attr_gnu": coef_attr_gnu,
        "channels": channels,
        "max_state_words": max(c["state_words"] for c in channels),
        "golden": golden,
    }
    out = {header_name: render_template(target.folder, info.header_template, context)}
    if info.source_template:
        out[Path(header_name).stem + ".c"] = render_template(target.folder, info.source_template, context)
    if with_kernel:
        for name, text in kernel_texts(target, info).items():
            if name in out:
                raise TargetError(f"{target.folder / 'target.toml'}: kernel file name '{name}' clashes with the "
                                  "generated header; choose another output name")
            out[name] = text
    return out


_C_INT_BITS = {"int16_t": 16, "int32_t": 32, "int64_t": 64}


def kernel_context(target: Target, info: BuildInfo) -> dict:
    """The finished values a kernel family's templates lay out (``k`` in the templates).

    Every C type and width is decided here from the target's ``[c]``, ``[limits]``,
    ``[layout]`` and ``[arithmetic]``: the accumulator container is the state word,
    a product is formed in the narrowest of int32_t/int64_t that holds any product
    of a data and a coefficient container.
    """
    a = target.arithmetic
    prefix = info.kernel_prefix
    dbits, cbits = _C_INT_BITS.get(info.data_type, 32), _C_INT_BITS.get(info.coef_type, 32)
    abits = _C_INT_BITS.get(info.state_type, 64)
    negated = any(t.startswith("-") for t in info.section_layout)
    pshift = getattr(a, "product_shift", 0) or 0
    prounding = getattr(a, "product_rounding", "truncate")
    words = [f"{info.max_data_bits}-bit data words, {info.max_coef_bits}-bit coefficient words,"]
    if dbits > info.max_data_bits or cbits > info.max_coef_bits:
        words += [f"held right-justified (sign-extended) in {info.data_type} / {info.coef_type} containers,"]
    words += [f"an accumulator of up to {info.max_acc_bits} bits (formed exactly in uint{abits}_t)"]
    if pshift:
        words += [f"and every product rounded to a multiple of 2^{pshift} ({prounding}) before it is added"]
    return {
        "target": target.name, "prefix": prefix, "PREFIX": prefix.upper(), "abi": info.kernel_abi,
        "header": Path(info.kernel_header).name, "words": words,
        "data_type": info.data_type, "coef_type": info.coef_type, "state_type": info.state_type,
        "data_container_bits": dbits, "coef_container_bits": cbits, "data_bits": info.max_data_bits,
        "coef_bits": info.max_coef_bits, "max_acc_bits": info.max_acc_bits,
        "acc_container_bits": abits, "uacc_type": f"uint{abits}_t", "sacc_type": f"int{abits}_t",
        "prod_type": "int32_t" if dbits + cbits <= 32 else "int64_t",
        "a_negated": negated, "asub": "mac" if negated else "msub",
        "a1_note": " /* c[3] = -a1 */" if negated else "", "a2_note": " /* c[4] = -a2 */" if negated else "",
        "product_shift": pshift, "product_rounding": prounding,
        "PRODUCT_ROUNDING": prounding.upper().replace("-", "_"),
        "pad_process": " " * len(f"void {prefix}_process("),
        "pad_selftest": " " * len(f"long {prefix}_selftest("),
    }


def kernel_texts(target: Target, info: BuildInfo) -> dict[str, str]:
    """The target's reference kernel: ``{file name: text}`` for its header and sources.

    A target with ``[kernel] family`` has its kernel rendered from the templates
    ``kernel/<family>/kernel.h.j2`` and ``kernel.c.j2`` (any template, also one
    the family's templates include, is taken from the target folder when it has
    one of that name, else from ``targets/_common``); otherwise its files are
    copied as they are.
    """
    out = {}
    if info.kernel_family is not None:
        context = {"k": kernel_context(target, info)}
        base = f"kernel/{info.kernel_family}/kernel"
        out[Path(info.kernel_header).name] = render_template(target.folder, base + ".h.j2", context)
        for src in info.kernel_sources:
            out[Path(src).name] = render_template(target.folder, base + ".c.j2", context)
        return out
    for path in info.kernel_files(target.folder):
        try:
            out[path.name] = path.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as e:
            raise TargetError(f"{path}: cannot read the kernel file ({e})") from None
    return out
