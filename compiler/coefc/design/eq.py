"""Audio EQ biquads: cookbook parameters (f0, gain, Q / bandwidth / slope) in, one SOS out.

Covers the stage kinds ``peaking``, ``lowshelf``, ``highshelf``, ``notch``,
``allpass`` and the ``response = "biquad"`` form of ``lowpass``, ``highpass``,
``bandpass`` (constant 0 dB peak gain) and ``bandstop`` (same as ``notch``).

References
----------
R. Bristow-Johnson, "Cookbook formulae for audio EQ biquad filter coefficients"
(the Audio EQ Cookbook).
"""

from __future__ import annotations

import math

import numpy as np

from ..blocks import SosBlock
from .stage import StageContext, StageResult


def _alpha(ctx: StageContext, w0: float, a_lin: float, how: tuple[str, ...], default_slope: bool = False) -> tuple[float, str]:
    """Cookbook alpha from q, bandwidth_oct or slope (whichever of *how* is given)."""
    sw = math.sin(w0)
    which = ctx.one_of(how, required=not default_slope)
    if which is None:  # shelves default to slope 1 (the steepest monotonic shelf)
        which, value = "slope", 1.0
    else:
        value = ctx.get(which)
    if which == "q":
        return sw / (2.0 * value), f"Q {value:g}"
    if which == "bandwidth_oct":
        arg = math.log(2.0) / 2.0 * value * w0 / sw
        if arg > 50:
            raise ctx.error(f"{value:g} octaves is too wide at this frequency; use a narrower band", which)
        return sw * math.sinh(arg), f"bandwidth {value:g} oct"
    inner = (a_lin + 1.0 / a_lin) * (1.0 / value - 1.0) + 2.0
    if inner <= 0:
        gain_db = 40 * math.log10(a_lin)
        s_max = 1.0 / (1.0 - 2.0 / (a_lin + 1.0 / a_lin)) if a_lin != 1 else math.inf
        raise ctx.error(f"slope {value:g} is too steep for a {gain_db:g} dB shelf (the shelf would not be "
                        f"a biquad); use slope below {s_max:.4g}", "slope")
    return sw / 2.0 * math.sqrt(inner), f"slope {value:g}"


def cookbook_biquad(kind: str, f0: float, fs: float, alpha: float, gain_db: float = 0.0) -> np.ndarray:
    """One cookbook section as an SOS row ``[b0, b1, b2, 1, a1, a2]``.

    Parameters
    ----------
    kind : {"lowpass", "highpass", "bandpass", "notch", "allpass", "peaking", "lowshelf", "highshelf"}
    f0 : float
        Centre, corner or shelf mid-point frequency in Hz.
    fs : float
        Sample rate in Hz.
    alpha : float
        The cookbook's ``alpha`` (from Q, bandwidth or shelf slope).
    gain_db : float
        Gain for peaking and shelving sections.

    References
    ----------
    R. Bristow-Johnson, "Cookbook formulae for audio EQ biquad filter coefficients".

    Examples
    --------
    >>> import math
    >>> row = cookbook_biquad("peaking", 1000, 48000, math.sin(2*math.pi/48)/2, 6.0)
    >>> [round(float(x), 8) for x in row]
    [1.04395309, -1.89532072, 0.86772228, 1.0, -1.89532072, 0.91167537]
    """
    w0 = 2.0 * math.pi * f0 / fs
    c = math.cos(w0)
    A = 10.0 ** (gain_db / 40.0)
    if kind == "lowpass":
        b = [(1 - c) / 2, 1 - c, (1 - c) / 2]
        a = [1 + alpha, -2 * c, 1 - alpha]
    elif kind == "highpass":
        b = [(1 + c) / 2, -(1 + c), (1 + c) / 2]
        a = [1 + alpha, -2 * c, 1 - alpha]
    elif kind == "bandpass":
        b = [alpha, 0.0, -alpha]
        a = [1 + alpha, -2 * c, 1 - alpha]
    elif kind == "notch":
        b = [1.0, -2 * c, 1.0]
        a = [1 + alpha, -2 * c, 1 - alpha]
    elif kind == "allpass":
        b = [1 - alpha, -2 * c, 1 + alpha]
        a = [1 + alpha, -2 * c, 1 - alpha]
    elif kind == "peaking":
        b = [1 + alpha * A, -2 * c, 1 - alpha * A]
        a = [1 + alpha / A, -2 * c, 1 - alpha / A]
    elif kind == "lowshelf":
        sq = 2 * math.sqrt(A) * alpha
        b = [A * ((A + 1) - (A - 1) * c + sq), 2 * A * ((A - 1) - (A + 1) * c), A * ((A + 1) - (A - 1) * c - sq)]
        a = [(A + 1) + (A - 1) * c + sq, -2 * ((A - 1) + (A + 1) * c), (A + 1) + (A - 1) * c - sq]
    elif kind == "highshelf":
        sq = 2 * math.sqrt(A) * alpha
        b = [A * ((A + 1) + (A - 1) * c + sq), -2 * A * ((A - 1) + (A + 1) * c), A * ((A + 1) + (A - 1) * c - sq)]
        a = [(A + 1) - (A - 1) * c + sq, 2 * ((A - 1) - (A + 1) * c), (A + 1) - (A - 1) * c - sq]
    else:
        raise ValueError(f"no cookbook section '{kind}'")
    a0 = a[0]
    return np.array([b[0] / a0, b[1] / a0, b[2] / a0, 1.0, a[1] / a0, a[2] / a0])


def design_eq(ctx: StageContext) -> StageResult:
    """Peaking, shelving, notch and all-pass stages (kinds of the same name)."""
    kind = ctx.kind
    f0 = ctx.require("freq_hz", "give the frequency, e.g. freq_hz = 1000")
    w0 = 2 * math.pi * f0 / ctx.fs
    gain_db = 0.0
    if kind in ("peaking", "lowshelf", "highshelf"):
        gain_db = ctx.require("gain_db", "give the gain in dB, e.g. gain_db = -3")
        if abs(gain_db) > 60:
            raise ctx.error(f"{gain_db:g} dB is outside -60..60 dB; use a smaller EQ gain", "gain_db")
    a_lin = 10.0 ** (gain_db / 40.0)
    if kind in ("lowshelf", "highshelf"):
        alpha, how = _alpha(ctx, w0, a_lin, ("q", "slope"), default_slope=True)
    else:
        alpha, how = _alpha(ctx, w0, a_lin, ("q", "bandwidth_oct"))
    row = cookbook_biquad(kind, f0, ctx.fs, alpha, gain_db)
    text = f"{kind} {f0:g} Hz, {how}" + (f", {gain_db:+g} dB" if kind in ("peaking", "lowshelf", "highshelf") else "")
    return StageResult(blocks=(SosBlock(row[None, :], label=text),), text=text, order=2, sections=1)


def design_biquad_filter(ctx: StageContext) -> StageResult:
    """``response = "biquad"`` for lowpass/highpass/bandpass/bandstop: one cookbook section."""
    kind = ctx.kind
    allowed = {"response", "freq_hz", "q"} | ({"bandwidth_oct"} if kind in ("bandpass", "bandstop") else set())
    ctx.only(allowed, f"to a {kind} biquad (it takes freq_hz and q"
             + (" or bandwidth_oct)" if "bandwidth_oct" in allowed else ")"))
    f0 = ctx.require("freq_hz", "a biquad takes freq_hz (the cookbook's f0) and q")
    w0 = 2 * math.pi * f0 / ctx.fs
    how_keys = ("q", "bandwidth_oct") if kind in ("bandpass", "bandstop") else ("q",)
    alpha, how = _alpha(ctx, w0, 1.0, how_keys)
    row = cookbook_biquad("notch" if kind == "bandstop" else kind, f0, ctx.fs, alpha)
    text = f"{kind} biquad {f0:g} Hz, {how}"
    return StageResult(blocks=(SosBlock(row[None, :], label=text),), text=text, order=2, sections=1)
