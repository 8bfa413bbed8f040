"""The merge gate: a realisation and a budget in, a :class:`CheckReport` (verdict per check) out.

Every channel is analysed (:func:`coefc.analyse.analyse_channel`) and compared with
the budget; each comparison is a check ``(name, value, limit, ok)`` with a one-line
reason.  The rules:

==========================  =====================================================
check                       passes when
==========================  =====================================================
``stable``                  every realised pole lies inside the unit circle (always checked)
``l1_scaling``              with ``scaling = "l1"`` on fixed point (always checked): every
                            internal node's realised l1 gain plus roundoff fits the data word
``passband_deviation_db``   max |quantised - float| in the passband <= limit
``stopband_attenuation_db`` achieved attenuation >= limit (no stopband: not applicable)
``output_noise_dbfs``       the larger of the analytic and the measured noise (the variance of
                            the output error, its mean excluded) <= limit
``output_offset_lsb``       |DC offset of the output error| in LSB <= limit: the analytic mean,
                            or the measured one where it exceeds that by more than three
                            standard errors
``limit_cycles``            ``"none"``: a proven ``none``; a number N: a cycle found by an
                            exhaustive search of amplitude <= N, otherwise the rigorous
                            bound <= N
``overflow``                ``"none"``: no overflow event under the worst-case inputs (at the
                            largest level whose ideal output stays within full scale, and at
                            least one LSB) and no overflow oscillation found; ``"allow"``:
                            always (with a caution)
``tone_gain_error_db``      on by default (limit :data:`DEFAULT_TONE_GAIN_ERROR_DB`; ``"off"``
                            switches it off): steady tones through the bit-true engine
                            (:mod:`coefc.analyse.tones`), max |measured - realised
                            coefficients' linear response| gain over the counted tones <= limit
``iec61672_class1_excess_db`` with the tone check, for a channel with a weighting stage: every
                            counted tone at the IEC 61672-1 frequencies lies inside the class 1
                            limits around the standard's curve (largest excess <= 0 dB)
==========================  =====================================================

Safe by default: a budget that does not name ``limit_cycles`` or ``overflow`` gates
them as ``"none"``, and one that does not name ``tone_gain_error_db`` gates it at
0.5 dB (:data:`HAZARD_DEFAULTS`); the report names the defaults it applied.  An unstable or marginally stable realisation has no finite noise, offset,
overflow or limit-cycle figure: those checks fail with the reason.

Levels in dBFS follow AES17 (0 dBFS = RMS of a full-scale sine, full scale = 1.0);
peaks are fractions of full scale or dB re full-scale peak.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Mapping, NamedTuple

from .checks import (BUDGET_CHECKS, BY_NAME, DEFAULT_TONE_GAIN_ERROR_DB, HAZARD_DEFAULTS,  # noqa: F401
                     SAFETY_CAUTION, LimitError, kind_of)
from .errors import DescriptionError
from .program import SectionOp, decimation
from .reports.text import format_limit
from .spec import Budget

SCHEMA = 1

_PASSBAND, _STOPBAND, _NOISE, _OFFSET = (BY_NAME[k] for k in ("passband_deviation_db", "stopband_attenuation_db",
                                                               "output_noise_dbfs", "output_offset_lsb"))

CAUTION = "caution: this budget tolerates {what}. " + SAFETY_CAUTION[0].upper() + SAFETY_CAUTION[1:]


class Check(NamedTuple):
    """One comparison with the budget (``value``/``limit`` None = not measurable)."""

    name: str
    value: object
    limit: object
    ok: bool

    @property
    def kind(self):
        """Its entry in the table of checks (:class:`coefc.checks.CheckKind`): comparison, unit, words."""
        return kind_of(self.name)

    @property
    def op(self) -> str:
        """How the value compares with the limit: ``<=``, ``>=`` or ``<``."""
        return self.kind.op


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
    budget: Budget | None = None  # this channel's budget as applied ([channel.budget], overrides, defaults)
    output_rate_hz: float | None = None  # the rate of the output samples (multirate channels); None: the input rate
    block_multiple: int = 1  # a block's input length must be a multiple of this (the decimation factor)

    @property
    def ok(self) -> bool:
        return all(c.ok for c in self.checks)

    def as_dict(self) -> dict:
        return {
            "name": self.name,
            "sample_rate_hz": self.sample_rate_hz,
            "output_rate_hz": self.output_rate_hz if self.output_rate_hz is not None else self.sample_rate_hz,
            "block_multiple": self.block_multiple,
            "arithmetic": self.arithmetic,
            "sections": self.sections,
            "metrics": self.metrics,
            **({"budget": _budget_dict(self.budget)} if self.budget is not None else {}),
            "checks": [{"name": c.name, "value": _json_num(c.value), "limit": _json_num(c.limit), "ok": c.ok,
                        "reason": self.reasons.get(c.name, "")} for c in self.checks],
            "ok": self.ok,
        }


@dataclass(frozen=True, eq=False)
class SumReport:
    """The check of one ``[[sum]]``: the channels' realised outputs added, against a level."""

    name: str
    checks: list[Check]
    reasons: dict[str, str]
    analysis: object = field(default=None, repr=False)  # coefc.analyse.sums.SumAnalysis

    @property
    def ok(self) -> bool:
        return all(c.ok for c in self.checks)

    def as_dict(self) -> dict:
        return {**self.analysis.as_dict(),
                "checks": [{"name": c.name, "value": _json_num(c.value), "limit": _json_num(c.limit), "ok": c.ok,
                            "reason": self.reasons.get(c.name, "")} for c in self.checks],
                "ok": self.ok}


@dataclass(frozen=True, eq=False)
class CheckReport:
    """The verdict of ``coefc check``: per-channel checks and the cautions to show."""

    source: str
    target: str
    channels: tuple[ChannelReport, ...]
    budget: Budget  # as applied: the file's, with overrides and the hazard defaults
    cautions: tuple[str, ...] = ()
    defaults: Mapping = field(default_factory=dict)  # budget keys filled in by HAZARD_DEFAULTS
    sums: tuple[SumReport, ...] = ()  # the [[sum]] tables whose channels were all realised

    @property
    def ok(self) -> bool:
        return all(ch.ok for ch in self.channels) and all(s.ok for s in self.sums)

    def failures(self) -> list[tuple[str, Check, str]]:
        return ([(ch.name, c, ch.reasons.get(c.name, "")) for ch in self.channels for c in ch.checks if not c.ok]
                + [(f"sum {s.name}", c, s.reasons.get(c.name, "")) for s in self.sums for c in s.checks if not c.ok])

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
            "sums": [_clean_json(s.as_dict()) for s in self.sums],
            "budget": _budget_dict(self.budget),
            "defaults_applied": dict(self.defaults),
            "cautions": list(self.cautions),
            "dbfs_definition": "AES17: 0 dBFS is the RMS level of a full-scale sine (full scale = 1.0); "
                               "a noise of variance s2 reads 10*log10(s2/0.5) dBFS",
        }


def _json_num(v):
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def _clean_json(v):
    """*v* with NaN and infinities as None, numpy numbers as Python numbers."""
    if isinstance(v, dict):
        return {k: _clean_json(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_clean_json(x) for x in v]
    if hasattr(v, "item") and not isinstance(v, (str, bytes)):
        v = v.item()
    return _json_num(v)


def sum_reports(realisation) -> tuple[SumReport, ...]:
    """The checks of the description's ``[[sum]]`` tables whose channels were all realised.

    A sum naming a channel left out (``--channel``) is not checked.
    """
    from .analyse.sums import analyse_sum, sum_check_reason

    designs = {d.name: d for d in realisation.design.channels}
    programs = {p.name: p for p in realisation.programs}
    out = []
    for spec in getattr(realisation.design.loaded.description, "sums", ()):
        if not all(c in programs for c in spec.channels):
            continue
        s = analyse_sum(spec, designs, programs)
        v = s.deviation_db
        ok = BY_NAME["sum_deviation_db"].holds(v, spec.tolerance_db) and not s.overflow_events
        out.append(SumReport(spec.name, [Check("sum_deviation_db", v, spec.tolerance_db, ok)],
                             {"sum_deviation_db": sum_check_reason(s, ok)}, s))
    return tuple(out)


def _budget_dict(b: Budget) -> dict:
    from .analyse.tones import DEFAULT_LEVELS_DBFS

    return {**{c.name: getattr(b, c.name) for c in BUDGET_CHECKS},
            "tone_levels_dbfs": list(b.tone_levels_dbfs or DEFAULT_LEVELS_DBFS),
            "passband": [list(x) for x in b.passband] if b.passband else None,
            "stopband": [list(x) for x in b.stopband] if b.stopband else None}


# ------------------------------------------------------------------ overrides

def apply_overrides(budget: Budget, **values) -> Budget:
    """Budget with command-line overrides applied (``None`` = keep the file's value).

    *values* are budget keys of :data:`coefc.checks.CHECKS` that have a command-line
    option, as the option gives them (``limit_cycles`` as text: ``"none"`` or a number
    of LSB; ``overflow``: ``"none"`` or ``"allow"``).  Bad values raise
    :class:`DescriptionError` naming the option.
    """
    ch = {}
    for key, value in values.items():
        check = BY_NAME.get(key)
        if check is None or check.option is None:
            raise TypeError(f"apply_overrides: no command-line override for {key!r}")
        if value is None:
            continue
        try:
            ch[key] = check.validate(check.parse_option(value))
        except LimitError as e:
            raise DescriptionError("<command line>", str(e), key=check.option) from None
    return replace(budget, **ch, command_line=budget.command_line | frozenset(ch))


def channel_budget(budget: Budget, overrides) -> Budget:
    """One channel's budget: *budget* with the channel's ``[channel.budget]`` keys.

    Keys set on the command line (``budget.command_line``) win over the channel's
    own: an override given to the whole command applies to every channel.
    """
    keys = {k: v for k, v in dict(overrides).items() if k not in budget.command_line}
    return replace(budget, **keys) if keys else budget


def width_budget(budget: Budget, arithmetic) -> Budget:
    """*budget* with its ``[budget.when_data_bits.N]`` keys for *arithmetic*'s data word (N its width).

    Float32 arithmetic has no data word: no table applies.  Keys set on the command
    line win over the table's.
    """
    if arithmetic is None or arithmetic.is_float:
        return budget
    for width, keys in budget.when_data_bits:
        if width == arithmetic.data.width:
            return channel_budget(budget, dict(keys))
    return budget


def budget_for(budget: Budget, spec, arithmetic) -> Budget:
    """One channel's budget as the check applies it, before the defaults (:func:`with_defaults`).

    In order, later winning: the description's ``[budget]``, its table for the
    channel's data-word width (:func:`width_budget`), the channel's own
    ``[channel.budget]`` (*spec*: a :class:`coefc.spec.ChannelSpec` or ``None``),
    and the keys set on the command line (``budget.command_line``) over all.
    ``structure = "auto"`` meets exactly this budget (:func:`coefc.api.Design.realise`).
    """
    b = width_budget(budget, arithmetic)
    return channel_budget(b, spec.budget) if spec is not None else b


# ------------------------------------------------------------------ checks

def _fmt(v, unit=""):
    if v is None:
        return "n/a"
    if isinstance(v, float):
        return f"{v:.4g}{unit}"
    return f"{v}{unit}"


def with_defaults(budget: Budget) -> tuple[Budget, dict]:
    """*budget* with the hazards it does not name gated as ``"none"``, and those defaults."""
    defaults = {k: v for k, v in HAZARD_DEFAULTS if getattr(budget, k) is None}
    return (replace(budget, **defaults) if defaults else budget), defaults


def _has_error_feedback(structure) -> bool:
    """Whether *structure* already feeds its rounding residual back (df1ef, df1ef-wide-fb)."""
    from .program import STRUCTURE_TABLE

    return structure in STRUCTURE_TABLE and STRUCTURE_TABLE[structure].error_feedback


_REMEDIES = {  # remedy -> (its words, the setting that means it is already in use)
    "df1ef": ("use error feedback (df1ef)", lambda m: _has_error_feedback(getattr(m, "structure", None))),
    "l1": ("scaling = \"l1\"", lambda m: getattr(m, "scaling", None) == "l1"),
    "saturate": ("saturation", lambda m: getattr(m, "overflow_mode", None) == "saturate"),
    "gain": ("a gain stage before the filter", lambda m: False),
    "rounding": ("another rounding", lambda m: False),
    "data": ("a wider data word", lambda m: False),
}


def _remedies(metrics, *names: str) -> str:
    """The remedies of a failing check, leaving out any the realisation already uses."""
    words = [text for text, in_use in (_REMEDIES[n] for n in names) if not in_use(metrics)]
    return ", ".join(words[:-1]) + (" or " if len(words) > 1 else "") + words[-1]


def cic_cycle_argument(cics) -> str:
    """Why a CIC decimator has no limit cycle, over the whole integer map (Hogenauer 1981).

    Its integrators are recursive but never round: every step is a ring operation modulo 2^B, so the
    comb output is the exact FIR sum of the last N (R D - 1) + 1 inputs (the modulo property), and
    zero input gives zero output after that many input samples.  From an arbitrary state (not the
    zero start) the integrators add sequences that are integer polynomials of degree < N in the
    sample index; each comb (1 - z^-(R D) at the input rate) lowers the degree by one, so N combs
    remove them after N D output samples.  The one rounding is outside every loop."""
    parts = []
    for r, n, d in cics:
        parts.append(f"the CIC decimator (R = {r}, N = {n}, D = {d}) has none: its integrators never round and "
                     f"wrap modulo 2^B, so its output is the exact FIR of its last {n * (r * d - 1) + 1} inputs "
                     f"(the modulo property), zero after them for zero input, and from any state its combs remove "
                     f"the integrators' drift after {n * d} output samples")
    return "; ".join(parts)


def channel_checks(metrics, budget: Budget, tones=None, design=None) -> tuple[list[Check], dict[str, str]]:
    """The checks of one channel: (list of Check, reasons by check name).

    Compares *budget* as given (keys set to ``None`` are not checked); :func:`run_check`
    fills in the hazard defaults first.

    *tones* is the channel's :class:`coefc.analyse.tones.ToneAnalysis` (None: not run);
    *design* its float design (for ``correction_error_db``).
    """
    r, lc, ov = metrics.response, metrics.limit_cycles, metrics.overflow
    checks: list[Check] = []
    why: dict[str, str] = {}
    unstable = getattr(metrics, "unstable", None)
    if unstable is None and not r.stable:
        unstable = f"a realised pole has radius {r.max_pole_radius:.6f} >= 1"
    no_figure = (f"no finite figure: the realisation is unstable, so its roundoff error grows without bound "
                 f"or never decays ({unstable})" if unstable else "")

    ok = unstable is None
    checks.append(Check("stable", r.max_pole_radius, 1.0, ok))
    why["stable"] = (f"largest realised pole radius {r.max_pole_radius:.6f} < 1" if ok else
                     f"unstable: {unstable}; use wider coefficients")

    # the promise of l1 scaling, checked unless the budget tolerates overflow outright
    if getattr(ov, "l1_worst", None) is not None and budget.overflow != "allow":
        checks.append(_l1_check(ov, why))

    if budget.passband_deviation_db is not None:
        v, lim = r.passband_deviation_db, budget.passband_deviation_db
        ok = v is not None and _PASSBAND.holds(v, lim)
        checks.append(Check("passband_deviation_db", v, lim, ok))
        why["passband_deviation_db"] = (
            f"passband ({r.passband_rule}) deviates by up to {_PASSBAND.value_text(v, lim, ok)} dB"
            + ("" if ok else f", over the {format_limit(lim)} dB limit; widen the coefficient word"))

    if budget.correction_error_db is not None:
        checks.append(_correction_check(r, design, budget.correction_error_db, why))

    if budget.stopband_attenuation_db is not None:
        v, lim = r.stopband_attenuation_db, budget.stopband_attenuation_db
        if v is None:
            checks.append(Check("stopband_attenuation_db", None, lim, True))
            why["stopband_attenuation_db"] = f"not applicable: no stopband ({r.stopband_rule})"
        else:
            ok = _STOPBAND.holds(v, lim)
            checks.append(Check("stopband_attenuation_db", v, lim, ok))
            why["stopband_attenuation_db"] = (
                f"stopband ({r.stopband_rule}) is {_STOPBAND.value_text(v, lim, ok)} dB down "
                f"(float design {_fmt(r.float_stopband_attenuation_db)} dB)"
                + ("" if ok else f", short of {format_limit(lim)} dB; widen the coefficient word or name the "
                   "stopband bands"))

    if budget.alias_attenuation_db is not None:
        a, lim = getattr(metrics, "alias", None), budget.alias_attenuation_db
        if a is None:
            checks.append(Check("alias_attenuation_db", None, lim, True))
            why["alias_attenuation_db"] = "not applicable: the channel does not change its rate"
        else:
            ok = kind_of("alias_attenuation_db").holds(a.attenuation_db, lim)
            checks.append(Check("alias_attenuation_db", a.attenuation_db, lim, ok))
            why["alias_attenuation_db"] = (
                f"what folds into the output passband ({a.passband_rule}; multiples of {a.low_rate_hz:g} Hz) is "
                f"{kind_of('alias_attenuation_db').value_text(a.attenuation_db, lim, ok)} dB down at least, "
                f"worst at {a.worst_hz:.6g} Hz, landing on {a.folds_to_hz:.6g} Hz "
                f"(float design {_fmt(a.float_attenuation_db)} dB)"
                + ("" if ok else f", short of {format_limit(lim)} dB; a longer anti-alias (or image) filter, a "
                   "lower passband edge, or a wider coefficient word"))

    if budget.output_noise_dbfs is not None and unstable:
        checks.append(Check("output_noise_dbfs", None, budget.output_noise_dbfs, False))
        why["output_noise_dbfs"] = no_figure
    elif budget.output_noise_dbfs is not None:
        lim = budget.output_noise_dbfs
        an = metrics.noise.dbfs if metrics.noise else None
        me = metrics.measured.dbfs if metrics.measured else None
        vals = [x for x in (an, me) if x is not None]
        v = max(vals) if vals else None
        ok = v is not None and _NOISE.holds(v, lim)
        checks.append(Check("output_noise_dbfs", v, lim, ok))
        why["output_noise_dbfs"] = (
            f"roundoff noise {_NOISE.value_text(v, lim, ok) if v is not None else 'n/a'} dBFS "
            f"(variance of the output error; analytic {_fmt(an)}, measured {_fmt(me)}; AES17 dBFS)"
            + ("" if ok else f", above the {format_limit(lim)} dBFS limit; "
               + ("try tdf2, or a fixed-point target with a wide data word and error feedback (df1ef)"
                  if metrics.is_float else "widen the data word"
                  + ("" if _has_error_feedback(metrics.structure) else " or use error feedback (df1ef)")))
            + (f"; note: {metrics.measured.note}" if metrics.measured is not None and metrics.measured.note else ""))

    lim = getattr(budget, "output_offset_lsb", None)
    if lim is not None:
        checks.append(_offset_check(metrics, lim, no_figure, why))

    if budget.limit_cycles is not None and unstable:
        checks.append(Check("limit_cycles", None, budget.limit_cycles, False))
        why["limit_cycles"] = no_figure
    elif budget.limit_cycles is not None:
        lim = budget.limit_cycles
        if metrics.is_float:
            checks.append(Check("limit_cycles", None, lim, True))
            why["limit_cycles"] = ("not applicable: float32 rounding is relative to the value, so zero-input "
                                   "decay can only stall near the denormal range (about 1e-38 of full scale); not analysed")
        else:
            st, amp, bound = lc.status, lc.amplitude_lsb, lc.bound_lsb
            summary = lc.summary()
            if lim == "none":
                ok = st == "none"
                v = "none" if ok else (amp if st == "found" else f"unproven (bound {_fmt(bound)} LSB)")
                if ok:
                    reason = "no zero-input limit cycle: exhaustive search inside the bound of every section"
                    if getattr(metrics, "cic", ()):
                        reason += "; " + cic_cycle_argument(metrics.cic)
                else:
                    reason = (f"{summary}; "
                              + (_remedies(metrics, "df1ef", "rounding", "data")
                                 if st == "found" else "allow a number of LSB"
                                 + (" or raise the search limit" if any(getattr(s, "search_limited", False) for s in lc.sections)
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
                    reason += f"; over the {format_limit(lim)} LSB limit in " + ", ".join(lc.label(s) for s in bad)
            checks.append(Check("limit_cycles", v, lim, ok))
            why["limit_cycles"] = reason

    if budget.overflow is not None and unstable:
        checks.append(Check("overflow", None, budget.overflow, False))
        why["overflow"] = no_figure
    elif budget.overflow is not None:
        lim = budget.overflow
        n = ov.overflow_count
        osc = "none" if metrics.is_float else lc.overflow_status
        # No safe input level at all: the worst-case roundoff alone can reach full scale, or
        # the safe level is below one LSB, so the test input quantises to zero; the zero
        # events of such a test prove nothing.
        peak_lsb = getattr(ov, "input_peak_lsb", None)
        no_level = not metrics.is_float and ov.runs > 0 and (ov.input_peak <= 0 or peak_lsb == 0)
        if lim == "allow":
            ok = True
        else:
            ok = (n == 0) and osc != "found" and not no_level
        checks.append(Check("overflow", n, lim, ok))
        at = _overflow_level(ov, peak_lsb)
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
            parts.append("scale the input down: " + _remedies(metrics, "gain", "l1", "saturate", "data"))
        why["overflow"] = "; ".join(parts)
    if tones is not None:
        checks.extend(_tone_checks(tones, budget, why, metrics))
    return checks, why


def _l1_check(ov, why: dict) -> Check:
    """``l1_scaling``: no internal node can overflow for any input within full scale.

    Passes when every internal node's bound (realised l1 gain plus the roundoff that
    reaches it) is at most the largest data word and the bit-true worst-case runs at
    full scale saw no event at an internal node.
    """
    ratio = ov.l1_worst / ov.l1_limit
    events = ov.internal_events_full_scale
    ok = ratio <= 1.0 and not events
    text = (f"worst case of any internal node for inputs within full scale: {ratio:.12g} of the largest data word "
            f"at {ov.l1_worst_node} (realised l1 gain plus roundoff)")
    if events is not None:
        text += f"; {events} events at internal nodes under full-scale worst-case inputs ({ov.runs} runs)"
    if ratio > 1.0:
        text += (f"; the l1 promise does not hold: {math.log2(ratio):.2f} bits of headroom missing "
                 f"(about {math.ceil(math.log2(ratio)):d} more data bits, or wider coefficients)")
    elif events:
        text += "; the l1 promise does not hold"
    why["l1_scaling"] = text
    return Check("l1_scaling", ratio, 1.0, ok)


def _peak_text(peak: float) -> str:
    """A peak level as a fraction of full scale and in dB re full-scale peak (not dBFS: AES17 is RMS)."""
    text = f"{peak:.4g}"
    if text == "1":  # just below full scale: show that it is below
        text = f"{peak:.9g}"
    return f"{text} of full scale ({20 * math.log10(peak):.2f} dB re full-scale peak)"


def _overflow_level(ov, peak_lsb) -> str:
    """Where the worst-case runs were made, and why there."""
    if ov.input_peak >= 1.0:
        return "full scale"
    gains = f"peak gain {ov.output_peak_gain:.4g}"
    if getattr(ov, "design_peak_gain", None) is not None:
        gains += f"; the float design's {ov.design_peak_gain:.4g}"
    if ov.input_peak <= 0:
        return ("zero level: no input level is safe, because the worst-case roundoff of the realisation alone "
                "can reach full scale (widen the data word)")
    if peak_lsb == 0:
        return (f"no safe level: the largest level at which the realised filter's output stays within full scale "
                f"({_peak_text(ov.input_peak)}; {gains}) is below one LSB, so the test input quantises to all "
                "zeros and shows nothing (widen the data word)")
    return (f"{_peak_text(ov.input_peak)}, the largest level at which the realised filter's ideal output "
            f"(its quantised coefficients without rounding; {gains}) stays within full scale, less the "
            "worst-case roundoff")


def _offset_check(metrics, lim: float, no_figure: str, why: dict) -> Check:
    """``output_offset_lsb``: the DC offset of the output error, in LSB, against *lim*."""
    if no_figure:
        why["output_offset_lsb"] = no_figure
        return Check("output_offset_lsb", None, lim, False)
    an = getattr(metrics, "output_offset_lsb", None)
    me = getattr(metrics, "output_offset_lsb_simulated", None)
    se = getattr(metrics, "offset_stderr_lsb", None)
    if an is None:  # float32: only the measured figure exists
        v = abs(me) if me is not None else None
        basis = "measured"
    else:
        v = abs(an)
        basis = "analytic"
        # the measurement overrides the model only where it is significantly larger
        if me is not None and se is not None and abs(me) - 3 * se > v:
            v, basis = abs(me), "measured"
    ok = v is not None and _OFFSET.holds(v, lim)
    text = _OFFSET.value_text(v, lim, ok) if v is not None else "n/a"
    why["output_offset_lsb"] = (
        f"DC offset of the output error {text} LSB ({basis}; analytic {_fmt(an)}, measured {_fmt(me)}"
        + (f" +- {se:.2g}" if se is not None else "") + " LSB)"
        + ("" if ok else f", over the {format_limit(lim)} LSB limit; use add-half or half-even rounding "
           "instead of truncate, or a wider data word"))
    return Check("output_offset_lsb", v, lim, ok)


# ------------------------------------------------------------------ steady tones (coefc.analyse.tones)

def _run_tones(design, program, metrics, budget: Budget):
    """The channel's tone analysis, or None when the budget switches the check off."""
    if budget.tone_gain_error_db in (None, "off"):
        return None
    from .analyse.tones import DEFAULT_LEVELS_DBFS, analyse_tones

    r = metrics.response
    return analyse_tones(design, program, r.freqs_hz, r.float_db,
                         levels_dbfs=budget.tone_levels_dbfs or DEFAULT_LEVELS_DBFS)


def _hz(f: float) -> str:
    return f"{f / 1000:.4g} kHz" if f >= 1000 else f"{f:.4g} Hz"


def _tone_checks(t, budget: Budget, why: dict, metrics) -> list[Check]:
    """``tone_gain_error_db``, and ``iec61672_class1_excess_db`` for a channel with a weighting stage."""
    name = "tone_gain_error_db"
    lim = float(DEFAULT_TONE_GAIN_ERROR_DB if budget.tone_gain_error_db is None else budget.tone_gain_error_db)
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
             f"through the bit-true engine: largest |measured - realised coefficients' response| gain {v:.4g} dB "
             f"at {_hz(w.freq_hz)}, {w.level_dbfs:.4g} dBFS (measured {w.gain_db:.4g} dB, coefficients "
             f"{w.linear_gain_db:.4g} dB, float design {w.design_gain_db:.4g} dB"
             + (f", output held at {w.dc_lsb:.0f} LSB DC" if w.below_resolution and w.dc_lsb is not None else "")
             + ")" + (f" -- {v:.6f} dB to be exact" if not ok and round(v, 4) <= lim else "")]
    if t.note:
        parts.append(t.note)
    if not ok:
        parts.append("the chip's rounding changes the signal (dead band or granular distortion): "
                     + _remedies(metrics, "df1ef", "data"))
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
                             else "; the float design is inside: the realisation's arithmetic moves it out: "
                             + _remedies(metrics, "df1ef", "data")))
        out.append(Check(cname, ex, 0.0, cok))
    return out


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
    why = {n.section: str(n) for n in getattr(program, "notes", ()) if getattr(n, "kind", "") == "choice"}
    for op in program.ops:
        if isinstance(op, SectionOp):
            conv = float if program.arithmetic.is_float else int
            out.append({"b": [conv(c) for c in op.b], "a": [conv(c) for c in op.a], "coef_shift": int(op.shift),
                        "structure": op.structure})
            if op.a_lo:  # df1-wide-fb: the low feedback words (coefc.program)
                out[-1]["a_lo"] = [int(c) for c in op.a_lo]
            if op.b_lo:  # df1ef-wide: the low numerator words, same weight (coefc.program)
                out[-1]["b_lo"] = [int(c) for c in op.b_lo]
            if len(out) in why:  # structure = "auto": why this section's structure was chosen
                out[-1]["chosen"] = why[len(out)]
    return out


def _correction_check(r, design, lim: float, why: dict) -> Check:
    """``correction_error_db``: each correction stage's float residual plus the channel's quantisation deviation
    over the stage's range (a bound on the realised error by the triangle inequality in dB)."""
    import numpy as np

    kind = BY_NAME["correction_error_db"]
    worst, where = None, ""
    for st in (design.stages if design is not None else ()):
        req = st.requirement or {}
        if "residual_max_db" not in req or "range_hz" not in req:
            continue
        lo, hi = req["range_hz"]
        sel = (r.freqs_hz >= lo) & (r.freqs_hz <= hi)
        dev = float(np.max(np.abs(r.quantised_db[sel] - r.float_db[sel]))) if np.any(sel) else 0.0
        v = float(req["residual_max_db"]) + dev
        if worst is None or v > worst:
            worst = v
            where = (f"stage {st.index} ({st.kind}): float residual {req['residual_max_db']:.3g} dB + quantisation "
                     f"{dev:.3g} dB over {lo:g}-{hi:g} Hz")
    if worst is None:
        why["correction_error_db"] = "not applicable: no correction stage in this channel"
        return Check("correction_error_db", None, lim, True)
    ok = kind.holds(worst, lim)
    why["correction_error_db"] = (f"correction error up to {kind.value_text(worst, lim, ok)} dB, {where}"
                                  + ("" if ok else f", over the {format_limit(lim)} dB limit; allow more sections "
                                                   "or taps, more boost, or a narrower range"))
    return Check("correction_error_db", worst, lim, ok)


def _boost_cautions(designs) -> list[str]:
    """The caution for every correction stage that boosts (its largest boost, from the design)."""
    out = []
    for d in designs:
        for st in d.stages:
            req = st.requirement or {}
            boost = req.get("largest_boost_db")
            if boost is not None and boost > 0.005:
                out.append(f"channel '{d.name}', stage {st.index}: the {st.kind} boosts by up to {boost:+.2f} dB "
                           f"near {req['largest_boost_hz']:.0f} Hz; that costs {boost:.2f} dB of headroom and "
                           "raises driver excursion and heating there: check it against the transducer's "
                           "excursion and thermal limits and the product's own safety limits")
    return out


def run_check(realisation, budget: Budget, *, options=None) -> CheckReport:
    """Analyse every channel of *realisation* and compare it with *budget*.

    Parameters
    ----------
    realisation : coefc.api.Realisation
    budget : Budget
        Usually ``description.budget`` with :func:`apply_overrides` applied; the
        hazards it does not name are gated as ``"none"`` (:func:`with_defaults`), and
        the report's ``defaults`` names them.
    options : coefc.analyse.AnalysisOptions, optional
        Bands and search effort; bands default to the budget's ``passband``/``stopband``.
    """
    from .analyse import AnalysisOptions, analyse_channel
    from .emit.codegen import cost_of

    base = options or AnalysisOptions()
    designs = {d.name: d for d in realisation.design.channels}
    specs = {c.name: c for c in realisation.design.loaded.description.channels}
    reports = []
    defaults: dict = {}
    tolerated: list[str] = []
    for prog in realisation.programs:
        spec = specs.get(prog.name)
        cb, defs = with_defaults(budget_for(budget, spec, prog.arithmetic))
        defaults.update(defs)
        opt = base
        if opt.passband is None and cb.passband:
            opt = replace(opt, passband=tuple(cb.passband))
        if opt.stopband is None and cb.stopband:
            opt = replace(opt, stopband=tuple(cb.stopband))
        m = analyse_channel(designs[prog.name], prog, opt)
        tones = _run_tones(designs[prog.name], prog, m, cb)
        checks, why = channel_checks(m, cb, tones, designs[prog.name])
        checks.sort(key=lambda c: c.ok)  # failing rows first
        md = m.as_dict()
        md["cost"] = cost_of(prog)  # of the generated code (coefc.emit.codegen)
        if tones is not None:
            from .analyse import _clean

            md["tones"] = _clean(tones.as_dict())
        reports.append(ChannelReport(prog.name, prog.sample_rate_hz, prog.arithmetic.as_dict(), _sections(prog),
                                     md, checks, why, m, cb, prog.output_rate_hz, decimation(prog.ops)))
        if cb.overflow == "allow" and "overflow" not in tolerated:
            tolerated.append("overflow")
        if cb.limit_cycles is not None and cb.limit_cycles != "none":
            lc = f"limit cycles up to {cb.limit_cycles:g} LSB"
            if lc not in tolerated:
                tolerated.append(lc)
    cautions = [CAUTION.format(what=" and ".join(tolerated))] if tolerated else []
    cautions += _boost_cautions(designs[p.name] for p in realisation.programs)
    budget, _ = with_defaults(budget)
    return CheckReport(realisation.design.loaded.description.source, realisation.target.name, tuple(reports),
                       budget, tuple(cautions), defaults, sum_reports(realisation))
