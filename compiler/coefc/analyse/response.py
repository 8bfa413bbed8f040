"""Coefficient quantisation: a float design and its realised program in, response errors out.

The realised response is that of the exact physical values of the quantised
coefficients (:func:`coefc.blocks.as_float_blocks`), compared with the float
design on one frequency grid (:func:`grid`) that covers every band and every
frequency the description names:

* 2048 log-spaced frequencies from a decade below the lowest frequency named
  (stage edges, budget band edges above 0 Hz; at most 10 Hz and fs/4800) up to
  Nyquist;
* a linear grid over 0..Nyquist with at least 32 points per 1/N of the sample
  rate for the channel's total FIR length N (every FIR stopband lobe sampled 32
  times; at least 2048 points, at most 2^16);
* every stage edge and band edge itself, and inside each budget band 512
  log-spaced and at least 512 linear points (denser for long FIRs, as above).

0 Hz is represented by the lowest grid frequency (at most fs * 1e-6 when a band
starts at 0 Hz), so every array stays plottable on a log axis.

Bands (the rules, stated once):

* passband: the ``passband`` bands of the budget when given; otherwise every grid
  frequency where the float design is within ``passband_threshold_db`` (3 dB) of
  its peak;
* stopband: the ``stopband`` bands of the budget when given; otherwise every grid
  frequency where the float design is at least ``stopband_threshold_db`` (40 dB)
  below its peak.  Stopband attenuation is the quantised passband peak minus the
  largest quantised level in the stopband.

Pole and zero displacement pair every realised root with a design root
(minimum total distance, :func:`scipy.optimize.linear_sum_assignment`) and report
the largest distance in the z-plane.

References
----------
A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed., sec. 6.8
(effects of coefficient quantisation).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..blocks import ChannelDesign, FirBlock, SosBlock, chain_response
from ..program import section_transfer, ChannelProgram, SectionOp

GRID_POINTS = 2048
F_MIN_HZ = 10.0
#: Points per 1/N of the sample rate (N: the channel's FIR taps) on the linear grid.
FIR_POINTS_PER_LOBE = 32
MAX_LINEAR_POINTS = 1 << 16
BAND_POINTS = 512


@dataclass(frozen=True, eq=False)
class ResponseAnalysis:
    freqs_hz: np.ndarray
    float_db: np.ndarray
    quantised_db: np.ndarray
    passband_deviation_db: float | None
    stopband_attenuation_db: float | None
    float_stopband_attenuation_db: float | None
    passband_rule: str
    stopband_rule: str
    max_pole_radius: float
    stable: bool
    pole_displacement: float | None
    zero_displacement: float | None
    passband_mask: np.ndarray | None = None  # where passband_deviation_db was measured
    stopband_mask: np.ndarray | None = None  # where stopband_attenuation_db was measured


def grid(fs: float, points: int = GRID_POINTS, *, edges_hz=(), bands=(), fir_taps: int = 0) -> np.ndarray:
    """The response grid: sorted, unique frequencies in (0, fs/2] covering every band and edge.

    Parameters
    ----------
    fs : float
        Sample rate in Hz.
    points : int
        Log-spaced points from the lowest frequency to Nyquist.
    edges_hz : sequence of float
        Frequencies the stages name (cutoffs, centres, band edges).
    bands : sequence of (lo, hi)
        Bands to be checked (the budget's passband and stopband bands).
    fir_taps : int
        Total FIR length of the channel: the linear grid samples each 1/N of the
        sample rate ``FIR_POINTS_PER_LOBE`` times.
    """
    nyq = fs / 2.0
    named = [float(e) for e in edges_hz if 0 < float(e) <= nyq]
    named += [float(x) for b in bands for x in b if 0 < float(x) <= nyq]
    lo = min([F_MIN_HZ, fs / 4800.0] + [e / 10.0 for e in named])
    if any(float(b[0]) <= 0 for b in bands):
        lo = min(lo, fs * 1e-6)
    n_lin = int(min(MAX_LINEAR_POINTS, max(GRID_POINTS, FIR_POINTS_PER_LOBE * fir_taps)))
    parts = [np.geomspace(lo, nyq, points), np.linspace(0.0, nyq, n_lin + 1)[1:], np.array(named)]
    for b in bands:
        b_lo, b_hi = max(float(b[0]), lo), min(float(b[1]), nyq)
        if b_hi <= b_lo:
            continue
        n_band = int(min(MAX_LINEAR_POINTS, max(BAND_POINTS, FIR_POINTS_PER_LOBE * fir_taps * (b_hi - b_lo) / fs)))
        parts += [np.geomspace(b_lo, b_hi, BAND_POINTS), np.linspace(b_lo, b_hi, n_band)]
    f = np.unique(np.concatenate(parts))
    return f[(f > 0) & (f <= nyq)]


def _db(h: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.maximum(np.abs(h), 1e-300))


def _in_bands(f: np.ndarray, bands) -> np.ndarray:
    mask = np.zeros(f.shape, dtype=bool)
    for lo, hi in bands:
        mask |= (f >= float(lo)) & (f <= float(hi))
    return mask


def _match(a: np.ndarray, b: np.ndarray) -> float | None:
    if len(a) == 0 or len(b) == 0:
        return None
    from scipy.optimize import linear_sum_assignment

    d = np.abs(a[:, None] - b[None, :])
    r, c = linear_sum_assignment(d)
    return float(np.max(d[r, c])) if len(r) else None


def _roots(sos_rows, which):
    out = []
    for row in sos_rows:
        p = np.asarray(row[3:] if which == "poles" else row[:3], dtype=np.float64)
        p = np.trim_zeros(p, "b")
        if len(p) > 1 and p[0] != 0:
            out.extend(np.roots(p))
    return np.array(out, dtype=complex)


def analyse_response(design: ChannelDesign, program: ChannelProgram, *, passband=None, stopband=None,
                     passband_threshold_db: float = 3.0, stopband_threshold_db: float = 40.0,
                     points: int = GRID_POINTS) -> ResponseAnalysis:
    """Compare the realised (quantised) response with the float design.

    Returns the largest passband deviation |quantised - float| in dB, the achieved
    stopband attenuation, the largest pole radius, stability and root displacement.
    """
    from ..blocks import as_float_blocks

    from ..blocks import model_rate

    fs = float(design.sample_rate_hz)
    taps = sum(len(b.taps) for b in design.blocks if isinstance(b, FirBlock))
    # a multirate channel: the grid of its equivalent single-rate model (the highest rate it reaches)
    f = grid(model_rate(design.blocks, fs), points, edges_hz=design.edges_hz, bands=tuple(passband or ()) + tuple(stopband or ()),
             fir_taps=taps)
    hf = design.response(f)
    hq = chain_response(as_float_blocks(program), f, fs)
    df, dq = _db(hf), _db(hq)
    peak = float(np.max(df))
    if passband:
        pmask = _in_bands(f, passband)
        prule = "bands " + ", ".join(f"{lo:g}-{hi:g} Hz" for lo, hi in passband)
    else:
        pmask = df >= peak - passband_threshold_db
        prule = f"float design within {passband_threshold_db:g} dB of its peak"
    if stopband:
        smask = _in_bands(f, stopband)
        srule = "bands " + ", ".join(f"{lo:g}-{hi:g} Hz" for lo, hi in stopband)
    else:
        smask = df <= peak - stopband_threshold_db
        srule = f"float design at least {stopband_threshold_db:g} dB below its peak"
    dev = float(np.max(np.abs(dq[pmask] - df[pmask]))) if np.any(pmask) else None
    if np.any(smask):
        qpeak = float(np.max(dq[pmask])) if np.any(pmask) else float(np.max(dq))
        att = qpeak - float(np.max(dq[smask]))
        fatt = peak - float(np.max(df[smask]))
    else:
        att = fatt = None

    # roots: realised sections vs every second-order section of the design
    fc = None if program.arithmetic.is_float else program.arithmetic.coef.frac_bits
    rows_q = []
    for op in program.ops:
        if isinstance(op, SectionOp):
            bq, aq = section_transfer(op, program.arithmetic.coef if fc is not None else 0)
            rows_q.append(bq + aq)
    rows_f = [row for blk in design.blocks if isinstance(blk, SosBlock) for row in np.asarray(blk.sos)]
    pq, pf = _roots(rows_q, "poles"), _roots(rows_f, "poles")
    zq, zf = _roots(rows_q, "zeros"), _roots(rows_f, "zeros")
    radius = float(np.max(np.abs(pq))) if len(pq) else 0.0
    return ResponseAnalysis(f, df, dq, dev, att, fatt, prule, srule, radius, radius < 1.0,
                            _match(pq, pf), _match(zq, zf), pmask, smask)



@dataclass(frozen=True)
class AliasAnalysis:
    """What folds into the output passband of a multirate channel (:func:`alias_attenuation`)."""

    attenuation_db: float  # the smallest, over every band that folds into the output passband (realised)
    float_attenuation_db: float  # the same for the float design
    worst_hz: float  # where (at the higher rate) the smallest attenuation is
    folds_to_hz: float  # the passband frequency it lands on
    passband_rule: str
    low_rate_hz: float  # the rate whose multiples fold (the output rate of a decimator, the input rate of an interpolator)


def alias_attenuation(design: ChannelDesign, program: ChannelProgram, *, passband=None,
                      passband_threshold_db: float = 3.0, points: int = 1 << 15) -> AliasAnalysis | None:
    """The smallest attenuation over every band that folds into the output passband.

    At the lower rate ``fl`` of a channel (the output of a decimator, the input of an
    interpolator) a frequency ``f`` of the higher rate lands on ``|f - k fl|`` for the
    nearest multiple ``k fl``.  Every ``f`` above ``fl/2`` (up to half the higher rate)
    whose image lies in the passband is an alias (decimation) or an image
    (interpolation) of a passband frequency; the realised response of the channel's
    equivalent single-rate model (:func:`coefc.blocks.chain_response`) must keep it
    down.  The value is ``max(passband) - max(alias bands)`` in dB, on a dense
    linear grid plus the band edges ``k fl +- passband edges``.  ``None`` for a
    single-rate channel.

    References
    ----------
    R. E. Crochiere and L. R. Rabiner, *Multirate Digital Signal Processing*,
    Prentice-Hall, 1983, sec. 2.3-2.4 (aliasing in decimation, imaging in
    interpolation; from memory).
    """
    from ..blocks import as_float_blocks, model_rate

    fs = float(design.sample_rate_hz)
    top = model_rate(design.blocks, fs)
    low = min(fs, design.output_rate_hz)
    if top == low:
        return None
    fl = np.linspace(0.0, low / 2, 4097)
    if passband:
        pmask_low = _in_bands(fl, passband)
        bands = [(max(0.0, lo), min(hi, low / 2)) for lo, hi in passband if lo < low / 2]
        rule = "bands " + ", ".join(f"{lo:g}-{hi:g} Hz" for lo, hi in passband)
    else:
        dfl = _db(design.response(fl))
        pmask_low = dfl >= float(np.max(dfl)) - passband_threshold_db
        edges = np.flatnonzero(np.diff(pmask_low.astype(int)) != 0)
        bands = [(float(fl[0]), float(fl[-1]))] if not len(edges) else []
        start = 0.0 if pmask_low[0] else None
        for i in edges:
            if pmask_low[i + 1]:
                start = float(fl[i + 1])
            elif start is not None:
                bands.append((start, float(fl[i])))
                start = None
        if start is not None:
            bands.append((start, float(fl[-1])))
        rule = f"float design within {passband_threshold_db:g} dB of its peak below {low / 2:g} Hz"
    if not bands:
        return None
    extra = [k * low + s * e for k in range(1, int(top / low) + 1) for lo, hi in bands for e in (lo, hi)
             for s in (-1.0, 1.0)]
    f = np.unique(np.concatenate([np.linspace(low / 2, top / 2, points), np.array(extra)]))
    f = f[(f > low / 2) & (f <= top / 2)]
    r = np.mod(f, low)
    fold = np.minimum(r, low - r)
    amask = np.zeros(f.shape, dtype=bool)
    for lo, hi in bands:
        amask |= (fold >= lo - 1e-9) & (fold <= hi + 1e-9)
    if not np.any(amask):
        return None
    fp = np.unique(np.concatenate([np.linspace(b[0], b[1], 1024) for b in bands]))
    hq = _db(chain_response(as_float_blocks(program), np.concatenate([fp, f[amask]]), fs))
    hf = _db(design.response(np.concatenate([fp, f[amask]])))
    nq, nf = hq[len(fp):], hf[len(fp):]
    att = float(np.max(hq[:len(fp)])) - float(np.max(nq))
    fatt = float(np.max(hf[:len(fp)])) - float(np.max(nf))
    i = int(np.argmax(nq))
    return AliasAnalysis(att, fatt, float(f[amask][i]), float(fold[amask][i]), rule, low)
