"""Synthesise the invented "measurements" of the two-way example (filters/two_way_corrected.toml).

THE DATA ARE INVENTED.  No loudspeaker was measured: the files are computed from a
made-up model of a two-way product, with made-up numbers, so the example can show
a correction designed from measurement files.  Run from the repository root:

    python filters/measurements/make_measurements.py

It writes, next to this script:

``woofer.csv``   on-axis magnitude (dB, arbitrary reference) and phase of the woofer
                 way, 10 Hz .. 20 kHz, 24 points per octave;
``tweeter.wav``  the tweeter way's impulse response, mono 32-bit float, 48 kHz, 4096
                 samples;
``house_curve.csv``  an invented target curve (a gentle downward tilt).

The model (all analog prototypes, responses evaluated exactly at each frequency):

woofer   a closed box (second-order high-pass, 52 Hz, Q 0.9), an enclosure dip
         (peaking, 620 Hz, Q 3, -4 dB), a bump from the baffle (peaking, 1.4 kHz,
         Q 1.5, +2.5 dB), the cone's own roll-off (second-order low-pass, 4 kHz,
         Q 0.7), a tilt of -0.8 dB per decade, level 86 dB, and measurement noise
         (normal, 0.15 dB standard deviation, fixed seed).
tweeter  a second-order high-pass (1.1 kHz, Q 0.8) and a dome breakup peak (peaking,
         17 kHz, Q 4, +5 dB), made digital by the bilinear transform at 48 kHz
         without pre-warping (which moves the peak to about 13 kHz), then a rising
         first-order shelf (about +3 dB towards the top), a delay of 40 samples,
         a gain of 0.5 and noise at -90 dB re the peak (fixed seed).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from scipy import signal
from scipy.io import wavfile

HERE = Path(__file__).resolve().parent
FS = 48000


def _peak_s(f0: float, q: float, gain_db: float):
    """Analog peaking section (the Audio EQ Cookbook's analog prototype), as (b, a) in s."""
    w = 2 * math.pi * f0
    a = 10 ** (gain_db / 40)
    return [1 / w ** 2, a / (q * w), 1.0], [1 / w ** 2, 1 / (a * q * w), 1.0]


def _hp2(f0: float, q: float):
    w = 2 * math.pi * f0
    return [1.0, 0.0, 0.0], [1.0, w / q, w * w]


def _lp2(f0: float, q: float):
    w = 2 * math.pi * f0
    return [w * w], [1.0, w / q, w * w]


def _cascade(parts):
    b, a = np.array([1.0]), np.array([1.0])
    for pb, pa in parts:
        b, a = np.polymul(b, pb), np.polymul(a, pa)
    return b, a


def woofer(rng) -> None:
    f = np.geomspace(10, 20000, int(24 * math.log2(2000)) + 1)
    b, a = _cascade([_hp2(52, 0.9), _peak_s(620, 3, -4), _peak_s(1400, 1.5, 2.5), _lp2(4000, 0.7)])
    h = signal.freqs(b, a, worN=2 * np.pi * f)[1]
    mag = 20 * np.log10(np.abs(h)) + 86 - 0.8 * np.log10(f / 1000) + rng.normal(0, 0.15, f.size)
    phase = np.degrees(np.angle(h))
    lines = ["# INVENTED DATA: synthesised by make_measurements.py from a made-up woofer model;",
             "# no real loudspeaker was measured.",
             "frequency_hz,magnitude_db,phase_deg"]
    lines += [f"{fi:.3f},{mi:.3f},{pi:.2f}" for fi, mi, pi in zip(f, mag, phase)]
    (HERE / "woofer.csv").write_text("\n".join(lines) + "\n")


def tweeter(rng) -> None:
    b, a = _cascade([_hp2(1100, 0.8), _peak_s(17000, 4, 5.0)])
    bz, az = signal.bilinear(b, a, FS)
    x = np.zeros(4096)
    x[40] = 1.0
    h = signal.lfilter(bz, az, x)
    # a gentle rising tilt: a first-order high shelf (+3 dB above ~8 kHz), also by the bilinear transform
    sb, sa = signal.bilinear([1 / (2 * math.pi * 5600), 1.0], [1 / (2 * math.pi * 8000), 1.0], FS)
    h = signal.lfilter(sb, sa, h) * 0.5
    h = h + rng.normal(0, 10 ** (-90 / 20) * np.max(np.abs(h)), h.size)
    wavfile.write(HERE / "tweeter.wav", FS, h.astype(np.float32))


def house_curve() -> None:
    f = np.geomspace(20, 20000, 31)
    mag = -1.0 * np.log2(f / 1000) / 3  # -1 dB per three octaves around 1 kHz: an invented taste
    lines = ["# INVENTED target curve for the two-way example (a gentle downward tilt).",
             "frequency_hz,magnitude_db"] + [f"{fi:.2f},{mi:.3f}" for fi, mi in zip(f, mag)]
    (HERE / "house_curve.csv").write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    rng = np.random.default_rng(20261202)
    woofer(rng)
    tweeter(rng)
    house_curve()
