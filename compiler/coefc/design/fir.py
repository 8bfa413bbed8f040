"""Linear-phase FIR filters: band edges and attenuation in, FIR taps out.

Kinds ``fir-lowpass``, ``fir-highpass``, ``fir-bandpass`` and ``fir-bandstop``,
given by ``passband_hz``, ``stopband_hz`` (a frequency, or a band ``[low, high]``),
``attenuation_db`` (smallest stopband attenuation) and optionally ``ripple_db``
(largest passband deviation, default 0.1 dB where a method needs one) and
``taps`` (a fixed length instead of the estimated one).  ``method``:

``kaiser`` (default)
    windowed sinc with a Kaiser window; length and beta from Kaiser's formulas
    (scipy.signal.kaiserord), cutoff midway in the transition band.
``equiripple``
    Parks-McClellan (scipy.signal.remez), weights from the ripple and
    attenuation; length from Kaiser's estimate for equiripple filters, then
    lengthened until the attenuation is met.
``least-squares``
    weighted least squares (scipy.signal.firls); same length search.

Taps vs order: a filter of N taps has order N - 1 and a constant group delay of
(N - 1) / 2 samples.  High-pass and band-stop filters need an odd number of taps.

References
----------
J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
function", Proc. IEEE ISCAS, 1974.
J. H. McClellan & T. W. Parks, "A unified approach to the design of optimum FIR
linear phase digital filters", IEEE Trans. Circuit Theory 20(6), 1973.
T. W. Parks & C. S. Burrus, *Digital Filter Design*, Wiley 1987, ch. 3 (least squares).
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from ..blocks import FirBlock
from ..spec import MAX_FIR_TAPS
from .stage import StageContext, StageResult

#: Tap counts above which a requirement is reported as needing a very long filter.
MANY_TAPS = 1024
DEFAULT_RIPPLE_DB = 0.1
_MAX_SEARCH_STEPS = 16


def _band(kind: str) -> str:
    return kind.removeprefix("fir-")


def _check_edges(ctx: StageContext, band: str, wp, ws) -> float:
    """Check the edge order; return the narrowest transition width in Hz."""
    if band == "lowpass" and wp < ws:
        return ws - wp
    if band == "highpass" and ws < wp:
        return wp - ws
    if band == "bandpass" and ws[0] < wp[0] < wp[1] < ws[1]:
        return min(wp[0] - ws[0], ws[1] - wp[1])
    if band == "bandstop" and wp[0] < ws[0] < ws[1] < wp[1]:
        return min(ws[0] - wp[0], wp[1] - ws[1])
    rule = {
        "lowpass": "passband_hz must be below stopband_hz",
        "highpass": "passband_hz must be above stopband_hz",
        "bandpass": "the stopband must enclose the passband (stop low < pass low < pass high < stop high)",
        "bandstop": "the passband must enclose the stopband (pass low < stop low < stop high < pass high)",
    }[band]
    raise ctx.error(f"for a {ctx.kind}, {rule}", "stopband_hz")


def _bands(band: str, wp, ws, nyq: float):
    """(band edges, desired gains per band, True where the band is a passband)."""
    if band == "lowpass":
        return [0, wp, ws, nyq], [1, 0], [True, False]
    if band == "highpass":
        return [0, ws, wp, nyq], [0, 1], [False, True]
    if band == "bandpass":
        return [0, ws[0], wp[0], wp[1], ws[1], nyq], [0, 1, 0], [False, True, False]
    return [0, wp[0], ws[0], ws[1], wp[1], nyq], [1, 0, 1], [True, False, True]


def measure(taps: np.ndarray, edges, passbands, fs: float) -> tuple[float, float]:
    """(largest passband deviation in dB, smallest stopband attenuation in dB)."""
    from scipy import signal

    dev, att = 0.0, math.inf
    for i, is_pass in enumerate(passbands):
        f = np.linspace(edges[2 * i], edges[2 * i + 1], 1024)
        f = f[f < fs / 2] if edges[2 * i + 1] >= fs / 2 else f
        if f.size == 0:
            continue
        h = np.abs(signal.freqz(taps, 1.0, worN=f, fs=fs)[1])
        if is_pass:
            dev = max(dev, float(np.max(np.abs(20 * np.log10(np.maximum(h, 1e-300))))))
        else:
            att = min(att, float(-20 * np.log10(max(float(np.max(h)), 1e-300))))
    return dev, att


def kaiser_equiripple_estimate(delta_p: float, delta_s: float, width_hz: float, fs: float) -> int:
    """Kaiser's length estimate for an equiripple FIR.

    ``N = (-20 log10 sqrt(dp ds) - 13) / (14.6 df / fs) + 1``.

    References
    ----------
    J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
    function", Proc. IEEE ISCAS, 1974; L. R. Rabiner & B. Gold, *Theory and
    Application of Digital Signal Processing*, 1975, sec. 3.32.
    """
    n = (-20 * math.log10(math.sqrt(delta_p * delta_s)) - 13) / (14.6 * width_hz / fs) + 1
    return max(3, int(math.ceil(n)))


def design_fir(ctx: StageContext) -> StageResult:
    from scipy import signal

    band = _band(ctx.kind)
    method = ctx.get("method", "kaiser")
    wp = ctx.require("passband_hz", "give the passband edge(s) in Hz")
    ws = ctx.require("stopband_hz", "give the stopband edge(s) in Hz")
    att = ctx.require("attenuation_db", "give the smallest stopband attenuation, e.g. attenuation_db = 80")
    width = _check_edges(ctx, band, wp, ws)
    fs, nyq = ctx.fs, ctx.nyquist
    rp = ctx.get("ripple_db", DEFAULT_RIPPLE_DB)
    if rp >= att:
        raise ctx.error(f"ripple_db ({rp:g}) must be smaller than attenuation_db ({att:g})", "ripple_db")
    if att > 300:
        raise ctx.error(f"{att:g} dB is beyond double precision; use at most 300 dB", "attenuation_db")
    delta_p = (10 ** (rp / 20) - 1) / (10 ** (rp / 20) + 1)
    delta_s = 10 ** (-att / 20)
    odd = band in ("highpass", "bandstop")
    given = ctx.get("taps")
    if given is not None:
        if odd and given % 2 == 0:
            raise ctx.error(f"a {ctx.kind} needs an odd number of taps (an even-length linear-phase filter "
                            f"has a zero at Nyquist); use {given + 1}", "taps")
        if given < 3:
            raise ctx.error("use at least 3 taps", "taps")
    edges, desired, passbands = _bands(band, wp, ws, nyq)
    # The optimal methods design against equal transition widths (the wider one
    # moved in to match the narrower): an unequal, unconstrained transition band
    # lets the response overshoot there.  This only tightens the requirement.
    if band == "bandpass":
        design_edges = _bands(band, wp, (wp[0] - width, wp[1] + width), nyq)[0]
    elif band == "bandstop":
        design_edges = _bands(band, wp, (wp[0] + width, wp[1] - width), nyq)[0]
    else:
        design_edges = edges
    warns: list[str] = []

    def fix_parity(n: int) -> int:
        return n + 1 if (odd or method == "least-squares") and n % 2 == 0 else n

    if method == "kaiser":
        a_k = att if "ripple_db" not in ctx.params else max(att, -20 * math.log10(delta_p))
        if given is None:
            n, beta = signal.kaiserord(a_k, width / nyq)
            n = fix_parity(int(n))
        else:
            n, beta = given, signal.kaiser_beta(a_k)
        if n > MAX_FIR_TAPS:
            raise ctx.error(f"Kaiser's formula needs {n} taps, above the limit of {MAX_FIR_TAPS}; widen the "
                            "transition band or lower attenuation_db", "stopband_hz")
        if band in ("lowpass", "highpass"):
            cutoff = (wp + ws) / 2
        else:
            cutoff = [(wp[0] + ws[0]) / 2, (wp[1] + ws[1]) / 2]
        taps = signal.firwin(n, cutoff, window=("kaiser", float(beta)), pass_zero=band, fs=fs)
        how = f"Kaiser window (beta {beta:.3f}), {n} taps"
        dev, got = measure(taps, edges, passbands, fs)
        if got < att - 1.0:
            warns.append(f"the Kaiser design reaches {got:.1f} dB, short of attenuation_db = {att:g}"
                         + ("; the taps value is too small" if given is not None else
                            "; add a few taps with the taps key"))
    else:
        weights = [1 / delta_p if p else 1 / delta_s for p in passbands]
        weights = [w / min(weights) for w in weights]
        if given is not None:
            n = given
        elif method == "equiripple":
            n = fix_parity(kaiser_equiripple_estimate(delta_p, delta_s, width, fs))
        else:
            n = fix_parity(int(signal.kaiserord(att, width / nyq)[0]))

        def build(n_taps: int) -> tuple[np.ndarray | None, str]:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                try:
                    if method == "equiripple":
                        h = signal.remez(n_taps, design_edges, desired, weight=weights, fs=fs, maxiter=50)
                    else:
                        pairs = [g for d in desired for g in (d, d)]
                        h = signal.firls(n_taps, design_edges, pairs, weight=weights, fs=fs)
                except (ValueError, np.linalg.LinAlgError) as e:
                    return None, str(e)
            if not np.all(np.isfinite(h)):
                return None, "non-finite taps"
            if caught:
                warns.append(f"{method} design at {n_taps} taps: {caught[-1].message}")
            return h, ""

        if n > MAX_FIR_TAPS:
            raise ctx.error(f"the requirements need about {n} taps, above the limit of {MAX_FIR_TAPS}; "
                            "widen the transition band or lower attenuation_db", "stopband_hz")
        taps, why = build(n)
        if taps is None:
            raise ctx.error(f"the {method} design failed at {n} taps ({why}); widen the transition band "
                            "or use method = \"kaiser\"", "method" if ctx.has("method") else "stopband_hz")
        dev, got = measure(taps, edges, passbands, fs)
        steps = 0
        while given is None and (got < att or dev > rp) and steps < _MAX_SEARCH_STEPS:
            step = max(2, (n // 40) * 2)
            if n + step > MAX_FIR_TAPS:
                break
            longer, why = build(n + step)
            if longer is None:
                warns.append(f"the {method} design stopped at {n} taps ({why})")
                break
            n, taps = n + step, longer
            dev, got = measure(taps, edges, passbands, fs)
            steps += 1
        if got < att - 1e-6 or dev > rp + 1e-6:
            warns.append(f"the {method} design at {n} taps reaches {got:.1f} dB attenuation and "
                         f"{dev:.3f} dB passband deviation, short of attenuation_db = {att:g} / ripple_db = {rp:g}")
        how = ("equiripple (Parks-McClellan)" if method == "equiripple" else "least squares") + f", {n} taps"
    if not np.all(np.isfinite(taps)):
        raise ctx.error("the Kaiser design is not numerically sound; change the edges or give taps")
    peak = float(np.max(np.abs(signal.freqz(taps, 1.0, worN=4096, fs=fs)[1])))
    if 20 * math.log10(peak) > 20 * math.log10(1 + delta_p) + 0.1:
        warns.append(f"the response overshoots to {20 * math.log10(peak):+.1f} dB in a transition band; "
                     "narrow the transition bands or change the method")
    if n > MANY_TAPS:
        warns.append(f"{n} taps is a long filter for an embedded target; consider a wider transition band "
                     "or a multi-stage design")
    text = (f"{ctx.kind} {how}: passband {_show(wp)} Hz, stopband {_show(ws)} Hz, "
            f"reaches {got:.1f} dB attenuation, {dev:.3f} dB passband deviation")
    return StageResult(blocks=(FirBlock(np.asarray(taps, dtype=float), label=text),), text=text,
                       order=n - 1, taps=n, latency_samples=(n - 1) / 2, warnings=tuple(warns))


def _show(e) -> str:
    return f"[{e[0]:g}, {e[1]:g}]" if isinstance(e, tuple) else f"{e:g}"
