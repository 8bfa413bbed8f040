"""Time and level alignment of several ways from their impulse responses (``coefc align``).

Each impulse response (mono WAV, one sample rate for all) is compared with the
first one (the reference):

- **arrival**: the lag of the largest magnitude of the cross-correlation with the
  reference, found on whole samples and then refined to a fraction of a sample by
  evaluating the band-limited cross-correlation
  ``r(t) = sum_k X_k conj(R_k) e^{j w_k t}`` (the inverse DFT at a non-integer lag)
  on a grid of 1/64 sample around the peak, and a parabola through the best three
  points.  A negative peak means opposite polarity, which is reported.
- **level**: the mean power of the response over a band (``band_hz``), in dB.

The alignment delays every way to the latest arrival (delays are never negative)
and brings every way down to the quietest level (a correction never boosts).

References
----------
C. H. Knapp & G. C. Carter, "The generalized correlation method for estimation of
time delay", IEEE Trans. Acoust., Speech, Signal Process. 24(4), 320-327, 1976
(from memory): delay estimation by the peak of the cross-correlation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import DataError, setting
from ..fileio.measurement import MeasurementError, _read_bytes

#: Fraction of a sample of the fine search grid around the correlation peak.
FINE_STEP = 1 / 64


@dataclass(frozen=True)
class Arrival:
    """One impulse response: its arrival relative to the reference and its band level."""

    path: str
    lag_samples: float  # arrival minus the reference's arrival
    inverted: bool
    level_db: float


def read_ir(path: str) -> tuple[np.ndarray, float]:
    """A mono WAV impulse response as floats and its sample rate (errors: :class:`DataError`)."""
    import io
    import warnings
    from pathlib import Path

    from scipy.io import wavfile

    from ..fileio.measurement import MAX_POINTS

    p = Path(path)
    try:
        raw = _read_bytes(p, path, "check the path")
    except MeasurementError as e:
        raise DataError(str(e)) from None
    if len(raw) < 12 or raw[:4] not in (b"RIFF", b"RIFX") or raw[8:12] != b"WAVE":
        raise DataError(f"{path}: not a WAV file (no RIFF/WAVE header); give mono .wav impulse responses")
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            rate, data = wavfile.read(io.BytesIO(raw))
    except Exception as e:
        raise DataError(f"{path}: cannot read the WAV file ({e}); export it again as PCM or float WAV") from None
    if data.ndim != 1:
        raise DataError(f"{path}: {data.shape[1]} channels; an impulse response must be mono: export each way "
                        "to its own file")
    if data.size < 16 or data.size > MAX_POINTS:
        raise DataError(f"{path}: {data.size} samples; an impulse response needs 16 to {MAX_POINTS} samples")
    x = data.astype(float)
    if data.dtype.kind == "u":
        x = x / 2.0 ** (data.dtype.itemsize * 8 - 1) - 1.0
    elif data.dtype.kind == "i":
        x = x / 2.0 ** (data.dtype.itemsize * 8 - 1)
    if not np.all(np.isfinite(x)) or not np.any(x):
        raise DataError(f"{path}: the impulse response is all zeros or has NaN/infinite samples; check the recording")
    return x, float(rate)


def band_level_db(x: np.ndarray, fs: float, band_hz: tuple[float, float]) -> float:
    """Mean power of the response of *x* over *band_hz* (FFT bins inside the band), in dB."""
    n = max(x.size, 1 << 14)
    h = np.fft.rfft(x, n)
    f = np.fft.rfftfreq(n, 1 / fs)
    sel = (f >= band_hz[0]) & (f <= band_hz[1])
    return float(10 * np.log10(np.mean(np.abs(h[sel]) ** 2)))


def relative_lag(x: np.ndarray, ref: np.ndarray) -> tuple[float, bool]:
    """Lag (samples) of *x* relative to *ref* by the band-limited cross-correlation peak, and its polarity."""
    n = 1 << int(math.ceil(math.log2(x.size + ref.size)))
    cross = np.fft.rfft(x, n) * np.conj(np.fft.rfft(ref, n))
    r = np.fft.irfft(cross, n)
    k = int(np.argmax(np.abs(r)))
    inverted = bool(r[k] < 0)
    coarse = k if k <= n // 2 else k - n
    w = 2 * np.pi * np.arange(cross.size) / n
    wt = np.full(cross.size, 2.0)  # one-sided spectrum: DC and Nyquist once, the rest twice
    wt[0] = 1.0
    if n % 2 == 0:
        wt[-1] = 1.0
    t = coarse + np.arange(-64, 65) * FINE_STEP
    vals = np.real(np.exp(1j * np.outer(t, w)) @ (wt * cross)) / n
    vals = -vals if inverted else vals
    i = int(np.clip(np.argmax(vals), 1, t.size - 2))
    y0, y1, y2 = vals[i - 1], vals[i], vals[i + 1]
    den = y0 - 2 * y1 + y2
    frac = 0.5 * (y0 - y2) / den if den != 0 else 0.0
    return float(t[i] + frac * FINE_STEP), inverted


def align(paths: list[str], band_hz: tuple[float, float] | None = None) -> tuple[float, list[Arrival]]:
    """Arrivals and band levels of the impulse responses *paths* (the first is the reference).

    Returns ``(sample rate, arrivals)``.  Raises :class:`DataError` for unreadable
    files, a rate mismatch or a band above Nyquist.
    """
    if len(paths) < 2:
        raise DataError("name at least two impulse responses (WAV) to align")
    irs = []
    fs = None
    for p in paths:
        x, rate = read_ir(p)
        if fs is None:
            fs = rate
        elif rate != fs:
            raise DataError(f"{p}: recorded at {rate:g} Hz but {paths[0]} at {fs:g} Hz; resample them to one rate")
        irs.append(x)
    band = band_hz or (100.0, min(10000.0, 0.45 * fs))
    if not 0 < band[0] < band[1] <= fs / 2:
        raise DataError(f"band [{band[0]:g}, {band[1]:g}] Hz must lie inside 0..{fs / 2:g} Hz (Nyquist) with the "
                        f"low edge first; fix the band ({setting('band')})")
    out = []
    for p, x in zip(paths, irs):
        lag, inv = (0.0, False) if x is irs[0] else relative_lag(x, irs[0])
        out.append(Arrival(p, lag, inv, band_level_db(x, fs, band)))
    return fs, out


def alignment_stages(fs: float, arrivals: list[Arrival]) -> list[dict]:
    """Per way: the delay (ms) to the latest arrival and the gain (dB) to the quietest level."""
    latest = max(a.lag_samples for a in arrivals)
    quietest = min(a.level_db for a in arrivals)
    rows = []
    for a in arrivals:
        d = latest - a.lag_samples
        rows.append({"path": a.path, "arrival_samples": a.lag_samples, "inverted": a.inverted,
                     "level_db": a.level_db, "delay_samples": d, "delay_ms": d / fs * 1e3,
                     "gain_db": quietest - a.level_db})
    return rows
