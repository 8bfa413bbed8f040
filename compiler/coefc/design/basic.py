"""Simple stages: gain, delay, DC blocker and raw coefficients, each to float blocks.

Stage parameters in, a :class:`coefc.design.stage.StageResult` out.

References
----------
Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., sec. 7.1
(bilinear transformation), used for the DC blocker's corner frequency.
ISO 9613-1:1993, eq. (A.4), for delays given as a path difference in metres.
"""

from __future__ import annotations

import math

import numpy as np

from ..blocks import DelayBlock, FirBlock, GainBlock, SosBlock
from ..spec import MAX_DELAY_SAMPLES, MAX_IIR_ORDER
from .acoustics import AIR_TEMPERATURE_RANGE_C, DEFAULT_AIR_TEMPERATURE_C, speed_of_sound
from .stage import StageContext, StageResult

#: Pole radius at or above which a raw IIR section is rejected as not stable.
STABILITY_LIMIT = 1.0


def design_gain(ctx: StageContext) -> StageResult:
    """A plain gain: ``db`` or ``linear`` (positive), and ``invert`` for polarity."""
    which = ctx.one_of(("db", "linear"), required=False)
    invert = bool(ctx.get("invert", False))
    if which is None and not invert:
        raise ctx.error("a gain stage needs db, linear or invert = true")
    if which == "db":
        db = ctx.get("db")
        if abs(db) > 200:
            raise ctx.error(f"{db:g} dB is outside -200..200 dB; use a sensible gain", "db")
        g = 10.0 ** (db / 20.0)
        text = f"gain {db:+g} dB"
    elif which == "linear":
        g = ctx.get("linear")
        if not 1e-10 <= g <= 1e10:
            raise ctx.error(f"{g:g} is outside 1e-10..1e10; use a sensible gain", "linear")
        text = f"gain x{g:g}"
    else:
        g = 1.0
        text = "gain 0 dB"
    if invert:
        g = -g
        text += ", polarity inverted"
    return StageResult(blocks=(GainBlock(g, label=text),), text=text)


def design_delay(ctx: StageContext) -> StageResult:
    """An integer delay from ``samples``, ``ms`` or ``metres`` (path difference).

    A delay in ms or metres is rounded to the nearest whole sample; the text of
    the result reports the residual fraction.  Metres use the speed of sound of
    ISO 9613-1 at ``air_temperature_c`` (default 20 C).
    """
    which = ctx.one_of(("samples", "ms", "metres"))
    if ctx.has("air_temperature_c") and which != "metres":
        raise ctx.error("only applies to a delay given in metres; remove it", "air_temperature_c")
    fs = ctx.fs
    if which == "samples":
        exact = float(ctx.get("samples"))
        what = f"{ctx.get('samples')} samples"
    elif which == "ms":
        ms = ctx.get("ms")
        exact = ms * 1e-3 * fs
        what = f"{ms:g} ms"
    else:
        metres = ctx.get("metres")
        t = ctx.get("air_temperature_c", DEFAULT_AIR_TEMPERATURE_C)
        lo, hi = AIR_TEMPERATURE_RANGE_C
        if not lo <= t <= hi:
            raise ctx.error(f"{t:g} C is outside {lo:g}..{hi:g} C, the range of the ISO 9613-1 speed of "
                            "sound formula", "air_temperature_c")
        c = speed_of_sound(t)
        exact = metres / c * fs
        what = f"{metres:g} m at {t:g} C (c = {c:.3f} m/s)"
    if exact > MAX_DELAY_SAMPLES:
        raise ctx.error(f"{what} is {exact:.0f} samples; at most {MAX_DELAY_SAMPLES} samples are accepted", which)
    interp = ctx.get("interpolation", "none")
    if interp == "none":
        for key in ("max_error_samples", "accuracy_hz"):
            if ctx.has(key):
                raise ctx.error("only applies with interpolation = \"thiran\" or \"lagrange\"; remove it", key)
    elif which != "samples" and exact != math.floor(exact):
        return _fractional_delay(ctx, exact, what, interp)
    n = int(math.floor(exact + 0.5))
    residual = exact - n
    if which == "samples":
        text = f"delay {n} samples"
    else:
        text = f"delay {what} -> {n} samples (residual {residual:+.3f} sample)"
    return StageResult(blocks=(DelayBlock(n, label=text),), text=text, latency_samples=float(n))


def _fractional_delay(ctx: StageContext, exact: float, what: str, interp: str) -> StageResult:
    """A delay of *exact* samples: a whole-sample delay and a Thiran all-pass or a Lagrange FIR.

    References
    ----------
    J.-P. Thiran (1971); T. I. Laakso et al., "Splitting the unit delay", IEEE SP
    Magazine 13(1), 1996 -- see :mod:`coefc.design.fractional_delay`.
    """
    from . import fractional_delay as fd

    max_err = float(ctx.get("max_error_samples", fd.DEFAULT_MAX_ERROR_SAMPLES))
    acc_hz = float(ctx.get("accuracy_hz", min(fd.DEFAULT_ACCURACY_HZ, ctx.fs / 4)))
    if acc_hz >= ctx.fs / 2 * 0.95:
        raise ctx.error(f"{acc_hz:g} Hz is too close to Nyquist for a fractional delay; use at most "
                        f"{ctx.fs / 2 * 0.9:g} Hz", "accuracy_hz")
    got = fd.design(exact, interp, ctx.fs, max_err, acc_hz)
    if got is None:
        raise ctx.error(f"no {interp} fractional delay up to order {fd.MAX_ORDER} gives {what} ({exact:.4f} samples) "
                        f"within {max_err:g} samples up to {acc_hz:g} Hz; relax max_error_samples, lower "
                        "accuracy_hz, or lengthen the delay (the filter needs about its order in samples)",
                        "max_error_samples" if ctx.has("max_error_samples") else "interpolation")
    kind, order, m, d, coef, err = got
    name = "Thiran all-pass" if kind == "thiran" else "Lagrange FIR"
    droop = ""
    if kind == "lagrange":
        w = 2 * math.pi * np.linspace(0.0, acc_hz, 256) / ctx.fs
        mag = np.abs(np.exp(-1j * np.outer(w, np.arange(coef.size))) @ coef)
        droop = f", magnitude within {float(np.max(np.abs(20 * np.log10(mag)))):.2g} dB"
    text = (f"delay {what} = {exact:.4f} samples: {m} whole samples + {name} order {order} ({d:.4f} samples; "
            f"group delay within {err:.2g} samples{droop} up to {acc_hz:g} Hz)")
    blocks = [DelayBlock(m, label=f"delay {m} samples")] if m else []
    if kind == "thiran":
        from scipy import signal

        sos = signal.tf2sos(coef[::-1], coef)
        blocks.append(SosBlock(sos, label=f"Thiran all-pass order {order}, {d:.4f} samples"))
        return StageResult(blocks=tuple(blocks), text=text, order=order, sections=len(sos),
                           latency_samples=float(m))
    blocks.append(FirBlock(coef, label=f"Lagrange FIR order {order}, {d:.4f} samples"))
    return StageResult(blocks=tuple(blocks), text=text, order=order, taps=order + 1, latency_samples=float(m))


def dc_blocker_sos(cutoff_hz: float, fs: float) -> np.ndarray:
    """First-order DC blocker ``g (1 - z^-1) / (1 - R z^-1)`` as one SOS row.

    The pole radius ``R = (1 - t) / (1 + t)`` with ``t = tan(pi fc / fs)`` comes
    from the bilinear transform of the analog high-pass ``s / (s + wc)`` with the
    corner pre-warped, so the response is exactly -3.01 dB at ``cutoff_hz``; the
    gain ``g = (1 + R) / 2`` makes it 0 dB at Nyquist.

    References
    ----------
    Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., sec. 7.1.
    """
    t = math.tan(math.pi * cutoff_hz / fs)
    r = (1.0 - t) / (1.0 + t)
    g = (1.0 + r) / 2.0
    return np.array([[g, -g, 0.0, 1.0, -r, 0.0]])


def design_dc_blocker(ctx: StageContext) -> StageResult:
    fc = ctx.require("cutoff_hz", "give the corner frequency, e.g. cutoff_hz = 5")
    sos = dc_blocker_sos(fc, ctx.fs)
    text = f"DC blocker, corner {fc:g} Hz (pole radius {-sos[0, 4]:.6f})"
    return StageResult(blocks=(SosBlock(sos, label=text),), text=text, order=1, sections=1)


def _pole_check(ctx: StageContext, a: np.ndarray, key: str, what: str) -> None:
    poles = np.roots(a) if len(np.trim_zeros(a, "f")) > 1 else np.zeros(0)
    if poles.size and not np.all(np.isfinite(poles)):
        raise ctx.error(f"{what}: the denominator cannot be solved for its poles; check the coefficients", key)
    if poles.size:
        r = float(np.max(np.abs(poles)))
        if r >= STABILITY_LIMIT - 1e-12:
            raise ctx.error(f"{what} is not stable: a pole has radius {r:.6g} (on or outside the unit "
                            "circle); use coefficients whose poles lie inside the unit circle", key)


def design_sos(ctx: StageContext) -> StageResult:
    """Raw second-order sections in scipy's row layout, normalised to ``a0 = 1``."""
    rows = np.array(ctx.require("sections", "give sections = [[b0, b1, b2, a0, a1, a2], ...]"), dtype=float)
    for i, row in enumerate(rows):
        if row[3] == 0.0:
            raise ctx.error(f"section {i + 1} has a0 = 0; a0 must be non-zero (normally 1)", "sections")
        rows[i] = row / row[3]
        _pole_check(ctx, rows[i, 3:], "sections", f"section {i + 1}")
        if not np.all(np.isfinite(rows[i])):
            raise ctx.error(f"section {i + 1} overflows when normalised by a0; scale it", "sections")
    warnings = tuple(f"section {i + 1} has an all-zero numerator: the channel outputs silence"
                     for i, row in enumerate(rows) if not np.any(row[:3]))
    n = len(rows)
    order = sum(_section_order(r) for r in rows)
    text = f"raw second-order sections, {n} section{'s' if n != 1 else ''}"
    return StageResult(blocks=(SosBlock(rows, label=text),), text=text, order=order, sections=n,
                       warnings=warnings)


def _section_order(row: np.ndarray) -> int:
    b = np.trim_zeros(row[:3], "b")
    a = np.trim_zeros(row[3:], "b")
    return max(len(b), len(a)) - 1


def design_transfer(ctx: StageContext) -> StageResult:
    """Raw ``b``/``a`` polynomials, converted to second-order sections (scipy tf2sos)."""
    from scipy import signal

    b = np.array(ctx.require("b", "give the numerator, e.g. b = [1.0, 0.5]"), dtype=float)
    a = np.array(ctx.require("a", "give the denominator, e.g. a = [1.0, -0.5]"), dtype=float)
    if a[0] == 0.0:
        raise ctx.error("a[0] is 0; the first denominator coefficient must be non-zero (normally 1)", "a")
    if not np.any(b):
        raise ctx.error("the numerator is all zeros; the stage would output silence", "b")
    if len(b) > 2 * MAX_IIR_ORDER + 1:
        raise ctx.error(f"{len(b)} numerator coefficients; at most {2 * MAX_IIR_ORDER + 1} are accepted "
                        "(use kind = \"fir\" for long FIR filters)", "b")
    scale = a[0]
    b, a = b / scale, a / scale
    if not (np.all(np.isfinite(b)) and np.all(np.isfinite(a))):
        raise ctx.error("coefficients overflow when normalised by a[0]; scale them", "a")
    _pole_check(ctx, a, "a", "the transfer function")
    try:
        sos = signal.tf2sos(b, a)
    except (ValueError, np.linalg.LinAlgError) as e:
        raise ctx.error(f"cannot convert to second-order sections ({e}); check the coefficients", "b") from None
    if not np.all(np.isfinite(sos)):
        raise ctx.error("cannot convert to second-order sections (non-finite result); check the "
                        "coefficients", "b")
    order = max(len(np.trim_zeros(b, "b")), len(np.trim_zeros(a, "b"))) - 1
    text = f"raw transfer function, order {order} -> {len(sos)} section{'s' if len(sos) != 1 else ''}"
    return StageResult(blocks=(SosBlock(sos, label=text),), text=text, order=order, sections=len(sos))


def design_fir_taps(ctx: StageContext) -> StageResult:
    """Raw FIR taps; linear phase (symmetric taps) gives a latency of (N-1)/2 samples."""
    taps = np.array(ctx.require("taps", "give taps = [h0, h1, ...]"), dtype=float)
    if not np.any(taps):
        raise ctx.error("all taps are zero; the stage would output silence", "taps")
    n = len(taps)
    linear = bool(np.allclose(taps, taps[::-1], rtol=0, atol=1e-15) or
                  np.allclose(taps, -taps[::-1], rtol=0, atol=1e-15))
    latency = (n - 1) / 2 if linear else 0.0
    text = f"raw FIR, {n} taps" + (" (linear phase)" if linear else "")
    return StageResult(blocks=(FirBlock(taps, label=text),), text=text, order=n - 1, taps=n,
                       latency_samples=latency)
