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

from .errors import CoefcError
from .checks import BUDGET_CHECKS, SAFETY_CAUTION, kind_of
from .reporting import format_limit, format_number

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
    fig.clf()
    text = buf.getvalue()
    return text[text.index("<svg"):]  # drop the XML prologue and doctype for inline use


def _finite(a: np.ndarray) -> np.ndarray:
    a = np.asarray(a, dtype=float)
    return np.where(np.isfinite(a), a, np.nan)


def response_svg(plt, metrics, fs: float, limit_db: float | None) -> str:
    """Float vs realised magnitude (top) and their difference (bottom)."""
    r = metrics.response
    fig, (top, bot) = plt.subplots(2, 1, figsize=(8.0, 5.6), sharex=True, constrained_layout=True,
                                   gridspec_kw={"height_ratios": [3, 2]})
    f = r.freqs_hz
    fl, qu = _finite(r.float_db), _finite(r.quantised_db)
    peak = float(np.nanmax(fl))
    top.semilogx(f, fl, label="float design", lw=1.6)
    top.semilogx(f, qu, label="realised (quantised coefficients)", lw=1.0, ls="--")
    top.set_ylim(max(float(np.nanmin(fl)), peak - 140.0) - 5.0, peak + 10.0)
    top.set_ylabel("magnitude (dB)")
    top.grid(True, which="both", alpha=0.3)
    top.legend(fontsize=8)
    # The difference means something where the design passes signal: within 60 dB of its peak.
    diff = np.where(fl >= peak - 60.0, qu - fl, np.nan)
    bot.semilogx(f, diff, lw=1.0, color="C2", label="where the design is within 60 dB of its peak")
    if limit_db is not None:
        for s in (1, -1):
            bot.axhline(s * limit_db, color="red", ls="--", lw=0.8)
    bot.legend(fontsize=7)
    bot.set_ylabel("realised - float (dB)")
    bot.set_xlabel("frequency (Hz)")
    bot.set_xlim(f[0], fs / 2)
    bot.grid(True, which="both", alpha=0.3)
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


def poles_zeros(design, program) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(float zeros, float poles, realised zeros, realised poles) of the IIR sections."""
    from .blocks import SosBlock
    from .realise import as_float_blocks

    def roots(sos_rows):
        z, p = [], []
        for row in sos_rows:
            b, a = np.trim_zeros(np.asarray(row[:3], float), "b"), np.trim_zeros(np.asarray(row[3:], float), "b")
            if len(b) > 1:
                z.extend(np.roots(b))
            if len(a) > 1:
                p.extend(np.roots(a))
        return np.asarray(z, complex), np.asarray(p, complex)

    fz, fp = roots(design.sos())
    rows = [row for blk in as_float_blocks(program) if isinstance(blk, SosBlock) for row in blk.sos]
    rz, rp = roots(rows)
    return fz, fp, rz, rp


def pole_zero_svg(plt, design, program) -> str | None:
    fz, fp, rz, rp = poles_zeros(design, program)
    if len(fp) == 0:
        return None
    fig, ax = plt.subplots(figsize=(4.2, 4.2), constrained_layout=True)
    t = np.linspace(0, 2 * np.pi, 361)
    ax.plot(np.cos(t), np.sin(t), color="0.6", lw=0.8)
    ax.plot(fz.real, fz.imag, "o", mfc="none", mec="C0", ms=7, label="float zeros")
    ax.plot(fp.real, fp.imag, "x", color="C0", ms=7, label="float poles")
    ax.plot(rz.real, rz.imag, "o", mfc="none", mec="C1", ms=4, label="realised zeros")
    ax.plot(rp.real, rp.imag, "+", color="C1", ms=8, label="realised poles")
    ax.set_aspect("equal")
    ax.set_xlim(-1.15, 1.15)
    ax.set_ylim(-1.15, 1.15)
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=7, loc="lower left")
    return _svg(fig)


def _defaulted(report, key: str, value):
    """A budget value, marked when the hazard default supplied it."""
    return f"{value} (default)" if key in (getattr(report, "defaults", None) or {}) else value


def render_report(report, realisation) -> str:
    """The HTML page of a :class:`coefc.budget.CheckReport` (raises CoefcError without matplotlib)."""
    from . import __version__
    from .templating import environment

    plt = _pyplot()
    designs = {d.name: d for d in realisation.design.channels}
    programs = {p.name: p for p in realisation.programs}
    budget = report.budget
    channels = []
    for ch in report.channels:
        m, design, program = ch.analysis, designs[ch.name], programs[ch.name]
        lc = ch.metrics.get("limit_cycle") or {}
        channels.append({
            "name": ch.name,
            "ok": ch.ok,
            "arithmetic": ", ".join(f"{k} {v}" for k, v in ch.arithmetic.items() if v is not None),
            "checks": [{"name": c.name, "value": kind_of(c.name).value_text(c.value, c.limit, c.ok),
                        "limit": format_limit(c.limit), "ok": c.ok,
                        "reason": ch.reasons.get(c.name, "")} for c in ch.checks],
            "sections": [{"index": i + 1, "b": s["b"], "a": s["a"], "coef_shift": s["coef_shift"],
                          "structure": s.get("structure", "")} for i, s in enumerate(ch.sections)],
            "limit_cycles": [{"op": s.get("op"), "status": s.get("status"), "bound": format_number(s.get("bound_lsb")),
                              "amplitude": format_number(s.get("amplitude_lsb")), "period": format_number(s.get("period")),
                              "overflow": s.get("overflow_oscillation") or "-", "note": s.get("note") or ""}
                             for s in lc.get("sections", []) or []],
            "nodes": [{"op": n["op"], "node": n["node"], "l1": format_number(n["l1_gain"]), "linf": format_number(n["linf_gain"]),
                       "headroom": format_number(n["headroom_bits"])} for n in ch.metrics.get("nodes", []) or []],
            "cost": ch.metrics.get("cost"),
            "notes": list(program.notes),
            "response_svg": response_svg(plt, m, ch.sample_rate_hz, budget.passband_deviation_db),
            "noise_svg": noise_svg(plt, m, ch.sample_rate_hz),
            "pole_zero_svg": pole_zero_svg(plt, design, program),
            "correction_svgs": correction_svgs(plt, design),
        })
    plt.close("all")
    env = environment(TEMPLATE_DIR, autoescape=True)
    html = env.get_template("report.html.j2").render(
        version=__version__, source=report.source, target=report.target, ok=report.ok,
        cautions=list(report.cautions), channels=channels,
        safety_caution=SAFETY_CAUTION[0].upper() + SAFETY_CAUTION[1:],
        budget={f"{c.title} ({c.unit})" if c.unit else c.title: _defaulted(report, c.name, getattr(budget, c.name))
                for c in BUDGET_CHECKS if getattr(budget, c.name) is not None},
    )
    return re.sub(r"[ \t]+\n", "\n", html)
