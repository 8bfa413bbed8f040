"""Coefficient quantisation: a float design and its realised program in, response errors out.

The realised response is that of the exact physical values of the quantised
coefficients (:func:`coefc.realise.as_float_blocks`), compared with the float
design on a log-spaced grid from 10 Hz to Nyquist.

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

from ..blocks import ChannelDesign, SosBlock, chain_response
from ..program import ChannelProgram, SectionOp

GRID_POINTS = 2048
F_MIN_HZ = 10.0


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


def grid(fs: float, points: int = GRID_POINTS) -> np.ndarray:
    """Log-spaced frequencies from 10 Hz (or fs/4800 when lower) up to Nyquist."""
    lo = min(F_MIN_HZ, fs / 4800.0)
    return np.geomspace(lo, fs / 2.0, points)


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
    from ..realise import as_float_blocks

    fs = float(design.sample_rate_hz)
    f = grid(fs, points)
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
            sc = 1.0 if fc is None else 2.0 ** (op.shift - fc)
            rows_q.append([float(c) * sc for c in op.b] + [1.0] + [float(c) * sc for c in op.a])
    rows_f = [row for blk in design.blocks if isinstance(blk, SosBlock) for row in np.asarray(blk.sos)]
    pq, pf = _roots(rows_q, "poles"), _roots(rows_f, "poles")
    zq, zf = _roots(rows_q, "zeros"), _roots(rows_f, "zeros")
    radius = float(np.max(np.abs(pq))) if len(pq) else 0.0
    return ResponseAnalysis(f, df, dq, dev, att, fatt, prule, srule, radius, radius < 1.0,
                            _match(pq, pf), _match(zq, zf))

