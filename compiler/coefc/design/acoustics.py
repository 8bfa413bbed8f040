"""Acoustics used by delay stages: air temperature in, speed of sound out.

References
----------
ISO 9613-1:1993, *Acoustics -- Attenuation of sound during propagation outdoors --
Part 1*, eq. (A.4) for the speed of sound in air.
"""

from __future__ import annotations

import math

#: Temperature range (deg C) over which the ISO 9613-1 formula is stated.
AIR_TEMPERATURE_RANGE_C = (-20.0, 50.0)
DEFAULT_AIR_TEMPERATURE_C = 20.0


def speed_of_sound(air_temperature_c: float = DEFAULT_AIR_TEMPERATURE_C) -> float:
    """Speed of sound in air, m/s: ``343.2 * sqrt((t + 273.15) / 293.15)``.

    Parameters
    ----------
    air_temperature_c : float
        Air temperature in degrees Celsius (the formula is stated for -20..50 C).

    References
    ----------
    ISO 9613-1:1993, eq. (A.4).

    Examples
    --------
    >>> round(speed_of_sound(20.0), 3)
    343.2
    >>> round(speed_of_sound(0.0), 3)
    331.286
    """
    return 343.2 * math.sqrt((air_temperature_c + 273.15) / 293.15)
