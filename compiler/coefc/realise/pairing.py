"""Pole-zero pairing and section ordering: float sections in, re-paired sections out.

:func:`repair` takes the second-order sections of a channel (scipy row layout,
``a0 == 1``), collects their poles and zeros and pairs them again by Jackson's
rule: the pole pair closest to the unit circle is taken first and given the zeros
nearest to it, then the next pole pair, and so on.  Numerators come out monic
(``b0 == 1``); the product of the original ``b0`` is returned as the overall gain.

:func:`order_sections` puts the re-paired sections in order by the radius of
their poles.  Whether the most peaked section should come first or last depends
on the scaling norm and on the filter, and the literature's statements of the
rule disagree in direction, so both monotone orders are scaled and their analytic
output roundoff noise compared; the quieter one is kept and then improved by
exchanging pairs of sections while the analytic noise drops.

References
----------
L. B. Jackson, "Roundoff-noise analysis for fixed-point digital filters realized in
cascade or parallel form", IEEE Trans. Audio Electroacoust. AU-18(2), 1970
(pairing and ordering of second-order sections).
"""

from __future__ import annotations

import numpy as np

from . import scaling


class NotRepairable(ValueError):
    """The sections cannot be expressed as monic pole-zero pairs (e.g. b0 == 0)."""


def _roots(c0: float, c1: float, c2: float) -> tuple[list[complex], list[float]]:
    """Roots of ``c0 + c1 z^-1 + c2 z^-2``: (upper-half complex roots, real roots)."""
    if c0 == 0:
        raise NotRepairable("leading coefficient is zero")
    p, q = c1 / c0, c2 / c0
    disc = p * p - 4 * q
    if disc < 0:
        return [complex(-p / 2, np.sqrt(-disc) / 2)], []
    sq = np.sqrt(disc)
    # numerically stable pair of real roots
    r1 = (-p - sq) / 2 if p >= 0 else (-p + sq) / 2
    r2 = q / r1 if r1 != 0 else (-p + sq) / 2 if p >= 0 else (-p - sq) / 2
    return [], [float(r1), float(r2)]


def _poly_complex(z: complex) -> np.ndarray:
    return np.array([1.0, -2.0 * z.real, abs(z) ** 2])


def _poly_real(r1: float, r2: float) -> np.ndarray:
    return np.array([1.0, -(r1 + r2), r1 * r2])


def repair(sos: np.ndarray) -> tuple[list[tuple[np.ndarray, np.ndarray]], float]:
    """Re-pair the poles and zeros of *sos*; return ``([(b, a), ...], gain)``."""
    sos = np.asarray(sos, dtype=float)
    cz, rz, cp, rp = [], [], [], []
    gain = 1.0
    for row in sos:
        gain *= row[0]
        c, r = _roots(*row[:3])
        cz += c
        rz += r
        c, r = _roots(*row[3:])
        cp += c
        rp += r
    # pole groups: complex pairs, and real poles two by two (largest radius first)
    rp.sort(key=lambda v: -abs(v))
    groups = [("c", p, abs(p)) for p in cp] + [("r", (rp[i], rp[i + 1]), abs(rp[i])) for i in range(0, len(rp), 2)]
    groups.sort(key=lambda g: -g[2])
    out = []
    for kind, p, _ in groups:
        lead = p if kind == "c" else p[0]
        best_c = min(range(len(cz)), key=lambda i: abs(cz[i] - lead), default=None)
        best_r = min(range(len(rz)), key=lambda i: abs(rz[i] - lead), default=None)
        use_c = best_c is not None and (best_r is None or abs(cz[best_c] - lead) <= abs(rz[best_r] - lead))
        if use_c:
            b = _poly_complex(cz.pop(best_c))
        else:
            r1 = rz.pop(best_r)
            other = p if kind == "c" else p[1]
            j = min(range(len(rz)), key=lambda i: abs(rz[i] - other))
            b = _poly_real(r1, rz.pop(j))
        a = _poly_complex(p) if kind == "c" else _poly_real(*p)
        out.append((b, a))
    return out, gain


def pole_radius(a) -> float:
    """Largest pole radius of ``1 + a1 z^-1 + a2 z^-2``."""
    c, r = _roots(*a)
    return max([abs(v) for v in c] + [abs(v) for v in r] + [0.0])


def order_sections(pre, sections, post, norm: str, target: float, structure: str,
                   extra_gain: float = 1.0, coef_lsb: float = 0.0) -> tuple[list, dict]:
    """Choose the order of *sections* (Jackson's rule, then pairwise exchanges).

    1. Sort the sections by pole radius, both ways; keep the direction with the
       lower analytic output noise (:func:`chain_noise`).
    2. For up to ``MAX_EXCHANGE`` sections, exchange pairs of sections while an
       exchange lowers the analytic noise (at most three passes).  A trial order
       is abandoned as soon as it provably cannot win: more thin numerators than
       the best order, or a partial sum of its noise terms (each >= 0) already at
       the best order's noise.  The candidates share
       the responses of their common leading ops (:class:`scaling.PrefixMemo`).
       The order chosen is the one the full evaluation of every trial would choose.

    With *coef_lsb* (the coefficient word's LSB), an order whose scaling leaves a
    numerator with fewer than 8 significant bits of that word loses to any order
    with fewer such numerators, whatever its noise: a numerator rounded to a few
    LSB (or to zero) would destroy the response.

    *pre* and *post* are the float FIR ops (``("fir", taps)``) before and after the
    IIR cascade.  Returns the ordered sections and a dict of the analytic output
    noise (data LSB^2) of the candidates: ``"descending"`` (poles closest to the
    unit circle first), ``"ascending"`` and ``"exchanged"`` (the final order).
    """
    desc = sorted(sections, key=lambda s: -pole_radius(s[1]))
    chain = list(pre) + [("sos", s) for s in sections] + list(post)
    n = scaling.response_length(chain)

    memo = scaling.PrefixMemo()  # the candidate orders share the responses of their common leading ops

    def cost(secs, beat=None):
        return chain_cost(pre, secs, post, norm, target, structure, extra_gain, n, coef_lsb, memo, beat)

    cands = {"descending": desc, "ascending": desc[::-1]}
    costs = {name: cost(secs) for name, secs in cands.items()}
    first = min(costs, key=costs.get)
    best, best_cost = list(cands[first]), costs[first]
    if len(best) <= MAX_EXCHANGE:
        for _ in range(3):
            improved = False
            for i in range(len(best)):
                for j in range(i + 1, len(best)):
                    trial = list(best)
                    trial[i], trial[j] = trial[j], trial[i]
                    v = cost(trial, best_cost)  # (thin, inf) once a bound shows it cannot win
                    if v[0] < best_cost[0] or (v[0] == best_cost[0] and v[1] < best_cost[1] * (1 - 1e-9)):
                        best, best_cost, improved = trial, v, True
            if not improved:
                break
    noise = {name: c[1] for name, c in costs.items()}
    noise["exchanged"] = best_cost[1]
    return best, noise


MAX_EXCHANGE = 6


def chain_cost(pre, sections, post, norm: str, target: float, structure: str, extra_gain: float = 1.0,
               length: int | None = None, coef_lsb: float = 0.0,
               memo: scaling.PrefixMemo | None = None, beat: tuple | None = None) -> tuple[int, float]:
    """(numerators with fewer than 8 significant bits, analytic output noise in LSB^2).

    *memo* shares the responses of common leading ops between calls (one ordering
    search); the result is the same without it.  With *beat* ``= (thin, noise)`` of
    an order to beat, the noise is ``inf`` when this order provably does not: more
    thin numerators, or as many and a noise of at least ``noise * (1 - 1e-9)``.
    """
    chain = list(pre) + [("sos", s) for s in sections] + list(post)
    n = length or scaling.response_length(chain)
    peaks, noise = _scaled_cost(chain, norm, target, structure, extra_gain, n, memo,
                                lambda pk: _stop(pk, coef_lsb, beat))
    return _thin(peaks, coef_lsb), noise


def _thin(peaks, coef_lsb: float) -> int:
    return sum(1 for v in peaks if v < 128 * coef_lsb) if coef_lsb > 0 else 0


def _stop(peaks, coef_lsb: float, beat) -> float | None:
    """The noise at or above which an order with these numerator peaks cannot beat *beat* (None: no bound)."""
    if beat is None:
        return None
    thin = _thin(peaks, coef_lsb)
    if thin > beat[0]:
        return 0.0  # loses whatever its noise
    if thin < beat[0]:
        return None  # wins whatever its noise: evaluate it fully
    return beat[1] * (1 - 1e-9)


_COST_CACHE: dict = {}
_LOWER: dict = {}


def _scaled_cost(chain, norm: str, target: float, structure: str, extra_gain: float, n: int,
                 memo: scaling.PrefixMemo | None = None, stop_at=None):
    """(largest |numerator coefficient| of every scaled section, analytic output noise).

    A pure function of its arguments, so it is kept per process by their exact
    values: a sweep over coefficient widths orders the same float sections for the
    same data word (the same *target*) again and again.  *stop_at(peaks)* may give a
    noise level at which to stop summing (:func:`scaling.output_noise_lsb2`'s
    *stop*): the noise is then ``inf``, and only that bound is kept (``_LOWER``).
    """
    key = (tuple((k, *(np.asarray(v, dtype=float).tobytes() for v in (op if k == "sos" else (op,))))
                 for k, op in chain), norm, float(target), structure, float(extra_gain), int(n))
    hit = _COST_CACHE.get(key)
    if hit is not None:
        return hit
    low = _LOWER.get(key)  # (peaks, a proven lower bound of the noise) of an earlier abandoned evaluation
    if low is not None and stop_at is not None:
        stop = stop_at(low[0])
        if stop is not None and low[1] >= stop:
            return low[0], float("inf")
    f = scaling.scale_factors(chain, norm, target, n, memo)
    sc = [(k, scaling.scaled(k, op, c)) for (k, op), c in zip(chain, f)]
    g = extra_gain / float(np.prod(f))
    peaks = tuple(float(np.max(np.abs(op[0]))) for k, op in sc if k == "sos")
    stop = stop_at(peaks) if stop_at is not None else None
    noise = scaling.output_noise_lsb2(sc, g, structure, True, n, stop=stop)
    if noise is None:  # provably no better than the order to beat: the noise is at least `stop`
        if len(_LOWER) >= 8192:
            _LOWER.clear()
        _LOWER[key] = (peaks, stop)
        return peaks, float("inf")
    out = (peaks, noise)
    if len(_COST_CACHE) >= 8192:
        _COST_CACHE.clear()
    _COST_CACHE[key] = out
    return out


def chain_noise(pre, sections, post, norm: str, target: float, structure: str, extra_gain: float = 1.0,
                length: int | None = None) -> float:
    """Analytic output noise (data LSB^2) of the chain scaled by *norm*."""
    return chain_cost(pre, sections, post, norm, target, structure, extra_gain, length)[1]
