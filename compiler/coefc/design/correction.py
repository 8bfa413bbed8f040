"""Corrections designed from a measurement: fitted EQ sections and a regularised inverse FIR.

Stage kinds ``correction`` and ``fir-correction``.  Both read a measured
magnitude response (:mod:`coefc.fileio.measurement`), optionally smooth it by a
fractional octave, and design a correction so that measurement x correction
follows a target over ``range_hz``: flat at the measurement's median level over
the range (default), flat at ``target_db``, or the curve of ``target``.

``correction``
    Fits up to ``sections`` Audio EQ Cookbook sections (peaking, and one low and
    one high shelf unless ``shelves = false``) plus a broadband gain by nonlinear
    least squares on the dB error over a logarithmic grid (48 points per octave)
    of ``range_hz`` (:func:`scipy.optimize.least_squares`, bounded: centre
    frequencies inside the range, each section's gain within
    ``-max_cut_db .. +max_boost_db``, Q within ``q_min .. q_max``, shelf slope
    within 0.3 .. 1).  Sections are placed greedily and deterministically: each
    step tries a peaking section at the largest remaining error (its Q from the
    error's half-height width) and, once each, a low and a high shelf; all
    sections are refitted together and the candidate with the smallest error is
    kept; the fit stops early when the RMS error is below 0.01 dB or a further
    section improves it by less than 1 % (or 0.005 dB).  The combined boost (and cut) of the whole correction is held
    within the limits by penalty terms over the whole band during the fit and then
    checked on a dense grid from 1 Hz to Nyquist; if the check still finds a
    boost above ``max_boost_db`` (or a cut below ``-max_cut_db``), every gain is
    scaled down together until it passes (all gains at zero always pass).
``fir-correction``
    A regularised inverse of the measured magnitude on an FFT grid,
    ``X = (C + beta X0) / (C^2 + beta)`` with ``C`` the measured magnitude relative
    to the target, ``X0`` the correction's median level over the range, and a
    frequency-dependent regularisation ``beta``: ``regularisation_db`` (default
    -30 dB) inside ``range_hz``, rising to +20 dB over ``transition_oct``
    (default 1/3 octave, raised cosine in dB over log frequency) outside it, so
    the correction leaves the response alone (apart from the level) where it was
    not asked to act.  ``X`` is clipped at ``max_boost_db``.  The FIR is minimum
    phase by default (the real-cepstrum method: fold the cepstrum of ``log X``),
    or linear phase (``phase = "linear"``: frequency sampling with a delay of
    ``(taps - 1)/2`` samples and a Hann window).

Both corrections act on the magnitude only; a measured phase (CSV column or WAV
impulse response) is read and validated but not corrected.

References
----------
R. Bristow-Johnson, "Cookbook formulae for audio EQ biquad filter coefficients"
(the Audio EQ Cookbook): the peaking and shelving sections.
O. Kirkeby, P. A. Nelson, H. Hamada & F. Orduna-Bustamante, "Fast deconvolution
of multichannel systems using regularization", IEEE Trans. Speech and Audio
Processing 6(2), 189-194, 1998 (from memory): the regularised inverse
``C* / (C* C + beta)`` with frequency-dependent ``beta``; here with a prior
``X0`` (Tikhonov regularisation towards the level, minimising
``|C X - 1|^2 + beta |X - X0|^2``).
A. V. Oppenheim & R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
ch. 13 (minimum phase from the real cepstrum).
M. A. Branch, T. F. Coleman & Y. Li, "A subspace, interior, and conjugate gradient
method for large-scale bound-constrained minimization problems", SIAM J. Sci.
Comput. 21(1), 1999 (the trust-region reflective method of ``least_squares``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..blocks import FirBlock, GainBlock, SosBlock
from ..fileio.measurement import Measurement, MeasurementError, log_axis, read_measurement, smooth_fractional_octave
from ..stagekinds import MAX_CORRECTION_SECTIONS, MAX_FIR_TAPS
from .eq import cookbook_biquad
from .stage import StageContext, StageResult

#: Points per octave of the fit grid over ``range_hz``.
FIT_POINTS_PER_OCTAVE = 48
#: Defaults of the ``correction`` keys.
DEFAULT_SECTIONS = 6
DEFAULT_MAX_BOOST_DB = 0.0
DEFAULT_MAX_CUT_DB = 12.0
DEFAULT_Q_MIN = 0.5
DEFAULT_Q_MAX = 8.0
#: Largest Q accepted (beyond it a "correction" chases measurement detail, not a stable flaw).
MAX_Q = 30.0
#: Shelf slope bounds (cookbook S; 1 is the steepest shelf without overshoot).
SLOPE_MIN, SLOPE_MAX = 0.3, 1.0
#: A fitted section whose gain is below this (dB) is dropped.
MIN_SECTION_GAIN_DB = 0.05
#: The fit adds no further section once the RMS error is below this (dB), or a section would gain less than half of it.
STOP_RMS_DB = 0.01
#: Slack of the dense-grid boost and cut check (dB).
LIMIT_SLACK_DB = 0.01
#: Defaults of the ``fir-correction`` keys.
DEFAULT_REGULARISATION_DB = -30.0
OUTSIDE_REGULARISATION_DB = 20.0
DEFAULT_TRANSITION_OCT = 1.0 / 3.0


@dataclass(frozen=True)
class Section:
    """One fitted cookbook section: kind, frequency (Hz), gain (dB) and Q (peaking) or slope (shelves)."""

    kind: str
    freq_hz: float
    gain_db: float
    shape: float

    def alpha(self, fs: float) -> float:
        w0 = 2 * math.pi * self.freq_hz / fs
        if self.kind == "peaking":
            return math.sin(w0) / (2 * self.shape)
        a = 10 ** (self.gain_db / 40)
        return math.sin(w0) / 2 * math.sqrt((a + 1 / a) * (1 / self.shape - 1) + 2)

    def row(self, fs: float) -> np.ndarray:
        return cookbook_biquad(self.kind, self.freq_hz, fs, self.alpha(fs), self.gain_db)

    def describe(self) -> str:
        what = f"Q {self.shape:.3g}" if self.kind == "peaking" else f"slope {self.shape:.3g}"
        return f"{self.kind} {self.freq_hz:.5g} Hz, {what}, {self.gain_db:+.2f} dB"


# ---------------------------------------------------------------- the measurement, target and grid


@dataclass(frozen=True, eq=False)
class Problem:
    """What both corrections start from: the smoothed measurement and the target."""

    measurement: Measurement
    smoothed_f: np.ndarray  # log axis over the measured span
    smoothed_db: np.ndarray
    range_hz: tuple[float, float]
    grid: np.ndarray  # fit grid over range_hz
    measured: np.ndarray  # dB on grid
    target: np.ndarray  # dB on grid
    target_text: str
    smoothing_text: str
    inputs: tuple[tuple[str, str], ...] = ()  # (file as the description names it, sha256)

    def measured_at(self, f) -> np.ndarray:
        """Smoothed measured dB at *f*, held constant beyond the measured span."""
        f = np.clip(np.asarray(f, dtype=float), self.smoothed_f[0], self.smoothed_f[-1])
        return np.interp(np.log(f), np.log(self.smoothed_f), self.smoothed_db)

    def target_at(self, f) -> np.ndarray:
        """Target dB at *f*, held at its edge values beyond range_hz."""
        f = np.clip(np.asarray(f, dtype=float), self.grid[0], self.grid[-1])
        return np.interp(np.log(f), np.log(self.grid), self.target)


def _read(ctx: StageContext, key: str) -> Measurement:
    try:
        return read_measurement(ctx.source, ctx.params[key], ctx.fs)
    except MeasurementError as e:
        raise ctx.error(str(e), key) from None


def load_problem(ctx: StageContext) -> Problem:
    """Read, smooth and check the stage's measurement and target (errors placed at the stage's keys)."""
    ctx.require("measurement", "name the measured response, e.g. measurement = \"woofer.csv\" (a path relative "
                "to this description)")
    lo, hi = ctx.require("range_hz", "give the band to correct, e.g. range_hz = [40, 2000]")
    if hi / lo < 2 ** (1 / 3):
        raise ctx.error(f"[{lo:g}, {hi:g}] Hz is narrower than 1/3 octave; a correction needs a wider range",
                        "range_hz")
    m = _read(ctx, "measurement")
    if not m.covers(lo, hi):
        raise ctx.error(f"{m.path} spans {m.freqs_hz[0]:g}..{m.freqs_hz[-1]:g} Hz, which does not cover range_hz "
                        f"[{lo:g}, {hi:g}]; narrow range_hz to the measured span", "range_hz")
    width = float(ctx.get("smoothing_oct", 0.0))
    if width > 2:
        raise ctx.error(f"{width:g} octaves is wider than smoothing is useful for; use at most 2 (1/6 octave is "
                        "0.1667)", "smoothing_oct")
    sf, sdb = smooth_fractional_octave(m.freqs_hz, m.magnitude_db, width)
    grid = log_axis(lo, hi, FIT_POINTS_PER_OCTAVE)
    measured = np.interp(np.log(grid), np.log(sf), sdb)
    shape = np.zeros(grid.shape)
    inputs = [(ctx.params["measurement"], m.sha256)]
    if ctx.has("target"):
        t = _read(ctx, "target")
        inputs.append((ctx.params["target"], t.sha256))
        if not t.covers(lo, hi):
            raise ctx.error(f"{t.path} spans {t.freqs_hz[0]:g}..{t.freqs_hz[-1]:g} Hz, which does not cover "
                            f"range_hz [{lo:g}, {hi:g}]; extend the target curve or narrow range_hz", "target")
        shape = t.magnitude_at(grid)
        shape = shape - np.median(shape)
    if ctx.has("target_db"):
        level = float(ctx.params["target_db"])
        level_text = f"{level:g} dB"
    else:
        level = float(np.median(measured))
        level_text = f"the measurement's median {level:.2f} dB"
    target = shape + level
    target_text = (f"curve {t.path} with its median at {level_text}" if ctx.has("target")
                   else f"flat at {level_text}")
    smoothing_text = f"{_octave_text(width)} smoothing" if width > 0 else "unsmoothed"
    return Problem(m, sf, sdb, (float(lo), float(hi)), grid, measured, target, target_text, smoothing_text,
                   tuple(inputs))


def _octave_text(width: float) -> str:
    inv = 1 / width
    return f"1/{inv:.0f}-octave" if abs(inv - round(inv)) < 0.01 * inv else f"{width:g}-octave"


def dense_grid(fs: float) -> np.ndarray:
    """Where the combined boost and cut are checked: 1 Hz to just below Nyquist, log and linear points."""
    nyq = fs / 2
    return np.unique(np.concatenate([np.geomspace(1.0, nyq * 0.9999, 96 * int(math.ceil(math.log2(nyq))) + 1),
                                     np.linspace(0.0, nyq, 4097)[1:-1]]))


# ---------------------------------------------------------------- the fitted EQ


def _section_db(kind: str, f0: float, gain: float, shape: float, fs: float, zinv: np.ndarray) -> np.ndarray:
    row = Section(kind, f0, gain, shape).row(fs)
    num = row[0] + zinv * (row[1] + zinv * row[2])
    den = 1.0 + zinv * (row[4] + zinv * row[5])
    return 20 * np.log10(np.maximum(np.abs(num / den), 1e-300))


def correction_db(sections, level_db: float, freqs_hz, fs: float) -> np.ndarray:
    """The correction's magnitude (dB) at *freqs_hz*: every section plus the broadband level."""
    zinv = np.exp(-2j * np.pi * np.asarray(freqs_hz, dtype=float) / fs)
    out = np.full(zinv.shape, float(level_db))
    for s in sections:
        out = out + _section_db(s.kind, s.freq_hz, s.gain_db, s.shape, fs, zinv)
    return out


class _Fit:
    """The bounded least-squares problem over a fixed list of section kinds."""

    def __init__(self, prob: Problem, fs: float, lim: dict) -> None:
        self.prob, self.fs, self.lim = prob, fs, lim
        self.want = prob.target - prob.measured  # the correction asked for, dB on the grid
        self.zgrid = np.exp(-2j * np.pi * prob.grid / fs)
        nyq = fs / 2
        self.pen_f = np.geomspace(1.0, nyq * 0.999, 12 * int(math.ceil(math.log2(nyq))) + 1)
        self.zpen = np.exp(-2j * np.pi * self.pen_f / fs)
        self.scale = 1 / math.sqrt(prob.grid.size)

    # parameter vector: level, then per section (log f, gain, log shape)
    def bounds(self, kinds):
        lo, hi = self.prob.range_hz
        lb, ub = [-self.lim["cut"]], [self.lim["boost"]]
        for k in kinds:
            s_lo, s_hi = (self.lim["q_min"], self.lim["q_max"]) if k == "peaking" else (SLOPE_MIN, SLOPE_MAX)
            lb += [math.log(lo), -self.lim["cut"], math.log(s_lo)]
            ub += [math.log(hi), self.lim["boost"], math.log(s_hi)]
        return np.array(lb), np.array(ub)

    @staticmethod
    def sections(kinds, x) -> list[Section]:
        return [Section(k, math.exp(x[1 + 3 * i]), float(x[2 + 3 * i]), math.exp(x[3 + 3 * i]))
                for i, k in enumerate(kinds)]

    def _curve(self, kinds, x, zinv) -> np.ndarray:
        out = np.full(zinv.shape, float(x[0]))
        for s in self.sections(kinds, x):
            out = out + _section_db(s.kind, s.freq_hz, s.gain_db, s.shape, self.fs, zinv)
        return out

    def residuals(self, x, kinds) -> np.ndarray:
        err = (self._curve(kinds, x, self.zgrid) - self.want) * self.scale
        pen = self._curve(kinds, x, self.zpen)
        over = np.maximum(pen - self.lim["boost"], 0.0)
        under = np.maximum(-self.lim["cut"] - pen, 0.0)
        return np.concatenate([err, 10.0 * over, 10.0 * under])

    def solve(self, kinds, x0):
        from scipy.optimize import least_squares

        lb, ub = self.bounds(kinds)
        span = ub - lb
        x0 = np.clip(np.asarray(x0, dtype=float), lb + 1e-6 * span, ub - 1e-6 * span)
        res = least_squares(self.residuals, x0, bounds=(lb, ub), args=(kinds,), method="trf",
                            tr_solver="lsmr" if len(x0) > 2 else "exact",
                            x_scale=np.maximum(span, 1e-3) / 4, max_nfev=200 * (1 + len(x0)))
        return res.x, float(np.sqrt(np.mean((self._curve(kinds, res.x, self.zgrid) - self.want) ** 2)))

    def remaining(self, kinds, x) -> np.ndarray:
        return self.want - self._curve(kinds, x, self.zgrid)


def _peak_guess(fit: _Fit, r: np.ndarray) -> tuple[float, float, float]:
    """A peaking section at the largest remaining error; Q from the error's half-height width."""
    g = fit.prob.grid
    i = int(np.argmax(np.abs(r)))
    peak = float(r[i])
    half = abs(peak) / 2
    j, k = i, i
    while j > 0 and np.sign(r[j - 1]) == np.sign(peak) and abs(r[j - 1]) > half:
        j -= 1
    while k < r.size - 1 and np.sign(r[k + 1]) == np.sign(peak) and abs(r[k + 1]) > half:
        k += 1
    bw = max(math.log2(g[k] / g[j]), 1 / FIT_POINTS_PER_OCTAVE)
    q = 1 / (2 * math.sinh(math.log(2) / 2 * bw))  # the bandwidth-Q relation of the cookbook (analog form)
    return float(g[i]), peak, q


def fit_sections(prob: Problem, fs: float, n_max: int, *, max_boost_db: float, max_cut_db: float,
                 q_min: float, q_max: float, shelves: bool = True) -> tuple[list[Section], float, float]:
    """Fit up to *n_max* cookbook sections and a broadband level so measured + correction follows the target.

    Returns ``(sections, level_db, rms_error_db)``; deterministic (no random starts).

    References
    ----------
    R. Bristow-Johnson, Audio EQ Cookbook; Branch, Coleman & Li (1999), the
    trust-region reflective method of :func:`scipy.optimize.least_squares`.
    """
    lim = {"boost": max_boost_db, "cut": max_cut_db, "q_min": q_min, "q_max": q_max}
    fit = _Fit(prob, fs, lim)
    lo, hi = prob.range_hz
    level0 = float(np.clip(np.median(fit.want), -max_cut_db, max_boost_db))
    kinds: list[str] = []
    x = np.array([level0])
    x, rms = fit.solve(kinds, x)
    for _ in range(n_max):
        if rms < STOP_RMS_DB:
            break
        r = fit.remaining(kinds, x)
        cands = []
        f0, g0, q0 = _peak_guess(fit, r)
        cands.append(("peaking", [math.log(f0), g0, math.log(min(max(q0, q_min), q_max))]))
        if shelves:
            octave = prob.grid <= lo * 2
            if "lowshelf" not in kinds:
                cands.append(("lowshelf", [math.log(min(lo * 2, hi)), float(np.mean(r[octave])), math.log(SLOPE_MAX)]))
            top = prob.grid >= hi / 2
            if "highshelf" not in kinds:
                cands.append(("highshelf", [math.log(max(hi / 2, lo)), float(np.mean(r[top])), math.log(SLOPE_MAX)]))
        best = None
        for kind, guess in cands:
            trial_kinds = kinds + [kind]
            xt, rt = fit.solve(trial_kinds, np.concatenate([x, guess]))
            if best is None or rt < best[2] - 1e-12:
                best = (trial_kinds, xt, rt)
        if best[2] > rms * 0.99 or rms - best[2] < STOP_RMS_DB / 2:
            break
        kinds, x, rms = best
    sections = [s for s in fit.sections(kinds, x) if abs(s.gain_db) >= MIN_SECTION_GAIN_DB]
    level = float(x[0])
    sections, level = _hold_limits(sections, level, fs, max_boost_db, max_cut_db)
    final = correction_db(sections, level, prob.grid, fs)
    rms = float(np.sqrt(np.mean((prob.measured + final - prob.target) ** 2)))
    return sorted(sections, key=lambda s: s.freq_hz), level, rms


def _within(sections, level, fs, boost, cut) -> bool:
    c = correction_db(sections, level, dense_grid(fs), fs)
    return float(np.max(c)) <= boost + LIMIT_SLACK_DB and float(np.min(c)) >= -cut - LIMIT_SLACK_DB


def _hold_limits(sections, level, fs, boost, cut):
    """Scale every gain (sections and level) together until the dense-grid check passes.

    At scale 0 the correction is flat 0 dB, which always passes; the scale is
    searched downwards in steps of 1 % (deterministic)."""
    if _within(sections, level, fs, boost, cut):
        return list(sections), level
    for k in range(99, -1, -1):
        a = k / 100
        trial = [Section(s.kind, s.freq_hz, s.gain_db * a, s.shape) for s in sections]
        if _within(trial, level * a, fs, boost, cut):
            return [s for s in trial if abs(s.gain_db) >= MIN_SECTION_GAIN_DB], level * a
    return [], 0.0  # not reached: scale 0 passes


def _limit_q(ctx: StageContext) -> tuple[float, float]:
    q_min = float(ctx.get("q_min", DEFAULT_Q_MIN))
    q_max = float(ctx.get("q_max", max(DEFAULT_Q_MAX, q_min)))
    if q_max > MAX_Q:
        raise ctx.error(f"Q {q_max:g} is beyond what a correction of a stable flaw needs; use at most {MAX_Q:g}",
                        "q_max")
    if q_min >= q_max:
        raise ctx.error(f"q_min {q_min:g} must be below q_max {q_max:g}; widen the Q range", "q_min")
    return q_min, q_max


def _curves(prob: Problem, corr_on_grid: np.ndarray) -> dict:
    """The curves the HTML report overlays (on the fit grid): measured (smoothed), target and correction, dB."""
    r = lambda a: [round(float(x), 4) for x in a]  # noqa: E731
    return {"freq_hz": r(prob.grid), "measured_db": r(prob.measured), "target_db": r(prob.target),
            "correction_db": r(corr_on_grid)}


def _report(prob: Problem, corr_on_grid: np.ndarray, dense_f: np.ndarray, dense_c: np.ndarray,
            max_boost_db: float) -> tuple[float, float, float, float, list[str]]:
    err = prob.measured + corr_on_grid - prob.target
    e_max = float(np.max(np.abs(err)))
    e_rms = float(np.sqrt(np.mean(err ** 2)))
    i = int(np.argmax(dense_c))
    boost, at = float(dense_c[i]), float(dense_f[i])
    warnings = []
    if boost > 0.005:
        warnings.append(f"the correction boosts by up to {boost:+.2f} dB near {at:.0f} Hz (limit "
                        f"{max_boost_db:g} dB): that costs {boost:.2f} dB of headroom and raises driver excursion "
                        "and heating there; keep within the transducer's excursion and thermal limits and the "
                        "product's own safety limits")
    return e_max, e_rms, boost, at, warnings


def design_correction(ctx: StageContext) -> StageResult:
    """``correction``: cookbook sections fitted to a measurement (see the module docstring)."""
    prob = load_problem(ctx)
    n = int(ctx.get("sections", DEFAULT_SECTIONS))
    if n > MAX_CORRECTION_SECTIONS:
        raise ctx.error(f"{n} sections; a correction may fit at most {MAX_CORRECTION_SECTIONS}", "sections")
    boost = float(ctx.get("max_boost_db", DEFAULT_MAX_BOOST_DB))
    cut = float(ctx.get("max_cut_db", DEFAULT_MAX_CUT_DB))
    for key, v in (("max_boost_db", boost), ("max_cut_db", cut)):
        if v > 24:
            raise ctx.error(f"{v:g} dB; a correction may boost or cut at most 24 dB", key)
    q_min, q_max = _limit_q(ctx)
    sections, level, _ = fit_sections(prob, ctx.fs, n, max_boost_db=boost, max_cut_db=cut, q_min=q_min,
                                      q_max=q_max, shelves=bool(ctx.get("shelves", True)))
    df = dense_grid(ctx.fs)
    dc = correction_db(sections, level, df, ctx.fs)
    on_grid = correction_db(sections, level, prob.grid, ctx.fs)
    e_max, e_rms, big, at, warnings = _report(prob, on_grid, df, dc, boost)
    lo, hi = prob.range_hz
    text = (f"correction of {prob.measurement.path} ({prob.smoothing_text}) over {lo:g}-{hi:g} Hz, target "
            f"{prob.target_text}: {len(sections)} section{'s' if len(sections) != 1 else ''}"
            + (f", level {level:+.2f} dB" if abs(level) >= 0.005 else "")
            + f"; residual max {e_max:.2f} dB, RMS {e_rms:.2f} dB; largest boost {big:+.2f} dB")
    details = tuple(s.describe() for s in sections) + \
        ((f"gain {level:+.2f} dB",) if abs(level) >= 0.005 else ())
    blocks = []
    if sections:
        blocks.append(SosBlock(np.array([s.row(ctx.fs) for s in sections]), label="correction: "
                               + "; ".join(s.describe() for s in sections)))
    if abs(level) >= 0.005 or not sections:
        blocks.append(GainBlock(10 ** (level / 20), label=f"correction level {level:+.2f} dB"))
    requirement = {"range_hz": [lo, hi], "target": prob.target_text, "smoothing": prob.smoothing_text,
                   "max_boost_db": boost, "max_cut_db": cut,
                   "residual_max_db": e_max, "residual_rms_db": e_rms,
                   "largest_boost_db": big, "largest_boost_hz": at,
                   "sections": [{"kind": s.kind, "freq_hz": s.freq_hz, "gain_db": s.gain_db,
                                 ("q" if s.kind == "peaking" else "slope"): s.shape} for s in sections],
                   "level_db": level, "curves": _curves(prob, on_grid),
                   "inputs": [{"file": n, "sha256": h} for n, h in prob.inputs]}
    return StageResult(blocks=tuple(blocks), text=text, order=2 * len(sections), sections=len(sections),
                       warnings=tuple(warnings), requirement=requirement, details=details)


# ---------------------------------------------------------------- the regularised inverse FIR


def regularisation(f: np.ndarray, range_hz: tuple[float, float], inside_db: float, transition_oct: float) -> np.ndarray:
    """beta(f): ``inside_db`` within range_hz, rising (raised cosine in dB over log f) to +20 dB outside."""
    lo, hi = range_hz
    with np.errstate(divide="ignore"):
        lf = np.log2(np.maximum(f, 1e-12))
    d = np.maximum(np.maximum(math.log2(lo) - lf, lf - math.log2(hi)), 0.0)
    w = 0.5 - 0.5 * np.cos(np.pi * np.minimum(d / transition_oct, 1.0))
    return 10 ** ((inside_db + (OUTSIDE_REGULARISATION_DB - inside_db) * w) / 10)


def minimum_phase_fir(mag: np.ndarray, taps: int) -> np.ndarray:
    """Minimum-phase FIR of *taps* taps whose magnitude approximates *mag* (rfft grid, DC..Nyquist).

    References
    ----------
    A. V. Oppenheim & R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
    sec. 13.8 (the real cepstrum folded onto positive quefrencies).
    """
    nfft = 2 * (mag.size - 1)
    cep = np.fft.irfft(np.log(np.maximum(mag, 1e-12)), nfft)
    fold = np.zeros(nfft)
    fold[0] = cep[0]
    fold[1:nfft // 2] = 2 * cep[1:nfft // 2]
    fold[nfft // 2] = cep[nfft // 2]
    h = np.fft.irfft(np.exp(np.fft.rfft(fold)), nfft)[:taps]
    fade = max(1, taps // 8)
    h[taps - fade:] *= 0.5 + 0.5 * np.cos(np.pi * (np.arange(1, fade + 1)) / (fade + 1))
    return h


def linear_phase_fir(mag: np.ndarray, taps: int) -> np.ndarray:
    """Linear-phase FIR of *taps* taps by frequency sampling of *mag* with a Hann window (end points kept nonzero)."""
    nfft = 2 * (mag.size - 1)
    w = np.pi * np.arange(mag.size) / (mag.size - 1)
    h = np.fft.irfft(mag * np.exp(-1j * w * (taps - 1) / 2), nfft)[:taps]
    win = np.hanning(taps + 2)[1:-1]
    h = h * win
    return (h + h[::-1]) / 2  # exactly symmetric


def design_fir_correction(ctx: StageContext) -> StageResult:
    """``fir-correction``: a regularised inverse FIR of a measurement (see the module docstring)."""
    prob = load_problem(ctx)
    taps = int(ctx.require("taps", "give the FIR length, e.g. taps = 512"))
    if taps > MAX_FIR_TAPS:
        raise ctx.error(f"{taps} taps is too many; use at most {MAX_FIR_TAPS}", "taps")
    if taps < 8:
        raise ctx.error(f"{taps} taps cannot correct anything; use at least 8", "taps")
    phase = ctx.get("phase", "minimum")
    boost = float(ctx.get("max_boost_db", DEFAULT_MAX_BOOST_DB))
    if boost > 24:
        raise ctx.error(f"{boost:g} dB; a correction may boost at most 24 dB", "max_boost_db")
    reg_db = float(ctx.get("regularisation_db", DEFAULT_REGULARISATION_DB))
    if not -80 <= reg_db <= 20:
        raise ctx.error(f"{reg_db:g} dB is outside -80..20 dB; use e.g. -30", "regularisation_db")
    trans = float(ctx.get("transition_oct", DEFAULT_TRANSITION_OCT))
    if trans > 4:
        raise ctx.error(f"{trans:g} octaves; use at most 4", "transition_oct")
    nfft = max(16384, 1 << int(math.ceil(math.log2(16 * taps))))
    f = np.fft.rfftfreq(nfft, 1 / ctx.fs)
    fpos = np.maximum(f, f[1] / 2)
    rel = 10 ** ((prob.measured_at(fpos) - prob.target_at(fpos)) / 20)  # measurement relative to the target
    x0 = 10 ** (float(np.median(prob.target - prob.measured)) / 20)
    beta = regularisation(fpos, prob.range_hz, reg_db, trans)
    want = (rel + beta * x0) / (rel ** 2 + beta)
    want = np.minimum(want, 10 ** (boost / 20))
    h = minimum_phase_fir(want, taps) if phase == "minimum" else linear_phase_fir(want, taps)
    from scipy import signal

    df = dense_grid(ctx.fs)
    dc = 20 * np.log10(np.maximum(np.abs(signal.freqz(h, 1.0, worN=df, fs=ctx.fs)[1]), 1e-300))
    lowered = 0.0
    if float(np.max(dc)) > boost + LIMIT_SLACK_DB:
        lowered = float(np.max(dc)) - boost
        h = h * 10 ** (-lowered / 20)
        dc = dc - lowered
    on_grid = 20 * np.log10(np.maximum(np.abs(signal.freqz(h, 1.0, worN=prob.grid, fs=ctx.fs)[1]), 1e-300))
    e_max, e_rms, big, at, warnings = _report(prob, on_grid, df, dc, boost)
    if lowered:
        warnings.append(f"the FIR's ripple rose {lowered:.2f} dB above max_boost_db; the whole correction was "
                        f"lowered by {lowered:.2f} dB to keep within it")
    lo, hi = prob.range_hz
    latency = (taps - 1) / 2 if phase == "linear" else 0.0
    text = (f"FIR correction of {prob.measurement.path} ({prob.smoothing_text}) over {lo:g}-{hi:g} Hz, target "
            f"{prob.target_text}: {taps} taps, {phase} phase, regularisation {reg_db:g} dB in range; residual max "
            f"{e_max:.2f} dB, RMS {e_rms:.2f} dB; largest boost {big:+.2f} dB")
    requirement = {"range_hz": [lo, hi], "target": prob.target_text, "smoothing": prob.smoothing_text,
                   "max_boost_db": boost, "phase": phase, "regularisation_db": reg_db,
                   "residual_max_db": e_max, "residual_rms_db": e_rms,
                   "largest_boost_db": big, "largest_boost_hz": at, "curves": _curves(prob, on_grid),
                   "inputs": [{"file": n, "sha256": h} for n, h in prob.inputs]}
    return StageResult(blocks=(FirBlock(h, label=f"fir-correction {taps} taps, {phase} phase"),), text=text,
                       order=taps - 1, taps=taps, latency_samples=latency, warnings=tuple(warnings),
                       requirement=requirement)
