"""IEC 61672 frequency weightings: the weighting letter and sample rate in, SOS out.

The analog weightings of IEC 61672-1:2013 Annex E are given as poles and zeros:
A has four zeros at s = 0 and poles at -2 pi {f1, f1, f4, f4, f2, f3}; C has two
zeros at s = 0 and poles at -2 pi {f1, f1, f4, f4}.  They are mapped to the
z-plane by the bilinear transform (no pre-warping) and normalised to 0 dB at
1 kHz, as the standard normalises them.

Why the top octave departs: the bilinear transform squeezes the whole analog
frequency axis into 0..fs/2, so the response near Nyquist is compressed towards
the zero the transform puts at fs/2.  At fs = 48 kHz the digital A-weighting lies
about 0.5, 1.2, 2.7 and 6.2 dB below the analytic curve at 8, 10, 12.5 and 16 kHz,
yet within the class 1 limits up to 16 kHz (whose lower limits widen there); at
lower sample rates the departure grows, and :func:`design_weighting` warns when a
nominal frequency below Nyquist falls outside the class 1 limits.

References
----------
IEC 61672-1:2013, *Electroacoustics -- Sound level meters -- Part 1:
Specifications*, Annex E (analytical expressions) and Table 3 (weightings and
class 1 acceptance limits).
"""

from __future__ import annotations

import math

import numpy as np

from ..blocks import SosBlock
from .stage import StageContext, StageResult

# IEC 61672-1:2013 Annex E pole frequencies, Hz.
F1 = 20.598997057618316
F2 = 107.65264864304629
F3 = 737.8622307362901
F4 = 12194.217147998012

# IEC 61672-1:2013 Table 3: nominal frequency, A, C, class 1 upper and lower limit
# (None = minus infinity).  Used to warn when the digital curve leaves class 1.
CLASS1_TABLE = (
    (10, -70.4, -14.3, 3.0, None), (12.5, -63.4, -11.2, 2.5, None), (16, -56.7, -8.5, 2.0, -4.0),
    (20, -50.5, -6.2, 2.0, -2.0), (25, -44.7, -4.4, 2.0, -1.5), (31.5, -39.4, -3.0, 1.5, -1.5),
    (40, -34.6, -2.0, 1.0, -1.0), (50, -30.2, -1.3, 1.0, -1.0), (63, -26.2, -0.8, 1.0, -1.0),
    (80, -22.5, -0.5, 1.0, -1.0), (100, -19.1, -0.3, 1.0, -1.0), (125, -16.1, -0.2, 1.0, -1.0),
    (160, -13.4, -0.1, 1.0, -1.0), (200, -10.9, 0.0, 1.0, -1.0), (250, -8.6, 0.0, 1.0, -1.0),
    (315, -6.6, 0.0, 1.0, -1.0), (400, -4.8, 0.0, 1.0, -1.0), (500, -3.2, 0.0, 1.0, -1.0),
    (630, -1.9, 0.0, 1.0, -1.0), (800, -0.8, 0.0, 1.0, -1.0), (1000, 0.0, 0.0, 0.7, -0.7),
    (1250, 0.6, 0.0, 1.0, -1.0), (1600, 1.0, -0.1, 1.0, -1.0), (2000, 1.2, -0.2, 1.0, -1.0),
    (2500, 1.3, -0.3, 1.0, -1.0), (3150, 1.2, -0.5, 1.0, -1.0), (4000, 1.0, -0.8, 1.0, -1.0),
    (5000, 0.5, -1.3, 1.5, -1.5), (6300, -0.1, -2.0, 1.5, -2.0), (8000, -1.1, -3.0, 1.5, -2.5),
    (10000, -2.5, -4.4, 2.0, -3.0), (12500, -4.3, -6.2, 2.0, -5.0), (16000, -6.6, -8.5, 2.5, -16.0),
    (20000, -9.3, -11.2, 3.0, None),
)


def analog_zpk(weighting: str) -> tuple[np.ndarray, np.ndarray, float]:
    """Zeros, poles (rad/s) and gain of the analog A or C weighting (Annex E)."""
    w = 2 * math.pi
    if weighting == "A":
        z = np.zeros(4)
        p = -w * np.array([F1, F1, F4, F4, F2, F3])
    elif weighting == "C":
        z = np.zeros(2)
        p = -w * np.array([F1, F1, F4, F4])
    else:
        raise ValueError(f"unknown weighting {weighting}")
    return z, p, 1.0


def weighting_sos(weighting: str, fs: float) -> np.ndarray:
    """Digital A or C weighting (bilinear transform), 0 dB at 1 kHz, as SOS.

    Examples
    --------
    >>> from scipy import signal
    >>> sos = weighting_sos("A", 48000.0)
    >>> h = signal.sosfreqz(sos, worN=[1000.0, 100.0], fs=48000.0)[1]
    >>> [round(float(20 * np.log10(abs(x))), 1) for x in h]
    [0.0, -19.1]
    """
    from scipy import signal

    z, p, k = analog_zpk(weighting)
    zd, pd, kd = signal.bilinear_zpk(z, p, k, fs)
    sos = signal.zpk2sos(zd, pd, kd)
    h = signal.sosfreqz(sos, worN=[1000.0], fs=fs)[1][0]
    sos[0, :3] /= abs(h)
    return sos


def analytic_db(weighting: str, f) -> np.ndarray:
    """The analytic weighting in dB at frequencies *f* (IEC 61672-1 Annex E)."""
    f = np.asarray(f, dtype=float)
    f2 = f * f
    c = 20 * np.log10(F4**2 * f2 / ((f2 + F1**2) * (f2 + F4**2)))
    if weighting == "C":
        return c - _at_1k("C")
    a = 20 * np.log10(F4**2 * f2 * f2 / ((f2 + F1**2) * np.sqrt(f2 + F2**2) * np.sqrt(f2 + F3**2) * (f2 + F4**2)))
    return a - _at_1k("A")


def _at_1k(weighting: str) -> float:
    f2 = 1e6
    if weighting == "C":
        return 20 * math.log10(F4**2 * f2 / ((f2 + F1**2) * (f2 + F4**2)))
    return 20 * math.log10(F4**2 * f2 * f2 / ((f2 + F1**2) * math.sqrt(f2 + F2**2) * math.sqrt(f2 + F3**2)
                                              * (f2 + F4**2)))


def design_weighting(ctx: StageContext) -> StageResult:
    from scipy import signal

    letter = ctx.require("weighting", "give weighting = \"A\" or \"C\"")
    if ctx.fs <= 2000.0:
        # The weighting is normalised to 0 dB at 1 kHz (IEC 61672-1), which must lie below Nyquist.
        raise ctx.error(f"{letter}-weighting is defined relative to 1 kHz, which must lie below Nyquist "
                        f"(sample_rate_hz={ctx.fs:g} -> {ctx.nyquist:g} Hz); use a sample rate above 2000 Hz "
                        "(IEC 61672-1 weightings need an audio rate, 48000 Hz is usual)", "weighting")
    sos = weighting_sos(letter, ctx.fs)
    # Compare the digital curve with the nominal values at the exact base-ten
    # frequencies (IEC 61672-1 computes its table there).
    warns = []
    outside = []
    for n, row in enumerate(CLASS1_TABLE):
        f_exact = 1000.0 * 10 ** ((n + 10 - 30) / 10)
        if f_exact >= ctx.nyquist:
            break
        h = abs(signal.sosfreqz(sos, worN=[f_exact], fs=ctx.fs)[1][0])
        dev = 20 * math.log10(h) - float(analytic_db(letter, f_exact))
        upper, lower = row[3], row[4]
        if dev > upper or (lower is not None and dev < lower):
            outside.append(f"{row[0]:g} Hz ({dev:+.1f} dB)")
    if outside:
        warns.append(f"{letter}-weighting at {ctx.fs:g} Hz leaves the IEC 61672-1 class 1 limits at "
                     + ", ".join(outside) + " (bilinear transform near Nyquist); use a higher sample rate")
    text = f"IEC 61672 {letter}-weighting (bilinear transform, 0 dB at 1 kHz)"
    return StageResult(blocks=(SosBlock(sos, label=text),), text=text, order=6 if letter == "A" else 4,
                       sections=len(sos), warnings=tuple(warns))
