"""Node norms for section scaling: a chain of float linear ops in, scale factors out.

A chain is a list of float linear ops in signal order, each ``("sos", (b, a))``
(one second-order section, ``b = [b0, b1, b2]``, ``a = [1, a1, a2]``) or
``("fir", taps)``.  :func:`scale_factors` returns one positive real factor per op
such that, with each op's numerator (or taps) multiplied by its factor, the
transfer function from the chain input to every op output has the chosen norm
equal to *target*.  Factors are not restricted to powers of two: they are folded
into the numerators before the coefficients are quantised.

Norms (Jackson 1970), for the impulse response ``f`` and frequency response ``F``:

``l1``    ``sum |f[n]|``: no overflow for any input bounded by full scale.
``l2``    ``sqrt(sum f[n]^2)``: the statistical rule (unit-variance white input).
``linf``  ``max |F(w)|``: no overflow for a full-scale sinusoid.

``l2`` norms are exact (Gramian of the cascade's state-space form, for up to 40
states).  Impulse responses (for ``l1``) are truncated where the slowest pole has
decayed by 10^-12 (at most 2^18 samples); ``linf`` is read from the exact
frequency response on a grid of 16384 frequencies plus the pole angles, refined
three times around the largest value.

References
----------
L. B. Jackson, "On the interaction of roundoff noise and dynamic range in digital
filters", Bell Syst. Tech. J. 49(2), 1970.
L. B. Jackson, "Roundoff-noise analysis for fixed-point digital filters realized in
cascade or parallel form", IEEE Trans. Audio Electroacoust. AU-18(2), 1970.
"""

from __future__ import annotations

import numpy as np
from scipy import signal

from ..blocks import decay_samples
from ..program import STRUCTURE_TABLE

MAX_LEN = 1 << 18
MIN_LEN = 1 << 11


def response_length(chain) -> int:
    """Samples needed for the impulse response of *chain* to decay below :data:`coefc.blocks.DECAY`."""
    n = MIN_LEN
    for kind, op in chain:
        if kind == "sos":
            r = float(np.max(np.abs(np.roots(op[1])))) if np.any(op[1][1:]) else 0.0
            if r >= 1.0:
                return MAX_LEN
            if r > 0.0:
                n = max(n, decay_samples(r) + 8)
        else:
            n = max(n, 4 * len(op))
    n = 1 << int(np.ceil(np.log2(n)))
    return min(n, MAX_LEN)


def apply_op(kind: str, op, h: np.ndarray) -> np.ndarray:
    """Pass the truncated sequence *h* through one float op."""
    if kind == "sos":
        b, a = op
        return signal.lfilter(b, a, h)
    return np.convolve(h, np.asarray(op, dtype=float))[: len(h)]


def norm(h: np.ndarray, p: str) -> float:
    """The l1 or l2 norm of a truncated impulse response *h*."""
    if p == "l1":
        return float(np.sum(np.abs(h)))
    if p == "l2":
        return float(np.sqrt(np.sum(h * h)))
    raise ValueError(f"unknown norm '{p}'")


def op_freq(kind: str, op, w: np.ndarray) -> np.ndarray:
    """Complex response of one float op at angular frequencies *w* (rad/sample)."""
    zi = np.exp(-1j * np.asarray(w, dtype=float))
    if kind == "sos":
        b, a = op
        return np.polyval(np.asarray(b, dtype=float)[::-1], zi) / np.polyval(np.asarray(a, dtype=float)[::-1], zi)
    return np.polyval(np.asarray(op, dtype=float)[::-1], zi)


def _prefix_freq(chain, i: int, w: np.ndarray, factors) -> np.ndarray:
    h = np.full(len(w), float(np.prod(factors)) if len(factors) else 1.0, dtype=complex)
    for kind, op in chain[: i + 1]:
        h *= op_freq(kind, op, w)
    return h


def _linf_factors(chain, target: float) -> list[float]:
    """linf scale factors from the exact response on a grid, refined at the peak."""
    grid = np.linspace(0.0, np.pi, 1 << 14)
    angles = [np.abs(np.angle(np.roots(op[1]))) for kind, op in chain if kind == "sos" and np.any(op[1][1:])]
    w = np.concatenate([grid] + angles)
    h = np.ones(len(w), dtype=complex)
    factors: list[float] = []
    for i, (kind, op) in enumerate(chain):
        h *= op_freq(kind, op, w)
        mag = np.abs(h)
        j = int(np.argmax(mag))
        peak, w0, step = float(mag[j]), float(w[j]), float(grid[1])
        for _ in range(3):  # zoom around the largest value
            wr = np.clip(w0 + np.linspace(-step, step, 41), 0.0, np.pi)
            m = np.abs(_prefix_freq(chain, i, wr, factors))
            k = int(np.argmax(m))
            if m[k] > peak:
                peak, w0 = float(m[k]), float(wr[k])
            step /= 20
        c = target / peak if peak > 0 else 1.0
        h *= c
        factors.append(c)
    return factors


def _op_ss(kind: str, op):
    """State-space (A, B, C, D) of one op (controllable form / shift register)."""
    if kind == "sos":
        b, a = (np.asarray(v, dtype=float) for v in op)
        A = np.array([[-a[1], -a[2]], [1.0, 0.0]])
        B = np.array([1.0, 0.0])
        C = np.array([b[1] - b[0] * a[1], b[2] - b[0] * a[2]])
        return A, B, C, float(b[0])
    t = np.asarray(op, dtype=float)
    m = len(t) - 1
    A = np.eye(m, k=-1) if m else np.zeros((0, 0))
    B = np.zeros(m)
    if m:
        B[0] = 1.0
    return A, B, t[1:].copy(), float(t[0])


def _cascade_ss(ops):
    A, B, C, D = np.zeros((0, 0)), np.zeros(0), np.zeros(0), 1.0
    for kind, op in ops:
        A2, B2, C2, D2 = _op_ss(kind, op)
        n1, n2 = len(B), len(B2)
        An = np.zeros((n1 + n2, n1 + n2))
        An[:n1, :n1] = A
        An[n1:, :n1] = np.outer(B2, C)
        An[n1:, n1:] = A2
        A, B, C, D = An, np.concatenate([B, B2 * D]), np.concatenate([D2 * C, C2]), D2 * D
    return A, B, C, D


def _impulse_energy(ops) -> float:
    n = response_length(ops)
    h = np.zeros(n)
    h[0] = 1.0
    for kind, op in ops:
        h = apply_op(kind, op, h)
    return float(np.sum(h * h))


def energy(ops) -> float:
    """``sum h[n]^2`` of the cascade *ops*.

    Exact for cascades of up to 40 states: the Gramian ``P = sum A^k B B' A'^k``
    by repeated squaring (Smith's doubling iteration for the discrete Lyapunov
    equation), then ``C P C' + D^2``.  Longer or unstable cascades use a truncated
    impulse response.
    """
    A, B, C, D = _cascade_ss(ops)
    if len(B) == 0:
        return D * D
    if len(B) > 40:
        return _impulse_energy(ops)
    P = np.outer(B, B)
    Ak = A.copy()
    for _ in range(64):
        with np.errstate(over="ignore", invalid="ignore"):  # a pole on the circle: squares blow up
            P = P + Ak @ P @ Ak.T
            Ak = Ak @ Ak
        if not (np.all(np.isfinite(Ak)) and np.all(np.isfinite(P))):
            return _impulse_energy(ops)
        if np.max(np.abs(Ak)) < 1e-20:
            return float(C @ P @ C + D * D)
    return _impulse_energy(ops)


#: samples of prefix responses one :class:`PrefixMemo` keeps (at most 64 MiB)
MEMO_SAMPLES = 1 << 23


class PrefixMemo:
    """Node responses of chain prefixes, shared by the candidate orders of one ordering search.

    The scale factor of an op depends only on the ops before it and on itself, so two
    orders that begin with the same ops share those factors and the scaled response
    after them exactly: the search (``pairing.order_sections``) passes one memo to
    every evaluation and an exchange of sections i < j refilters only from op i on.
    Keys are the identities of the ops (the memo lives as long as the search, which
    holds the ops).
    """

    def __init__(self) -> None:
        self.l1: dict = {}  # (length, op ids of the prefix) -> (scaled response, factors)
        self.energy: dict = {}  # op ids of the prefix -> energy of the unscaled prefix
        self.kept = 0

    def keep_l1(self, key, h: np.ndarray, factors: list[float]) -> None:
        if self.kept + len(h) <= MEMO_SAMPLES:
            self.kept += len(h)
            self.l1[key] = (h, list(factors))


def scale_factors(chain, p: str, target: float = 1.0, length: int | None = None,
                  memo: PrefixMemo | None = None) -> list[float]:
    """One factor per op so that every op output has norm *target* (see module doc).

    *memo* (:class:`PrefixMemo`) reuses what an earlier call computed for the same
    leading ops; the factors are the same with or without it.
    """
    if p == "linf":
        return _linf_factors(chain, target)
    ids = tuple(id(op) for _, op in chain)
    if p == "l2":
        factors = []
        for i in range(len(chain)):
            if memo is None:
                e = energy(chain[: i + 1])
            else:
                e = memo.energy.get(ids[: i + 1])
                if e is None:
                    e = memo.energy[ids[: i + 1]] = energy(chain[: i + 1])
            nv = np.sqrt(e) * float(np.prod(factors))
            factors.append(target / nv if nv > 0 else 1.0)
        return factors
    n = length or response_length(chain)
    start, factors = 0, []
    h = None
    if memo is not None:
        for i in range(len(chain), 0, -1):  # the longest prefix already filtered
            hit = memo.l1.get((n, ids[:i]))
            if hit is not None:
                h, factors = hit[0], list(hit[1])
                start = i
                break
    if h is None:
        h = np.zeros(n)
        h[0] = 1.0
    for i in range(start, len(chain)):
        kind, op = chain[i]
        h = apply_op(kind, op, h)
        nv = norm(h, p)
        c = target / nv if nv > 0 else 1.0
        h = h * c
        factors.append(c)
        if memo is not None and i < len(chain) - 1:
            memo.keep_l1((n, ids[: i + 1]), h, factors)
    return factors


def scaled(kind: str, op, c: float):
    """The op with its numerator (or taps) multiplied by *c*."""
    if kind == "sos":
        return (np.asarray(op[0], dtype=float) * c, op[1])
    return np.asarray(op, dtype=float) * c


def output_noise_lsb2(chain, final_gain: float, structure: str = "df1", has_gain_op: bool = True,
                      length: int | None = None, stop: float | None = None) -> float | None:
    """Analytic roundoff noise at the output, in data-LSB^2, of an already scaled chain.

    Each op rounds its output once (variance 1/12 LSB^2, white, independent); the
    error of a section feeds back through its own denominator (``1/A(z)``; with
    first-order error feedback ``(1 - z^-1)/A(z)``) and then through every later
    op and *final_gain*.  A final gain op adds one more source of 1/12.  The noise
    gains ``sum g[n]^2`` are computed exactly (discrete Lyapunov equation).

    With *stop*, ``None`` is returned as soon as the partial sum of the terms shows
    the total is at least *stop* (every term is >= 0; a relative margin of 1e-12
    covers the rounding).  Otherwise the total is summed in op order, the same
    value with or without *stop*.

    References
    ----------
    Jackson, IEEE Trans. Audio Electroacoust. AU-18(2), 1970: output noise spectrum
    ``N(w) = sigma0^2 sum_j k_j |G_j(w)|^2``.
    """
    terms: list[float | None] = [None] * len(chain)
    part = 1.0 / 12.0 if has_gain_op else 0.0
    if stop is not None and part * (1.0 - 1e-12) >= stop:
        return None
    for i in range(len(chain)):
        kind, op = chain[i]
        path = list(chain[i + 1:])
        if kind == "sos":
            num = [1.0, -1.0, 0.0] if STRUCTURE_TABLE[structure].error_feedback else [1.0, 0.0, 0.0]
            path = [("sos", (num, op[1]))] + path
        terms[i] = energy(path) * final_gain * final_gain / 12.0
        if stop is not None:
            part += terms[i]
            if part * (1.0 - 1e-12) >= stop:
                return None
    total = 0.0
    for t in terms:
        total += t
    if has_gain_op:
        total += 1.0 / 12.0
    return total
