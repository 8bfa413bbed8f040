"""Quantisation analysis: a float design and its realised program in, :class:`Metrics` out.

What the word lengths cost, one module per question:

:mod:`.response`     coefficient quantisation (response error, poles, zeros, stability)
:mod:`.noise`        roundoff noise, analytic (Jackson 1970) and measured (bit-true engine)
:mod:`.overflow`     node peak gains, headroom, worst-case input through the engine
:mod:`.limitcycles`  granular limit cycles and overflow oscillations per section
:mod:`.linear`       the linear model of a realised program the others share

Levels in dBFS follow AES17: full scale = 1.0 and 0 dBFS is the RMS level of a
full-scale sine, so a noise of variance s2 reads 10*log10(s2/0.5) dBFS.  Peaks are
given as fractions of full scale (or in dB re full-scale peak), never in dBFS.

An unstable or marginally stable realisation (a realised pole on or outside the unit
circle, decided exactly on the integers by the stability triangle) has no finite
noise, overflow or limit-cycle figure: its error grows without bound or never decays.
Those figures are null, with the reason in ``unstable_reason``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from fractions import Fraction

from ..blocks import ChannelDesign
from ..program import ChannelProgram, SectionOp, lo_bits
from .limitcycles import MAX_STATES, LimitCycleAnalysis, analyse_limit_cycles
from .linear import op_models, response_length
from .noise import MeasuredNoise, NoiseAnalysis, analytic_noise, measured_noise
from .overflow import OverflowAnalysis, analyse_overflow
from .response import ResponseAnalysis, analyse_response

__all__ = ["AnalysisOptions", "Metrics", "analyse_channel", "instability"]


@dataclass(frozen=True)
class AnalysisOptions:
    """What to analyse and how hard.

    ``passband``/``stopband`` are lists of ``(lo_hz, hi_hz)``; ``None`` applies the
    threshold rules of :mod:`.response`.
    """

    passband: tuple | None = None
    stopband: tuple | None = None
    passband_threshold_db: float = 3.0
    stopband_threshold_db: float = 40.0
    measure_noise: bool = True
    noise_samples: int = 1 << 15
    worst_case_runs: bool = True
    max_states: int = MAX_STATES
    seed: int = 20261201


@dataclass(frozen=True, eq=False)
class Metrics:
    """Everything measured on one channel."""

    response: ResponseAnalysis
    noise: NoiseAnalysis | None
    measured: MeasuredNoise | None
    overflow: OverflowAnalysis
    limit_cycles: LimitCycleAnalysis
    is_float: bool
    overflow_mode: str = "saturate"
    sample_rate_hz: float = 48000.0
    structure: str = "df1"
    unstable: str | None = None  # why the realisation is unstable (None: every pole strictly inside)
    scaling: str = "none"  # the arithmetic's section scaling (hints never suggest what is in use)
    alias: object = None  # coefc.analyse.response.AliasAnalysis of a multirate channel (None: single rate)
    cic: tuple = ()  # (factor, stages, differential delay) of each CIC decimator (the limit-cycle argument)

    @property
    def stable(self) -> bool:
        return self.unstable is None and bool(self.response.stable)

    @property
    def output_noise_dbfs(self) -> float | None:
        """Analytic output noise variance (fixed point) or the measured one (float32), in dBFS."""
        if not self.stable:
            return None
        if self.noise is not None:
            return self.noise.dbfs
        return self.measured.dbfs if self.measured else None

    @property
    def output_offset_lsb(self) -> float | None:
        """Analytic DC offset of the output error in LSB (None for float32 or unstable)."""
        return self.noise.offset_lsb if self.stable and self.noise is not None else None

    @property
    def output_offset_lsb_simulated(self) -> float | None:
        return self.measured.offset_lsb if self.stable and self.measured is not None else None

    @property
    def offset_stderr_lsb(self) -> float | None:
        """Standard error of the measured offset (from the analytic noise density at DC)."""
        if not self.stable or self.noise is None or self.measured is None:
            return None
        return self.noise.offset_stderr_lsb(self.measured.samples)

    def as_dict(self) -> dict:
        """The ``metrics`` object of the JSON report (NaN and infinities become null)."""
        r, n, m, o, lc = self.response, self.noise, self.measured, self.overflow, self.limit_cycles
        if not self.stable:
            return _clean(self._unstable_dict())
        if self.is_float:
            lcd = {"status": "unproven", "amplitude_lsb": None, "period": None, "bound_lsb": None,
                   "exhaustive": False,
                   "note": "float32 arithmetic: granular limit cycles are not analysed"}
        else:
            lcd = {"status": lc.status, "amplitude_lsb": lc.amplitude_lsb, "period": lc.period,
                   "section": lc.section, "section_amplitude_lsb": lc.section_amplitude_lsb,
                   "bound_lsb": lc.bound_lsb, "exhaustive": lc.complete, "summary": lc.summary(),
                   "sections": [
                       {"op": s.op_index + 1, "status": s.status, "bound_lsb": s.bound_lsb,
                        "exhaustive": s.exhaustive, "states_searched": s.states_searched,
                        "amplitude_lsb": s.amplitude_lsb, "period": s.period,
                        "output_amplitude_lsb": s.output_amplitude_lsb, "output_bound_lsb": s.output_bound_lsb,
                        "output_note": s.output_note,
                        "start_state": list(s.start_state) if s.start_state else None,
                        "overflow_oscillation": s.overflow_status, "overflow_note": s.overflow_note,
                        "note": s.note}
                       for s in lc.sections]}
        d = {
            "passband_deviation_db": r.passband_deviation_db,
            "stopband_attenuation_db": r.stopband_attenuation_db,
            "output_noise_dbfs": self.output_noise_dbfs,
            "output_noise_dbfs_simulated": m.dbfs if m else None,
            "output_offset_lsb": self.output_offset_lsb,
            "output_offset_lsb_simulated": self.output_offset_lsb_simulated,
            "output_offset_lsb_simulated_stderr": self.offset_stderr_lsb,
            "output_offset_dbfs": n.offset_dbfs if n else (m.offset_dbfs if m else None),
            "output_offset_dbfs_simulated": m.offset_dbfs if m else None,
            "max_pole_radius": r.max_pole_radius,
            "headroom_bits": o.headroom_bits,
            "overflow_count": o.overflow_count,
            "limit_cycle": lcd,
            # additions
            "stable": self.stable,
            "unstable_reason": None,
            "float_stopband_attenuation_db": r.float_stopband_attenuation_db,
            "passband_rule": r.passband_rule,
            "stopband_rule": r.stopband_rule,
            "pole_displacement": r.pole_displacement,
            "zero_displacement": r.zero_displacement,
            "snr_db": n.snr_db if n else (None if not m or m.dbfs is None else -m.dbfs),
            "output_noise_mean": n.mean if n else (m.mean if m else None),
            "noise_sources": [
                {"op": s.op_index + 1, "bits_dropped": s.k, "variance_lsb2": s.variance_lsb2,
                 "mean_lsb": s.mean_lsb, "power_gain": s.power_gain,
                 "output_variance_lsb2": s.output_variance_lsb2} for s in (n.sources if n else ())],
            "noise_measurement": None if m is None else {
                "samples": m.samples, "stimulus_peak": m.stimulus_peak, "stimulus_rms": m.stimulus_rms,
                "min_node_rms_lsb": m.min_node_rms_lsb, "uniform_model_holds": m.model_holds,
                "overflow_events": m.overflow_events, "note": m.note},
            "headroom_bits_sine": o.headroom_bits_sine,
            "worst_node": o.worst_node,
            "worst_case_runs": o.runs,
            "worst_case_input_peak": o.input_peak,
            "worst_case_input_peak_lsb": o.input_peak_lsb,
            "worst_case_input_peak_db_re_full_scale": None if not o.input_peak else 20 * math.log10(o.input_peak),
            "output_peak_gain": o.output_peak_gain,
            "design_peak_gain": o.design_peak_gain,
            "overflow_count_full_scale": o.overflow_count_full_scale,
            "nodes": [{"op": g.op_index + 1, "node": g.node, "l1_gain": g.l1, "linf_gain": g.linf,
                       "full_scale": g.full_scale, "headroom_bits": g.headroom_bits,
                       "headroom_bits_sine": g.headroom_bits_sine} for g in o.nodes],
            "overflow_oscillation": "none" if self.is_float else lc.overflow_status,
            "noise_spectrum": self.noise_spectrum(),
        }
        if self.alias is not None:
            a = self.alias
            d["alias_attenuation_db"] = a.attenuation_db
            d["alias"] = {"attenuation_db": a.attenuation_db, "float_attenuation_db": a.float_attenuation_db,
                          "worst_hz": a.worst_hz, "folds_to_hz": a.folds_to_hz, "passband_rule": a.passband_rule,
                          "fold_rate_hz": a.low_rate_hz}
        return _clean(d)

    def _unstable_dict(self) -> dict:
        """The metrics of an unstable realisation: response figures only, every other figure null."""
        r = self.response
        why = self.unstable or f"a realised pole has radius {r.max_pole_radius:.6f} >= 1"
        note = (f"no finite figure: the realisation is unstable, so its roundoff error grows without bound or "
                f"never decays ({why})")
        return {
            "passband_deviation_db": r.passband_deviation_db,
            "stopband_attenuation_db": r.stopband_attenuation_db,
            "output_noise_dbfs": None, "output_noise_dbfs_simulated": None,
            "output_offset_lsb": None, "output_offset_lsb_simulated": None,
            "output_offset_lsb_simulated_stderr": None,
            "output_offset_dbfs": None, "output_offset_dbfs_simulated": None,
            "max_pole_radius": r.max_pole_radius,
            "headroom_bits": None, "overflow_count": None,
            "limit_cycle": {"status": "unproven", "amplitude_lsb": None, "period": None, "bound_lsb": None,
                            "exhaustive": False, "note": note, "sections": []},
            "stable": False,
            "unstable_reason": why,
            "float_stopband_attenuation_db": r.float_stopband_attenuation_db,
            "passband_rule": r.passband_rule,
            "stopband_rule": r.stopband_rule,
            "pole_displacement": r.pole_displacement,
            "zero_displacement": r.zero_displacement,
            "snr_db": None, "output_noise_mean": None, "noise_sources": [], "noise_measurement": None,
            "headroom_bits_sine": None, "worst_node": None, "worst_case_runs": 0,
            "worst_case_input_peak": None, "worst_case_input_peak_lsb": None,
            "worst_case_input_peak_db_re_full_scale": None,
            "output_peak_gain": None, "design_peak_gain": self.overflow.design_peak_gain,
            "overflow_count_full_scale": None, "nodes": [], "overflow_oscillation": None,
            "noise_spectrum": None,
        }

    def noise_spectrum(self, points: int = 48) -> list[dict] | None:
        """Analytic output-noise density (dBFS/Hz, AES17 reference) on a log grid, for reports."""
        if not self.stable or self.noise is None or not self.noise.sources:
            return None
        import numpy as np

        fs = self.sample_rate_hz
        f = np.geomspace(min(10.0, fs / 4800.0), fs / 2.0, points)
        dens = self.noise.spectrum(f, fs)
        return [{"freq_hz": float(a), "dbfs_per_hz": float(b)} for a, b in zip(f, dens)]


def _clean(v):
    if isinstance(v, float):
        return v if math.isfinite(v) else None
    if isinstance(v, dict):
        return {k: _clean(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_clean(x) for x in v]
    if hasattr(v, "item") and not isinstance(v, (str, bytes)):
        return _clean(v.item())
    return v


def instability(program: ChannelProgram) -> str | None:
    """Why *program* is unstable or marginally stable, or ``None`` when every pole is strictly inside.

    Decided exactly on the realised coefficients (integers, or float32 values, as
    exact fractions): ``1 + a1 z^-1 + a2 z^-2`` has both poles strictly inside the unit
    circle if and only if ``|a2| < 1`` and ``|a1| < 1 + a2`` (the stability triangle,
    Jury's test for second order).  A root finder in floating point can put a double
    pole at z = 1 a hair inside the circle; this test cannot.

    References
    ----------
    A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed., sec. 6.8
    (the stability triangle of a second-order section); E. I. Jury, *Theory and
    Application of the z-Transform Method*, Wiley, 1964.
    """
    ar = program.arithmetic
    fc = 0 if ar.is_float else ar.coef.frac_bits
    for i, op in enumerate(program.ops):
        if not isinstance(op, SectionOp):
            continue
        if ar.is_float:
            a1, a2 = (Fraction(float(c)) for c in op.a)
        else:
            unit = Fraction(2) ** (fc - op.shift)  # the integer that means 1.0 in this section
            if len(op.a) == 4:  # coupled: the characteristic polynomial of the integer state matrix
                a11, a12, a21, a22 = (Fraction(int(v)) / unit for v in op.a)
                a1, a2 = -(a11 + a22), a11 * a22 - a12 * a21
            else:
                a1, a2 = Fraction(int(op.a[0])) / unit, Fraction(int(op.a[1])) / unit
                if op.a_lo:  # df1-wide-fb: the low words, of weight 2^-L (coefc.program)
                    lo = unit * 2 ** lo_bits(ar.coef)
                    a1, a2 = a1 + Fraction(int(op.a_lo[0])) / lo, a2 + Fraction(int(op.a_lo[1])) / lo
        if abs(a2) < 1 and abs(a1) < 1 + a2:
            continue
        import numpy as np

        radius = float(np.max(np.abs(np.roots([1.0, float(a1), float(a2)])))) if a2 else abs(float(a1))
        return (f"op {i + 1}: a realised pole lies on or outside the unit circle (a1 = {float(a1):.10g}, "
                f"a2 = {float(a2):.10g}; largest pole radius {radius:.6f})")
    return None


def design_peak_gain(design: ChannelDesign, n: int = 0) -> float | None:
    """``sum |h|`` of the float design's impulse response (its worst-case peak gain).

    Summed over at least *n* samples and until the design's slowest pole has decayed
    (the rule of :func:`coefc.analyse.linear.response_length`).
    """
    import numpy as np
    from scipy import signal

    from ..blocks import DelayBlock, FirBlock, GainBlock, SosBlock
    from ..blocks import MAX_IMPULSE, decay_samples

    poles = [abs(p) for blk in design.blocks if isinstance(blk, SosBlock)
             for row in np.atleast_2d(blk.sos) for p in np.roots(row[3:]) if row[4] or row[5]]
    r = max(poles, default=0.0)
    own = decay_samples(r) * 2 if 0 < r < 1 else 0
    own += sum(len(blk.taps) for blk in design.blocks if isinstance(blk, FirBlock))
    own += sum(blk.samples for blk in design.blocks if isinstance(blk, DelayBlock))
    h = np.zeros(max(int(n), min(own + 8, MAX_IMPULSE), 1))
    h[0] = 1.0
    for blk in design.blocks:
        if isinstance(blk, SosBlock):
            h = signal.sosfilt(np.asarray(blk.sos, dtype=float), h)
        elif isinstance(blk, FirBlock):
            h = signal.oaconvolve(h, np.asarray(blk.taps, dtype=float))[: len(h)]
        elif isinstance(blk, GainBlock):
            h = h * float(blk.gain)
        elif isinstance(blk, DelayBlock):
            h = np.concatenate([np.zeros(min(blk.samples, len(h))), h])[: len(h)]
        else:  # pragma: no cover - blocks are a closed set
            return None
    g = float(np.sum(np.abs(h)))
    return g if math.isfinite(g) else None


def analyse_channel(design: ChannelDesign, program: ChannelProgram,
                    options: AnalysisOptions | None = None) -> Metrics:
    """Analyse one realised channel against its float design.

    Parameters
    ----------
    design : ChannelDesign
        The float design (what the channel should do).
    program : ChannelProgram
        The realised program (what the chip will do).
    options : AnalysisOptions, optional

    Returns
    -------
    Metrics
        Response error, analytic and measured noise, overflow and limit cycles.

    References
    ----------
    L. B. Jackson, "Roundoff-noise analysis for fixed-point digital filters realized
    in cascade or parallel form", IEEE Trans. Audio Electroacoust. AU-18(2), 1970.
    """
    opt = options or AnalysisOptions()
    models = op_models(program)
    n = response_length(models)
    # Stopbands: the budget's, else those the stages' requirements state, else the threshold rule.
    stopband = opt.stopband if opt.stopband is not None else (tuple(design.stopbands) or None)
    resp = analyse_response(design, program, passband=opt.passband, stopband=stopband,
                            passband_threshold_db=opt.passband_threshold_db,
                            stopband_threshold_db=opt.stopband_threshold_db)
    if opt.stopband is None and design.stopbands:
        resp = replace(resp, stopband_rule="stopband_hz of the stages: " + resp.stopband_rule)
    unstable = instability(program)
    if unstable is None and not resp.stable:
        unstable = f"a realised pole has radius {resp.max_pole_radius:.6f} >= 1"
    dgain = design_peak_gain(design, n)
    if unstable is not None:
        # no finite figure exists: the linear model's responses grow and the engine's error with them
        ovf = OverflowAnalysis(nodes=(), headroom_bits=None, headroom_bits_sine=None, worst_node=None,
                               overflow_count=None, runs=0, input_peak=None, design_peak_gain=dgain)
        lc = analyse_limit_cycles(program, max_states=opt.max_states)
        return Metrics(resp, None, None, ovf, lc, program.arithmetic.is_float, program.arithmetic.overflow,
                       float(program.sample_rate_hz), program.arithmetic.structure, unstable,
                       scaling=program.arithmetic.scaling)
    noise = analytic_noise(program, models, n)
    # float32 has no analytic figure: its noise is always measured
    meas = (measured_noise(program, samples=opt.noise_samples, seed=opt.seed, models=models, n=n)
            if opt.measure_noise or noise is None else None)
    ovf = replace(analyse_overflow(program, run_engine=opt.worst_case_runs, models=models, n=n),
                  design_peak_gain=dgain)
    lc = analyse_limit_cycles(program, max_states=opt.max_states)
    from .response import alias_attenuation

    alias = alias_attenuation(design, program, passband=opt.passband,
                              passband_threshold_db=opt.passband_threshold_db)
    return Metrics(resp, noise, meas, ovf, lc, program.arithmetic.is_float, program.arithmetic.overflow,
                   float(program.sample_rate_hz), program.arithmetic.structure, scaling=program.arithmetic.scaling,
                   alias=alias, cic=tuple((op.factor, op.stages, op.delay) for op in program.ops
                                          if type(op).__name__ == "CicOp"))
