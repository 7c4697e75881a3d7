"""Temperature unit conversions at the edges (internal computation is in degrees Celsius).

A temperature converts as ``C = (F - 32) * 5/9``; a temperature *difference* (z, degree-minutes)
converts by ``5/9`` alone.
"""

from __future__ import annotations

import numpy as np


def fahrenheit_to_celsius(temperature_F):
    """Temperature [°F] -> temperature [°C]."""
    return (np.asarray(temperature_F, dtype=float) - 32.0) * 5.0 / 9.0 if np.ndim(temperature_F) else (float(temperature_F) - 32.0) * 5.0 / 9.0


def celsius_to_fahrenheit(temperature_C):
    """Temperature [°C] -> temperature [°F]."""
    return np.asarray(temperature_C, dtype=float) * 9.0 / 5.0 + 32.0 if np.ndim(temperature_C) else float(temperature_C) * 9.0 / 5.0 + 32.0


def fahrenheit_difference_to_celsius(difference_F):
    """Temperature difference [°F] (e.g. z) -> difference [°C]."""
    return float(difference_F) * 5.0 / 9.0
