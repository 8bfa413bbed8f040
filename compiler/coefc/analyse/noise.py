"""Roundoff noise of a realised channel: a ChannelProgram in, output noise figures out.

Two independent estimates that must agree:

analytic
    Every rounding node ``j`` adds an error of mean ``mu_j`` and variance
    ``sigma_j^2`` (in LSB^2 of the data word) that reaches the output through its
    own noise transfer function ``G_j``; the output noise spectrum is
    ``N(w) = sum_j sigma_j^2 |G_j(w)|^2`` (Jackson 1970) and the output mean is
    ``sum_j mu_j G_j(1)`` (the mean passes at DC gain).
measured
    The bit-true engine (:func:`coefc.simulate.simulate`) against a float64 run of
    the same realised coefficients, on uniform white noise whose peak keeps every
    node below half of full scale (so nothing overflows); numpy's mean and variance
    of the error record.  The uniform error model
    needs signals well above one LSB at every rounding node (Widrow, Kollar & Liu
    1996); a node whose signal RMS falls below one LSB is reported.

Error statistics per rounding mode, for a value whose dropped ``k`` bits are
uniformly distributed (exact for the discrete residues, q = 1 LSB):

=============  ==========================  ===============================
mode           mean                        variance
=============  ==========================  ===============================
add-half       +q/2^(k+1)                  (q^2/12)(1 - 2^-2k)
half-even      0                           (q^2/12)(1 + 2^(1-2k))
truncate       -(q/2)(1 - 2^-k)            (q^2/12)(1 - 2^-2k)
toward-zero    0 (symmetric signals)       q^2 (1 - 2^-k)(2 - 2^-k)/6  (-> q^2/3)
=============  ==========================  ===============================

Magnitude truncation (``toward-zero``) is an error of magnitude uniform in [0, q) with the
sign opposite to the value: ``e = -sign(v) u``.  For a zero-mean Gaussian value its
mean is 0 and its mean square q^2/3, but it is correlated with ``v``: by Bussgang's
theorem ``sign(v) = sqrt(2/pi) v/sigma_v + d`` with ``d`` uncorrelated with ``v`` and of
variance ``1 - 2/pi``.  The model therefore splits each source into a white part of
variance ``var(u) + E[u]^2 (1 - 2/pi)`` (about 0.174 q^2) and a part
``-E[u] sqrt(2/pi) v/sigma_v`` that reaches the output along the signal's own path;
for a white input its output power is ``||sum_j c_j g_j * h_j||^2`` with
``c_j = E[u] sqrt(2/pi)/||h_j||`` (``h_j``: input to node ``j``), independent of the
input level, and the sources add coherently.  Inside a recursive section this part
acts like a small change of the feedback gain and can dominate.

The *noise* figure is the variance of the output error (its mean removed); the mean
is reported apart as the output's DC *offset* (in LSB of the data word, and as the
level of that DC in dBFS: ``10*log10(mean^2/0.5)``), since ``truncate`` rounding adds
an offset of about ``-q/2`` per rounding point times its noise path's DC gain, which
would otherwise swamp the noise figure.

Levels are in dBFS as in AES17: full scale = 1.0, 0 dBFS is the RMS level of a
full-scale sine, so a noise of variance ``s2`` reads ``10*log10(s2/0.5)`` dBFS.

Rounded products (``product_shift = P``, coefc.program): each product ``C*x`` whose
coefficient is not a multiple of ``2^P`` is a source of its own, dropping ``P - v2(C)``
bits by the product rounding (statistics as above, in units of ``2^P``, scaled by
``2^-(Fc - s - P)`` into data LSB); all enter where the accumulator is formed and reach
the output through ``1/A(z)`` of their operation (error feedback shapes only the final
rounding).  This is Jackson's model of rounding after every multiplication, ``k_j``
sources of variance ``q^2/12`` at a node (Jackson 1970; Oppenheim & Schafer, ch. 6).
Under ``toward-zero`` the products' correlated part is not split off: each counts with
its whole mean square, which overstates a little.

References
----------
L. B. Jackson, "Roundoff-noise analysis for fixed-point digital filters realized in
cascade or parallel form", IEEE Trans. Audio Electroacoust. AU-18(2), 1970.
B. Widrow, I. Kollar, M.-C. Liu, "Statistical theory of quantization", IEEE Trans.
Instrum. Meas. 45(2), 1996.
B. Widrow, I. Kollar, *Quantization Noise*, Cambridge University Press, 2008 (mean and
variance of rounding and truncation errors).
A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed., ch. 6.
AES17, *AES standard method for digital audio engineering - Measurement of digital
audio equipment* (definition of dBFS).
J. J. Bussgang, "Crosscorrelation functions of amplitude-distorted Gaussian signals",
MIT RLE Tech. Rep. 216, 1952 (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..program import ChannelProgram
from .linear import (OpModel, _run, chain_filter, node_impulses, noise_impulse, noise_impulses, op_models, pole_radius,
                     response_length, tail_impulse)


def _run_noise(a, x):
    from scipy import signal

    return signal.lfilter([1.0], a, x)

#: power of a full-scale sine (full scale = 1.0): the 0 dBFS reference of AES17
FULL_SCALE_SINE_POWER = 0.5


def dbfs(power: float | None) -> float | None:
    """Power (full scale = 1.0) in dBFS per AES17; ``None`` for no value, -inf floored.

    >>> round(dbfs(0.5), 6)
    0.0
    >>> round(dbfs((2.0 ** -15) ** 2 / 12), 2)   # one rounding of a 16-bit word: q^2/12 re 1/2
    -98.09
    """
    if power is None or not math.isfinite(power):
        return None
    if power <= 0:
        return -math.inf
    return 10.0 * math.log10(power / FULL_SCALE_SINE_POWER)


def rounding_error_stats(k: int, mode: str) -> tuple[float, float]:
    """Mean and variance, in LSB units, of the error of dropping *k* bits by *mode*.

    The ``2^k`` residues are taken as equally likely (the uniform model).

    >>> rounding_error_stats(30, "add-half")[1] * 12
    1.0
    >>> rounding_error_stats(1, "truncate")
    (-0.25, 0.0625)
    """
    if k <= 0:
        return 0.0, 0.0
    if k <= 16:
        from ..qformat import round_shift

        r = np.arange(1 << k, dtype=np.int64)
        if mode == "toward-zero":
            # symmetric signal: half the values are positive (error -frac), half negative (+frac)
            frac = r / float(1 << k)
            return 0.0, float(np.mean(frac ** 2))
        # residue r of a value v = M*2^k + r: the error is round_shift(v) - v/2^k
        big = (1 << 20) << k  # an even multiple, so half-even ties see an even quotient half the time
        v = np.concatenate([big + r, big + (1 << k) + r])
        e = round_shift(v, k, mode) - v / float(1 << k)
        return float(np.mean(e)), float(np.var(e))
    if mode == "add-half":
        return 0.0, 1.0 / 12.0
    if mode == "half-even":
        return 0.0, 1.0 / 12.0
    if mode == "truncate":
        return -0.5, 1.0 / 12.0
    if mode == "toward-zero":
        return 0.0, 1.0 / 3.0
    raise ValueError(f"unknown rounding mode '{mode}'")


@dataclass(frozen=True)
class NoiseSource:
    """One rounding node and what it contributes at the output (LSB^2 units)."""

    op_index: int  # 0-based
    k: int  # bits dropped
    mean_lsb: float
    variance_lsb2: float
    power_gain: float  # sum of g^2 of its noise transfer to the output
    dc_gain: float
    output_variance_lsb2: float
    correlated_gain: float = 0.0  # magnitude truncation: c_j of the signal-following part
    source: int = 0  # which rounding of the op (coupled: 0 the output, 1 and 2 the states)
    noise_b: tuple | None = None  # numerator of its transfer when not its op's noise_b (df1ef-wide-fb's floor)


@dataclass(frozen=True, eq=False)
class NoiseAnalysis:
    """Analytic output noise of a fixed-point channel."""

    sources: tuple[NoiseSource, ...]
    variance: float  # physical units (full scale = 1.0)
    mean: float  # the output's DC offset, physical units
    power: float  # variance + mean^2 (mean square of the error)
    dbfs: float | None  # of the variance: the noise, offset excluded
    snr_db: float | None  # full-scale sine over the noise variance
    lsb: float
    _models: tuple = field(default=(), repr=False)
    correlated_variance: float = 0.0  # magnitude truncation: the part that follows the signal
    mean_noise_variance: float = 0.0  # sum_j sigma_j^2 G_j(1)^2 (LSB^2): the noise density at DC, per sample

    @property
    def offset_lsb(self) -> float:
        """The output's DC offset (mean error) in LSB of the data word."""
        return self.mean / self.lsb

    @property
    def offset_dbfs(self) -> float | None:
        """The DC offset's level in dBFS (AES17: its RMS is its magnitude); None for no offset."""
        d = dbfs(self.mean ** 2)
        return None if d is None or d == -math.inf else d

    def offset_stderr_lsb(self, samples: int) -> float:
        """Standard error, in LSB, of the mean of *samples* output errors (the noise's DC density)."""
        return math.sqrt(self.mean_noise_variance / samples) if samples > 0 else math.inf

    def spectrum(self, freqs_hz, fs: float) -> np.ndarray:
        """One-sided noise density in dBFS/Hz (AES17 reference) at *freqs_hz*.

        ``2 sum_j sigma_j^2 |G_j(f)|^2 / fs`` relative to 0.5 (the power of a
        full-scale sine); integrated from 0 to fs/2 it gives the output variance.
        The DC offset of ``truncate`` rounding (``mean``) is not part of it.
        """
        f = np.asarray(freqs_hz, dtype=np.float64)
        psd = np.zeros(f.shape)
        w = 2 * np.pi * f / fs
        models = self._models
        resp = [_freq(m.b, m.a, w) for m in models]  # every op as a rational function
        corr = np.zeros(f.shape, dtype=complex)
        for src in self.sources:
            m = models[src.op_index]
            G = _freq(*((np.asarray(src.noise_b), m.noise_a) if src.noise_b is not None
                        else m.noise_paths[src.source]), w)
            for r in resp[src.op_index + 1:]:
                G = G * r
            psd += src.variance_lsb2 * self.lsb ** 2 * np.abs(G) ** 2
            if src.correlated_gain:
                H = np.ones(f.shape, dtype=complex)
                for r in resp[: src.op_index]:
                    H = H * r
                H = H * (_freq(*m.states[src.source - 1], w) if src.source else resp[src.op_index])
                corr += src.correlated_gain * G * H
        psd += self.lsb ** 2 * np.abs(corr) ** 2
        with np.errstate(divide="ignore"):
            return 10 * np.log10(2.0 * psd / fs / FULL_SCALE_SINE_POWER)


def _unit(n: int) -> np.ndarray:
    u = np.zeros(n)
    u[0] = 1.0
    return u


def _freq(b, a, w):
    from scipy import signal

    return signal.freqz(b, a, worN=w)[1]


def analytic_noise(program: ChannelProgram, models: list[OpModel] | None = None,
                   n: int | None = None) -> NoiseAnalysis | None:
    """Output roundoff noise by the linear model (``None`` for float32 arithmetic or an unstable program).

    Parameters
    ----------
    program : ChannelProgram
        The realised channel (fixed-point arithmetic).

    Returns
    -------
    NoiseAnalysis
        Per-source contributions, output variance, mean, power and dBFS.

    References
    ----------
    Jackson (1970), eq. for the output noise spectrum
    ``N(w) = sigma0^2 sum_j k_j |G_j(w)|^2``.
    """
    ar = program.arithmetic
    if ar.is_float:
        return None
    models = models if models is not None else op_models(program)
    if pole_radius(models) >= 1.0:
        return None  # an unstable realisation has no finite noise gain
    n = n or response_length(models)
    lsb = ar.data.lsb
    sources = []
    var = mean = dc_var = 0.0
    corr = np.zeros(n)
    node_imps = node_impulses(models, n) if ar.rounding == "toward-zero" else None
    for m in models:
        if m.k <= 0:
            continue
        for src, g in enumerate(noise_impulses(models, m.index, n)):
            mu, s2 = rounding_error_stats(m.k, ar.rounding)
            pg = float(np.dot(g, g))
            dc = float(np.sum(g))
            if ar.rounding == "toward-zero":
                # e = -sign(v) u: split into a white part and a part proportional to the value v
                # (Bussgang), which reaches the output along the signal's own path
                eu = 0.5 * (1.0 - 2.0 ** -m.k)
                white = (s2 - eu * eu) + eu * eu * (1.0 - 2.0 / math.pi)
                h = node_imps[m.index]
                if src:  # a coupled state: the value rounded is the state
                    h = _run(*m.states[src - 1], node_imps[m.index - 1] if m.index else _unit(n))
                hn = math.sqrt(float(np.dot(h, h)))
                cg = -eu * math.sqrt(2.0 / math.pi) / hn if hn > 0 else 0.0
                if cg:
                    corr += cg * _conv(g, h)
                s2 = white
            else:
                cg = 0.0
            if not src and m.extra_noise_b is None:
                # a second source at the same node (df1-wide-fb's floor of the low products), independent
                mu, s2 = mu + m.extra_mean, s2 + m.extra_var
            sources.append(NoiseSource(m.index, m.k, mu, s2, pg, dc, s2 * pg, cg, src))
            var += s2 * pg
            mean += mu * dc
            dc_var += s2 * dc * dc
        if m.extra_noise_b is not None and (m.extra_var or m.extra_mean):
            # its own transfer (df1ef-wide-fb: the floor is not fed back, 1/A(z) unshaped)
            g2 = _run(m.extra_noise_b, m.noise_a, tail_impulse(models, m.index + 1, n))
            pg2, dc2 = float(np.dot(g2, g2)), float(np.sum(g2))
            sources.append(NoiseSource(m.index, m.k, m.extra_mean, m.extra_var, pg2, dc2, m.extra_var * pg2, 0.0,
                                       noise_b=tuple(float(v) for v in m.extra_noise_b)))
            var += m.extra_var * pg2
            mean += m.extra_mean * dc2
            dc_var += m.extra_var * dc2 * dc2
    for m in models:
        if not m.product_noise:
            continue
        # rounded products (Jackson 1970: one source per multiplier, each white with the
        # q^2/12-type variance of its dropped bits): all enter at the accumulator and
        # reach the output through 1/A(z) of the operation, also under error feedback
        if np.array_equal(m.noise_b, [1.0]):
            g = noise_impulse(models, m.index, n)
        else:
            g = _run_noise(m.a, tail_impulse(models, m.index + 1, n))
        pg, dc = float(np.dot(g, g)), float(np.sum(g))
        mu = sum(p[0] for p in m.product_noise)
        s2 = sum(p[1] for p in m.product_noise)
        sources.append(NoiseSource(m.index, ar.product_shift, mu, s2, pg, dc, s2 * pg, 0.0))
        var += s2 * pg
        mean += mu * dc
        dc_var += s2 * dc * dc
    correlated = float(np.dot(corr, corr))
    var += correlated
    var *= lsb ** 2
    mean *= lsb
    power = var + mean ** 2
    d = dbfs(var)  # the noise is the variance; the mean is the offset, reported apart
    snr = None if d is None or d == -math.inf else -d
    return NoiseAnalysis(tuple(sources), var, mean, power, d, snr, lsb, tuple(models), correlated * lsb ** 2,
                         dc_var)


def _conv(g: np.ndarray, h: np.ndarray) -> np.ndarray:
    from scipy import signal

    return signal.oaconvolve(g, h)[: len(g)]


@dataclass(frozen=True)
class MeasuredNoise:
    """Output noise measured with the bit-true engine (numpy mean and variance of the error)."""

    power: float  # mean square of the error
    mean: float  # its mean: the output's DC offset, physical units
    dbfs: float | None  # of the variance (the noise, offset excluded)
    samples: int
    stimulus_peak: float  # physical, full scale = 1.0
    stimulus_rms: float
    min_node_rms_lsb: float | None  # smallest signal RMS at a rounding node, in LSB
    model_holds: bool  # every rounding node sees at least 1 LSB RMS
    overflow_events: int
    note: str = ""
    variance: float | None = None
    lsb: float | None = None  # of the data word (None for float32)

    @property
    def offset_lsb(self) -> float | None:
        return None if self.lsb is None else self.mean / self.lsb

    @property
    def offset_dbfs(self) -> float | None:
        d = dbfs(self.mean ** 2)
        return None if d is None or d == -math.inf else d


def stimulus_level(models: list[OpModel], impulses: list[np.ndarray]) -> float:
    """Peak input level (full scale = 1.0) keeping every node and accumulator below half scale."""
    worst = 1.0
    for m, h in zip(models, impulses):
        l1 = float(np.sum(np.abs(h)))
        worst = max(worst, l1 / m.full_scale)
        if m.acc_full_scale:
            worst = max(worst, l1 / m.acc_full_scale)
    return 0.5 / worst


def measured_noise(program: ChannelProgram, *, samples: int = 1 << 15, seed: int = 20261201,
                   models: list[OpModel] | None = None, n: int | None = None) -> MeasuredNoise:
    """Output noise of the bit-true engine against a float64 reference.

    The stimulus is uniform white noise of peak ``stimulus_level`` (see there),
    quantised to the data word; the first samples, while the slowest pole settles,
    are excluded from the measurement.  Slow poles make the noise narrow-band, so
    the record is lengthened to at least 32 settling times (at most 2^18 samples).
    """
    from ..simulate import simulate

    ar = program.arithmetic
    models = models if models is not None else op_models(program)
    n = n or response_length(models)
    imps = node_impulses(models, n)
    peak = stimulus_level(models, imps)
    settle = n // 4  # the slowest pole's transient power is below 1e-6 by then
    # narrow-band noise (slow poles) needs a longer record for the same confidence:
    # at least 32 settling times, at most 2^18 samples
    samples = int(min(max(samples, 32 * settle), max(samples, 1 << 18)))
    # a multirate channel: n and the settling time count samples of its single-rate model (the
    # input rate times every interpolation factor), the record counts output samples; at least
    # 2048 of them after settling, whatever the rate change
    up = int(np.prod([m.up for m in models])) if models else 1
    down = int(np.prod([m.down for m in models])) if models else 1
    settle_out = -(-settle // down)
    wanted = max(samples * up // down, 2048) if (up, down) != (1, 1) else samples
    length = -(-(wanted + settle_out) * down // up)
    length = -(-length // down) * down  # whole blocks of the decimation (coefc.program)
    rng = np.random.default_rng(seed)
    u = rng.uniform(-1.0, 1.0, length)
    if ar.is_float:
        x = (u * peak).astype(np.float32)
        xin = x.astype(np.float64)
        tr = simulate(program, x, trace=True)
        y = np.asarray(tr.y, dtype=np.float64)
    else:
        scale = 2.0 ** ar.data.frac_bits
        x = np.round(u * peak * scale).astype(np.int64)
        xin = x / scale
        tr = simulate(program, x, trace=True)
        y = np.asarray(tr.y, dtype=np.float64) / scale
    overflows = int(sum(int(c) for c in tr.overflow_counts)) + int(sum(int(c) for c in tr.acc_overflow_counts))
    ref = chain_filter(models, xin)
    e = (y - ref)[settle_out:]
    power = float(np.mean(e ** 2))
    variance = float(np.var(e))
    rms_in = float(np.sqrt(np.mean(xin ** 2)))
    min_rms = None
    holds = True
    note = ""
    if not ar.is_float:
        # signal RMS at the input of each rounding node = output of the op in the linear model
        rms = [rms_in * float(np.sqrt(np.dot(h, h))) / ar.data.lsb for m, h in zip(models, imps) if m.k > 0]
        if rms:
            min_rms = min(rms)
            holds = min_rms >= 1.0
            if not holds:
                note = (f"the signal at a rounding node is only {min_rms:.2g} LSB RMS; the uniform "
                        "error model needs signals well above one LSB (Widrow, Kollar & Liu 1996)")
    if overflows:
        note = (note + "; " if note else "") + f"{overflows} overflow events during the noise run"
    return MeasuredNoise(power, float(np.mean(e)), dbfs(variance), len(e), peak, rms_in, min_rms, holds,
                         overflows, note, variance, None if ar.is_float else ar.data.lsb)
