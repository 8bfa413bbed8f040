"""Classic IIR filters: family, order and edges (or requirements) in, SOS out.

Families: Butterworth, Chebyshev type I and II, elliptic (Cauer) and Bessel, as
low-pass, high-pass, band-pass or band-stop.  A filter is given either

* by ``order`` and ``cutoff_hz`` (a frequency, or a band ``[low, high]`` for
  band-pass/band-stop), with ``ripple_db`` for Chebyshev I and elliptic and
  ``attenuation_db`` for Chebyshev II and elliptic; or
* by requirements: ``passband_hz``, ``stopband_hz``, ``ripple_db`` (largest
  passband loss) and ``attenuation_db`` (smallest stopband attenuation), from which
  the minimal order is found (Butterworth, Chebyshev I/II, elliptic).  Such a
  design keeps ``margin_db`` (default 0.5 dB) of stopband attenuation beyond
  ``attenuation_db`` for coefficient quantisation: it is designed for
  ``attenuation_db + margin_db``, at the minimal order when that order has room
  for it, otherwise at the next order; the design report says which.  The
  designed filter is measured on a dense grid and the order raised should it fall
  short.

Order vs poles: ``order`` is the order of the low-pass prototype (scipy's ``N``), so
a band-pass or band-stop of ``order = 4`` has 8 poles.  ``cutoff_hz`` means what it
means in scipy.signal: the -3 dB point for Butterworth; the passband edge (where
the loss reaches ``ripple_db``) for Chebyshev I and elliptic; the stopband edge
(where the attenuation reaches ``attenuation_db``) for Chebyshev II; and the -3 dB
point for Bessel (magnitude-normalised, scipy's ``norm="mag"``).

References
----------
S. Butterworth, "On the theory of filter amplifiers", Wireless Engineer 7, 1930.
A. V. Oppenheim & R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed., ch. 7
(analog prototypes and the bilinear transformation).
scipy.signal.butter/cheby1/cheby2/ellip/bessel and buttord/cheb1ord/cheb2ord/ellipord.
"""

from __future__ import annotations

import warnings

import numpy as np

from ..blocks import SosBlock
from ..spec import MAX_IIR_ORDER
from .stage import StageContext, StageResult, edges_in_order

#: Orders above which a requirement is reported as needing a very high order.
HIGH_ORDER = 12
#: Tolerance (dB) of the dense-grid check of a design given by requirements: the classic
#: families meet their edges exactly, up to floating-point rounding.
_TOL_DB = 1e-6

_NAMES = {"butterworth": "Butterworth", "chebyshev1": "Chebyshev I", "chebyshev2": "Chebyshev II",
          "elliptic": "elliptic", "bessel": "Bessel"}


def _btype(kind: str) -> str:
    return {"lowpass": "lowpass", "highpass": "highpass", "bandpass": "bandpass", "bandstop": "bandstop"}[kind]


def family_sos(response: str, order: int, edges, kind: str, fs: float,
               ripple_db: float | None = None, attenuation_db: float | None = None) -> np.ndarray:
    """Second-order sections of a classic family (scipy.signal designs, ``output='sos'``)."""
    from scipy import signal

    wn = list(edges) if isinstance(edges, tuple) else edges
    bt = _btype(kind)
    if response == "butterworth":
        return signal.butter(order, wn, bt, output="sos", fs=fs)
    if response == "chebyshev1":
        return signal.cheby1(order, ripple_db, wn, bt, output="sos", fs=fs)
    if response == "chebyshev2":
        return signal.cheby2(order, attenuation_db, wn, bt, output="sos", fs=fs)
    if response == "elliptic":
        return signal.ellip(order, ripple_db, attenuation_db, wn, bt, output="sos", fs=fs)
    if response == "bessel":
        return signal.bessel(order, wn, bt, output="sos", fs=fs, norm="mag")
    raise ValueError(f"unknown response {response}")


def _show(e) -> str:
    return f"[{e[0]:g}, {e[1]:g}]" if isinstance(e, tuple) else f"{e:g}"


def design_iir(ctx: StageContext) -> StageResult:
    """lowpass/highpass/bandpass/bandstop with a classic response family."""
    from scipy import signal

    response = ctx.get("response")
    name = _NAMES[response]
    by_order = ctx.has("order") or ctx.has("cutoff_hz")
    by_req = ctx.has("passband_hz") or ctx.has("stopband_hz")
    if ctx.has("freq_hz") or ctx.has("q") or ctx.has("bandwidth_oct"):
        bad = next(k for k in ("freq_hz", "q", "bandwidth_oct") if ctx.has(k))
        raise ctx.error(f"applies to response = \"biquad\" only; a {name} filter takes order and cutoff_hz "
                        "(or passband_hz and stopband_hz)", bad)
    if by_order and by_req:
        raise ctx.error("give either order and cutoff_hz, or passband_hz and stopband_hz with ripple_db and "
                        "attenuation_db (the minimal order is then found), not both",
                        "passband_hz" if ctx.has("passband_hz") else "stopband_hz")
    warns: list[str] = []
    rp = ctx.get("ripple_db")
    rs = ctx.get("attenuation_db")
    requirement = None
    if by_req:
        if response == "bessel":
            raise ctx.error("a Bessel filter is designed by order and cutoff_hz (it has no minimal-order "
                            "rule); give order and cutoff_hz", "passband_hz")
        wp = ctx.require("passband_hz", "give the passband edge(s) in Hz")
        ws = ctx.require("stopband_hz", "give the stopband edge(s) in Hz")
        rp = ctx.require("ripple_db", "give the largest passband loss in dB, e.g. ripple_db = 0.5")
        rs = ctx.require("attenuation_db", "give the smallest stopband attenuation in dB, e.g. attenuation_db = 60")
        edges_in_order(ctx, wp, ws)
        if rs <= rp:
            raise ctx.error(f"attenuation_db ({rs:g}) must exceed ripple_db ({rp:g})", "attenuation_db")
        margin = ctx.margin_db()
        if rs + margin > 300:
            raise ctx.error(f"{rs + margin:g} dB (attenuation_db plus margin_db) is beyond double precision; "
                            "use at most 300 dB in all", "attenuation_db")
        ordfunc = {"butterworth": signal.buttord, "chebyshev1": signal.cheb1ord,
                   "chebyshev2": signal.cheb2ord, "elliptic": signal.ellipord}[response]

        def minimal(atten: float):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                try:
                    n, w = ordfunc(list(wp) if isinstance(wp, tuple) else wp,
                                   list(ws) if isinstance(ws, tuple) else ws, rp, atten, fs=ctx.fs)
                except (ValueError, ZeroDivisionError, OverflowError) as e:
                    raise ctx.error(f"no {name} filter meets these requirements ({e}); relax them",
                                    "stopband_hz") from None
            return int(n), w

        min_order = minimal(rs)[0]
        order, wn = minimal(rs + margin)
        if not 1 <= order <= MAX_IIR_ORDER:
            raise ctx.error(f"the requirements need a {name} order of {order}, above the limit of "
                            f"{MAX_IIR_ORDER}; widen the transition band or relax ripple_db/attenuation_db",
                            "stopband_hz")
        wn_arr = np.atleast_1d(np.asarray(wn, dtype=float))
        if not np.all(np.isfinite(wn_arr)) or np.any(wn_arr <= 0) or np.any(wn_arr >= ctx.nyquist):
            raise ctx.error(f"no {name} filter meets these requirements below Nyquist; relax them", "stopband_hz")
        edges = tuple(float(x) for x in wn_arr) if wn_arr.size == 2 else float(wn_arr[0])
        # The order formulas are closed forms; the designed filter is measured on a dense grid and,
        # should it fall short (rounding at the edges), the next order is taken.
        while True:
            sos_try = _family_or_error(ctx, name, response, order, edges, rp, rs + margin)
            loss, got = measure_sos(sos_try, ctx.kind, wp, ws, ctx.fs)
            if loss <= rp + _TOL_DB and got >= rs + margin - _TOL_DB:
                break
            if order >= MAX_IIR_ORDER:
                raise ctx.error(f"no {name} filter up to order {MAX_IIR_ORDER} reaches {rs:g} dB + {margin:g} dB "
                                f"margin with at most {rp:g} dB loss (best: {got:.2f} dB, {loss:.3f} dB loss); "
                                "widen the transition band or relax ripple_db/attenuation_db", "stopband_hz")
            order += 1
        if order > HIGH_ORDER:
            warns.append(f"the requirements need a {name} order of {order} (high for fixed point); "
                         "consider relaxing them or an elliptic response")
        extra = order - min_order
        if extra == 0:
            paid = (f"the minimal order for {rs:g} dB also keeps a {margin:g} dB margin for quantisation"
                    if margin else "no margin for quantisation (margin_db = 0)")
        else:
            paid = (f"{'one order' if extra == 1 else f'{extra} orders'} above the minimal {min_order} for "
                    f"{rs:g} dB, to keep a {margin:g} dB margin for quantisation")
        how = (f"order {order} (for passband {_show(wp)} Hz, stopband {_show(ws)} Hz, {rp:g} dB ripple, "
               f"{rs:g} dB attenuation; {paid}; reaches {got:.2f} dB, {loss:.3f} dB loss)")
        requirement = {
            "attenuation_db": float(rs), "ripple_db": float(rp), "margin_db": float(margin),
            "design_attenuation_db": float(rs + margin), "reached_attenuation_db": float(got),
            "reached_ripple_db": float(loss), "margin_left_db": float(got - rs),
            "minimal_order": min_order, "order": order,
            "margin_kept_by": "minimal order" if extra == 0 else "higher order",
        }
    else:
        order = ctx.require("order", "give the order, e.g. order = 4 (or passband_hz and stopband_hz "
                                     "for a minimal order)")
        if ctx.has("margin_db"):
            raise ctx.error("applies to a filter given by requirements (passband_hz, stopband_hz, ripple_db, "
                            "attenuation_db); a filter given by order and cutoff_hz keeps no margin: remove it",
                            "margin_db")
        edges = ctx.require("cutoff_hz", "give the cutoff frequency in Hz (a band [low, high] for "
                                         "bandpass/bandstop)")
        if response in ("butterworth", "bessel"):
            for k in ("ripple_db", "attenuation_db"):
                if ctx.has(k):
                    raise ctx.error(f"does not apply to a {name} filter given by order; remove it", k)
        if response in ("chebyshev1", "elliptic") and rp is None:
            raise ctx.error(f"missing; a {name} filter needs the passband ripple, e.g. ripple_db = 0.5",
                            "ripple_db")
        if response in ("chebyshev2", "elliptic") and rs is None:
            raise ctx.error(f"missing; a {name} filter needs the stopband attenuation, e.g. attenuation_db = 60",
                            "attenuation_db")
        if response == "chebyshev2" and rp is not None:
            raise ctx.error("does not apply to a Chebyshev II filter given by order; remove it", "ripple_db")
        if response == "chebyshev1" and rs is not None:
            raise ctx.error("does not apply to a Chebyshev I filter given by order; remove it", "attenuation_db")
        if response == "elliptic" and rs <= rp:
            raise ctx.error(f"attenuation_db ({rs:g}) must exceed ripple_db ({rp:g})", "attenuation_db")
        if response == "bessel" and order > 25:
            raise ctx.error(f"Bessel order {order} is beyond what can be designed accurately; use at most 25",
                            "order")
        how = f"order {order} at {_show(edges)} Hz" + (f", {rp:g} dB ripple" if rp is not None and
                                                       response in ("chebyshev1", "elliptic") else "") \
            + (f", {rs:g} dB attenuation" if rs is not None and response in ("chebyshev2", "elliptic") else "")
    sos = sos_try if by_req else _family_or_error(ctx, name, response, order, edges, rp, rs)
    if not np.all(np.isfinite(sos)):
        raise ctx.error(f"the {name} design is not numerically sound at this order and these edges; "
                        "lower the order or move the edges", "order" if ctx.has("order") else "stopband_hz")
    poles = order * (2 if ctx.kind in ("bandpass", "bandstop") else 1)
    text = f"{ctx.kind} {name} {how}"
    return StageResult(blocks=(SosBlock(sos, label=text),), text=text, order=poles, sections=len(sos),
                       warnings=tuple(warns), requirement=requirement)


def _family_or_error(ctx: StageContext, name: str, response: str, order: int, edges, rp, rs) -> np.ndarray:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return family_sos(response, order, edges, ctx.kind, ctx.fs, rp, rs)
        except (ValueError, ZeroDivisionError, OverflowError, np.linalg.LinAlgError) as e:
            raise ctx.error(f"the {name} design failed ({e}); change the order or edges, or relax "
                            "ripple_db/attenuation_db") from None


def measure_sos(sos: np.ndarray, kind: str, wp, ws, fs: float, points: int = 4096) -> tuple[float, float]:
    """(largest passband loss in dB, smallest stopband attenuation in dB) of a design given by requirements.

    Each band is sampled at its edges and at *points* linearly and *points*
    logarithmically spaced frequencies; the loss and attenuation are relative to 0 dB
    (the classic families peak at 0 dB in the passband).
    """
    from scipy import signal

    nyq = fs / 2
    if kind == "lowpass":
        pbands, sbands = [(0.0, wp)], [(ws, nyq)]
    elif kind == "highpass":
        pbands, sbands = [(wp, nyq)], [(0.0, ws)]
    elif kind == "bandpass":
        pbands, sbands = [wp], [(0.0, ws[0]), (ws[1], nyq)]
    else:
        pbands, sbands = [(0.0, wp[0]), (wp[1], nyq)], [ws]

    def level(lo, hi):
        f = np.concatenate([[lo, hi], np.linspace(lo, hi, points),
                            np.geomspace(max(lo, hi * 1e-6), hi, points)])
        with np.errstate(divide="ignore"):
            return 20 * np.log10(np.abs(signal.sosfreqz(sos, worN=f, fs=fs)[1]))

    loss = max(float(-np.min(level(lo, hi))) for lo, hi in pbands)
    att = min(float(-np.max(level(lo, hi))) for lo, hi in sbands)
    return max(loss, 0.0), att
