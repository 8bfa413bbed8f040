"""Sums of channels: the level of several channels' outputs added, on the float design and bit-true.

A crossover is judged by its sum: the drivers' outputs add in the air.  A ``[[sum]]``
table names channels; each is taken as realised (its polarity, gains and delays
included) and the complex responses are added.  The level of the sum,
``20 log10 |sum_c H_c(f)|``, must stay within ``target_db +- tolerance_db`` over the
band.

Two figures are computed:

* the float design: the channels' float responses (:meth:`ChannelDesign.response`)
  added at every frequency of the measuring grid;
* the bit-true outputs: one periodic multisine (every bin of an N-point FFT, equal
  amplitude, Schroeder phases) is quantised to data words and run through the
  engine (:func:`coefc.simulate.simulate`) on each channel for two periods; the
  second period of every output is in steady state (N is at least the length in
  which the slowest realised pole decays to 1e-13), the outputs are added and
  ``H_sum(k) = FFT(sum_c y_c)(k) / FFT(x)(k)``.  In steady state the output of a
  periodic input is itself periodic (the roundoff is a function of the state), so
  further periods would repeat the same figure: the bit-true level includes the
  roundoff error at each bin once, as the chip would produce it for this input.  The input peak keeps every
  node's realised l1 bound at half its full scale, so no node overflows; the
  engine's overflow counters are read back and an overflow is reported.

The grid is the FFT's bins inside the band, so the float and the bit-true figures
are compared at the same frequencies.

References
----------
S. H. Linkwitz, "Active crossover networks for noncoincident drivers", J. Audio
Eng. Soc. 24(1), 1976 (the in-phase sum of Linkwitz-Riley crossover outputs).
M. R. Schroeder, "Synthesis of low-peak-factor signals and binary sequences with
low autocorrelation", IEEE Trans. Inf. Theory 16(1), 1970 (the multisine phases).
J. Schoukens, R. Pintelon, "Identification of Linear Systems", Pergamon 1991
(periodic excitation: the ratio of output and input spectra at the excited bins).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: shortest and longest measuring period (samples)
MIN_PERIOD = 1 << 14
MAX_PERIOD = 1 << 18


@dataclass(frozen=True, eq=False)
class SumAnalysis:
    """The sum of some channels: grids, complex responses and deviations from the target level."""

    name: str
    channels: tuple[str, ...]
    target_db: float
    tolerance_db: float
    band_hz: tuple[float, float]
    freqs_hz: np.ndarray  # the FFT bins (all of them, 0 .. fs/2)
    float_response: np.ndarray  # complex, sum of the float designs
    realised_response: np.ndarray  # complex, bit-true sum / input
    channel_float: dict  # name -> complex float response of each channel (for plots)
    float_deviation_db: float  # max |level - target| over the band, float design
    realised_deviation_db: float  # the same, bit-true
    float_worst_hz: float
    realised_worst_hz: float
    realised_worst_level_db: float
    float_worst_level_db: float
    input_peak: float  # fraction of full scale
    overflow_events: int
    period: int

    @property
    def deviation_db(self) -> float:
        """The larger of the float and the bit-true deviation: what the check compares."""
        return max(self.float_deviation_db, self.realised_deviation_db)

    def in_band(self) -> np.ndarray:
        lo, hi = self.band_hz
        return (self.freqs_hz >= lo) & (self.freqs_hz <= hi)

    def as_dict(self) -> dict:
        return {"name": self.name, "channels": list(self.channels), "target_db": self.target_db,
                "tolerance_db": self.tolerance_db, "band_hz": list(self.band_hz),
                "float_deviation_db": self.float_deviation_db, "realised_deviation_db": self.realised_deviation_db,
                "float_worst_hz": self.float_worst_hz, "float_worst_level_db": self.float_worst_level_db,
                "realised_worst_hz": self.realised_worst_hz,
                "realised_worst_level_db": self.realised_worst_level_db, "input_peak": self.input_peak,
                "overflow_events": self.overflow_events, "period_samples": self.period,
                "bins_in_band": int(np.count_nonzero(self.in_band()))}


def _db(h: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.maximum(np.abs(h), 1e-300))


def _worst(level_db: np.ndarray, f: np.ndarray, mask: np.ndarray, target: float) -> tuple[float, float, float]:
    dev = np.abs(level_db[mask] - target)
    i = int(np.argmax(dev))
    return float(dev[i]), float(f[mask][i]), float(level_db[mask][i])


def multisine(n: int) -> np.ndarray:
    """One period of a flat multisine over bins 1 .. n/2 - 1 with Schroeder phases, peak 1."""
    k = np.arange(n // 2 + 1)
    m = n // 2 - 1
    spec = np.zeros(n // 2 + 1, dtype=complex)
    phase = -np.pi * k[1:m + 1] * (k[1:m + 1] - 1) / m
    spec[1:m + 1] = np.exp(1j * phase)
    x = np.fft.irfft(spec, n)
    return x / np.max(np.abs(x))


def _period(programs) -> int:
    from .linear import op_models, response_length

    need = max(response_length(op_models(p)) for p in programs)
    n = MIN_PERIOD
    while n < need and n < MAX_PERIOD:
        n *= 2
    return n


def _safe_peak(programs, n: int) -> float:
    """Input peak (fraction of full scale) that keeps every node of every channel within half its full scale."""
    from .linear import node_impulses, op_models

    peak = 0.5
    for p in programs:
        models = op_models(p)
        for m, h in zip(models, node_impulses(models, n)):
            l1 = float(np.sum(np.abs(h)))
            if l1 > 0:
                peak = min(peak, 0.5 * m.full_scale / l1)
    return peak


def analyse_sum(spec, designs: dict, programs: dict) -> SumAnalysis:
    """The :class:`SumAnalysis` of one ``[[sum]]`` (*spec*: :class:`coefc.spec.SumSpec`).

    *designs* and *programs* map channel names to :class:`ChannelDesign` and
    :class:`ChannelProgram`; every channel of the sum must be present.
    """
    from ..simulate import simulate

    progs = [programs[c] for c in spec.channels]
    fs = progs[0].sample_rate_hz
    n = _period(progs)
    f = np.arange(n // 2 + 1) * fs / n
    peak = _safe_peak(progs, n)
    base = multisine(n)
    y_sum = np.zeros(n)
    x_phys = None
    overflow = 0
    for p in progs:
        ar = p.arithmetic
        if ar.is_float:
            x = (base * peak).astype(np.float32)
            xin = np.concatenate([x, x])
            x_p = x.astype(float)
            tr = simulate(p, xin, trace=True)
            y = np.asarray(tr.y, dtype=float)[n:]
        else:
            words = np.round(base * peak * ar.data.max_value / ar.data.lsb).astype(np.int64)
            words = np.clip(words, ar.data.min_int, ar.data.max_int)
            xin = np.concatenate([words, words])
            x_p = words * ar.data.lsb
            tr = simulate(p, xin, trace=True)
            y = np.asarray(tr.y, dtype=float)[n:] * ar.data.lsb
        overflow += int(sum(tr.overflow_counts)) + int(sum(tr.acc_overflow_counts))
        if x_phys is None:
            x_phys = x_p
        elif not np.allclose(x_phys, x_p, rtol=0, atol=max(abs(x_phys).max(), 1e-30) * 1e-6):
            # channels of different data words get their own quantised input: refer each to its own
            y = np.fft.irfft(np.fft.rfft(y) / np.where(np.fft.rfft(x_p) == 0, 1, np.fft.rfft(x_p))
                             * np.fft.rfft(x_phys), n)
        y_sum += y
    X = np.fft.rfft(x_phys)
    excited = np.abs(X) > 0
    Y = np.fft.rfft(y_sum)
    realised = np.where(excited, Y / np.where(excited, X, 1), np.nan)
    chan_float = {c: designs[c].response(f) for c in spec.channels}
    flt = np.sum(list(chan_float.values()), axis=0)
    mask = (f >= spec.band_hz[0]) & (f <= spec.band_hz[1]) & excited
    if not np.any(mask):  # a band narrower than one bin: its nearest bin
        mid = 0.5 * (spec.band_hz[0] + spec.band_hz[1])
        mask = np.zeros_like(excited)
        cand = np.where(excited)[0]
        mask[cand[np.argmin(np.abs(f[cand] - mid))]] = True
    fd, ff, fl = _worst(_db(flt), f, mask, spec.target_db)
    rd, rf, rl = _worst(_db(np.nan_to_num(realised)), f, mask, spec.target_db)
    return SumAnalysis(spec.name, tuple(spec.channels), spec.target_db, spec.tolerance_db, tuple(spec.band_hz), f,
                       flt, realised, chan_float, fd, rd, ff, rf, rl, fl, peak, overflow, n)


def sum_check_reason(s: SumAnalysis, ok: bool) -> str:
    """The one-line reason of a sum's check row."""
    lo, hi = s.band_hz
    text = (f"channels {' + '.join(s.channels)} as realised (polarity, gains, delays): level of the sum within "
            f"{s.target_db:g} +- {s.tolerance_db:g} dB over {lo:g}..{hi:g} Hz? float design: worst "
            f"{s.float_worst_level_db:.4g} dB at {s.float_worst_hz:.4g} Hz ({s.float_deviation_db:.4g} dB off); "
            f"bit-true ({s.period}-sample multisine at {20 * math.log10(s.input_peak):.1f} dB re full-scale peak): "
            f"worst {s.realised_worst_level_db:.4g} dB at {s.realised_worst_hz:.4g} Hz "
            f"({s.realised_deviation_db:.4g} dB off)")
    if s.overflow_events:
        text += f"; {s.overflow_events} overflow events during the measurement: the bit-true figure is unreliable"
    if not ok:
        text += ("; check the channels' polarity (an inverted driver digs a hole at the crossover), delays and "
                 "gains, or state the level and tolerance the design really reaches")
    return text
