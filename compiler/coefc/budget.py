"""The merge gate: a realisation and a budget in, a :class:`CheckReport` (verdict per check) out.

Every channel is analysed (:func:`coefc.analyse.analyse_channel`) and compared with
the budget; each comparison is a check ``(name, value, limit, ok)`` with a one-line
reason.  The rules:

==========================  =====================================================
check                       passes when
==========================  =====================================================
``stable``                  every realised pole lies inside the unit circle (always checked)
``passband_deviation_db``   max |quantised - float| in the passband <= limit
``stopband_attenuation_db`` achieved attenuation >= limit (no stopband: not applicable)
``output_noise_dbfs``       the larger of the analytic and the measured noise <= limit
``limit_cycles``            ``"none"``: a proven ``none``; a number N: a cycle found by an
                            exhaustive search of amplitude <= N, otherwise the rigorous
                            bound <= N
``overflow``                ``"none"``: no overflow event under the worst-case inputs (at the
                            largest level whose ideal output stays within full scale) and
                            no overflow oscillation found; ``"allow"``: always (with a caution)
==========================  =====================================================

Levels in dBFS follow AES17 (0 dBFS = RMS of a full-scale sine, full scale = 1.0).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import NamedTuple

from .errors import DescriptionError
from .program import SectionOp
from .spec import Budget

SCHEMA = 1

CAUTION = (
    "caution: this budget tolerates {what}. A fixed-point filter that overflows or "
    "limit-cycles can drive an amplifier to full scale, damage drivers and hearing, and "
    "in control loops damage machines. Verify against the standards and sign-off "
    "practice that apply to your product before it drives real hardware."
)


class Check(NamedTuple):
    """One comparison with the budget (``value``/``limit`` None = not measurable)."""

    name: str
    value: object
    limit: object
    ok: bool


@dataclass(frozen=True, eq=False)
class ChannelReport:
    name: str
    sample_rate_hz: float
    arithmetic: dict
    sections: list
    metrics: dict
    checks: list[Check]
    reasons: dict[str, str]
    analysis: object = field(default=None, repr=False)  # coefc.analyse.Metrics

    @property
    def ok(self) -> bool:
        return all(c.ok for c in self.checks)

    def as_dict(self) -> dict:
        return {
            "name": self.name,
            "sample_rate_hz": self.sample_rate_hz,
            "arithmetic": self.arithmetic,
            "sections": self.sections,
            "metrics": self.metrics,
            "checks": [{"name": c.name, "value": _json_num(c.value), "limit": _json_num(c.limit), "ok": c.ok,
                        "reason": self.reasons.get(c.name, "")} for c in self.checks],
            "ok": self.ok,
        }


@dataclass(frozen=True, eq=False)
class CheckReport:
    """The verdict of ``coefc check``: per-channel checks and the cautions to show."""

    source: str
    target: str
    channels: tuple[ChannelReport, ...]
    budget: Budget
    cautions: tuple[str, ...] = ()

    @property
    def ok(self) -> bool:
        return all(ch.ok for ch in self.channels)

    def failures(self) -> list[tuple[str, Check, str]]:
        return [(ch.name, c, ch.reasons.get(c.name, "")) for ch in self.channels for c in ch.checks if not c.ok]

    def to_json(self) -> dict:
        """The JSON report contract (schema 1); no NaN or infinity anywhere."""
        from . import __version__

        return {
            "schema": SCHEMA,
            "tool_version": __version__,
            "source": self.source,
            "target": self.target,
            "ok": self.ok,
            "channels": [ch.as_dict() for ch in self.channels],
            "budget": _budget_dict(self.budget),
            "cautions": list(self.cautions),
            "dbfs_definition": "AES17: 0 dBFS is the RMS level of a full-scale sine (full scale = 1.0); "
                               "a noise of variance s2 reads 10*log10(s2/0.5) dBFS",
        }


def _json_num(v):
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def _budget_dict(b: Budget) -> dict:
    return {"passband_deviation_db": b.passband_deviation_db, "stopband_attenuation_db": b.stopband_attenuation_db,
            "output_noise_dbfs": b.output_noise_dbfs, "limit_cycles": b.limit_cycles, "overflow": b.overflow,
            "passband": [list(x) for x in b.passband] if b.passband else None,
            "stopband": [list(x) for x in b.stopband] if b.stopband else None}


# ------------------------------------------------------------------ overrides

def apply_overrides(budget: Budget, *, passband_deviation_db: float | None = None,
                    stopband_attenuation_db: float | None = None, output_noise_dbfs: float | None = None,
                    limit_cycles: str | None = None, overflow: str | None = None) -> Budget:
    """Budget with command-line overrides applied (``None`` = keep the file's value).

    ``limit_cycles`` is ``"none"`` or a number of LSB as text; ``overflow`` is
    ``"none"`` or ``"allow"``.  Bad values raise :class:`DescriptionError`.
    """
    where = "<command line>"
    ch = {}
    if passband_deviation_db is not None:
        if not (passband_deviation_db > 0 and math.isfinite(passband_deviation_db)):
            raise DescriptionError(where, f"{passband_deviation_db} dB: use a positive, finite deviation such as 0.05",
                                   key="--max-passband-deviation-db")
        ch["passband_deviation_db"] = float(passband_deviation_db)
    if stopband_attenuation_db is not None:
        if not (stopband_attenuation_db > 0 and math.isfinite(stopband_attenuation_db)):
            raise DescriptionError(where, f"{stopband_attenuation_db} dB: use a positive, finite attenuation such as 80",
                                   key="--min-stopband-attenuation-db")
        ch["stopband_attenuation_db"] = float(stopband_attenuation_db)
    if output_noise_dbfs is not None:
        if not (output_noise_dbfs < 0 and math.isfinite(output_noise_dbfs)):
            raise DescriptionError(where, f"{output_noise_dbfs} dBFS is not a noise limit; write a finite "
                                   "negative level such as -120", key="--max-noise-dbfs")
        ch["output_noise_dbfs"] = float(output_noise_dbfs)
    if limit_cycles is not None:
        text = str(limit_cycles).strip().lower()
        if text == "none":
            ch["limit_cycles"] = "none"
        else:
            try:
                v = float(text)
            except ValueError:
                v = -1.0
            if not (v >= 0 and math.isfinite(v)):
                raise DescriptionError(where, f"'{limit_cycles}' is not understood; write none or a maximum "
                                       "amplitude in LSB such as 2", key="--limit-cycles")
            ch["limit_cycles"] = v
    if overflow is not None:
        if overflow not in ("none", "allow"):
            raise DescriptionError(where, f"'{overflow}': write none or allow", key="--overflow-budget")
        ch["overflow"] = overflow
    return replace(budget, **ch)


# ------------------------------------------------------------------ checks

def _fmt(v, unit=""):
    if v is None:
        return "n/a"
    if isinstance(v, float):
        return f"{v:.4g}{unit}"
    return f"{v}{unit}"


def channel_checks(metrics, budget: Budget) -> tuple[list[Check], dict[str, str]]:
    """The checks of one channel: (list of Check, reasons by check name)."""
    r, lc, ov = metrics.response, metrics.limit_cycles, metrics.overflow
    checks: list[Check] = []
    why: dict[str, str] = {}

    ok = r.stable
    checks.append(Check("stable", r.max_pole_radius, 1.0, ok))
    why["stable"] = (f"largest realised pole radius {r.max_pole_radius:.6f} "
                     + ("< 1" if ok else ">= 1: the quantised filter is unstable; use wider coefficients"))

    if budget.passband_deviation_db is not None:
        v, lim = r.passband_deviation_db, budget.passband_deviation_db
        ok = v is not None and v <= lim
        checks.append(Check("passband_deviation_db", v, lim, ok))
        why["passband_deviation_db"] = (
            f"passband ({r.passband_rule}) deviates by up to {_fmt(v, ' dB')}"
            + ("" if ok else f", over the {lim:g} dB limit; widen the coefficient word"))

    if budget.stopband_attenuation_db is not None:
        v, lim = r.stopband_attenuation_db, budget.stopband_attenuation_db
        if v is None:
            checks.append(Check("stopband_attenuation_db", None, lim, True))
            why["stopband_attenuation_db"] = f"not applicable: no stopband ({r.stopband_rule})"
        else:
            ok = v >= lim
            checks.append(Check("stopband_attenuation_db", v, lim, ok))
            why["stopband_attenuation_db"] = (
                f"stopband ({r.stopband_rule}) is {v:.4g} dB down (float design {_fmt(r.float_stopband_attenuation_db)} dB)"
                + ("" if ok or round(v, 2) < lim else f" -- {v:.6f} dB to be exact")
                + ("" if ok else f", short of {lim:g} dB; widen the coefficient word or name the stopband bands"))

    if budget.output_noise_dbfs is not None:
        lim = budget.output_noise_dbfs
        an = metrics.noise.dbfs if metrics.noise else None
        me = metrics.measured.dbfs if metrics.measured else None
        vals = [x for x in (an, me) if x is not None]
        v = max(vals) if vals else None
        ok = v is not None and v <= lim
        checks.append(Check("output_noise_dbfs", v, lim, ok))
        why["output_noise_dbfs"] = (
            f"roundoff noise {_fmt(v, ' dBFS')} (analytic {_fmt(an)}, measured {_fmt(me)}; AES17 dBFS)"
            + ("" if ok else f", above the {lim:g} dBFS limit; "
               + ("try tdf2, or a fixed-point target with a wide data word and error feedback (df1ef)"
                  if metrics.is_float else "widen the data word"
                  + ("" if metrics.structure == "df1ef" else " or use error feedback (df1ef)")))
            + (f"; note: {metrics.measured.note}" if metrics.measured is not None and metrics.measured.note else ""))

    if budget.limit_cycles is not None:
        lim = budget.limit_cycles
        if metrics.is_float:
            checks.append(Check("limit_cycles", None, lim, True))
            why["limit_cycles"] = ("not applicable: float32 rounding is relative to the value, so zero-input "
                                   "decay can only stall near the denormal range (about -759 dBFS); not analysed")
        else:
            st, amp, bound = lc.status, lc.amplitude_lsb, lc.bound_lsb
            summary = lc.summary()
            if lim == "none":
                ok = st == "none"
                v = "none" if ok else (amp if st == "found" else f"unproven (bound {_fmt(bound)} LSB)")
                if ok:
                    reason = "no zero-input limit cycle: exhaustive search inside the bound of every section"
                else:
                    reason = (f"{summary}; "
                              + ("use error feedback (df1ef), another rounding or a wider data word"
                                 if st == "found" else "allow a number of LSB"
                                 + (" or raise --search-limit" if any("search limit" in s.note for s in lc.sections)
                                    else "")))
            else:
                # every section must be within the limit at the channel output: a found cycle of an
                # exhaustive search by its amplitude, any other by its rigorous bound
                bad = [s for s in lc.sections if not _section_within(s, lim)]
                ok = not bad
                if st == "none":
                    v = 0
                elif st == "found" and lc.complete:
                    v = amp
                else:
                    v = bound
                reason = ("no zero-input limit cycle (exhaustive search)" if st == "none" else
                          f"{summary} (amplitudes at the channel output)")
                if not ok:
                    reason += f"; over the {lim:g} LSB limit in " + ", ".join(lc.label(s) for s in bad)
            checks.append(Check("limit_cycles", v, lim, ok))
            why["limit_cycles"] = reason

    if budget.overflow is not None:
        lim = budget.overflow
        n = ov.overflow_count
        osc = "none" if metrics.is_float else lc.overflow_status
        # No safe input level at all: the worst-case roundoff alone can reach full scale,
        # so the zero events of a zero-level test prove nothing.
        no_level = not metrics.is_float and ov.runs > 0 and ov.input_peak <= 0
        if lim == "allow":
            ok = True
        else:
            ok = (n == 0) and osc != "found" and not no_level
        checks.append(Check("overflow", n, lim, ok))
        at = "full scale" if ov.input_peak >= 1.0 else (
            f"{20 * math.log10(ov.input_peak):.2f} dBFS peak, where the design's own output "
            f"(peak gain {ov.output_peak_gain:.3g}) reaches full scale" if ov.input_peak > 0 else
            "zero level: no input level is safe, because the worst-case roundoff of the realisation alone "
            "can reach full scale (widen the data word)")
        parts = [f"{_fmt(n)} overflow events under worst-case inputs at {at} ({ov.runs} runs); "
                 f"worst node {ov.worst_node} headroom {_fmt(ov.headroom_bits, ' bits')}"]
        if ov.input_peak < 1.0 and ov.overflow_count_full_scale:
            parts.append(f"{ov.overflow_count_full_scale} events at full scale")
        if osc == "found":
            bad = next(s for s in lc.sections if s.overflow_status == "found")
            parts.append(f"overflow oscillation in op {bad.op_index + 1}: {bad.overflow_note}")
        elif osc == "unproven":
            un = [lc.label(s) if hasattr(lc, "label") else f"op {s.op_index + 1}"
                  for s in lc.sections if s.overflow_status == "unproven"]
            parts.append(f"zero-input overflow oscillations not proven absent in {', '.join(un)} (see "
                         "limit_cycle.sections); they can start only after an overflow")
        if not ok:
            parts.append("scale the input down (a gain stage or scaling = \"l1\")"
                         + (" or use saturation" if metrics.overflow_mode == "wrap" else ""))
        why["overflow"] = "; ".join(parts)
    return checks, why


def _section_within(s, lim: float) -> bool:
    """One section's limit-cycle verdict against a limit in LSB at the channel output."""
    if s.status == "none":
        return True
    amp = s.output_amplitude_lsb if s.output_amplitude_lsb is not None else s.amplitude_lsb
    if s.status == "found" and s.exhaustive:
        return amp <= lim
    ob = s.output_bound_lsb if s.output_bound_lsb is not None or s.bound_lsb is None else s.bound_lsb
    return ob is not None and ob <= lim and (amp or 0) <= lim


def _sections(program) -> list[dict]:
    out = []
    for op in program.ops:
        if isinstance(op, SectionOp):
            conv = float if program.arithmetic.is_float else int
            out.append({"b": [conv(c) for c in op.b], "a": [conv(c) for c in op.a], "coef_shift": int(op.shift),
                        "structure": op.structure})
    return out


def run_check(realisation, budget: Budget, *, options=None) -> CheckReport:
    """Analyse every channel of *realisation* and compare it with *budget*.

    Parameters
    ----------
    realisation : coefc.api.Realisation
    budget : Budget
        Usually ``description.budget`` with :func:`apply_overrides` applied.
    options : coefc.analyse.AnalysisOptions, optional
        Bands and search effort; bands default to the budget's ``passband``/``stopband``.
    """
    from .analyse import AnalysisOptions, analyse_channel

    opt = options or AnalysisOptions()
    if opt.passband is None and budget.passband:
        opt = replace(opt, passband=tuple(budget.passband))
    if opt.stopband is None and budget.stopband:
        opt = replace(opt, stopband=tuple(budget.stopband))
    designs = {d.name: d for d in realisation.design.channels}
    reports = []
    for prog in realisation.programs:
        m = analyse_channel(designs[prog.name], prog, opt)
        checks, why = channel_checks(m, budget)
        checks.sort(key=lambda c: c.ok)  # failing rows first
        reports.append(ChannelReport(prog.name, prog.sample_rate_hz, prog.arithmetic.as_dict(), _sections(prog),
                                     m.as_dict(), checks, why, m))
    cautions = []
    tolerated = []
    if budget.overflow == "allow":
        tolerated.append("overflow")
    if budget.limit_cycles is not None and budget.limit_cycles != "none":
        tolerated.append(f"limit cycles up to {budget.limit_cycles:g} LSB")
    if tolerated:
        cautions.append(CAUTION.format(what=" and ".join(tolerated)))
    return CheckReport(realisation.design.loaded.description.source, realisation.target.name, tuple(reports),
                       budget, tuple(cautions))
