"""Quantisation analysis: a float design and its realised program in, :class:`Metrics` out.

What the word lengths cost, one module per question:

:mod:`.response`     coefficient quantisation (response error, poles, zeros, stability)
:mod:`.noise`        roundoff noise, analytic (Jackson 1970) and measured (bit-true engine)
:mod:`.overflow`     node peak gains, headroom, worst-case input through the engine
:mod:`.limitcycles`  granular limit cycles and overflow oscillations per section
:mod:`.linear`       the linear model of a realised program the others share

Levels in dBFS follow AES17: full scale = 1.0 and 0 dBFS is the RMS level of a
full-scale sine, so a noise of power P reads 10*log10(P/0.5) dBFS.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from ..blocks import ChannelDesign
from ..program import ChannelProgram
from .limitcycles import MAX_STATES, LimitCycleAnalysis, analyse_limit_cycles
from .linear import op_models, response_length
from .noise import MeasuredNoise, NoiseAnalysis, analytic_noise, measured_noise
from .overflow import OverflowAnalysis, analyse_overflow
from .response import ResponseAnalysis, analyse_response

__all__ = ["AnalysisOptions", "Metrics", "analyse_channel"]


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

    @property
    def output_noise_dbfs(self) -> float | None:
        """Analytic output noise (fixed point) or the measured one (float32)."""
        if self.noise is not None:
            return self.noise.dbfs
        return self.measured.dbfs if self.measured else None

    def as_dict(self) -> dict:
        """The ``metrics`` object of the JSON report (NaN and infinities become null)."""
        r, n, m, o, lc = self.response, self.noise, self.measured, self.overflow, self.limit_cycles
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
            "max_pole_radius": r.max_pole_radius,
            "headroom_bits": o.headroom_bits,
            "overflow_count": o.overflow_count,
            "limit_cycle": lcd,
            # additions
            "stable": r.stable,
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
            "worst_case_input_peak_dbfs": None if not o.input_peak else 20 * math.log10(o.input_peak),
            "output_peak_gain": o.output_peak_gain,
            "overflow_count_full_scale": o.overflow_count_full_scale,
            "nodes": [{"op": g.op_index + 1, "node": g.node, "l1_gain": g.l1, "linf_gain": g.linf,
                       "full_scale": g.full_scale, "headroom_bits": g.headroom_bits,
                       "headroom_bits_sine": g.headroom_bits_sine} for g in o.nodes],
            "overflow_oscillation": "none" if self.is_float else lc.overflow_status,
            "noise_spectrum": self.noise_spectrum(),
        }
        return _clean(d)

    def noise_spectrum(self, points: int = 48) -> list[dict] | None:
        """Analytic output-noise density (dBFS/Hz, AES17 reference) on a log grid, for reports."""
        if self.noise is None or not self.noise.sources:
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
    noise = analytic_noise(program, models, n)
    # float32 has no analytic figure: its noise is always measured
    meas = (measured_noise(program, samples=opt.noise_samples, seed=opt.seed, models=models, n=n)
            if opt.measure_noise or noise is None else None)
    ovf = analyse_overflow(program, run_engine=opt.worst_case_runs, models=models, n=n)
    lc = analyse_limit_cycles(program, max_states=opt.max_states)
    return Metrics(resp, noise, meas, ovf, lc, program.arithmetic.is_float, program.arithmetic.overflow,
                   float(program.sample_rate_hz), program.arithmetic.structure)
