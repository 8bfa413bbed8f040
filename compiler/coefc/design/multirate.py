"""Rate changes: ``decimate`` (keep every M-th sample) and ``interpolate`` (insert L - 1 zeros).

A rate change is a :class:`coefc.blocks.RateBlock`; every stage after it is designed
at the new rate.  The realisation (:mod:`coefc.realise`) merges a decimation that
directly follows an FIR (or an interpolation directly before one) into one
polyphase FIR that computes only the samples kept (:class:`coefc.program.PolyFirOp`).

The filter before a decimation keeps what would fold into the output band out of
it (anti-aliasing); the filter after an interpolation removes the images of the
input spectrum that zero insertion creates, and carries the gain ``L`` that zero
insertion takes away (:func:`coefc.design.design_channel` applies it).

References
----------
R. E. Crochiere and L. R. Rabiner, *Multirate Digital Signal Processing*,
Prentice-Hall, 1983, ch. 2 (decimation, interpolation, aliasing and imaging;
from memory).
P. P. Vaidyanathan, *Multirate Systems and Filter Banks*, Prentice-Hall, 1993,
ch. 4 (noble identities, polyphase decomposition; from memory).
E. B. Hogenauer, "An economical class of digital filters for decimation and
interpolation", IEEE Trans. ASSP-29(2), 1981 (the CIC decimator: response
``(sin(pi f R D) / sin(pi f D))^N``, register growth ``N log2(R D)``; from memory).
T. W. Parks & C. S. Burrus, *Digital Filter Design*, Wiley 1987, ch. 3 (least-squares
FIR design with an arbitrary desired magnitude; from memory).
"""

from __future__ import annotations

import math

import numpy as np

from ..blocks import CicBlock, FirBlock, RateBlock
from .stage import StageContext, StageResult

#: stage kinds that can serve as the anti-alias filter right before a decimation (or the
#: image filter right after an interpolation): low- and band-pass filters and raw coefficients
BAND_LIMITING_KINDS = ("lowpass", "bandpass", "fir-lowpass", "fir-bandpass", "fir", "sos", "transfer",
                       "cic-compensator")

#: sub-bands of the compensator's passband, each with a linear piece of the inverse CIC response
COMPENSATOR_PIECES = 64
#: points of the grid on which the compensated passband (CIC times compensator) is measured
PASSBAND_GRID = 2048
DEFAULT_COMPENSATOR_RIPPLE_DB = 0.1


def design_decimate(ctx: StageContext) -> StageResult:
    """Keep every ``factor``-th sample; the stages after it run at ``fs / factor``."""
    m = int(ctx.require("factor", "give the decimation factor, e.g. factor = 2"))
    return StageResult(blocks=(RateBlock(down=m),),
                       text=f"decimate by {m}: {ctx.fs:g} Hz -> {ctx.fs / m:g} Hz")


def design_interpolate(ctx: StageContext) -> StageResult:
    """Insert ``factor - 1`` zeros after each sample; the stages after it run at ``fs * factor``."""
    m = int(ctx.require("factor", "give the interpolation factor, e.g. factor = 2"))
    return StageResult(blocks=(RateBlock(up=m),),
                       text=f"interpolate by {m}: {ctx.fs:g} Hz -> {ctx.fs * m:g} Hz")


def design_cic_decimator(ctx: StageContext) -> StageResult:
    """A CIC decimator (Hogenauer 1981): ``N`` integrators, keep every ``R``-th sample, ``N`` combs of
    differential delay ``D``.  As a float block it is the FIR of its impulse response normalised to DC
    gain 1 (:class:`coefc.blocks.CicBlock`); the realiser writes integrators and combs."""
    from ..program import cic_growth, cic_impulse

    r = int(ctx.require("factor", "give the decimation factor, e.g. factor = 16"))
    n = int(ctx.require("stages", "give the number of integrator/comb pairs, e.g. stages = 4"))
    d = int(ctx.get("differential_delay", 1))
    h = np.array(cic_impulse(r, n, d), dtype=float)
    g = (r * d) ** n
    growth = cic_growth(r, n, d)
    text = (f"CIC decimator by {r}, {n} stages, differential delay {d}: {ctx.fs:g} Hz -> {ctx.fs / r:g} Hz, "
            f"DC gain (R*D)^N = {g} removed at the output, register growth N*log2(R*D) = {growth} bits")
    first_null = ctx.fs / (r * d)
    details = (f"response (sin(pi f R D / fs) / (R D sin(pi f / fs)))^{n}: nulls at multiples of "
               f"{first_null:g} Hz, the centres of the bands that fold onto 0 Hz",
               f"{len(h)} taps of impulse response at {ctx.fs:g} Hz; no multiplies in the integrators and combs")
    return StageResult(blocks=(CicBlock(h / g, label=text, factor=r, stages=n, delay=d), RateBlock(down=r)),
                       text=text, order=len(h) - 1, taps=len(h), latency_samples=(len(h) - 1) / 2, details=details)


def cic_magnitude(f_hz, fs_out: float, factor: int, stages: int, delay: int) -> np.ndarray:
    """|H(f)| of a CIC decimator normalised to DC gain 1, at frequencies *f_hz* in Hz, for its output
    rate *fs_out* (input rate ``fs = R fs_out``): ``|sin(pi f R D / fs) / (R D sin(pi f / fs))|^N``
    (Hogenauer 1981)."""
    f = np.asarray(f_hz, dtype=float)
    fs = fs_out * factor
    rd = factor * delay
    num = np.sin(np.pi * f * rd / fs)
    den = rd * np.sin(np.pi * f / fs)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(np.abs(den) > 0, num / np.where(den == 0, 1.0, den), 1.0)
    return np.abs(ratio) ** stages


def design_cic_compensator(ctx: StageContext) -> StageResult:
    """A linear-phase FIR at the CIC's output rate whose passband follows the inverse of the CIC's
    droop (``1 / |H_cic(f)|`` up to ``passband_hz``) and whose stopband starts at ``stopband_hz``.

    Least squares (scipy.signal.firls) with the inverse droop as ``COMPENSATOR_PIECES`` linear
    pieces across the passband; weights ``1/delta_p`` and ``1/delta_s`` from ``ripple_db`` and
    ``attenuation_db + margin_db``.  Odd lengths only.  Accepted when the *compensated* passband
    (CIC times compensator, on a grid of ``PASSBAND_GRID`` points) stays within ``ripple_db`` and
    the compensator's own stopband (:func:`coefc.design.fir.measure`) reaches
    ``attenuation_db + margin_db``; without ``taps`` the shortest such odd length is searched upward
    from Kaiser's equiripple estimate.
    """
    import warnings

    from scipy import signal

    from ..stagekinds import MAX_LS_TAPS
    from .fir import kaiser_equiripple_estimate, measure

    if ctx.cic is None:
        raise ctx.error("a cic-compensator corrects the droop of a cic-decimator: put it after a cic-decimator "
                        "stage, with no other rate change between them", "kind")
    r, nst, d = ctx.cic
    fs, nyq = ctx.fs, ctx.nyquist
    wp = float(ctx.require("passband_hz", "give the passband edge in Hz, e.g. passband_hz = 20000"))
    ws = float(ctx.require("stopband_hz", "give the stopband edge in Hz"))
    att = float(ctx.require("attenuation_db", "give the smallest stopband attenuation, e.g. attenuation_db = 80"))
    rp = float(ctx.get("ripple_db", DEFAULT_COMPENSATOR_RIPPLE_DB))
    margin = ctx.margin_db()
    if not wp < ws:
        raise ctx.error(f"passband_hz must be below stopband_hz; got passband_hz = {wp:g}, stopband_hz = {ws:g}",
                        "stopband_hz")
    if rp >= att:
        raise ctx.error(f"ripple_db ({rp:g}) must be smaller than attenuation_db ({att:g})", "ripple_db")
    if att + margin > 300:
        raise ctx.error(f"{att + margin:g} dB (attenuation_db plus margin_db) is beyond double precision; "
                        "use at most 300 dB in all", "attenuation_db")
    droop_db = -20 * math.log10(float(cic_magnitude(wp, fs, r, nst, d)))
    if droop_db > 40:
        raise ctx.error(f"the CIC attenuates {droop_db:.1f} dB at passband_hz = {wp:g} Hz; a compensator would "
                        "amplify its aliases as much: lower passband_hz", "passband_hz")
    target = att + margin
    delta_p = (10 ** (rp / 20) - 1) / (10 ** (rp / 20) + 1)
    delta_s = 10 ** (-target / 20)
    fgrid = np.linspace(0.0, wp, COMPENSATOR_PIECES + 1)
    inv = 1.0 / cic_magnitude(fgrid, fs, r, nst, d)
    bands, desired = [], []
    for i in range(COMPENSATOR_PIECES):
        bands += [fgrid[i], fgrid[i + 1]]
        desired += [inv[i], inv[i + 1]]
    bands += [ws, nyq]
    desired += [0.0, 0.0]
    w_stop = delta_p / delta_s
    weights = [1.0] * COMPENSATOR_PIECES + [w_stop]
    pgrid = np.linspace(0.0, wp, PASSBAND_GRID)
    cic_p = cic_magnitude(pgrid, fs, r, nst, d)
    wgrid = 2 * np.pi * pgrid / fs

    def trial(n_taps: int):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                h = signal.firls(n_taps, bands, desired, weight=weights, fs=fs)
            except (ValueError, np.linalg.LinAlgError):
                return None
        if not np.all(np.isfinite(h)):
            return None
        comp = np.abs(np.exp(-1j * np.outer(wgrid, np.arange(n_taps))) @ h)
        dev = float(np.max(np.abs(20 * np.log10(np.maximum(comp * cic_p, 1e-300)))))
        got = measure(h, [ws, nyq], [False], fs)[1]
        return h, dev, got

    given = ctx.get("taps")
    need = f"{att:g} dB + {margin:g} dB margin" if margin else f"{att:g} dB"
    warns: list[str] = []
    if given is not None:
        if given % 2 == 0 or given < 3:
            raise ctx.error(f"a compensator has an odd number of taps, at least 3; use {max(3, given + 1)}", "taps")
        if given > MAX_LS_TAPS:
            raise ctx.error(f"least-squares designs take at most {MAX_LS_TAPS} taps", "taps")
        t = trial(given)
        if t is None:
            raise ctx.error(f"the least-squares design failed at {given} taps; change taps", "taps")
        h, dev, got = t
        if got < att or dev > rp:
            short = f"{got:.2f} dB attenuation" if got < att else f"{dev:.4f} dB compensated passband deviation"
            raise ctx.error(f"with taps = {given} the compensator reaches {short}, short of attenuation_db = "
                            f"{att:g} / ripple_db = {rp:g}; give more taps or remove taps to search the length",
                            "taps")
        if got < target:
            warns.append(f"with taps = {given} the compensator reaches {got:.2f} dB, leaving {got - att:.2f} dB of "
                         f"the {margin:g} dB margin_db for coefficient quantisation")
        how = f"{given} taps (given)"
        n = given
    else:
        est = kaiser_equiripple_estimate(delta_p, delta_s, ws - wp, fs)
        est = max(3, est | 1)
        cap = min(MAX_LS_TAPS, 4 * est + 64)
        found = None
        for n in range(est, cap + 1, 2):
            t = trial(n)
            if t is not None and t[2] >= target and t[1] <= rp:
                found = t
                break
        if found is None:
            raise ctx.error(f"no least-squares compensator up to {cap} taps reaches {need} with at most {rp:g} dB "
                            "compensated passband deviation; widen the transition band, lower attenuation_db or "
                            "raise ripple_db", "stopband_hz")
        h, dev, got = found
        how = f"{n} taps (shortest odd length meeting {need}; estimate {est})"
    text = (f"CIC compensator (inverse droop of {nst} stages, R = {r}, D = {d}), least squares, {how}: passband "
            f"{wp:g} Hz (CIC droop {droop_db:.2f} dB there), stopband {ws:g} Hz, reaches {got:.2f} dB attenuation, "
            f"{dev:.4f} dB compensated passband deviation")
    requirement = {
        "attenuation_db": att, "ripple_db": rp, "margin_db": float(margin), "design_attenuation_db": float(target),
        "reached_attenuation_db": float(got), "reached_ripple_db": float(dev), "margin_left_db": float(got - att),
        "margin_kept_by": "given taps" if given is not None else "length",
    }
    return StageResult(blocks=(FirBlock(np.asarray(h, dtype=float), label=text),), text=text, order=n - 1, taps=n,
                       latency_samples=(n - 1) / 2, warnings=tuple(warns), requirement=requirement,
                       details=(f"the CIC droop at {wp:g} Hz is {droop_db:.2f} dB; the compensator lifts it back "
                                f"to within {dev:.4f} dB of flat",))
