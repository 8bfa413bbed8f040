"""The visual report: a check report and its realisation in, one self-contained HTML page out.

Per channel the page shows the float and the realised magnitude response, their
difference, the analytic roundoff-noise density, the poles and zeros of the float
design against the realised ones, the checks with their reasons, the realised
integers of every section and the limit-cycle verdict of every recursive section.
Plots are inline SVG drawn by matplotlib (the ``plot`` extra); the page loads
nothing from anywhere else, so it can be attached to a merge request as it is.

Levels in dBFS follow AES17 (0 dBFS is the RMS level of a full-scale sine).
"""

from __future__ import annotations

import io
import re
from pathlib import Path

import numpy as np

from ..errors import CoefcError
from ..checks import BUDGET_CHECKS, SAFETY_CAUTION, kind_of
from .text import format_limit, format_number

TEMPLATE_DIR = Path(__file__).parent / "templates"


def _pyplot():
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        raise CoefcError("the HTML report draws its plots with matplotlib: pip install 'coefc[plot]'") from None
    plt.rcParams["svg.hashsalt"] = "coefc"  # identical inputs give identical pages
    plt.rcParams["svg.fonttype"] = "none"
    return plt


def _svg(fig) -> str:
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
    import matplotlib.pyplot as plt

    plt.close(fig)
    text = buf.getvalue()
    return text[text.index("<svg"):]  # drop the XML prologue and doctype for inline use


def _finite(a: np.ndarray) -> np.ndarray:
    a = np.asarray(a, dtype=float)
    return np.where(np.isfinite(a), a, np.nan)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """The (start, stop) index ranges where *mask* is true."""
    m = np.concatenate([[False], np.asarray(mask, bool), [False]])
    d = np.flatnonzero(np.diff(m.astype(int)))
    return list(zip(d[::2], d[1::2]))


def response_svg(plt, metrics, fs: float, budget) -> str:
    """Float vs realised magnitude with the stopband mask (top); |realised - float| on a log axis (bottom).

    The deviation limit is drawn over the passband only and the attenuation limit
    over the stopband only: where each check measured (``ResponseAnalysis`` masks).
    """
    r = metrics.response
    fig, (top, bot) = plt.subplots(2, 1, figsize=(8.0, 6.0), sharex=True, constrained_layout=True,
                                   gridspec_kw={"height_ratios": [3, 2]})
    f = r.freqs_hz
    fl, qu = _finite(r.float_db), _finite(r.quantised_db)
    peak = float(np.nanmax(fl))
    top.semilogx(f, fl, label="float design", lw=1.6)
    top.semilogx(f, qu, label="realised (quantised coefficients)", lw=1.0, ls="--")
    lo = max(float(np.nanmin(fl)), peak - 140.0) - 5.0
    pmask = r.passband_mask if r.passband_mask is not None else np.zeros(len(f), bool)
    smask = r.stopband_mask if r.stopband_mask is not None else np.zeros(len(f), bool)
    att = getattr(budget, "stopband_attenuation_db", None)
    if att is not None and r.stopband_attenuation_db is not None and np.any(smask):
        ref = float(np.nanmax(qu[pmask])) if np.any(pmask) else float(np.nanmax(qu))
        for k, (i, j) in enumerate(_runs(smask)):
            top.fill_between(f[i:j], ref - att, ref + 10.0, color="red", alpha=0.12, step="mid",
                             label=f"stopband mask: at least {att:g} dB below the passband" if k == 0 else None)
            top.hlines(ref - att, f[i], f[j - 1], color="red", lw=1.0)
        lo = min(lo, ref - att - 10.0)
    top.set_ylim(lo, peak + 10.0)
    top.set_ylabel("magnitude (dB)")
    top.grid(True, which="both", alpha=0.3)
    top.legend(fontsize=7, loc="lower left")
    # |realised - float| where the design passes signal (within 60 dB of its peak), on a log axis so that
    # errors of 1e-6 dB show as clearly as errors of 0.1 dB
    diff = np.abs(qu - fl)
    show = fl >= peak - 60.0
    floor = 1e-12
    d = np.where(show, np.maximum(diff, floor), np.nan)
    bot.loglog(f, d, lw=1.0, color="C2", label="|realised - float|, where the design is within 60 dB of its peak")
    lim = getattr(budget, "passband_deviation_db", None)
    top_y = np.nanmax(d) if np.any(np.isfinite(d)) else 1.0
    if lim is not None and np.any(pmask):
        for k, (i, j) in enumerate(_runs(pmask)):
            bot.hlines(lim, f[i], f[j - 1], color="red", ls="--", lw=1.0,
                       label=f"passband deviation limit {lim:g} dB (passband: {r.passband_rule})" if k == 0 else None)
        top_y = max(top_y, lim)
    finite = d[np.isfinite(d) & (d > floor)]
    bottom = max(floor, float(np.min(finite)) / 3.0) if finite.size else floor
    bot.set_ylim(bottom, top_y * 1e3)  # room above the limit line for the legend
    if np.any(show & (diff <= floor)):
        bot.text(0.01, 0.03, "points on the bottom edge: no difference (<= 1e-12 dB)", transform=bot.transAxes,
                 fontsize=7)
    bot.legend(fontsize=7, loc="upper left")
    bot.set_ylabel("|realised - float| (dB)")
    bot.set_xlabel("frequency (Hz)")
    bot.set_xlim(f[0], fs / 2)
    bot.grid(True, which="both", alpha=0.3)
    return _svg(fig)


def _group_delay(h_of, f: np.ndarray, fs: float) -> np.ndarray:
    """Group delay in samples, -d(arg H)/d(omega), by a central difference of the phase of H(f +- df)."""
    df = np.maximum(f * 1e-5, fs * 1e-9)
    ratio = h_of(f + df) / h_of(np.maximum(f - df, 1e-12))
    return -np.angle(ratio) / (2 * np.pi * 2 * df / fs)


def phase_svg(plt, design, program, fs: float) -> str:
    """Phase (degrees) and group delay (samples and ms) of the float design and the realised coefficients."""
    from ..blocks import chain_response
    from ..blocks import as_float_blocks

    blocks = as_float_blocks(program)
    f = np.geomspace(max(fs * 1e-5, 1.0), fs / 2 * 0.999, 1200)
    hf, hq = design.response(f), chain_response(blocks, f, fs)
    mag = np.abs(hf)
    show = mag >= np.max(mag) * 1e-3  # within 60 dB of the peak: elsewhere the phase is noise
    fig, (ph, gd) = plt.subplots(2, 1, figsize=(8.0, 4.8), sharex=True, constrained_layout=True)
    ph.semilogx(f, np.where(show, np.degrees(np.unwrap(np.angle(hf))), np.nan), lw=1.6, label="float design")
    ph.semilogx(f, np.where(show, np.degrees(np.unwrap(np.angle(hq))), np.nan), lw=1.0, ls="--",
                label="realised (quantised coefficients)")
    ph.set_ylabel("phase (degrees, unwrapped)")
    ph.grid(True, which="both", alpha=0.3)
    ph.legend(fontsize=7)
    g_f = _group_delay(design.response, f, fs)
    g_q = _group_delay(lambda x: chain_response(blocks, x, fs), f, fs)
    gd.semilogx(f, np.where(show, g_f, np.nan), lw=1.6)
    gd.semilogx(f, np.where(show, g_q, np.nan), lw=1.0, ls="--")
    gd.set_ylabel("group delay (samples)")
    sec = gd.secondary_yaxis("right", functions=(lambda s: s / fs * 1e3, lambda ms: ms * fs / 1e3))
    sec.set_ylabel("ms")
    gd.set_xlabel("frequency (Hz), where the design is within 60 dB of its peak")
    gd.set_xlim(f[0], fs / 2)
    gd.grid(True, which="both", alpha=0.3)
    return _svg(fig)


def noise_svg(plt, metrics, fs: float) -> str | None:
    """Analytic output-noise density in dBFS/Hz."""
    if metrics.noise is None or not metrics.noise.sources:
        return None
    f = metrics.response.freqs_hz
    dens = _finite(metrics.noise.spectrum(f, fs))
    fig, ax = plt.subplots(figsize=(8.0, 3.0), constrained_layout=True)
    ax.semilogx(f, dens, lw=1.2, color="C3")
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel("noise density (dBFS/Hz)")
    ax.set_xlim(f[0], fs / 2)
    ax.grid(True, which="both", alpha=0.3)
    return _svg(fig)


def _roots_of(row) -> tuple[np.ndarray, np.ndarray]:
    b, a = np.trim_zeros(np.asarray(row[:3], float), "b"), np.trim_zeros(np.asarray(row[3:], float), "b")
    return (np.roots(b) if len(b) > 1 else np.zeros(0, complex)), (np.roots(a) if len(a) > 1 else np.zeros(0, complex))


def poles_zeros(design, program) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(float zeros, float poles, realised zeros, realised poles) of the IIR sections."""
    from ..blocks import SosBlock, as_float_blocks

    def roots(sos_rows):
        z, p = [], []
        for row in sos_rows:
            rz, rp = _roots_of(row)
            z.extend(rz)
            p.extend(rp)
        return np.asarray(z, complex), np.asarray(p, complex)

    fz, fp = roots(design.sos())
    rows = [row for blk in as_float_blocks(program) if isinstance(blk, SosBlock) for row in blk.sos]
    rz, rp = roots(rows)
    return fz, fp, rz, rp


#: FIR zeros are drawn up to this many taps (numpy.roots of a longer polynomial is slow and inaccurate)
MAX_FIR_ROOTS = 512


def fir_zeros(design, program) -> tuple[np.ndarray, np.ndarray]:
    """(float, realised) zeros of the FIR stages (numpy.roots of the taps), up to MAX_FIR_ROOTS taps each."""
    from ..blocks import FirBlock
    from ..blocks import as_float_blocks

    def zeros(blocks):
        out = [np.roots(np.trim_zeros(np.asarray(b.taps, float), "b")) for b in blocks
               if isinstance(b, FirBlock) and 1 < len(b.taps) <= MAX_FIR_ROOTS]
        return np.concatenate(out) if out else np.zeros(0, complex)

    return zeros(design.blocks), zeros(as_float_blocks(program))


def section_rows(program) -> list[tuple[int, int, list]]:
    """(section number, op number, physical [b0, b1, b2, 1, a1, a2]) of every realised section."""
    from ..program import SectionOp

    out, n = [], 0
    fc = None if program.arithmetic.is_float else program.arithmetic.coef.frac_bits
    for i, op in enumerate(program.ops):
        if isinstance(op, SectionOp):
            n += 1
            sc = 1.0 if fc is None else 2.0 ** (op.shift - fc)
            out.append((n, i + 1, [float(c) * sc for c in op.b] + [1.0] + [float(c) * sc for c in op.a]))
    return out


def correction_svgs(plt, design) -> list[dict]:
    """For each correction stage: measured, correction, corrected and target over the stage's range."""
    out = []
    for st in design.stages:
        c = (st.requirement or {}).get("curves")
        if not c:
            continue
        f = np.asarray(c["freq_hz"])
        meas, corr, tgt = (np.asarray(c[k]) for k in ("measured_db", "correction_db", "target_db"))
        fig, ax = plt.subplots(figsize=(8.0, 4.0), constrained_layout=True)
        ax.semilogx(f, meas, label="measured (smoothed)", lw=1.2)
        ax.semilogx(f, corr + float(np.median(tgt)), label="correction (float, placed at the target level)",
                    lw=1.0, ls=":")
        ax.semilogx(f, meas + corr, label="corrected", lw=1.6)
        ax.semilogx(f, tgt, label="target", lw=1.0, ls="--", color="black")
        ax.set_xlabel("frequency (Hz)")
        ax.set_ylabel("magnitude (dB)")
        ax.set_xlim(f[0], f[-1])
        ax.grid(True, which="both", alpha=0.3)
        ax.legend(fontsize=8)
        out.append({"title": f"Stage {st.index}: {st.kind} against its measurement", "svg": _svg(fig)})
    return out


def pole_zero_svg(plt, design, program) -> str | None:
    """The whole z-plane: IIR poles and zeros (float and realised) and FIR zeros."""
    fz, fp, rz, rp = poles_zeros(design, program)
    ffz, frz = fir_zeros(design, program)
    if len(fp) == 0 and len(ffz) == 0:
        return None
    fig, ax = plt.subplots(figsize=(4.6, 4.6), constrained_layout=True)
    t = np.linspace(0, 2 * np.pi, 361)
    ax.plot(np.cos(t), np.sin(t), color="0.6", lw=0.8)
    ax.plot(fz.real, fz.imag, "o", mfc="none", mec="C0", ms=7, label="float zeros (IIR)")
    ax.plot(fp.real, fp.imag, "x", color="C0", ms=7, label="float poles")
    ax.plot(rz.real, rz.imag, "o", mfc="none", mec="C1", ms=4, label="realised zeros (IIR)")
    ax.plot(rp.real, rp.imag, "+", color="C1", ms=8, label="realised poles")
    if len(ffz):
        ax.plot(ffz.real, ffz.imag, "s", mfc="none", mec="C2", ms=5, label="float zeros (FIR)")
        ax.plot(frz.real, frz.imag, ".", color="C3", ms=3, label="realised zeros (FIR)")
    allz = np.concatenate([fz, fp, rz, rp, ffz, frz])
    m = max(1.15, float(np.max(np.abs(allz))) * 1.05 if len(allz) else 1.15)
    ax.set_aspect("equal")
    ax.set_xlim(-min(m, 3.0), min(m, 3.0))
    ax.set_ylim(-min(m, 3.0), min(m, 3.0))
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=6, loc="lower left")
    return _svg(fig)


def section_zoom_svg(plt, design, program) -> str | None:
    """One zoomed z-plane view per realised section, centred on its poles: float (x) against realised (+).

    Each section's float poles are matched with the float design's sections by their
    nearest realised ones; the window is ten times the larger of the pole spread and
    the float-to-realised displacement, so poles near z = 1 separate.
    """
    rows = section_rows(program)
    if not rows:
        return None
    fp_all = poles_zeros(design, program)[1]
    n = len(rows)
    cols = min(4, n)
    nr = (n + cols - 1) // cols
    fig, axes = plt.subplots(nr, cols, figsize=(2.3 * cols, 2.4 * nr), constrained_layout=True, squeeze=False)
    for ax in axes.flat[n:]:
        ax.axis("off")
    for ax, (sec, op, row) in zip(axes.flat, rows):
        rz, rp = _roots_of(row)
        if len(rp) == 0:
            ax.set_title(f"section {sec} (op {op}): no poles", fontsize=8)
            ax.axis("off")
            continue
        # the float poles this section realises: the nearest float pole to each realised one
        fp = np.array([fp_all[np.argmin(np.abs(fp_all - p))] for p in rp]) if len(fp_all) else np.zeros(0)
        c = complex(np.mean(rp.real), abs(np.mean(np.abs(rp.imag))))  # upper half plane
        spread = max(float(np.max(np.abs(rp - c))), float(np.max(np.abs(fp - rp))) if len(fp) else 0.0,
                     1.0 - float(np.max(np.abs(rp))), 1e-9)
        w = 3.0 * spread
        t = np.linspace(0, 2 * np.pi, 4001)
        ax.plot(np.cos(t), np.sin(t), color="0.6", lw=0.8)
        ax.plot(fp.real, fp.imag, "x", color="C0", ms=8)
        ax.plot(rp.real, rp.imag, "+", color="C1", ms=9)
        ax.plot(rz.real, rz.imag, "o", mfc="none", mec="C1", ms=5)
        ax.set_xlim(c.real - w, c.real + w)
        ax.set_ylim(c.imag - w, c.imag + w)
        ax.set_aspect("equal")
        ax.ticklabel_format(useOffset=False)
        ax.tick_params(labelsize=6)
        ax.set_title(f"section {sec} (op {op}), r = {float(np.max(np.abs(rp))):.6f}", fontsize=8)
        ax.grid(True, alpha=0.3)
    fig.suptitle("zoom per section: x float poles, + realised poles, o realised zeros; grey: unit circle",
                 fontsize=8)
    return _svg(fig)


def sum_svg(plt, analysis, fs: float, title: str) -> str:
    """Magnitude and phase of a sum of channels: float design, bit-true, each channel, target band."""
    from ..analyse.sums import _db

    a = analysis
    f = a.freqs_hz
    keep = f > 0
    fig, (mag, ph) = plt.subplots(2, 1, figsize=(8.0, 5.6), sharex=True, constrained_layout=True,
                                  gridspec_kw={"height_ratios": [3, 2]})
    for name, h in a.channel_float.items():
        mag.semilogx(f[keep], _db(h)[keep], lw=0.8, alpha=0.6, label=f"{name} (float)")
    mag.semilogx(f[keep], _db(a.float_response)[keep], lw=1.8, color="k", label="sum, float design")
    mag.semilogx(f[keep], _db(np.nan_to_num(a.realised_response))[keep], lw=1.0, ls="--", color="C3",
                 label="sum, bit-true outputs")
    lo, hi = a.band_hz
    mag.fill_between([max(lo, f[1]), hi], a.target_db - a.tolerance_db, a.target_db + a.tolerance_db,
                     color="green", alpha=0.15,
                     label=f"target {a.target_db:g} +- {a.tolerance_db:g} dB over {lo:g}..{hi:g} Hz")
    lvl = _db(a.float_response)[keep]
    mag.set_ylim(max(float(np.min(lvl)), a.target_db - 40.0) - 5.0, max(float(np.max(lvl)), a.target_db) + 6.0)
    mag.set_ylabel("magnitude (dB)")
    mag.set_title(title, fontsize=9)
    mag.grid(True, which="both", alpha=0.3)
    mag.legend(fontsize=7, loc="lower left")
    ph.semilogx(f[keep], np.degrees(np.angle(a.float_response))[keep], lw=1.6, color="k", label="sum, float design")
    ph.semilogx(f[keep], np.degrees(np.angle(np.nan_to_num(a.realised_response)))[keep], lw=1.0, ls="--",
                color="C3", label="sum, bit-true outputs")
    ph.set_ylabel("phase (degrees, wrapped)")
    ph.set_ylim(-185, 185)
    ph.set_xlabel("frequency (Hz)")
    ph.set_xlim(f[1], fs / 2)
    ph.grid(True, which="both", alpha=0.3)
    ph.legend(fontsize=7)
    return _svg(fig)


def op_rows(program) -> list[dict]:
    """Every realised op with its number and its integers as the chip stores them."""
    from ..program import CicOp, DelayOp, FirOp, GainOp, PolyFirOp, RateOp, SectionOp

    out, n_sec = [], 0
    for i, op in enumerate(program.ops):
        row = {"op": i + 1, "section": "", "kind": type(op).__name__, "ints": [], "shift": "", "structure": "",
               "taps": None}
        if isinstance(op, SectionOp):
            n_sec += 1
            row.update(kind="section", section=n_sec, ints=[*op.b, *op.a], shift=op.shift, structure=op.structure)
        elif isinstance(op, GainOp):
            row.update(kind="gain", ints=[op.coef], shift=op.shift)
        elif isinstance(op, FirOp):
            row.update(kind=f"FIR, {len(op.taps)} taps" + (", symmetric" if op.symmetric else ""), shift=op.shift,
                       taps=", ".join(str(t) for t in op.taps))
        elif isinstance(op, PolyFirOp):
            how = f"decimating by {op.down}" if op.down > 1 else f"interpolating by {op.up}"
            row.update(kind=f"FIR, {len(op.taps)} taps, polyphase, {how}" + (", symmetric" if op.symmetric else ""),
                       shift=op.shift, taps=", ".join(str(t) for t in op.taps))
        elif isinstance(op, RateOp):
            row.update(kind=f"rate change, down {op.down}, up {op.up}")
        elif isinstance(op, CicOp):
            row.update(kind=f"CIC decimator by {op.factor}, {op.stages} stages, differential delay {op.delay}, "
                            f"{op.register_bits}-bit register", ints=[op.coef], shift=op.shift)
        elif isinstance(op, DelayOp):
            row.update(kind=f"delay, {op.samples} samples")
        out.append(row)
    return out


def _defaulted(report, key: str, value):
    """A budget value, marked when the hazard default supplied it."""
    return f"{value} (default)" if key in (getattr(report, "defaults", None) or {}) else value


def _channel_items(plt, report, realisation) -> list[dict]:
    designs = {d.name: d for d in realisation.design.channels}
    programs = {p.name: p for p in realisation.programs}
    channels = []
    for ch in report.channels:
        m, design, program = ch.analysis, designs[ch.name], programs[ch.name]
        budget = ch.budget if ch.budget is not None else report.budget
        lc = ch.metrics.get("limit_cycle") or {}
        channels.append({
            "name": ch.name,
            "ok": ch.ok,
            "arithmetic": ", ".join(f"{k} {v}" for k, v in ch.arithmetic.items() if v is not None),
            "checks": [{"name": c.name, "value": kind_of(c.name).value_text(c.value, c.limit, c.ok),
                        "limit": format_limit(c.limit), "ok": c.ok,
                        "reason": ch.reasons.get(c.name, "")} for c in ch.checks],
            "ops": op_rows(program),
            "limit_cycles": [{"op": s.get("op"), "status": s.get("status"), "bound": format_number(s.get("bound_lsb")),
                              "amplitude": format_number(s.get("amplitude_lsb")), "period": format_number(s.get("period")),
                              "overflow": s.get("overflow_oscillation") or "-", "note": s.get("note") or ""}
                             for s in lc.get("sections", []) or []],
            "nodes": [{"op": n["op"], "node": n["node"], "l1": format_number(n["l1_gain"]), "linf": format_number(n["linf_gain"]),
                       "headroom": format_number(n["headroom_bits"])} for n in ch.metrics.get("nodes", []) or []],
            "cost": ch.metrics.get("cost"),
            "notes": [{"kind": getattr(n, "kind", ""), "text": str(n)} for n in program.notes],
            "response_svg": response_svg(plt, m, ch.sample_rate_hz, budget),
            "phase_svg": phase_svg(plt, design, program, ch.sample_rate_hz),
            "noise_svg": noise_svg(plt, m, ch.sample_rate_hz),
            "pole_zero_svg": pole_zero_svg(plt, design, program),
            "correction_svgs": correction_svgs(plt, design),
            "zoom_svg": section_zoom_svg(plt, design, program),
        })
    return channels


def _sum_items(plt, report, realisation) -> list[dict]:
    """The [[sum]] checks with their plots; with none declared and several channels, the plain sum of all."""
    out = []
    fs = realisation.design.loaded.description.sample_rate_hz
    for sm in getattr(report, "sums", ()):
        out.append({"name": sm.name, "ok": sm.ok, "declared": True,
                    "checks": [{"name": c.name, "value": kind_of(c.name).value_text(c.value, c.limit, c.ok),
                                "limit": format_limit(c.limit), "ok": c.ok, "reason": sm.reasons.get(c.name, "")}
                               for c in sm.checks],
                    "svg": sum_svg(plt, sm.analysis, fs, f"sum '{sm.name}': " + " + ".join(sm.analysis.channels))})
    if not out and len(realisation.programs) > 1:
        from ..analyse.sums import analyse_sum
        from ..spec import SumSpec

        names = tuple(p.name for p in realisation.programs)
        spec = SumSpec("all channels", names, 0.0, 1.0, (0.0, fs / 2))
        a = analyse_sum(spec, {d.name: d for d in realisation.design.channels},
                        {p.name: p for p in realisation.programs})
        out.append({"name": "all channels", "ok": None, "declared": False, "checks": [],
                    "svg": sum_svg(plt, a, fs, "sum of all channels as realised (for information: the description "
                                   "has no [[sum]], so nothing is checked; the 0 +- 1 dB band is only a guide)")})
    return out


def _run_item(plt, report, realisation, label: str = "") -> dict:
    budget = report.budget
    return {
        "label": label, "source": report.source, "target": report.target, "ok": report.ok,
        "cautions": list(report.cautions),
        "budget": {f"{c.title} ({c.unit})" if c.unit else c.title: _defaulted(report, c.name, getattr(budget, c.name))
                   for c in BUDGET_CHECKS if getattr(budget, c.name) is not None},
        "channels": _channel_items(plt, report, realisation),
        "sums": _sum_items(plt, report, realisation),
    }


def _compare_svg(plt, old, new, name: str) -> str:
    """One channel of two runs overlaid: magnitude and |realised - float| of OLD and NEW."""
    fig, (top, bot) = plt.subplots(2, 1, figsize=(8.0, 5.2), sharex=True, constrained_layout=True,
                                   gridspec_kw={"height_ratios": [3, 2]})
    fs = 1.0
    for label, ch, style in (("OLD", old, dict(color="C0")), ("NEW", new, dict(color="C3", ls="--"))):
        r = ch.analysis.response
        fs = ch.sample_rate_hz
        top.semilogx(r.freqs_hz, _finite(r.float_db), lw=1.6 if label == "OLD" else 1.0, alpha=0.5,
                     label=f"{label} float design", **{k: v for k, v in style.items() if k != "ls"})
        top.semilogx(r.freqs_hz, _finite(r.quantised_db), lw=1.0, label=f"{label} realised", **style)
        fl = _finite(r.float_db)
        d = np.where(fl >= np.nanmax(fl) - 60.0, np.maximum(np.abs(_finite(r.quantised_db) - fl), 1e-12), np.nan)
        bot.loglog(r.freqs_hz, d, lw=1.0, label=f"{label} |realised - float|", **style)
    top.set_ylabel("magnitude (dB)")
    top.set_title(f"channel {name}: OLD against NEW", fontsize=9)
    lo = min(float(np.nanmin(_finite(c.analysis.response.float_db))) for c in (old, new))
    hi = max(float(np.nanmax(_finite(c.analysis.response.float_db))) for c in (old, new))
    top.set_ylim(max(lo, hi - 140.0) - 5.0, hi + 10.0)
    top.grid(True, which="both", alpha=0.3)
    top.legend(fontsize=7, loc="lower left")
    bot.set_ylabel("|realised - float| (dB)")
    bot.set_xlabel("frequency (Hz)")
    bot.set_xlim(None, fs / 2)
    bot.grid(True, which="both", alpha=0.3)
    bot.legend(fontsize=7)
    return _svg(fig)


def _comparison(plt, old_report, new_report) -> list[dict]:
    olds = {c.name: c for c in old_report.channels}
    out = []
    for ch in new_report.channels:
        o = olds.get(ch.name)
        if o is None:
            out.append({"name": ch.name, "only": "NEW", "rows": [], "svg": None})
            continue
        oc = {c.name: c for c in o.checks}
        names = list(dict.fromkeys([c.name for c in o.checks] + [c.name for c in ch.checks]))
        nc = {c.name: c for c in ch.checks}
        out.append({"name": ch.name, "only": "", "svg": _compare_svg(plt, o, ch, ch.name),
                    "rows": [{"name": n, "old": _cell(oc.get(n)), "new": _cell(nc.get(n))} for n in names]})
    for name in olds:
        if name not in {c.name for c in new_report.channels}:
            out.append({"name": name, "only": "OLD", "rows": [], "svg": None})
    old_sums = {sm.name: sm for sm in getattr(old_report, "sums", ())}
    new_sums = {sm.name: sm for sm in getattr(new_report, "sums", ())}
    for name in dict.fromkeys([*old_sums, *new_sums]):
        o, n = old_sums.get(name), new_sums.get(name)
        out.append({"name": f"sum {name}", "only": "" if o and n else ("OLD" if o else "NEW"), "svg": None,
                    "rows": [{"name": "sum_deviation_db", "old": _cell(o.checks[0] if o else None),
                              "new": _cell(n.checks[0] if n else None)}]})
    return out


def _cell(c) -> dict:
    """A check as one cell of the OLD/NEW table: value / limit, and its verdict."""
    if c is None:
        return {"text": "-", "ok": None}
    return {"text": kind_of(c.name).value_text(c.value, c.limit, c.ok) + " / " + format_limit(c.limit), "ok": c.ok}


def _render(runs: list[dict], comparison=None) -> str:
    from .. import __version__
    from ..templating import environment

    env = environment(TEMPLATE_DIR, autoescape=True)
    html = env.get_template("report.html.j2").render(
        version=__version__, runs=runs, comparison=comparison,
        safety_caution=SAFETY_CAUTION[0].upper() + SAFETY_CAUTION[1:],
    )
    return re.sub(r"[ \t]+\n", "\n", html)


def render_report(report, realisation) -> str:
    """The HTML page of a :class:`coefc.budget.CheckReport` (raises CoefcError without matplotlib)."""
    plt = _pyplot()
    try:
        runs = [_run_item(plt, report, realisation)]
    finally:
        plt.close("all")
    return _render(runs)


def render_comparison(old, new) -> str:
    """One page showing two runs, OLD and NEW (each a ``(CheckReport, Realisation)`` pair).

    The page opens with every channel of both overlaid (magnitude and error) and
    their checks side by side, then shows each run in full, labelled OLD and NEW.
    """
    plt = _pyplot()
    try:
        comparison = _comparison(plt, old[0], new[0])
        runs = [_run_item(plt, *old, label="OLD"), _run_item(plt, *new, label="NEW")]
    finally:
        plt.close("all")
    return _render(runs, comparison)
