"""Linear-phase FIR filters: band edges and attenuation in, FIR taps out.

Kinds ``fir-lowpass``, ``fir-highpass``, ``fir-bandpass`` and ``fir-bandstop``,
given by ``passband_hz``, ``stopband_hz`` (a frequency, or a band ``[low, high]``),
``attenuation_db`` (smallest stopband attenuation) and optionally ``ripple_db``
(largest passband deviation, default 0.1 dB where a method needs one),
``margin_db`` (stopband attenuation kept beyond ``attenuation_db`` for coefficient
quantisation, default 0.5 dB) and ``taps`` (a fixed length instead of the search).

Every design is measured on a dense grid (a zero-padded FFT with at least 32
points per 1/N of the sample rate, the band edges, and the largest peaks refined
by direct evaluation).  A searched design is accepted only when it reaches
``attenuation_db + margin_db`` in every stopband and stays within ``ripple_db``
in every passband; when no length up to the limit does, the design fails with
an error naming the stage.  A design of given ``taps`` must reach
``attenuation_db`` (and ``ripple_db``); a margin short of ``margin_db`` is a warning.
``method``:

``kaiser`` (default)
    windowed sinc with a Kaiser window, cutoff midway in the transition band;
    length and beta from Kaiser's formulas (scipy.signal.kaiserord) for
    ``attenuation_db + margin_db``.  Kaiser's formulas are estimates: when the
    measured design falls short, beta is raised in steps of 0.1 (up to 0.3) and
    the filter lengthened until it meets the requirement.  The passband
    deviation of a window design follows its stopband ripple; it is checked
    only when ``ripple_db`` is given.
``equiripple``
    Parks-McClellan (scipy.signal.remez), weights from the ripple and
    attenuation; the shortest length that meets the requirement, found from
    Kaiser's estimate for equiripple filters by a search upward and a bisection
    downward in each parity (the optimal minimax error does not grow with the
    length within a parity: a filter of N taps is one of N + 2 taps with zero
    end taps).  A length at which remez does not converge counts as failing.
``halfband`` (``fir-lowpass`` only; for decimation or interpolation by 2)
    a half-band filter: its transition band is centred at a quarter of the
    sample rate, every other tap is exactly zero except the centre tap, which is
    exactly 1/2, so a polyphase realisation by 2 skips half the products
    (Vaidyanathan 1993, sec. 4.6).  Designed by the method of Vaidyanathan and
    Nguyen: a one-band Parks-McClellan filter ``g`` of ``2k + 2`` taps with
    passband ``[0, 2 passband_hz]`` (scipy.signal.remez) gives the filter
    ``h[2m] = g[m] / 2``, ``h[2k + 1] = 1/2``, of ``N = 4k + 3`` taps (its end taps
    are non-zero; ``4k + 1`` would waste two zero end taps).  Its passband and
    stopband ripples are equal, its stopband begins at ``fs/2 - passband_hz``:
    ``stopband_hz`` may not lie below that.  The shortest ``k`` meeting the
    requirement is searched (upward from Kaiser's estimate, then downward).
``least-squares``
    weighted least squares (scipy.signal.firls, odd lengths); the same search.
    Its largest error is not guaranteed to fall with the length, so the length
    found is the shortest the bisection met, every candidate measured.

Taps vs order: a filter of N taps has order N - 1 and a constant group delay of
(N - 1) / 2 samples.  High-pass and band-stop filters need an odd number of taps.

References
----------
J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
function", Proc. IEEE ISCAS, 1974.
J. H. McClellan & T. W. Parks, "A unified approach to the design of optimum FIR
linear phase digital filters", IEEE Trans. Circuit Theory 20(6), 1973.
T. W. Parks & C. S. Burrus, *Digital Filter Design*, Wiley 1987, ch. 3 (least squares).
P. P. Vaidyanathan and T. Q. Nguyen, "A trick for the design of FIR half-band
filters", IEEE Trans. Circuits Syst. 34(3), 1987 (from memory).
P. P. Vaidyanathan, *Multirate Systems and Filter Banks*, Prentice-Hall, 1993,
sec. 4.6.1 (half-band filters: every other coefficient zero; from memory).
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from ..blocks import FirBlock
from ..spec import MAX_FIR_TAPS, MAX_LS_TAPS
from .stage import StageContext, StageResult, edges_in_order

#: Tap counts above which a requirement is reported as needing a very long filter.
MANY_TAPS = 1024
DEFAULT_RIPPLE_DB = 0.1


def _band(kind: str) -> str:
    return kind.removeprefix("fir-")


def _bands(band: str, wp, ws, nyq: float):
    """(band edges, desired gains per band, True where the band is a passband)."""
    if band == "lowpass":
        return [0, wp, ws, nyq], [1, 0], [True, False]
    if band == "highpass":
        return [0, ws, wp, nyq], [0, 1], [False, True]
    if band == "bandpass":
        return [0, ws[0], wp[0], wp[1], ws[1], nyq], [0, 1, 0], [False, True, False]
    return [0, wp[0], ws[0], ws[1], wp[1], nyq], [1, 0, 1], [True, False, True]


def _direct(taps: np.ndarray, f, fs: float) -> np.ndarray:
    """|H| at the frequencies *f*, summed directly (the DTFT of the taps)."""
    w = 2 * np.pi * np.asarray(f, dtype=float) / fs
    return np.abs(np.exp(-1j * np.outer(w, np.arange(len(taps)))) @ np.asarray(taps, dtype=float))


def _band_worst(taps: np.ndarray, spec: np.ndarray, fgrid: np.ndarray, lo: float, hi: float, fs: float,
                is_pass: bool, refine: bool) -> float:
    """Largest |dB| deviation (passband) or largest magnitude (stopband) in [lo, hi]."""

    def metric(m):
        if not is_pass:
            return m
        return np.abs(20 * np.log10(np.maximum(m, 1e-300)))

    worst = float(np.max(metric(_direct(taps, [lo, hi], fs))))
    sel = np.nonzero((fgrid > lo) & (fgrid < hi))[0]
    if sel.size == 0:
        return worst
    m = metric(spec[sel])
    worst = max(worst, float(np.max(m)))
    if not refine:
        return worst
    # refine the largest local peaks of the sampled metric by direct evaluation
    left = np.concatenate([[-np.inf], m[:-1]])
    right = np.concatenate([m[1:], [-np.inf]])
    peaks = np.nonzero((m >= left) & (m >= right))[0]
    peaks = peaks[np.argsort(m[peaks])[::-1][:4]]
    step = fgrid[1] - fgrid[0]
    for k in peaks:
        fc = fgrid[sel[k]]
        f = np.linspace(max(lo, fc - step), min(hi, fc + step), 33)
        worst = max(worst, float(np.max(metric(_direct(taps, f, fs)))))
    return worst


def measure(taps: np.ndarray, edges, passbands, fs: float, refine: bool = True) -> tuple[float, float]:
    """(largest passband deviation in dB, smallest stopband attenuation in dB) on a dense grid.

    The grid is a zero-padded FFT with at least 32 points per 1/N of the sample
    rate (N taps: at least 32 points per stopband lobe), plus the band edges; the
    four largest local peaks of each band are refined by direct evaluation on a
    grid 16 times finer.  Every sampled value is exact, so a design that fails
    without the refinement (``refine=False``, fast) fails with it.
    """
    taps = np.asarray(taps, dtype=float)
    nfft = 1 << max(14, int(math.ceil(math.log2(32 * len(taps)))))
    spec = np.abs(np.fft.rfft(taps, nfft))
    fgrid = np.arange(nfft // 2 + 1) * (fs / nfft)
    dev, att = 0.0, math.inf
    for i, is_pass in enumerate(passbands):
        lo, hi = float(edges[2 * i]), min(float(edges[2 * i + 1]), fs / 2)
        if hi < lo:
            continue
        w = _band_worst(taps, spec, fgrid, lo, hi, fs, is_pass, refine)
        if is_pass:
            dev = max(dev, w)
        else:
            att = min(att, float(-20 * np.log10(max(w, 1e-300))))
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


#: Kaiser designs: beta is raised in these steps when the measured design falls short.
_BETA_STEPS = (0.0, 0.1, 0.2, 0.3)


def _kaiser_cap(n0: int) -> int:
    """Longest Kaiser filter tried: a quarter (at least 64 taps) beyond Kaiser's estimate."""
    return min(MAX_FIR_TAPS, max(n0 + 64, n0 + n0 // 4))


def design_fir(ctx: StageContext) -> StageResult:
    from scipy import signal

    band = _band(ctx.kind)
    method = ctx.get("method", "kaiser")
    wp = ctx.require("passband_hz", "give the passband edge(s) in Hz")
    ws = ctx.require("stopband_hz", "give the stopband edge(s) in Hz")
    att = ctx.require("attenuation_db", "give the smallest stopband attenuation, e.g. attenuation_db = 80")
    width = edges_in_order(ctx, wp, ws)
    fs, nyq = ctx.fs, ctx.nyquist
    rp = ctx.get("ripple_db", DEFAULT_RIPPLE_DB)
    margin = ctx.margin_db()
    if rp >= att:
        raise ctx.error(f"ripple_db ({rp:g}) must be smaller than attenuation_db ({att:g})", "ripple_db")
    if att + margin > 300:
        raise ctx.error(f"{att + margin:g} dB (attenuation_db plus margin_db) is beyond double precision; "
                        "use at most 300 dB in all", "attenuation_db")
    target = att + margin  # what the float design must reach in every stopband
    delta_p = (10 ** (rp / 20) - 1) / (10 ** (rp / 20) + 1)
    delta_s = 10 ** (-target / 20)
    # A Kaiser window's passband deviation follows its stopband; it is checked only when asked for.
    rp_req = rp if (method != "kaiser" or ctx.has("ripple_db")) else None
    odd = band in ("highpass", "bandstop")
    only_odd = odd or method == "least-squares"
    given = ctx.get("taps")
    if given is not None:
        if odd and given % 2 == 0:
            raise ctx.error(f"a {ctx.kind} needs an odd number of taps (an even-length linear-phase filter "
                            f"has a zero at Nyquist); use {given + 1}", "taps")
        if method == "least-squares" and given % 2 == 0:
            raise ctx.error(f"least-squares designs have an odd number of taps; use {given + 1}", "taps")
        if method == "least-squares" and given > MAX_LS_TAPS:
            raise ctx.error(f"least-squares designs take at most {MAX_LS_TAPS} taps (the solve grows as the "
                            "square of the length); use fewer taps or method = \"kaiser\"", "taps")
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
    need = f"{att:g} dB + {margin:g} dB margin" if margin else f"{att:g} dB"

    def meets(dev: float, got: float) -> bool:
        return got >= target and (rp_req is None or dev <= rp_req)

    def fix_parity(n: int) -> int:
        return n + 1 if only_odd and n % 2 == 0 else n

    where = "method" if ctx.has("method") else "stopband_hz"
    if method == "halfband":
        return _design_halfband(ctx, wp, ws, att, margin, rp, rp_req, given)
    if method == "kaiser":
        a_k = target if rp_req is None else max(target, -20 * math.log10(delta_p))
        if band in ("lowpass", "highpass"):
            cutoff = (wp + ws) / 2
        else:
            cutoff = [(wp[0] + ws[0]) / 2, (wp[1] + ws[1]) / 2]

        def kaiser(n_taps: int, b: float) -> tuple[np.ndarray, float, float]:
            h = signal.firwin(n_taps, cutoff, window=("kaiser", float(b)), pass_zero=band, fs=fs)
            coarse = measure(h, edges, passbands, fs, refine=False)
            return (h, *(measure(h, edges, passbands, fs) if meets(*coarse) or given else coarse))

        if given is None:
            n0, beta0 = signal.kaiserord(a_k, width / nyq)
            n0 = fix_parity(int(n0))
            if n0 > MAX_FIR_TAPS:
                raise ctx.error(f"Kaiser's formula needs {n0} taps, above the limit of {MAX_FIR_TAPS}; widen the "
                                "transition band or lower attenuation_db", "stopband_hz")
            found = None
            best = -math.inf
            cap = _kaiser_cap(n0)
            for n in range(n0, cap + 1, 2 if odd else 1):
                for db in _BETA_STEPS:
                    taps, dev, got = kaiser(n, beta0 + db)
                    best = max(best, got)
                    if meets(dev, got):
                        found = (n, beta0 + db)
                        break
                if found:
                    break
            if found is None:
                raise ctx.error(f"no Kaiser design up to {cap} taps reaches {need} (best {best:.2f} dB); widen "
                                "the transition band, lower attenuation_db or use method = \"equiripple\"",
                                "attenuation_db")
            n, beta = found
            how = f"Kaiser window (beta {beta:.3f}), {n} taps"
            how += (" (Kaiser's formula)" if (n, beta) == (n0, beta0) else
                    f" (Kaiser's formula gave {n0} taps at beta {beta0:.3f}, short of {need} when measured)")
        else:
            n, beta = given, float(signal.kaiser_beta(a_k))
            taps, dev, got = kaiser(n, beta)
            how = f"Kaiser window (beta {beta:.3f}), {n} taps (given)"
    else:
        weights = [1 / delta_p if p else 1 / delta_s for p in passbands]
        weights = [w / min(weights) for w in weights]
        tried: dict[int, tuple | None] = {}
        failures: list[str] = []

        def trial(n_taps: int):
            """(taps, deviation, attenuation) at *n_taps*, or None when the design fails."""
            if n_taps in tried:
                return tried[n_taps]
            out = None
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                try:
                    if method == "equiripple":
                        h = signal.remez(n_taps, design_edges, desired, weight=weights, fs=fs, maxiter=50)
                    elif n_taps > MAX_LS_TAPS:  # firls solves an N x N system: memory grows as N^2
                        raise ValueError(f"least squares is limited to {MAX_LS_TAPS} taps")
                    else:
                        pairs = [g for d in desired for g in (d, d)]
                        h = signal.firls(n_taps, design_edges, pairs, weight=weights, fs=fs)
                except (ValueError, np.linalg.LinAlgError) as e:
                    failures.append(f"{n_taps} taps: {e}")
                    h = None
            if h is not None and np.all(np.isfinite(h)):
                coarse = measure(h, edges, passbands, fs, refine=False)
                out = (h, *(measure(h, edges, passbands, fs) if meets(*coarse) or given else coarse))
            tried[n_taps] = out
            return out

        def passes(n_taps: int) -> bool:
            if n_taps < 3:
                return False
            t = trial(n_taps)
            return t is not None and meets(t[1], t[2])

        if given is not None:
            t = trial(given)
            if t is None:
                raise ctx.error(f"the {method} design failed at {given} taps ({failures[-1]}); change taps or "
                                "remove it to let coefc search the length", "taps")
            n = given
            taps, dev, got = t
            how = f"{given} taps (given)"
        else:
            if method == "equiripple":
                est = kaiser_equiripple_estimate(delta_p, delta_s, width, fs)
            else:
                est = int(signal.kaiserord(target, width / nyq)[0])
            est = fix_parity(max(3, est))
            if est > MAX_FIR_TAPS:
                raise ctx.error(f"the requirements need about {est} taps, above the limit of {MAX_FIR_TAPS}; "
                                "widen the transition band or lower attenuation_db", "stopband_hz")
            n = _shortest(est, passes)
            if n is None:
                why = f" (last failure: {failures[-1]})" if failures else ""
                raise ctx.error(f"no {method} design up to {MAX_FIR_TAPS} taps reaches {need} with at most "
                                f"{rp:g} dB ripple{why}; widen the transition band, lower attenuation_db or use "
                                "method = \"kaiser\"", where)
            if not only_odd and passes(n - 1):
                n = min(n, _shortest(n - 1, passes) or n)
            taps, dev, got = trial(n)
            how = (f"{n} taps (shortest meeting {need}; estimate {est})" if not failures else
                   f"{n} taps (shortest found meeting {need}; estimate {est}; the design did not converge at "
                   f"{len(failures)} length{'s' if len(failures) != 1 else ''} tried, counted as failing)")
        how = ("equiripple (Parks-McClellan)" if method == "equiripple" else "least squares") + f", {how}"
    if given is not None and not (got >= att and (rp_req is None or dev <= rp_req)):
        short = (f"{got:.2f} dB attenuation" if got < att else f"{dev:.4f} dB passband deviation")
        raise ctx.error(f"with taps = {given} the {_METHOD_NAMES[method]} design reaches {short}, short of "
                        f"attenuation_db = {att:g}" + (f" / ripple_db = {rp_req:g}" if rp_req is not None else "")
                        + f"; {_searched_length(ctx)}", "taps")
    if given is not None and got < target:
        warns.append(f"with taps = {given} the design reaches {got:.2f} dB, leaving {got - att:.2f} dB of the "
                     f"{margin:g} dB margin_db for coefficient quantisation; give more taps or remove taps")
    if not np.all(np.isfinite(taps)):
        raise ctx.error("the FIR design is not numerically sound; change the edges or give taps")
    peak = float(np.max(np.abs(signal.freqz(taps, 1.0, worN=4096, fs=fs)[1])))
    if 20 * math.log10(peak) > 20 * math.log10(1 + delta_p) + 0.1:
        warns.append(f"the response overshoots to {20 * math.log10(peak):+.1f} dB in a transition band; "
                     "narrow the transition bands or change the method")
    if n > MANY_TAPS:
        warns.append(f"{n} taps is a long filter for an embedded target; consider a wider transition band "
                     "or a multi-stage design")
    text = (f"{ctx.kind} {how}: passband {_show(wp)} Hz, stopband {_show(ws)} Hz, "
            f"reaches {got:.2f} dB attenuation ({att:g} dB asked, margin {got - att:.2f} dB for quantisation), "
            f"{dev:.4f} dB passband deviation")
    return _fir_result(taps, text, warns, att=att, rp_req=rp_req, margin=margin, target=target, got=got, dev=dev,
                       given=given)


_METHOD_NAMES = {"kaiser": "Kaiser", "equiripple": "equiripple", "least-squares": "least-squares",
                 "halfband": "half-band"}


def halfband_taps(n_taps: int, passband_hz: float, fs: float) -> np.ndarray:
    """The equiripple half-band low-pass of *n_taps* = 4k + 3 taps with passband edge *passband_hz*.

    Every tap ``h[j]`` with ``j - (N - 1)/2`` even and non-zero is exactly 0.0, the
    centre tap exactly 0.5, and ``H(f) + H(fs/2 - f) = 1`` (zero-phase amplitudes).

    References
    ----------
    P. P. Vaidyanathan and T. Q. Nguyen, "A trick for the design of FIR half-band
    filters", IEEE Trans. Circuits Syst. 34(3), 1987 (from memory).

    Examples
    --------
    >>> h = halfband_taps(11, 10000.0, 48000.0)
    >>> [float(v) for v in h[1::2]]
    [0.0, 0.0, 0.5, 0.0, 0.0]
    """
    from scipy import signal

    k = (n_taps - 3) // 4
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        g = signal.remez(2 * k + 2, [0.0, 2.0 * passband_hz / fs], [1.0], fs=1.0, maxiter=100)
    h = np.zeros(n_taps)
    h[0::2] = np.asarray(g, dtype=float) / 2.0
    h[2 * k + 1] = 0.5
    return h


def _design_halfband(ctx: StageContext, wp: float, ws: float, att: float, margin: float, rp: float,
                     rp_req: float | None, given: int | None) -> StageResult:
    """``method = "halfband"``: see the module docstring."""
    fs = ctx.fs
    if ctx.kind != "fir-lowpass":
        raise ctx.error(f"method = \"halfband\" designs low-passes only (fir-lowpass, for decimation or "
                        f"interpolation by 2), not {ctx.kind}; use another method", "method")
    if wp >= fs / 4:
        raise ctx.error(f"a half-band filter's passband ends below a quarter of the sample rate ({fs / 4:g} Hz); "
                        f"passband_hz = {wp:g} is not; lower it or use another method", "passband_hz")
    edge = fs / 2 - wp
    if ws < edge * (1 - 1e-12):
        raise ctx.error(f"a half-band filter's stopband begins at fs/2 - passband_hz = {edge:g} Hz; stopband_hz = "
                        f"{ws:g} lies below it; use stopband_hz = {edge:g} (or above), or another method",
                        "stopband_hz")
    if given is not None and given % 4 != 3:
        lo = max(3, given - (given - 3) % 4)
        raise ctx.error(f"a half-band filter has 4k + 3 taps (its end taps are then non-zero); use {lo} or "
                        f"{lo + 4}, not {given}", "taps")
    target = att + margin
    edges, passbands = [0, wp, edge, fs / 2], [True, False]
    need = f"{att:g} dB + {margin:g} dB margin" if margin else f"{att:g} dB"

    def trial(n_taps: int):
        try:
            h = halfband_taps(n_taps, wp, fs)
        except (ValueError, np.linalg.LinAlgError):
            return None
        if not np.all(np.isfinite(h)):
            return None
        return (h, *measure(h, edges, passbands, fs))

    def passes(t) -> bool:
        return t is not None and t[2] >= target and (rp_req is None or t[1] <= rp_req)

    if given is not None:
        t = trial(given)
        if t is None:
            raise ctx.error(f"the half-band design failed at {given} taps; change taps or remove it", "taps")
        n = given
        how = f"{n} taps (given)"
    else:
        delta = 10 ** (-target / 20)
        if rp_req is not None:
            delta = min(delta, (10 ** (rp_req / 20) - 1) / (10 ** (rp_req / 20) + 1))
        est = kaiser_equiripple_estimate(delta, delta, edge - wp, fs)
        n = max(3, est - (est - 3) % 4)
        if n > MAX_FIR_TAPS:
            raise ctx.error(f"the requirements need about {est} taps, above the limit of {MAX_FIR_TAPS}; widen the "
                            "transition band (lower passband_hz) or lower attenuation_db", "stopband_hz")
        cap = min(MAX_FIR_TAPS, max(n + 64, n + n // 4))  # as for Kaiser designs: a quarter beyond the estimate
        t = trial(n)
        while not passes(t):
            n += 4
            if n > cap:
                raise ctx.error(f"no half-band design up to {cap} taps reaches {need}; widen the transition band "
                                "(lower passband_hz) or lower attenuation_db", "attenuation_db")
            t = trial(n)
        while n > 3:
            shorter = trial(n - 4)
            if not passes(shorter):
                break
            n, t = n - 4, shorter
        how = f"{n} taps (shortest meeting {need}; estimate {est})"
    taps, dev, got = t
    if given is not None and not (got >= att and (rp_req is None or dev <= rp_req)):
        short = (f"{got:.2f} dB attenuation" if got < att else f"{dev:.4f} dB passband deviation")
        raise ctx.error(f"with taps = {given} the half-band design reaches {short}, short of attenuation_db = {att:g}"
                        + (f" / ripple_db = {rp_req:g}" if rp_req is not None else "")
                        + f"; {_searched_length(ctx)}", "taps")
    warns: list[str] = []
    if given is not None and got < target:
        warns.append(f"with taps = {given} the design reaches {got:.2f} dB, leaving {got - att:.2f} dB of the "
                     f"{margin:g} dB margin_db for coefficient quantisation; give more taps or remove taps")
    if n > MANY_TAPS:
        warns.append(f"{n} taps is a long filter for an embedded target; consider a wider transition band "
                     "or a multi-stage design")
    nonzero = int(np.count_nonzero(taps))
    text = (f"{ctx.kind} half-band (Parks-McClellan, Vaidyanathan-Nguyen), {how}, {nonzero} non-zero: passband "
            f"{wp:g} Hz, stopband {edge:g} Hz, reaches {got:.2f} dB attenuation ({att:g} dB asked, margin "
            f"{got - att:.2f} dB for quantisation), {dev:.4f} dB passband deviation")
    return _fir_result(taps, text, warns, att=att, rp_req=rp_req, margin=margin, target=target, got=got, dev=dev,
                       given=given)


def _fir_result(taps, text: str, warns: list[str], *, att, rp_req, margin, target, got, dev,
                given) -> StageResult:
    """A linear-phase FIR stage: its block, text, warnings and the requirement record (what was asked,
    what the design reached, what is left for coefficient quantisation)."""
    n = len(taps)
    requirement = {
        "attenuation_db": float(att), "ripple_db": float(rp_req) if rp_req is not None else None,
        "margin_db": float(margin), "design_attenuation_db": float(target),
        "reached_attenuation_db": float(got), "reached_ripple_db": float(dev),
        "margin_left_db": float(got - att),
        "margin_kept_by": "given taps" if given is not None else "length",
    }
    return StageResult(blocks=(FirBlock(np.asarray(taps, dtype=float), label=text),), text=text,
                       order=n - 1, taps=n, latency_samples=(n - 1) / 2, warnings=tuple(warns),
                       requirement=requirement)


def _searched_length(ctx: StageContext) -> str:
    """The fix for too few given taps: the length the search finds, when it finds one."""
    from dataclasses import replace

    from ..errors import DescriptionError

    free = replace(ctx, params={k: v for k, v in ctx.params.items() if k != "taps"})
    try:
        n = design_fir(free).taps
    except DescriptionError:
        return "remove taps to let coefc search the length, or widen the transition band"
    return f"use taps = {n} (what the search finds with the margin) or remove taps"


def _shortest(start: int, passes) -> int | None:
    """The shortest passing length of the parity of *start* (steps of 2).

    Upward from *start* until a length passes (or the tap limit), downward until
    one fails, then bisection between the two.  Exact when passing is monotone
    in the length within a parity (Parks-McClellan's optimum; McClellan & Parks
    1973); every length returned has passed its own measurement.
    """
    n, fail = start, None
    while not passes(n):
        fail = n
        n += 2 * max(1, n // 32)
        if n > MAX_FIR_TAPS:
            last = MAX_FIR_TAPS if (MAX_FIR_TAPS - start) % 2 == 0 else MAX_FIR_TAPS - 1
            if last > fail and passes(last):
                n = last
                break
            return None
    hi = n
    while fail is None:
        probe = hi - 2 * max(1, hi // 8)
        if probe < 3:
            fail = hi - 2 * ((hi - 1) // 2)  # 1 or 2: shorter than any design
        elif passes(probe):
            hi = probe
        else:
            fail = probe
    while hi - fail > 2:
        mid = fail + 2 * ((hi - fail) // 4)
        if passes(mid):
            hi = mid
        else:
            fail = mid
    return hi


def _show(e) -> str:
    return f"[{e[0]:g}, {e[1]:g}]" if isinstance(e, tuple) else f"{e:g}"
