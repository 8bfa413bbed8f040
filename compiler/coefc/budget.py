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
``tone_gain_error_db``      on by default (limit :data:`DEFAULT_TONE_GAIN_ERROR_DB`; ``"off"``
                            switches it off): steady tones through the bit-true engine
                            (:mod:`coefc.analyse.tones`), max |measured - float design| gain
                            over the counted tones <= limit
``iec61672_class1_excess_db`` with the tone check, for a channel with a weighting stage: every
                            counted tone at the IEC 61672-1 frequencies lies inside the class 1
                            limits around the standard's curve (largest excess <= 0 dB)
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
            **_tone_budget(b),
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


def channel_checks(metrics, budget: Budget, tones=None) -> tuple[list[Check], dict[str, str]]:
    """The checks of one channel: (list of Check, reasons by check name).

    *tones* is the channel's :class:`coefc.analyse.tones.ToneAnalysis` (None: not run).
    """
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
            if lim == "none":
                ok = st == "none"
                v = "none" if ok else (amp if st == "found" else f"unproven (bound {_fmt(bound)} LSB)")
                if ok:
                    reason = f"no zero-input limit cycle: exhaustive search inside the bound of {_fmt(bound)} LSB"
                elif st == "found":
                    s = max((s for s in lc.sections if s.amplitude_lsb), key=lambda s: s.amplitude_lsb)
                    reason = (f"limit cycle of {amp} LSB, period {s.period}, in op {s.op_index + 1} from state "
                              f"{s.start_state}; use error feedback (df1ef), another rounding or a wider data word")
                else:
                    why_not = next((s.note for s in lc.sections if s.status == "unproven" and s.note), "")
                    reason = (f"absence not proven (bound {_fmt(bound)} LSB"
                              + (f"; {why_not}" if why_not else "") + "); allow a number of LSB"
                              + (" or raise --search-limit" if "search limit" in why_not else ""))
            else:
                if st == "none":
                    ok, v = True, 0
                elif st == "found" and lc.complete:
                    ok, v = amp <= lim, amp
                else:
                    ok, v = bound is not None and bound <= lim and (amp or 0) <= lim, bound
                if st == "none":
                    reason = "no zero-input limit cycle (exhaustive search)"
                elif st == "found" and lc.complete:
                    reason = f"largest limit cycle {amp} LSB (exhaustive search)"
                elif bound is None:
                    why_not = next((s.note for s in lc.sections if s.bound_lsb is None and s.note), "")
                    reason = why_not or "no amplitude bound"
                else:
                    reason = (f"rigorous bound {_fmt(bound)} LSB" + (f", cycles of {amp} LSB found" if amp else ""))
                if not ok:
                    reason += f"; over the {lim:g} LSB limit"
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
        if not ok:
            parts.append("scale the input down (a gain stage or scaling = \"l1\")"
                         + (" or use saturation" if metrics.overflow_mode == "wrap" else ""))
        why["overflow"] = "; ".join(parts)
    if tones is not None:
        checks.extend(_tone_checks(tones, budget, why))
    return checks, why


# ------------------------------------------------------------------ steady tones (coefc.analyse.tones)

#: The tone check's limit when the budget names none: |measured - float design| in dB.
DEFAULT_TONE_GAIN_ERROR_DB = 0.5


def _tone_budget(b: Budget) -> dict:
    from .analyse.tones import DEFAULT_LEVELS_DBFS

    lim = DEFAULT_TONE_GAIN_ERROR_DB if b.tone_gain_error_db is None else b.tone_gain_error_db
    return {"tone_gain_error_db": lim, "tone_levels_dbfs": list(b.tone_levels_dbfs or DEFAULT_LEVELS_DBFS),
            "tone_gain_error_db_default": b.tone_gain_error_db is None}


def _run_tones(design, program, metrics, budget: Budget):
    """The channel's tone analysis, or None when the budget switches the check off."""
    if budget.tone_gain_error_db == "off":
        return None
    from .analyse.tones import DEFAULT_LEVELS_DBFS, analyse_tones

    r = metrics.response
    return analyse_tones(design, program, r.freqs_hz, r.float_db,
                         levels_dbfs=budget.tone_levels_dbfs or DEFAULT_LEVELS_DBFS)


def _hz(f: float) -> str:
    return f"{f / 1000:.4g} kHz" if f >= 1000 else f"{f:.4g} Hz"


def _tone_checks(t, budget: Budget, why: dict) -> list[Check]:
    """``tone_gain_error_db``, and ``iec61672_class1_excess_db`` for a channel with a weighting stage."""
    name = "tone_gain_error_db"
    default = budget.tone_gain_error_db is None
    lim = DEFAULT_TONE_GAIN_ERROR_DB if default else float(budget.tone_gain_error_db)
    levels = ", ".join(f"{v:g}" for v in t.levels_dbfs)
    if t.status != "measured":
        why[name] = t.note
        return [Check(name, None, lim, False)]
    if t.worst is None:
        why[name] = (f"no tone could be measured: none of the {len(t.tones)} tones at {levels} dBFS has an ideal "
                     f"output both within {t.range_db:g} dB of the design's peak and above the data word's "
                     "resolution floor; add a louder level to tone_levels_dbfs or widen the data word")
        return [Check(name, None, lim, False)]
    w = t.worst
    v = t.max_error_db
    ok = v <= lim
    f_lo, f_hi = min(x.freq_hz for x in t.tones), max(x.freq_hz for x in t.tones)
    parts = [f"{t.gated_count} of {len(t.tones)} steady tones ({_hz(f_lo)} to {_hz(f_hi)} at {levels} dBFS) "
             f"through the bit-true engine: largest |measured - float design| gain {v:.4g} dB at "
             f"{_hz(w.freq_hz)}, {w.level_dbfs:.4g} dBFS (measured {w.gain_db:.4g} dB, design "
             f"{w.design_gain_db:.4g} dB"
             + (f", output held at {w.dc_lsb:.0f} LSB DC" if w.below_resolution and w.dc_lsb is not None else "")
             + ")" + (f" -- {v:.6f} dB to be exact" if not ok and round(v, 4) <= lim else "")]
    if default:
        parts.append(f"default limit {lim:g} dB")
    if t.settle_capped:
        parts.append(t.note)
    if not ok:
        parts.append("the chip's rounding changes the signal (dead band or granular distortion): use error "
                     "feedback (df1ef), a wider data word, or scaling so small signals keep their bits")
    why[name] = "; ".join(parts)
    out = [Check(name, v, lim, ok)]

    std = t.standard_tones
    if std:
        cname = "iec61672_class1_excess_db"
        ex = t.class1_excess_db
        letter = std[0].standard["weighting"]
        cok = ex <= 0
        if cok:
            why[cname] = (f"{len(std)} tones at the IEC 61672-1 frequencies lie within the class 1 limits around "
                          f"the standard's {letter}-weighting curve, by at least {-ex:.3g} dB")
        else:
            bad = t.standard_failures[0]
            s = bad.standard
            lo = "-inf" if s["lower_db"] is None else f"{s['lower_db']:+g}"
            why[cname] = (f"{len(t.standard_failures)} of {len(std)} tones leave the class 1 limits of the "
                          f"{letter}-weighting, first at {bad.nominal_hz:g} Hz, {bad.level_dbfs:.4g} dBFS: "
                          f"{s['deviation_db']:+.3g} dB from the standard's curve, limits {s['upper_db']:+g}/{lo} dB"
                          + (f" -- {ex:.6f} dB over, to be exact" if round(ex, 3) <= 0 else "")
                          + ("; the float design itself is outside there (bilinear transform near Nyquist): use a "
                             "higher sample rate" if any(x.standard["design_outside"] for x in t.standard_failures)
                             else "; the float design is inside: the realisation's arithmetic moves it out "
                             "(error feedback, df1ef, or a wider data word)"))
        out.append(Check(cname, ex, 0.0, cok))
    return out


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
        tones = _run_tones(designs[prog.name], prog, m, budget)
        checks, why = channel_checks(m, budget, tones)
        checks.sort(key=lambda c: c.ok)  # failing rows first
        md = m.as_dict()
        if tones is not None:
            from .analyse import _clean

            md["tones"] = _clean(tones.as_dict())
        reports.append(ChannelReport(prog.name, prog.sample_rate_hz, prog.arithmetic.as_dict(), _sections(prog),
                                     md, checks, why, m))
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
