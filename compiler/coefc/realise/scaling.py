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

Impulse responses are truncated where the slowest pole has decayed by 10^-12
(at most 2^18 samples); ``linf`` is read from a zero-padded FFT of that response,
refined around its largest bin, and at the pole angles.

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

MAX_LEN = 1 << 18
MIN_LEN = 1 << 11


def response_length(chain) -> int:
    """Samples needed for the impulse response of *chain* to decay by 10^-12."""
    n = MIN_LEN
    for kind, op in chain:
        if kind == "sos":
            r = float(np.max(np.abs(np.roots(op[1])))) if np.any(op[1][1:]) else 0.0
            if r >= 1.0:
                return MAX_LEN
            if r > 0.0:
                n = max(n, int(np.ceil(np.log(1e-12) / np.log(r))) + 8)
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


def norm(h: np.ndarray, p: str, pole_angles=()) -> float:
    """The l1, l2 or linf norm of a truncated impulse response *h*."""
    if p == "l1":
        return float(np.sum(np.abs(h)))
    if p == "l2":
        return float(np.sqrt(np.sum(h * h)))
    if p == "linf":
        nfft = max(4 * len(h), 1 << 14)
        spec = np.abs(np.fft.rfft(h, nfft))
        i = int(np.argmax(spec))
        peak = float(spec[i])
        # refine between the neighbouring bins of the largest one
        w_ref = 2 * np.pi * (i + np.linspace(-1.0, 1.0, 65)) / nfft
        n_idx = np.arange(len(h))
        peak = max(peak, float(np.max(np.abs(np.exp(-1j * np.outer(w_ref, n_idx)) @ h))))
        if len(pole_angles):
            w = np.asarray(pole_angles, dtype=float)
            n = np.arange(len(h))
            peak = max(peak, float(np.max(np.abs(np.exp(-1j * np.outer(w, n)) @ h))))
        return peak
    raise ValueError(f"unknown norm '{p}'")


def _pole_angles(chain) -> np.ndarray:
    ang = []
    for kind, op in chain:
        if kind == "sos" and np.any(op[1][1:]):
            ang.extend(np.abs(np.angle(np.roots(op[1]))))
    return np.asarray(ang)


def scale_factors(chain, p: str, target: float = 1.0, length: int | None = None) -> list[float]:
    """One factor per op so that every op output has norm *target* (see module doc)."""
    n = length or response_length(chain)
    h = np.zeros(n)
    h[0] = 1.0
    angles = _pole_angles(chain) if p == "linf" else ()
    factors = []
    for kind, op in chain:
        h = apply_op(kind, op, h)
        nv = norm(h, p, angles)
        c = target / nv if nv > 0 else 1.0
        h = h * c
        factors.append(c)
    return factors


def scaled(kind: str, op, c: float):
    """The op with its numerator (or taps) multiplied by *c*."""
    if kind == "sos":
        return (np.asarray(op[0], dtype=float) * c, op[1])
    return np.asarray(op, dtype=float) * c


def output_noise_lsb2(chain, final_gain: float, structure: str = "df1", has_gain_op: bool = True,
                      length: int | None = None) -> float:
    """Analytic roundoff noise at the output, in data-LSB^2, of an already scaled chain.

    Each op rounds its output once (variance 1/12 LSB^2, white, independent); the
    error of a section feeds back through its own denominator (``1/A(z)``; with
    first-order error feedback ``(1 - z^-1)/A(z)``) and then through every later
    op and *final_gain*.  A final gain op adds one more source of 1/12.

    References
    ----------
    Jackson, IEEE Trans. Audio Electroacoust. AU-18(2), 1970: output noise spectrum
    ``N(w) = sigma0^2 sum_j k_j |G_j(w)|^2``.
    """
    n = length or response_length(chain)
    total = 0.0
    for i, (kind, op) in enumerate(chain):
        e = np.zeros(n)
        e[0] = 1.0
        if kind == "sos":
            if structure == "df1ef":
                e[1] = -1.0
            e = signal.lfilter([1.0], op[1], e)
        for kind2, op2 in chain[i + 1:]:
            e = apply_op(kind2, op2, e)
        total += float(np.sum(e * e)) * final_gain * final_gain / 12.0
    if has_gain_op:
        total += 1.0 / 12.0
    return total
