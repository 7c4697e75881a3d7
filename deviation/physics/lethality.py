"""Lethality of a heat process: lethal rate and the General Method.

The lethal rate ``L = 10^((T - T_ref)/z)`` converts a minute at temperature ``T`` into
equivalent minutes at the reference temperature (Bigelow [1]; Stumbo [2]). The General Method
integrates it over the cold-spot temperature history, ``F = ∫ L(T(t)) dt``, heating and cooling
together; with ``T_ref = 121.1 °C`` (250 °F) and ``z = 10 °C`` (18 °F) the result is F0.

References
----------
.. [1] W. D. Bigelow, G. S. Bohart, A. C. Richardson and C. O. Ball, "Heat penetration in
   processing canned foods", *National Canners Association Bulletin* 16-L (1920).
.. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., New York: Academic
   Press, 1973.
.. [3] J. Warne, *Manual on Fish Canning*, FAO Fisheries Technical Paper 285, Rome: FAO,
   1988, §1.3.3.
"""

from __future__ import annotations

import math

import numpy as np

from deviation.errors import RecordError

__all__ = ["LethalityInputError", "lethal_rate", "general_method"]

F0_REFERENCE_TEMPERATURE_C = 121.1  # 250 °F
F0_Z_C = 10.0  # 18 °F


class LethalityInputError(RecordError, ValueError):
    """A temperature history or lethality parameter is unusable.

    Both a ``deviation.errors.RecordError`` and a ``ValueError``.
    """


def _z(z_C) -> float:
    z = float(z_C)
    if not math.isfinite(z) or z <= 0.0:
        raise LethalityInputError(
            f"z_C = {z_C!r}; expected a finite temperature difference > 0 [°C]"
        )
    return z


def _reference(reference_temperature_C) -> float:
    ref = float(reference_temperature_C)
    if not math.isfinite(ref):
        raise LethalityInputError(
            f"reference_temperature_C = {reference_temperature_C!r}; "
            "expected a finite temperature [°C]"
        )
    return ref


def lethal_rate(
    temperature_C, reference_temperature_C=F0_REFERENCE_TEMPERATURE_C, z_C=F0_Z_C
) -> np.ndarray:
    """Lethal rate at a temperature: ``L = 10^((T - T_ref)/z)``.

    Method: lethal rate of the General Method (Bigelow et al. 1920 [1]; Stumbo 1973 [2]).

    Parameters
    ----------
    temperature_C : array_like
        Temperature [°C].
    reference_temperature_C : float, optional
        Reference temperature T_ref [°C]; 121.1 °C (250 °F) for F0.
    z_C : float, optional
        z value [°C] (a temperature difference); 10 °C (18 °F) for F0.

    Returns
    -------
    numpy.ndarray
        Lethal rate [min at T_ref per min], shape of ``temperature_C``.

    References
    ----------
    .. [1] Bigelow et al., *NCA Bulletin* 16-L (1920).
    .. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    ref = _reference(reference_temperature_C)
    z = _z(z_C)
    temperature = np.asarray(temperature_C, dtype=float)
    return np.power(10.0, (temperature - ref) / z)


def general_method(
    time_min, temperature_C, reference_temperature_C, z_C, *, conservative=False,
    uncredited_min=(),
) -> tuple[float, np.ndarray]:
    """Sterilizing value of a temperature history by the General Method.

    Method: General Method (Bigelow et al. 1920 [1]), ``F = ∫ L(T(t)) dt``, by the trapezoidal
    rule as in the worked example of FAO Fisheries Technical Paper 285 [3]. With
    ``conservative=True`` no interval is credited more than its lower reading,
    ``ΔF_k = Δt_k · min(L_k, L_k+1)`` (a single reading does not show the temperature stayed
    above a value between readings: common practice of process authorities).

    Parameters
    ----------
    time_min : array_like
        Sample times [min], 1-D, non-decreasing (need not be uniform).
    temperature_C : array_like
        Cold-spot temperature at those times [°C].
    reference_temperature_C : float
        Reference temperature T_ref [°C]; 121.1 °C for F0.
    z_C : float
        z value [°C]; 10 °C for F0.
    conservative : bool, optional
        Credit each interval with the lower of its two lethal rates instead of their mean.
    uncredited_min : sequence of (start, end), optional
        Time windows [min] in which no lethality is credited (a gap in the record longer than
        allowed: what the retort did there is not known); an interval partly inside a window is
        credited for the part outside it only.

    Returns
    -------
    F_min : float
        Sterilizing value, equivalent minutes at T_ref [min].
    cumulative_F_min : numpy.ndarray
        Running F at each sample time [min], starting at 0, same length as ``time_min``.

    Raises
    ------
    LethalityInputError
        (a ``RecordError`` and a ``ValueError``) if the arrays differ in shape, are empty,
        hold non-finite values, or time decreases.

    References
    ----------
    .. [1] Bigelow et al., *NCA Bulletin* 16-L (1920).
    .. [3] J. Warne, *Manual on Fish Canning*, FAO Fish. Tech. Pap. 285 (1988), §1.3.3.
    """
    t = np.asarray(time_min, dtype=float)
    temperature = np.asarray(temperature_C, dtype=float)
    if t.ndim != 1 or t.size == 0:
        raise LethalityInputError(
            f"time_min has shape {t.shape}; expected a non-empty 1-D array [min]"
        )
    if temperature.shape != t.shape:
        raise LethalityInputError(
            f"temperature_C has shape {temperature.shape}; expected the shape of time_min {t.shape}"
        )
    if not np.all(np.isfinite(t)):
        raise LethalityInputError(
            "time_min contains a non-finite value; expected finite times [min]"
        )
    if not np.all(np.isfinite(temperature)):
        bad = int(np.flatnonzero(~np.isfinite(temperature))[0])
        raise LethalityInputError(
            f"temperature_C[{bad}] = {temperature[bad]!r}; expected a finite temperature [°C]"
        )
    dt = np.diff(t)
    if np.any(dt < 0.0):
        bad = int(np.flatnonzero(dt < 0.0)[0]) + 1
        raise LethalityInputError(
            f"time_min decreases at sample {bad} ({t[bad - 1]!r} -> {t[bad]!r} min); "
            "expected non-decreasing times"
        )
    rate = lethal_rate(temperature, reference_temperature_C, z_C)
    if conservative:
        per_interval = dt * np.minimum(rate[:-1], rate[1:])
    else:
        per_interval = 0.5 * dt * (rate[:-1] + rate[1:])
    for start, end in uncredited_min:
        overlap = np.clip(np.minimum(t[1:], end) - np.maximum(t[:-1], start), 0.0, None)
        with np.errstate(invalid="ignore", divide="ignore"):
            kept = np.where(dt > 0.0, 1.0 - np.minimum(overlap / dt, 1.0), 1.0)
        per_interval = per_interval * kept
    cumulative = np.empty_like(t)
    cumulative[0] = 0.0
    np.cumsum(per_interval, out=cumulative[1:])
    return float(cumulative[-1]), cumulative
