"""Float design: a channel's stages in, a :class:`coefc.blocks.ChannelDesign` out.

Stage kinds (``kind = ...`` in a description) and the module that designs them:

``lowpass``, ``highpass``, ``bandpass``, ``bandstop``
    with ``response`` = ``butterworth``, ``chebyshev1``, ``chebyshev2``,
    ``elliptic``, ``bessel`` (by ``order`` + ``cutoff_hz``, or by requirements
    ``passband_hz``/``stopband_hz``/``ripple_db``/``attenuation_db``) -- :mod:`.iir`;
    ``linkwitz-riley`` (orders 2, 4, 8; lowpass/highpass) -- :mod:`.linkwitz_riley`;
    ``biquad`` (cookbook section, ``freq_hz`` + ``q``) -- :mod:`.eq`.
``fir-lowpass``, ``fir-highpass``, ``fir-bandpass``, ``fir-bandstop``
    linear-phase FIR from ``passband_hz``, ``stopband_hz``, ``attenuation_db``
    by ``method`` = ``kaiser`` (default), ``equiripple`` or ``least-squares`` -- :mod:`.fir`.
``peaking``, ``lowshelf``, ``highshelf``, ``notch``, ``allpass``
    audio EQ biquads (``freq_hz``, ``gain_db``, ``q``/``bandwidth_oct``/``slope``) -- :mod:`.eq`.
``correction``, ``fir-correction``
    a measured response (``measurement``, ``range_hz``) corrected by fitted cookbook
    sections or a regularised inverse FIR -- :mod:`.correction`.
``weighting``
    IEC 61672 A or C frequency weighting (``weighting = "A"``) -- :mod:`.weighting`.
``dc-blocker``
    first-order high-pass with corner ``cutoff_hz`` -- :mod:`.basic`.
``gain``
    ``db`` or ``linear``, ``invert`` -- :mod:`.basic`.
``delay``
    ``samples``, ``ms`` or ``metres`` (+ ``air_temperature_c``) -- :mod:`.basic`.
``sos``, ``transfer``, ``fir``
    raw coefficients: ``sections``, ``b``/``a``, ``taps`` -- :mod:`.basic`.

:func:`design_channel` also collects warnings worth a designer's attention: very
high-Q sections, poles very near the unit circle, requirements that needed a very
high order, and a channel gain above 0 dB (headroom).
"""

from __future__ import annotations

import importlib
import math

import numpy as np

from ..blocks import ChannelDesign, CicBlock, DelayBlock, FirBlock, GainBlock, RateBlock, SosBlock, StageSummary
from ..spec import ChannelSpec
from ..stagekinds import FIR_KINDS, IIR_KINDS, RATE_KINDS, STAGE_KINDS_TABLE, designer_of
from ..stagekinds import FREQ_KEYS as _FREQ_KEYS
from .stage import StageContext, StageResult

__all__ = ["design_channel", "section_q", "HIGH_Q", "POLE_RADIUS_WARN"]

#: A section whose poles have a quality factor above this is reported.
HIGH_Q = 20.0
#: A channel whose gain peaks above this many dB is reported (headroom).
HEADROOM_WARN_DB = 0.1
#: A pole with a radius above this is reported (it needs long coefficient words
#: and long accumulators; at 48 kHz this is a pole below about 3.8 Hz).
POLE_RADIUS_WARN = 0.9995


def _designer(ctx: StageContext):
    """The designer of the stage, from its design module's table (:mod:`coefc.stagekinds`)."""
    response = None
    if STAGE_KINDS_TABLE[ctx.kind].designer is None:  # an IIR kind: routed by its response
        response = ctx.require("response", "give the response family, e.g. response = \"butterworth\"")
    module, name = designer_of(ctx.kind, response)
    return getattr(importlib.import_module(f".{module}", __name__), name)


def section_q(row) -> float:
    """Quality factor of a section's pole pair (0 for real poles).

    The z-plane pole ``r e^{j theta}`` is mapped to ``s = fs (ln r + j theta)``
    (impulse invariance of the pole), and ``Q = |s| / (2 |Re s|)``, the analog
    definition.
    """
    a1, a2 = float(row[4]), float(row[5])
    if a2 <= 0 or a1 * a1 >= 4 * a2:
        return 0.0
    r = math.sqrt(a2)
    theta = math.acos(max(-1.0, min(1.0, -a1 / (2 * r))))
    ln_r = math.log(r)
    if ln_r == 0.0:
        return math.inf
    return math.hypot(ln_r, theta) / (2 * abs(ln_r))


def _channel_warnings(blocks, stages: list[tuple[int, StageResult]], fs: float) -> list[str]:
    out: list[str] = []
    for index, res in stages:
        for w in res.warnings:
            out.append(f"stage {index}: {w}")
        for b in res.blocks:
            if not isinstance(b, SosBlock):
                continue
            for j, row in enumerate(b.sos):
                q = section_q(row)
                if q > HIGH_Q:
                    out.append(f"stage {index}, section {j + 1}: very high Q ({q:.1f}); expect coefficient "
                               "sensitivity and large internal gain")
                a = np.trim_zeros(row[3:], "b")
                if len(a) > 1:
                    r = float(np.max(np.abs(np.roots(a))))
                    if r > POLE_RADIUS_WARN:
                        out.append(f"stage {index}, section {j + 1}: pole radius {r:.6f} is very near the unit "
                                   "circle; it needs long coefficient words and may limit-cycle")
    from ..blocks import chain_response

    from ..blocks import model_rate

    top = model_rate(blocks, fs)  # the rate of the equivalent single-rate model (multirate channels)
    f = np.linspace(0.0, top / 2, 2049)[:-1]
    f = np.unique(np.concatenate([f, np.geomspace(1.0, top / 2 * 0.999, 512)]))
    mag = np.abs(chain_response(blocks, f, fs))
    peak = float(np.max(mag)) if mag.size else 1.0
    if 20 * math.log10(max(peak, 1e-300)) > HEADROOM_WARN_DB:
        i = int(np.argmax(mag))
        out.append(f"channel gain peaks at {20 * math.log10(peak):+.2f} dB near {f[i]:.0f} Hz; a full-scale "
                   "input would clip unless the signal has that much headroom")
    return out


def _check_sound(ctx: StageContext, res: StageResult) -> None:
    """Refuse a designed stage that double precision could not represent.

    Extreme parameters (a corner of 1e-300 Hz, a Q of 1e300) can push designed
    coefficients to infinity or the poles onto the unit circle; every later stage
    (response, scaling, realisation) would then fail far from the cause.
    """
    from ..blocks import FirBlock, GainBlock

    key = next((k for k in _FREQ_KEYS if ctx.has(k)), None)
    for b in res.blocks:
        values = b.sos if isinstance(b, SosBlock) else b.taps if isinstance(b, FirBlock) else \
            np.array([b.gain]) if isinstance(b, GainBlock) else np.zeros(0)
        if not np.all(np.isfinite(values)):
            raise ctx.error("the design has a coefficient that is not finite (NaN or infinity): these "
                            "parameters are beyond double precision; move them towards ordinary values", key)
        if isinstance(b, SosBlock):
            for row in b.sos:
                a = np.trim_zeros(np.asarray(row[3:], dtype=float), "b")
                if len(a) > 1 and float(np.max(np.abs(np.roots(a)))) >= 1.0:
                    raise ctx.error(
                        f"the designed stage has a pole on the unit circle in double precision: the frequency "
                        f"is too far below the sample rate ({ctx.fs:g} Hz) or the Q too extreme to represent; "
                        "raise the frequency, lower sample_rate_hz or use a gentler Q", key)


def design_channel(channel: ChannelSpec, sample_rate_hz: float, source: str) -> ChannelDesign:
    """Design every stage of *channel* in floating point.

    Parameters
    ----------
    channel : coefc.spec.ChannelSpec
        The validated channel.
    sample_rate_hz : float
        The description's sample rate.
    source : str
        The description file, for error messages.

    Returns
    -------
    coefc.blocks.ChannelDesign
        Blocks in signal order, one StageSummary per stage, and warnings.

    Raises
    ------
    coefc.errors.DescriptionError
        When a stage cannot be designed (unstable raw coefficients, impossible
        requirements, keys that do not apply to the chosen response).
    """
    blocks = []
    summaries = []
    results: list[tuple[int, StageResult]] = []
    fs = float(sample_rate_hz)
    gain_after_zeros = 1  # an interpolation's factor L, for the filter after it (zero insertion costs 1/L)
    cic = None  # (R, N, D) of the CIC decimator the current rate comes from (for a cic-compensator)
    for pos, st in enumerate(channel.stages):
        ctx = StageContext(source=source, channel=channel.name, index=st.index, kind=st.kind,
                           fs=fs, params=st.params, cic=cic)
        if st.kind in RATE_KINDS:
            _check_rate_change(ctx, channel, pos)
        res = _designer(ctx)(ctx)
        _check_sound(ctx, res)
        if gain_after_zeros > 1:
            res = _with_interpolation_gain(res, gain_after_zeros)
            gain_after_zeros = 1
        blocks.extend(res.blocks)
        _check_totals(ctx, blocks)
        results.append((st.index, res))
        summaries.append(StageSummary(index=st.index, kind=st.kind, text=res.text, order=res.order,
                                      sections=res.sections, taps=res.taps,
                                      latency_samples=res.latency_samples, requirement=res.requirement,
                                      details=res.details, rate_hz=fs))
        for b in res.blocks:
            if isinstance(b, RateBlock):
                fs = fs * b.up / b.down
                gain_after_zeros = b.up
                cic = None
        for b in res.blocks:  # a CIC's own rate change leads to the rate its compensator runs at
            if isinstance(b, CicBlock):
                cic = (b.factor, b.stages, b.delay)
    if gain_after_zeros > 1:  # an interpolation ends the channel (allow_imaging): its gain still applies
        blocks.append(GainBlock(float(gain_after_zeros)))
    warnings = _channel_warnings(blocks, results, float(sample_rate_hz))
    return ChannelDesign(name=channel.name, sample_rate_hz=float(sample_rate_hz), blocks=tuple(blocks),
                         stages=tuple(summaries), warnings=tuple(warnings),
                         stopbands=required_stopbands(channel, float(sample_rate_hz)),
                         edges_hz=stage_frequencies(channel))


def _check_rate_change(ctx: StageContext, channel: ChannelSpec, pos: int) -> None:
    """A decimation needs an anti-alias filter right before it, an interpolation an image filter right
    after it (unless ``allow_aliasing``/``allow_imaging``); one channel either decimates or interpolates."""
    from .multirate import BAND_LIMITING_KINDS

    kinds = [st.kind for st in channel.stages]
    if ctx.kind == "cic-decimator" and "interpolate" in kinds or ctx.kind == "interpolate" and \
            "cic-decimator" in kinds:
        raise ctx.error("this channel both decimates and interpolates; a channel may change its rate in one "
                        "direction only: split it into two channels or describe one rate change", "kind")
    if ctx.kind == "cic-decimator":  # its own response is the anti-alias filter (nulls on the folding bands)
        return
    other = "interpolate" if ctx.kind == "decimate" else "decimate"
    if other in kinds:
        raise ctx.error("this channel both decimates and interpolates; a channel may change its rate in one "
                        "direction only: split it into two channels or describe one rate change", "kind")
    if ctx.kind == "decimate" and not ctx.get("allow_aliasing", False):
        before = kinds[pos - 1] if pos > 0 else None
        if before not in BAND_LIMITING_KINDS:
            what = f"a '{before}' stage" if before else "nothing"
            raise ctx.error(f"{what} comes right before this decimation, so everything above {ctx.fs / 2 / ctx.get('factor', 1):g} Hz "
                            "folds into the output band; put an anti-alias low-pass (e.g. fir-lowpass) right "
                            "before it, or write allow_aliasing = true", "factor")
    if ctx.kind == "interpolate" and not ctx.get("allow_imaging", False):
        after = kinds[pos + 1] if pos + 1 < len(kinds) else None
        if after not in BAND_LIMITING_KINDS:
            what = f"a '{after}' stage" if after else "nothing"
            raise ctx.error(f"{what} comes right after this interpolation, so the images of the input spectrum "
                            "stay in the output; put an image-rejection low-pass (e.g. fir-lowpass) right after "
                            "it, or write allow_imaging = true", "factor")


def _with_interpolation_gain(res: StageResult, gain: int) -> StageResult:
    """The stage after an interpolation by *gain*: its first FIR scaled by the factor (zero insertion
    leaves 1/L of the signal's amplitude), or a gain block put in front."""
    from dataclasses import replace as _replace

    first = res.blocks[0] if res.blocks else None
    if isinstance(first, FirBlock):
        return _replace(res, blocks=(FirBlock(first.taps * gain, first.label),) + tuple(res.blocks[1:]),
                        text=res.text + f" (gain x{gain} after zero insertion)")
    return _replace(res, blocks=(GainBlock(float(gain)),) + tuple(res.blocks),
                    text=res.text + f" (gain x{gain} after zero insertion)")


def stage_frequencies(channel: ChannelSpec) -> tuple[float, ...]:
    """Every positive frequency the stages name (``cutoff_hz``, ``freq_hz``, ``passband_hz``,
    ``stopband_hz``, as numbers or band edges), sorted: the frequencies the response grid must cover."""
    out = set()
    for st in channel.stages:
        for key in _FREQ_KEYS:
            v = st.params.get(key)
            for x in (v if isinstance(v, (list, tuple)) else [v]):
                if isinstance(x, (int, float)) and not isinstance(x, bool) and x > 0 and math.isfinite(x):
                    out.add(float(x))
    return tuple(sorted(out))


def _check_totals(ctx: StageContext, blocks) -> None:
    """Refuse a channel whose stages together ask for more work than a check can bound.

    Checked after each stage, so the stage that crosses a limit is the one named.
    """
    from ..spec import MAX_CHANNEL_DELAY_SAMPLES, MAX_CHANNEL_SECTIONS, MAX_CHANNEL_TAPS

    totals = (("FIR taps", sum(len(b.taps) for b in blocks if isinstance(b, FirBlock)), MAX_CHANNEL_TAPS),
              ("second-order sections", sum(len(b.sos) for b in blocks if isinstance(b, SosBlock)),
               MAX_CHANNEL_SECTIONS),
              ("samples of delay", sum(b.samples for b in blocks if isinstance(b, DelayBlock)),
               MAX_CHANNEL_DELAY_SAMPLES))
    for what, n, limit in totals:
        if n > limit:
            raise ctx.error(f"the channel now has {n} {what}; at most {limit} per channel are accepted "
                            "(a merge gate must finish): shorten the stages or split the channel")


def required_stopbands(channel: ChannelSpec, fs: float) -> tuple[tuple[float, float], ...]:
    """The stopbands the stages ask for through ``stopband_hz`` (filters given by requirements).

    A chain multiplies its stages' responses, so a stopband of any stage is a stopband
    of the channel: the union is returned, each band as ``(lo_hz, hi_hz)`` up to
    Nyquist.  Stages given by order and cutoff state no stopband and add none.
    """
    bands = []
    fs0 = fs
    for st in channel.stages:
        if st.kind in RATE_KINDS:  # later stages run at the new rate: their stopbands end at its Nyquist
            fs0 = fs0 / st.params["factor"] if st.kind != "interpolate" else fs0 * st.params["factor"]
        fs = fs0
        edge = st.params.get("stopband_hz")
        if edge is None or st.kind not in IIR_KINDS + FIR_KINDS + ("cic-compensator",):
            continue
        kind = "lowpass" if st.kind == "cic-compensator" else st.kind.removeprefix("fir-")
        e = [float(v) for v in edge] if isinstance(edge, (list, tuple)) else [float(edge)]
        if kind == "lowpass":
            bands.append((e[0], fs / 2))
        elif kind == "highpass":
            bands.append((0.0, e[0]))
        elif kind == "bandpass" and len(e) == 2:
            bands += [(0.0, e[0]), (e[1], fs / 2)]
        elif kind == "bandstop" and len(e) == 2:
            bands.append((e[0], e[1]))
    return tuple(bands)
