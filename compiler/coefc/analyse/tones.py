"""Steady tones through the bit-true engine: what the chip does to signals.

The response checks of :mod:`.response` use the linear model of the quantised
coefficients; they cannot see what the data word's rounding does to a signal
(dead bands, granular distortion, a section held at a constant by its own
rounding).  This module measures it: steady sine tones are quantised to the data
word, run through the realised program with the bit-true engine
(:func:`coefc.simulate.simulate`), and each tone's gain is measured and compared,
in dB, with the float design's gain (``error_db``) and with the exact linear
response of the realised coefficients (``arithmetic_error_db``).  The second is
what the budget gates: it is what the arithmetic adds beyond the coefficients,
whose own error the response checks already judge; near a notch floor the two
differ (a notch 55 dB deep moved by a coefficient's last bit reads 0.7 dB off the
float design while the chip does exactly what its coefficients say).

The rules, stated once:

* frequencies: points of the response grid (:func:`coefc.analyse.response.grid`)
  about a third of an octave apart where the float design is within
  ``range_db`` (60 dB) of its peak, plus that range's edges and the design's peak;
  for a channel with an IEC 61672 weighting stage, the standard's one-third-octave
  frequencies from 10 Hz to 20 kHz below 0.49 fs (the exact base-ten frequencies
  ``1000 * 10**(n/10)`` Hz at which IEC 61672-1 computes its table);
* levels: ``levels_dbfs`` (default -20 and -60 dBFS, AES17: a sine of peak
  ``10**(L/20)`` of full scale), each lowered where needed so that the design's
  ideal output peak stays at or below half of full scale (the tone level used
  is reported);
* coherent sampling: every tone has a whole number ``m`` of periods in the
  ``N``-sample measurement window (``f = m fs / N``, at least 4096 samples and
  two periods where :data:`MAX_WINDOW` allows, at least one period always), so the
  fit below is exact for a pure tone and has no leakage; grid points whose one
  period is longer than :data:`MAX_WINDOW` samples are not run, and the report
  says below which frequency the tones stop;
* settling: the window starts after the realised poles' transients have decayed
  to 1e-6 of their start (``ln(1e-6) / ln(r_max)`` samples plus the FIR lengths
  and delays), capped at :data:`MAX_SETTLE` samples -- when capped, the reports
  say so and how far the slowest mode had decayed;
* measurement: the least-squares fit of ``c + a cos(w n) + b sin(w n)`` at the
  tone's known frequency (the three-parameter sine fit of IEEE Std 1057), which
  over whole periods equals the single-bin DFT; the gain is the ratio of the
  output's fitted amplitude to the quantised input's, so the input's own
  quantisation does not count as an error;
* gating: a tone counts towards the largest arithmetic error where the float design is
  within ``range_db`` of its peak and, on fixed-point targets, the design's ideal
  output peak is at least :data:`MIN_OUTPUT_LSB` (64) output LSB; the others are
  reported, not gated.  Why 64: one rounding of a sine to the data word leaves an
  error of at most one step whose fundamental is at most that of a square wave,
  (4/pi)/2 = 0.64 LSB (truncation); a few rounding points in a chain give some
  2.5 LSB, which at 64 LSB is 0.3 dB -- inside the default limit, so only what the
  realisation adds beyond the data word's own resolution can fail the check;
* weighting stages: at the standard's frequencies the measured channel gain is
  also compared with the standard's curve (the analytic weighting of IEC 61672-1
  Annex E, with the rest of the channel's float stages multiplied in), against
  the class 1 limits of :data:`coefc.design.weighting.CLASS1_TABLE`.

A measurement at chosen tones and levels is evidence, not a proof for every
signal: the report says which tones were run.

References
----------
IEEE Std 1057-2017, *IEEE Standard for Digitizing Waveform Recorders*, sec. 8
(three-parameter least-squares sine fit at a known frequency).
IEC 61672-1:2013, *Electroacoustics -- Sound level meters -- Part 1: Specifications*,
Annex E (analytic weightings) and the table of weightings and class 1 limits.
L. B. Jackson, *Digital Filters and Signal Processing*, 3rd ed., sec. 11.6
(granular limit cycles and dead bands of recursive filters).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from ..blocks import ChannelDesign, SosBlock, block_response
from ..program import ChannelProgram, CicOp, DelayOp, FirOp, PolyFirOp, SectionOp, decimation, rate_ratio, section_transfer

DEFAULT_LEVELS_DBFS = (-20.0, -60.0)
RANGE_DB = 60.0
MIN_OUTPUT_LSB = 64.0  # 36 dB above one step: see "gating" above
MIN_WINDOW = 4096
MAX_WINDOW = 1 << 16  # one period must fit: tones below fs / MAX_WINDOW are not run (and reported)
SETTLE_DECAY = 1e-6
MAX_SETTLE = 1 << 15
MAX_TONE_FREQ = 0.49  # of fs: a tone at fs/2 exactly is not a sine the fit can measure
OUTPUT_PEAK = 0.5  # largest ideal output peak of a tone, as a fraction of full scale
METHOD = ("least-squares sine fit at the known frequency (IEEE Std 1057 three-parameter fit; "
          "equal to the single-bin DFT over the whole periods of the window)")

_WEIGHTING_TEXT = re.compile(r"IEC 61672 ([AC])-weighting")


@dataclass(frozen=True)
class ToneResult:
    """One tone at one level."""

    freq_hz: float  # the exact coherent frequency run
    level_dbfs: float  # the level used (AES17 dBFS)
    gain_db: float  # measured: fitted output amplitude / fitted input amplitude
    design_gain_db: float  # the float design at freq_hz
    error_db: float  # gain_db - design_gain_db
    linear_gain_db: float  # the realised coefficients' exact linear response at freq_hz
    arithmetic_error_db: float  # gain_db - linear_gain_db: what the data-word arithmetic adds (gated)
    gated: bool  # counts towards the largest error
    note: str  # why not gated, or what else was seen
    residual_db: float  # output power off the fitted sine and DC, re the fitted sine's power
    dc_lsb: float | None  # the output's mean over the window (fixed point)
    overflow_events: int  # data-word overflows at any op during the run
    window: int  # N samples measured (m whole periods)
    below_resolution: bool = False  # no output at the tone: gain_db is an upper bound
    nominal_hz: float | None = None  # IEC 61672 nominal frequency (weighting tones)
    standard: dict | None = None  # weighting: letter, reference_db, deviation_db, lower_db, upper_db, ok

    def as_dict(self) -> dict:
        d = {"freq_hz": self.freq_hz, "level_dbfs": self.level_dbfs, "gain_db": self.gain_db,
             "design_gain_db": self.design_gain_db, "error_db": self.error_db,
             "linear_gain_db": self.linear_gain_db, "arithmetic_error_db": self.arithmetic_error_db,
             "gated": self.gated,
             "below_resolution": self.below_resolution, "residual_db": self.residual_db,
             "dc_lsb": self.dc_lsb, "overflow_events": self.overflow_events, "window_samples": self.window,
             "note": self.note}
        if self.nominal_hz is not None:
            d["nominal_hz"] = self.nominal_hz
            d["standard"] = self.standard
        return d


@dataclass(frozen=True, eq=False)
class ToneAnalysis:
    """Every tone of one channel and the figures the budget gates on."""

    status: str  # "measured" or "not measured"
    tones: tuple[ToneResult, ...]
    max_error_db: float | None  # largest |arithmetic_error_db| over the gated tones
    worst: ToneResult | None
    standard_failures: tuple[ToneResult, ...]  # counted weighting tones outside their class 1 limits
    levels_dbfs: tuple[float, ...]
    range_db: float
    settle_samples: int
    settle_capped: bool
    slowest_pole_radius: float
    residual_transient: float  # r_max ** settle_samples
    samples_run: int
    note: str

    @property
    def gated_count(self) -> int:
        return sum(1 for t in self.tones if t.gated)

    @property
    def standard_tones(self) -> tuple[ToneResult, ...]:
        """The counted tones at the IEC 61672-1 frequencies of a weighting stage."""
        return tuple(t for t in self.tones if t.standard is not None and t.gated)

    @property
    def class1_excess_db(self) -> float | None:
        """Largest excess of a counted weighting tone over its class 1 limits (<= 0: inside, by that margin)."""
        ex = [t.standard["excess_db"] for t in self.standard_tones]
        return max(ex) if ex else None

    def as_dict(self) -> dict:
        return {
            "status": self.status, "method": METHOD, "levels_dbfs": list(self.levels_dbfs),
            "range_db": self.range_db, "min_output_lsb": MIN_OUTPUT_LSB,
            "max_error_db": self.max_error_db,
            "worst": None if self.worst is None else self.worst.as_dict(),
            "standard_failures": len(self.standard_failures), "class1_excess_db": self.class1_excess_db,
            "settle_samples": self.settle_samples, "settle_capped": self.settle_capped,
            "slowest_pole_radius": self.slowest_pole_radius,
            "residual_transient": self.residual_transient,
            "samples_run": self.samples_run, "tones_gated": self.gated_count, "note": self.note,
            "tones": [t.as_dict() for t in self.tones],
        }


# ------------------------------------------------------------------ the plan

def _db(v: float) -> float:
    return 20.0 * math.log10(v) if v > 0 else -math.inf


def slowest_pole_radius(program: ChannelProgram) -> float:
    """Largest pole radius of the realised sections (their exact coefficient values)."""
    ar = program.arithmetic
    r = 0.0
    for op in program.ops:
        if isinstance(op, SectionOp):
            _, (_, a1, a2) = section_transfer(op, 0 if ar.is_float else ar.coef)
            r = max(r, float(np.max(np.abs(np.roots([1.0, a1, a2])))) if (a1 or a2) else 0.0)
    return r


def settle_length(program: ChannelProgram) -> tuple[int, bool, float, float]:
    """``(samples, capped, r_max, r_max ** samples)``: how long the tones run before the window."""
    r = slowest_pole_radius(program)
    fixed = sum(len(op.taps) for op in program.ops if isinstance(op, (FirOp, PolyFirOp)))
    fixed += sum(len(op.impulse()) for op in program.ops if isinstance(op, CicOp))  # a CIC is an FIR in effect
    fixed += sum(op.samples for op in program.ops if isinstance(op, DelayOp))
    if r <= 0.0:
        n = 0
    elif r >= 1.0:
        n = MAX_SETTLE + 1
    else:
        n = math.ceil(math.log(SETTLE_DECAY) / math.log(r))
    n += fixed + 64  # a margin for coinciding poles (n r^n decays slower than r^n)
    n *= decimation(program.ops)  # counted in input samples: an op after a decimation by M settles M times slower
    capped = n > MAX_SETTLE
    n = min(n, MAX_SETTLE)
    return n, capped, r, (r ** n if r < 1.0 else 1.0)


def _weightings(design: ChannelDesign) -> list[tuple[str, SosBlock]]:
    """The IEC 61672 weighting blocks of a channel: ``(letter, block)``."""
    out = []
    texts = {s.text for s in design.stages if s.kind == "weighting"}
    for blk in design.blocks:
        if isinstance(blk, SosBlock) and blk.label in texts:
            m = _WEIGHTING_TEXT.match(blk.label)
            if m:
                out.append((m.group(1), blk))
    return out


def _coherent(f: float, fs: float) -> tuple[float, int, int]:
    """``(f_exact, m, N)``: m whole periods in N samples, f_exact = m fs / N close to *f*."""
    n0 = min(max(MIN_WINDOW, math.ceil(2.0 * fs / f)), MAX_WINDOW)
    m = max(1, round(f * n0 / fs))
    n = max(round(m * fs / f), 2 * m + 1)
    return m * fs / n, m, n


def _grid_picks(freqs: np.ndarray, float_db: np.ndarray, fs: float, range_db: float) -> list[float]:
    """Grid points about 1/3 octave apart inside the range, its run edges and the peak."""
    peak = float(np.max(float_db))
    ok = (float_db >= peak - range_db) & (freqs <= MAX_TONE_FREQ * fs)
    if not np.any(ok):
        return []
    logf = np.log2(freqs)
    picks = set()
    last = -math.inf
    idx = np.flatnonzero(ok)
    for i in idx:
        if logf[i] - last >= 1.0 / 3.0 - 1e-9:
            picks.add(int(i))
            last = logf[i]
    # edges of every contiguous run inside the range, and the peak
    edges = np.flatnonzero(np.diff(ok.astype(np.int8)) != 0)
    for e in edges:
        picks.add(int(e) if ok[e] else int(e) + 1)
    picks.add(int(idx[0]))
    picks.add(int(idx[-1]))
    ip = int(np.argmax(np.where(ok, float_db, -np.inf)))
    picks.add(ip)
    return sorted(float(freqs[i]) for i in picks)


def _standard_freqs(fs: float) -> list[tuple[float, tuple]]:
    from ..design.weighting import CLASS1_TABLE

    out = []
    for n, row in enumerate(CLASS1_TABLE):
        f_exact = 1000.0 * 10 ** ((n + 10 - 30) / 10)  # 10 Hz .. 20 kHz, base-ten series
        if f_exact < MAX_TONE_FREQ * fs:
            out.append((f_exact, row))
    return out


# ------------------------------------------------------------------ measuring

_TONE_CACHE: dict = {}
_TONE_CACHE_SAMPLES = 1 << 23  # samples kept (at most 64 MiB): the windows and bases of a channel's tones
_TONE_KEPT = [0]


def _tone_cached(key: tuple, make):
    """*make()* once per process for *key*: the tone windows, bases and input fits are pure functions
    of the tone and the data word, and a sweep runs the same tones for every configuration."""
    hit = _TONE_CACHE.get(key)
    if hit is None:
        hit = make()
        size = sum(getattr(v, "size", 0) for v in hit)
        if _TONE_KEPT[0] + size > _TONE_CACHE_SAMPLES:
            _TONE_CACHE.clear()
            _TONE_KEPT[0] = 0
        _TONE_KEPT[0] += size
        _TONE_CACHE[key] = hit
    return hit


def _basis(m: int, nn: int) -> tuple[np.ndarray, np.ndarray]:
    """``cos(w n), sin(w n)`` of *m* periods in *nn* samples (read-only, shared)."""
    def make():
        w = 2.0 * np.pi * m * np.arange(nn) / nn
        c, s = np.cos(w), np.sin(w)
        c.setflags(write=False)
        s.setflags(write=False)
        return c, s

    return _tone_cached(("basis", m, nn), make)


def _fit(v, c, si):  # elementwise sums, not BLAS: a BLAS call may spin threads on a busy machine
    nn = len(v)
    dc = float(np.sum(v)) / nn
    a = 2.0 / nn * float(np.sum(v * c))
    b = 2.0 / nn * float(np.sum(v * si))
    return dc, math.hypot(a, b), (a, b)


def _window(ar, m: int, n: int, peak: float):
    """One window of the tone quantised to the data word, and the input's fitted amplitude."""
    def make():
        s = np.sin(2.0 * np.pi * ((m * np.arange(n)) % n) / n)
        if ar.is_float:
            win = (peak * s).astype(np.float32)
        else:
            scale = float(1 << ar.data.frac_bits)
            win = np.clip(np.round(peak * scale * s), ar.data.min_int, ar.data.max_int).astype(np.int64)
        win.setflags(write=False)
        # the measured window of the run is exactly this window (the tone is periodic in n)
        _, ain, _ = _fit(win.astype(np.float64), *_basis(m, n))
        return win, ain

    fmt = None if ar.is_float else (ar.data.frac_bits, ar.data.min_int, ar.data.max_int)
    return _tone_cached(("window", m, n, float(peak), fmt), make)


def _run(program: ChannelProgram, f: float, m: int, n: int, settle: int, peak: float):
    """Run one tone; ``(in_amp, out_amp, dc, residual_power, overflow_events)`` in data units."""
    from ..simulate import simulate

    ar = program.arithmetic
    # one window of whole periods, quantised once; the settling run repeats it (the tone is periodic in n)
    win, ain = _window(ar, m, n, peak)
    scale = 1.0 if ar.is_float else float(1 << ar.data.frac_bits)
    reps = -(-settle // n)
    x = np.concatenate([np.tile(win, reps)[reps * n - settle:], win]) if settle else win.copy()
    tr = simulate(program, x, trace=True)
    # a multirate channel: the same m periods in the output window at the output rate
    # (n and settle are multiples of the decimation, see analyse_tones)
    ratio = rate_ratio(program.ops)
    n_out, s_out = int(n * ratio), int(settle * ratio)
    yw = tr.y[s_out:].astype(np.float64)
    c, si = _basis(m, n_out)
    dc, aout, (a, b) = _fit(yw, c, si)
    res = yw - dc - a * c - b * si
    res_p = float(np.sum(res * res)) / n_out
    ovf = int(sum(tr.overflow_counts))
    return ain, aout, dc, res_p, ovf, scale


def analyse_tones(design: ChannelDesign, program: ChannelProgram, freqs_hz: np.ndarray,
                  float_db: np.ndarray, *, levels_dbfs=DEFAULT_LEVELS_DBFS,
                  range_db: float = RANGE_DB) -> ToneAnalysis:
    """Run steady tones through the bit-true engine and compare their gains with the float design.

    Parameters
    ----------
    design : ChannelDesign
        The float design (the reference gain).
    program : ChannelProgram
        The realised program, run bit-true.
    freqs_hz, float_db : numpy.ndarray
        The response grid and the float design's level on it (from
        :func:`coefc.analyse.response.analyse_response`).
    levels_dbfs : sequence of float
        Tone levels, AES17 dBFS (a sine of peak ``10**(L/20)`` of full scale).
    range_db : float
        Tones are gated where the float design is within this many dB of its peak.

    Returns
    -------
    ToneAnalysis

    References
    ----------
    IEEE Std 1057-2017, sec. 8 (three-parameter sine fit).
    IEC 61672-1:2013, Annex E and the class 1 limits of its weighting table.
    """
    fs = float(program.sample_rate_hz)
    levels = tuple(float(v) for v in levels_dbfs)
    settle, capped, r, residual = settle_length(program)
    if r >= 1.0:
        return ToneAnalysis("not measured", (), None, None, (), levels, range_db, 0, False, r, 1.0, 0,
                            f"not measured: the realisation is unstable (pole radius {r:.6f}), a tone never settles")
    peak_db = float(np.max(float_db))
    weightings = _weightings(design)
    # multirate: tones below the lower of the input and output Nyquist frequencies, windows that hold
    # whole periods at that rate, the input window and settling a multiple of the decimation factor
    low = float(min(fs, program.output_rate_hz))
    per = int(round(fs / low))
    if per > 1:
        settle = -(-settle // per) * per
    std = _standard_freqs(low) if weightings else []
    plan: list[tuple[float, float | None, tuple | None]] = []  # (freq, nominal, table row)
    for f_exact, row in std:
        plan.append((f_exact, float(row[0]), row))
    f_min = low / MAX_WINDOW
    skipped = []
    for f in _grid_picks(np.asarray(freqs_hz), np.asarray(float_db), low, range_db):
        if f < f_min:
            skipped.append(f)
        # the standard's one-third-octave tones already cover a weighting channel's grid
        elif not std or not any(abs(math.log2(f / fe)) < 1.0 / 6.0 for fe, _ in std):
            plan.append((f, None, None))
    plan.sort(key=lambda p: p[0])

    coh = [_coherent(f, low) for f, _, _ in plan]
    coh = [(fe, m, n * per) for fe, m, n in coh]
    fx = np.array([c[0] for c in coh])
    h_design = np.abs(design.response(fx))
    from ..blocks import chain_response
    from ..blocks import as_float_blocks

    h_lin = np.abs(chain_response(as_float_blocks(program), fx, fs))
    stage_h = {letter: np.abs(block_response(blk, fx, fs)) for letter, blk in weightings}
    lsb_out = None if program.arithmetic.is_float else 1.0
    tones = []
    samples = 0
    for i, ((f0, nominal, row), (f, m, n), hd, hl) in enumerate(zip(plan, coh, h_design, h_lin)):
        design_db, lin_db = _db(float(hd)), _db(float(hl))
        for level in levels:
            peak, used = 10.0 ** (level / 20.0), level
            if hd * peak > OUTPUT_PEAK:
                peak = OUTPUT_PEAK / hd
                used = _db(peak)
            ain, aout, dc, res_p, ovf, scale = _run(program, f, m, n, settle, peak)
            samples += settle + n
            notes = []
            below = False
            floor = (1.0 / n) if lsb_out is not None else ain * 1e-15
            if aout < floor:  # no trace of the tone: the gain is at most the floor
                aout, below = floor, True
                notes.append(f"no output at the tone (gain at most {_db(floor / ain) if ain else -math.inf:.1f} dB)")
            gain = _db(aout / ain) if ain > 0 else -math.inf
            err = gain - design_db
            arith = gain - lin_db
            ideal_lsb = hd * peak * scale
            gated = design_db >= peak_db - range_db
            if not gated:
                notes.append(f"design more than {range_db:g} dB below its peak")
            elif lsb_out is not None and ideal_lsb < MIN_OUTPUT_LSB:
                gated = False
                notes.append(f"ideal output peak {ideal_lsb:.3g} LSB, below the {MIN_OUTPUT_LSB:g} LSB floor")
            if used < level - 1e-9:
                notes.append(f"level lowered from {level:g} dBFS so the ideal output peak stays at "
                             f"{OUTPUT_PEAK:g} of full scale")
            if ovf:
                notes.append(f"{ovf} data-word overflows during the tone")
            standard = None
            if row is not None:
                letter, blk = weightings[0]
                from ..design.weighting import analytic_db

                rest_db = design_db - _db(float(stage_h[letter][i]))
                ref = float(analytic_db(letter, f)) + rest_db
                dev = gain - ref
                upper, lower = float(row[3]), (None if row[4] is None else float(row[4]))
                # excess over the limits: > 0 outside, <= 0 inside (minus the margin)
                excess = max(dev - upper, -math.inf if lower is None else lower - dev)
                design_excess = max(design_db - ref - upper, -math.inf if lower is None else lower - design_db + ref)
                standard = {"weighting": letter, "reference_db": ref, "deviation_db": dev, "upper_db": upper,
                            "lower_db": lower, "excess_db": excess, "design_deviation_db": design_db - ref,
                            "design_outside": design_excess > 0, "ok": (not gated) or excess <= 0}
            fund_p = aout * aout / 2.0
            resid_db = 10.0 * math.log10(res_p / fund_p) if res_p > 0 and fund_p > 0 else -math.inf
            tones.append(ToneResult(f, used, gain, design_db, err, lin_db, arith, gated, "; ".join(notes), resid_db,
                                    None if lsb_out is None else dc, ovf, n, below, nominal, standard))
    gated = [t for t in tones if t.gated]
    worst = max(gated, key=lambda t: abs(t.arithmetic_error_db)) if gated else None
    fails = tuple(t for t in tones if t.standard is not None and not t.standard["ok"])
    notes = []
    if skipped:
        notes.append(f"no tone below {f_min:.3g} Hz (one period is longer than {MAX_WINDOW} samples): the "
                     f"response grid's {len(skipped)} lower points ({min(skipped):.3g} Hz up) are unproven by tones")
    if capped:
        notes.append(f"settling capped at {settle} samples: the slowest realised pole (radius {r:.6f}) had "
                     f"decayed to {residual:.2g} of its start, so figures near its frequency are unproven to that "
                     "extent")
    note = "; ".join(notes)
    return ToneAnalysis("measured", tuple(tones), None if worst is None else abs(worst.arithmetic_error_db), worst,
                        fails,
                        levels, range_db, settle, capped, r, residual, samples, note)
