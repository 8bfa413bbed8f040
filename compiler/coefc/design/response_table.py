"""Response tables: a ChannelDesign and frequencies in, magnitude/phase/group delay out.

Also builds the JSON-ready summary of a channel that ``coefc design --json`` writes.

Group delay is computed per block and summed (delays add along a cascade): for a
second-order section, from its zeros and poles, each root ``r e^{j phi}`` of a
factor ``1 - r e^{j phi} z^-1`` contributing
``(r^2 - r cos(w - phi)) / (1 - 2 r cos(w - phi) + r^2)`` samples (a zero on the
unit circle contributes exactly 1/2 sample, its limit); poles contribute the
negative.  A linear-phase FIR of N taps has (N - 1)/2 samples; any other FIR uses
``Re(sum k h[k] e^{-jwk} / H(w))``.  This is exact where scipy's
``group_delay`` warns about singular points.

References
----------
A. V. Oppenheim & R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
sec. 5.1.2 and 5.3 (group delay of first-order factors).
"""

from __future__ import annotations

import math

import numpy as np

from ..blocks import ChannelDesign, DelayBlock, FirBlock, GainBlock, RateBlock, SosBlock  # noqa: F401

#: Nominal octave-band centre frequencies (IEC 61260-1 base-ten series, nominal values).
OCTAVE_CENTRES_HZ = (31.5, 63.0, 125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0, 16000.0,
                     31500.0, 63000.0, 125000.0)


def default_freqs(fs: float) -> tuple[float, ...]:
    """Octave centres below Nyquist."""
    return tuple(f for f in OCTAVE_CENTRES_HZ if f < fs / 2)


def _root_delay(roots: np.ndarray, w: np.ndarray) -> np.ndarray:
    tau = np.zeros_like(w)
    for z0 in roots:
        r = abs(z0)
        if r == 0.0:
            continue
        if abs(r - 1.0) < 1e-12:
            tau += 0.5
            continue
        u = w - np.angle(z0)
        c = np.cos(u)
        tau += (r * r - r * c) / (1.0 - 2.0 * r * c + r * r)
    return tau


def _poly_delay(coefs: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Group delay (samples) of the polynomial sum c_k z^-k."""
    c = np.asarray(coefs, dtype=float)
    nz = np.flatnonzero(c)
    if nz.size == 0:
        return np.full_like(w, np.nan)
    lead = int(nz[0])
    c = c[lead:]
    roots = np.roots(c) if len(np.trim_zeros(c, "b")) > 1 else np.zeros(0)
    return lead + _root_delay(roots, w)


def _fir_delay(taps: np.ndarray, w: np.ndarray) -> np.ndarray:
    n = len(taps)
    if np.allclose(taps, taps[::-1], rtol=0, atol=1e-15) or np.allclose(taps, -taps[::-1], rtol=0, atol=1e-15):
        return np.full_like(w, (n - 1) / 2)
    k = np.arange(n)
    e = np.exp(-1j * np.outer(w, k))
    h = e @ taps
    dh = e @ (k * taps)
    out = np.full_like(w, np.nan)
    ok = np.abs(h) > 1e-12 * max(1e-300, float(np.sum(np.abs(taps))))
    out[ok] = np.real(dh[ok] / h[ok])
    return out


def group_delay_samples(design: ChannelDesign, freqs_hz) -> np.ndarray:
    """Group delay of the whole channel in samples at *freqs_hz* (NaN where undefined)."""
    f = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
    fs = design.sample_rate_hz
    tau = np.zeros_like(f)
    for b in design.blocks:
        # a block after a rate change runs at its own rate: its delay in its own samples,
        # counted in samples of the channel input
        w, per = 2 * np.pi * f / fs, design.sample_rate_hz / fs
        if isinstance(b, SosBlock):
            for row in b.sos:
                tau += per * (_poly_delay(row[:3], w) - _poly_delay(row[3:], w))
        elif isinstance(b, FirBlock):
            tau += per * _fir_delay(np.asarray(b.taps, dtype=float), w)
        elif isinstance(b, DelayBlock):
            tau += per * b.samples
        elif isinstance(b, RateBlock):
            fs = fs * b.up / b.down
    return tau


def latency_samples(design: ChannelDesign) -> float:
    """Frequency-independent delay: integer delays plus linear-phase FIR bulk delay."""
    fs = design.sample_rate_hz  # a stage after a rate change counts its latency in its own samples
    return float(sum(s.latency_samples * (fs / s.rate_hz if s.rate_hz else 1.0) for s in design.stages))


def response_rows(design: ChannelDesign, freqs_hz) -> list[dict]:
    """One row per frequency: freq_hz, magnitude_db, phase_deg, group_delay_samples.

    Undefined values (magnitude of an exact null, group delay at a singular
    point) are ``None``.
    """
    f = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
    h = design.response(f)
    gd = group_delay_samples(design, f)
    rows = []
    for fi, hi, gi in zip(f, h, gd):
        mag = abs(hi)
        rows.append({
            "freq_hz": float(fi),
            "magnitude_db": float(20 * math.log10(mag)) if mag > 0 and math.isfinite(mag) else None,
            "phase_deg": float(math.degrees(math.atan2(hi.imag, hi.real))) if mag > 0 else None,
            "group_delay_samples": float(gi) if math.isfinite(gi) else None,
        })
    return rows


def channel_summary(design: ChannelDesign, freqs_hz) -> dict:
    """JSON-ready summary of one channel (the ``coefc design --json`` object)."""
    lat = latency_samples(design)
    return {
        "name": design.name,
        "sample_rate_hz": design.sample_rate_hz,
        "output_rate_hz": design.output_rate_hz,
        "latency_samples": lat,
        "latency_ms": lat / design.sample_rate_hz * 1e3,
        "sections": int(sum(s.sections for s in design.stages)),
        "fir_taps": int(sum(s.taps for s in design.stages)),
        "stages": [
            {"index": s.index, "kind": s.kind, "text": s.text, "order": s.order, "sections": s.sections,
             "taps": s.taps, "latency_samples": s.latency_samples, "rate_hz": s.rate_hz or design.sample_rate_hz,
             "requirement": dict(s.requirement) if s.requirement is not None else None,
             "details": list(s.details)}
            for s in design.stages
        ],
        "warnings": list(design.warnings),
        "response": response_rows(design, freqs_hz),
    }
