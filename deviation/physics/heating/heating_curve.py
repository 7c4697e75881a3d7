"""Empirical heating-curve step responses (Ball's heating and cooling curves) that bound the product.

On ``log(T_R - T)`` against time a heat-penetration curve is, after a lag, a straight line of slope
``-1/fh`` whose intercept at zero time (the corrected zero when the come-up is not instantaneous) is
``jh · (T_R - T_0)`` (Ball [1]); a cooling curve likewise gives ``fc`` and ``jc`` on
``log(T - T_w)`` from steam off. Read as the cold spot's response to a step in retort
temperature these parameters do not fix the shape of the response during the lag, and a linear
model built on one assumed shape credits lethality the product did not receive: Ball's lag form
used for a fall of the retort temperature is a dead time of ``fc · log10(jc)`` during which the
predicted cold spot keeps heating as if the steam were still on.

This module therefore gives two step responses that bracket the product's own, and
:func:`deviation.physics.heating.superposition.superpose` (with ``falling_unaccomplished``) turns
the bracket into a cold-spot temperature that is never above the product's for any retort
history:

- :func:`rising_unaccomplished`, the slowest response the heating curve allows: Ball's lag form
  ``S(t) = min(1, max(jh, 1) · 10^(-t/fh))`` ([1]). It stays at 1 during the lag and follows the
  straight line afterwards; it is continuous at ``t = 0`` (for ``jh < 1`` the line is replaced by
  ``10^(-t/fh)``, so a retort overshoot is never answered at once).
- :func:`falling_unaccomplished`, a fast response: the step response of two first-order stages
  in series (a two-node lumped analogue of the container, [2] ch. 2 for the two-exponential
  response, from memory),
  ``S(t) = (τ1 e^(-t/τ1) - τ2 e^(-t/τ2)) / (τ1 - τ2)``, ``τ1 = f / ln 10``,
  ``τ2 = τ1 (1 - 1/j)``, which has Ball's straight line ``j · 10^(-t/f)`` as its asymptote,
  ``S(0) = 1`` and ``S'(0) = 0`` (the shortest lag a line of intercept ``j`` allows a smooth
  two-stage response); for ``j <= 1`` it is ``j · 10^(-t/f)``, an immediate response.

For conduction heating the exact centre response lies between the two when they take the
series' own first term (Carslaw & Jaeger [3]): Ball's lag form is that asymptote capped at 1, and
the series approaches its asymptote from below (checked for an 87 × 115 mm can). With fh, jh, fc, jc measured from a heat
penetration test by Ball's semi-log method the fall response stays below the series (to within
2e-4 of the change, late in cooling), while the rise response may run slightly ahead of it
(up to 0.7 % of the change for an 87 × 115 mm can): jh read at Ball's corrected zero after a
come-up ramp is below the series' own j. The falls more than make up for it: the model's F0
stayed below the exact F0 (by 2 % to 77 %) on every cycle of
``tests/reference/test_reference_heating_curve_bound.py``, for cylinders of height/diameter
0.1 to 5. The bracket is an assumption for other products: that the cold spot's step response
lies between the two forms.

:func:`bounding_kernels` picks the parameters of each side from a filing's fh, jh, fc, jc.

Broken heating curves
---------------------
A product that thickens or gels while it heats (starch, cream-style products) gives two straight
lines on the semi-log paper: fh from the lag to the break, then a slower fh2; the break time
``x_bh`` is counted from the corrected zero (Ball [1]; Stumbo [4], notation from memory).

- :func:`rising_unaccomplished_broken` is that curve as a step response: Ball's lag form on the
  first line until ``x_bh``, then the second line through the break point, continuous. For a
  retort history that is a single step it *is* the filed broken curve. It is never faster than
  either straight line (for ``fh2 >= fh`` it is the upper envelope of the first line and of the
  second line extended back). When ``fh2 < fh`` (a product that heats *faster* after the break)
  the faster second line is not credited to rises: the first line continues.
- :func:`bounding_kernels` with ``fh2_min``, ``break_min`` answers rises with it and falls with
  the two-stage response on the fastest of ``fh``, ``fh2``, ``fc``.

Superposed over a whole record that pair is a *time-invariant* reading of the break: every rise
of the retort is answered as if the product were unbroken when it came and broke ``x_bh``
later. The product breaks once, at a temperature (the cold spot's temperature at the break of
the filed curve, :func:`break_temperature`), and a rise that comes after that (the end of a
stalled come-up, the recovery from a drop after the break) is answered by the thickened product,
slowly. Measured on a conduction can whose diffusivity falls to a third when its centre reaches
105 °C (``tests/reference/test_reference_broken_curve.py``), the time-invariant pair credited
1.26 × the exact F0 to a come-up stalled 30 min at 110 °C, and 1.04 × the exact heating-phase
F0 even on the filed cycle (the second half of the come-up ramp breaks later than the product
does). :func:`broken_curve_cold_spot` is the record model that does not: it finds the earliest
time the product can have reached the break temperature (the highest cold spot the bracket
allows before the break reaches it) and from then on

- lets the changes of the retort made before it go on as the filed curve says, but breaking no
  later than that earliest time: their ages are counted on the second line's clock, the part
  before the break ``max(fh, fh2)/fh`` times as long (for the conduction can above this is
  exact: a uniform change of diffusivity rescales time mode by mode);
- answers every later rise as the thickened product would: Ball's lag form on
  ``max(fh, fh2)`` with a lag factor of at least (4/π)³ ≈ 2.064, the largest centre jh of the
  conduction shapes (Carslaw & Jaeger [3]): the filed jh is the thin product's (near 1 for a
  product that heats by convection before it thickens) and says nothing about the thickened
  product's lag;
- answers later falls by the fast two-stage response on the fastest line until the product has
  surely broken (the model's own cold spot reaches the break temperature), and on
  ``min(fh2, fc)`` after that (the thickened product cools at its own rate, which the cooling
  curve measures).

It is safe under these assumptions (stated, not proven for every product): the product's step
response lies in the bracket above, before and after the break; it breaks once, as a whole, when
its cold spot reaches the break temperature (a gel front moving in from the wall is not
modelled); and, as Ball's continuous broken line says, a change made before the break carries
on after it along the second line from where the first line had brought it.

References
----------
.. [1] C. O. Ball, "Thermal process time for canned food", *Bulletin of the National Research
   Council* 7, part 1, no. 37 (1923).
.. [2] D. R. Coughanowr and L. B. Koppel, *Process Systems Analysis and Control*, McGraw-Hill,
   1965 (first-order systems in series; chapter from memory).
.. [3] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford:
   Clarendon Press, 1959.
.. [4] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., New York: Academic
   Press, 1973 (broken heating curves; chapter from memory).
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from deviation.physics.heating.conduction import ModelInputError, finite_times
from deviation.physics.heating.superposition import superpose

__all__ = [
    "THICKENED_LAG_FACTOR",
    "BrokenCurveColdSpot",
    "bounding_kernels",
    "break_temperature",
    "broken_curve_cold_spot",
    "falling_unaccomplished",
    "rising_unaccomplished",
    "rising_unaccomplished_broken",
    "step_unaccomplished",
]

LN10 = math.log(10.0)

#: Lag factor [-] given to the response of a broken-curve product to a retort change made after
#: it may have thickened: (4/π)³ ≈ 2.064, the centre jh of a brick with its surface at the
#: retort temperature, the largest of the conduction shapes (finite cylinder 2.040, sphere 2.0;
#: a finite surface coefficient gives less; Carslaw & Jaeger 1959).
THICKENED_LAG_FACTOR = (4.0 / math.pi) ** 3


def _rate_index(name: str, value) -> float:
    f = float(value)
    if not math.isfinite(f) or f <= 0.0:
        raise ModelInputError(f"{name} = {value!r}; expected a finite number > 0 [min]")
    return f


def _lag_factor(name: str, value) -> float:
    j = float(value)
    if not math.isfinite(j) or j <= 0.0:
        raise ModelInputError(f"{name} = {value!r}; expected a finite number > 0")
    return j


def rising_unaccomplished(time_min, fh_min, jh) -> np.ndarray:
    """Unaccomplished fraction after a retort temperature step, slowest form the heating curve allows.

    Method: Ball's first-order response with lag (Ball 1923 [1]),
    ``S(t) = min(1, max(jh, 1) · 10^(-t/fh))`` for ``t >= 0``, ``S = 1`` before the step. It is
    continuous at ``t = 0``: the cold spot stays at its initial temperature during the lag
    ``fh · log10(jh)``, then follows Ball's straight line. For ``jh < 1`` the line would put the
    cold spot at once ``1 - jh`` of the way to the retort temperature; ``10^(-t/fh)`` is used
    instead (slower, never crediting heat the product has not had time to take up).

    Use it for rises of the retort temperature: it is an upper bound of the product's own
    response when that response, times ``10^(t/fh)``, grows monotonically to ``jh`` (as the
    conduction series does, Carslaw & Jaeger [2]).

    Parameters
    ----------
    time_min : array_like
        Time since the retort temperature step [min].
    fh_min : float
        Heating rate index fh [min], > 0.
    jh : float
        Heating lag factor jh [-], > 0.

    Returns
    -------
    numpy.ndarray
        ``S = (T_R - T) / (T_R - T_0)`` [-], in [0, 1], non-increasing in time, shape of
        ``time_min``.

    Raises
    ------
    ModelInputError
        ``fh_min`` or ``jh`` not finite and > 0, or a non-finite time.

    References
    ----------
    .. [1] C. O. Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    .. [2] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959.
    """
    fh = _rate_index("fh_min", fh_min)
    j = _lag_factor("jh", jh)
    t = finite_times(time_min)
    # log10 form: no overflow of 10^(-t/fh) for large negative t (those are set to 1 anyway)
    log10_s = math.log10(max(j, 1.0)) - np.maximum(t, 0.0) / fh
    return np.power(10.0, np.minimum(log10_s, 0.0))


def step_unaccomplished(time_min, fh_min, jh) -> np.ndarray:
    """Unaccomplished fraction after a retort temperature step, heating-curve model.

    The name kept for existing callers: the same response as :func:`rising_unaccomplished`,
    Ball's lag form ``min(1, max(jh, 1) · 10^(-t/fh))`` (Ball 1923), continuous at ``t = 0``;
    parameters (``fh_min``, ``jh``: or a cooling fc, jc), result and errors as there.
    """
    return rising_unaccomplished(time_min, fh_min, jh)


def falling_unaccomplished(time_min, fc_min, jc) -> np.ndarray:
    """Unaccomplished fraction after a retort temperature step, a fast two-stage response.

    Method: step response of two first-order stages in series (two-node lumped analogue,
    Coughanowr & Koppel [2]) whose asymptote is Ball's straight line ``jc · 10^(-t/fc)``
    (Ball 1923 [1]):

        S(t) = (τ1 e^(-t/τ1) - τ2 e^(-t/τ2)) / (τ1 - τ2),  τ1 = fc / ln 10,  τ2 = τ1 (1 - 1/jc)

    for ``jc > 1``: ``S(0) = 1``, ``S'(0) = 0``, no dead time. For ``jc <= 1`` it is
    ``S = jc · 10^(-t/fc)`` for ``t > 0`` (the product answers at once; for ``jc < 1`` partly
    at ``t = 0+``). ``S = 1`` at and before the step.

    Use it for falls of the retort temperature: for conduction heating it lies below the exact
    centre response with Ball's parameters measured from it (Carslaw & Jaeger [3]; see
    ``tests/reference/test_reference_heating_curve_bound.py``), so the predicted cold spot
    cools no later than the product.

    Parameters
    ----------
    time_min : array_like
        Time since the retort temperature step [min].
    fc_min : float
        Rate index of the response [min], > 0 (see :func:`bounding_kernels` for which of fh, fc).
    jc : float
        Lag factor of the response [-], > 0 (see :func:`bounding_kernels`).

    Returns
    -------
    numpy.ndarray
        ``S`` [-], in [0, 1], non-increasing in time, shape of ``time_min``.

    Raises
    ------
    ModelInputError
        ``fc_min`` or ``jc`` not finite and > 0, or a non-finite time.

    References
    ----------
    .. [1] C. O. Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    .. [2] Coughanowr & Koppel, *Process Systems Analysis and Control*, 1965.
    .. [3] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959.
    """
    f = _rate_index("fc_min", fc_min)
    j = _lag_factor("jc", jc)
    t = finite_times(time_min)
    after = np.maximum(t, 0.0)
    tau1 = f / LN10
    if j <= 1.0:
        s = j * np.exp(-after / tau1)
    else:
        tau2 = tau1 * (1.0 - 1.0 / j)
        # (τ1 e1 - τ2 e2)/(τ1 - τ2) = j e1 - (j - 1) e2 with τ1/(τ1 - τ2) = j
        s = j * np.exp(-after / tau1) - (j - 1.0) * np.exp(-after / tau2)
    return np.where(t > 0.0, np.clip(s, 0.0, 1.0), 1.0)


def _break_time(name: str, value) -> float:
    x = float(value)
    if not math.isfinite(x) or x < 0.0:
        raise ModelInputError(f"{name} = {value!r}; expected a finite time >= 0 [min]")
    return x


def rising_unaccomplished_broken(time_min, fh_min, jh, fh2_min, break_min) -> np.ndarray:
    """Unaccomplished fraction after a retort temperature step, broken heating curve.

    Method: Ball's broken heating curve (Ball 1923 [1]; Stumbo 1973 [2], from memory) read as
    a step response. On the first line with Ball's lag form until the break, then on the second
    line from the break point:

        log10 S(t) = min(0, log10 max(jh, 1) - min(t, x_bh)/fh - max(t - x_bh, 0)/fh2')

    with ``fh2' = max(fh, fh2)``, ``t`` counted from the step (the corrected zero of a heat
    penetration test) and ``S = 1`` before it. It is continuous and non-increasing; for a
    single step of the retort temperature it is the filed broken curve itself (for
    ``jh >= 1`` and ``fh2 >= fh``). For ``fh2 >= fh`` it is the upper envelope (the slower) of
    the first line continued and the second line extended back to the step, capped at 1: the
    response is never faster than either line allows. For ``fh2 < fh`` (a product that heats
    faster after the break) the second line is not credited and the first line continues: the
    function is then :func:`rising_unaccomplished` with ``fh``. For ``jh < 1`` the first line is
    replaced, as in :func:`rising_unaccomplished`, by ``10^(-t/fh)`` (no jump at the step).

    Superposed over a record this is a time-invariant reading of a break that really happens at
    a product temperature; see the module docstring and :func:`broken_curve_cold_spot`.

    Parameters
    ----------
    time_min, fh_min, jh
        As for :func:`rising_unaccomplished` (``fh_min``: the first line's).
    fh2_min : float
        Heating rate index of the second line, fh2 [min], > 0.
    break_min : float
        Break time x_bh from the step (the corrected zero) [min], >= 0.

    Returns
    -------
    numpy.ndarray
        As :func:`rising_unaccomplished`.

    Raises
    ------
    ModelInputError
        As :func:`rising_unaccomplished`, and a break time not finite and >= 0.

    References
    ----------
    .. [1] C. O. Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    .. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    fh = _rate_index("fh_min", fh_min)
    j = _lag_factor("jh", jh)
    fh2 = max(fh, _rate_index("fh2_min", fh2_min))
    x_bh = _break_time("break_min", break_min)
    t = np.maximum(finite_times(time_min), 0.0)
    log10_s = math.log10(max(j, 1.0)) - np.minimum(t, x_bh) / fh - np.maximum(t - x_bh, 0.0) / fh2
    return np.power(10.0, np.minimum(log10_s, 0.0))


def break_temperature(fh_min, jh, break_min, initial_C, retort_C) -> float:
    """Cold-spot temperature at the break of a broken heating curve.

    Method: Ball's first straight line at the break (Ball 1923 [1]; Stumbo 1973 [2], where
    ``g_bh`` is the retort minus this temperature, from memory):
    ``T_bh = T_R - min(jh · 10^(-x_bh/fh), 1) · (T_R - IT)``, capped so that a break during the
    lag is at the initial temperature. Give the heat penetration test's own IT and T_R: the
    product breaks at this temperature whatever the process (the trade's reading of a break;
    a lower IT here puts the break earlier, on the safe side).

    Parameters
    ----------
    fh_min : float
        fh of the first line [min], > 0.
    jh : float
        jh [-], > 0.
    break_min : float
        x_bh, break time from the corrected zero [min], >= 0.
    initial_C : float
        IT of the heat penetration test [°C].
    retort_C : float
        Retort temperature of the test T_R [°C], > IT.

    Returns
    -------
    float
        Break temperature T_bh [°C].

    Raises
    ------
    ModelInputError
        A parameter out of range, or T_R not above IT.

    References
    ----------
    .. [1] C. O. Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    .. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    fh = _rate_index("fh_min", fh_min)
    j = _lag_factor("jh", jh)
    x_bh = _break_time("break_min", break_min)
    it, tr = float(initial_C), float(retort_C)
    if not (math.isfinite(it) and math.isfinite(tr) and tr > it):
        raise ModelInputError(
            f"retort_C = {retort_C!r}, initial_C = {initial_C!r}; expected finite temperatures "
            "with the retort above the initial temperature [°C]"
        )
    return tr - min(j * 10.0 ** (-x_bh / fh), 1.0) * (tr - it)


def bounding_kernels(
    fh_min, jh, fc_min=None, jc=None, *, fh2_min=None, break_min=None
) -> tuple[Callable[[np.ndarray], np.ndarray], Callable[[np.ndarray], np.ndarray]]:
    """The rise and fall step responses of the bounding heating-curve model, from a filing.

    Method: the rise response is Ball's lag form with the heating parameters,
    ``rising_unaccomplished(t, fh, jh)`` (Ball 1923 [1]). The fall response is
    ``falling_unaccomplished(t, f, j)`` with

    - ``f = min(fh, fc)``: the faster of the two rate indices;
    - ``j = min(jh, jc)``: Ball's cooling ``jc`` is read from steam off and so includes the heat
      the product stored during heating, which the superposition already carries through the
      rises' responses; the response's own lag is the one measured from a uniform initial
      temperature, ``jh``. The smaller never credits more cooling lag than either curve shows;
    - without ``fc``/``jc``: ``f = fh`` and ``j = min(jh, 1)``, an immediate exponential
      response, the least cooling lethality.

    Broken heating curve (``fh2_min`` and ``break_min`` together; Ball 1923 [1], Stumbo
    1973 [2]): the rise response is :func:`rising_unaccomplished_broken` (the filed broken
    curve for a single step, never faster than either line; the first line continued when
    ``fh2 < fh``), and the fall response takes the fastest of the lines,
    ``f = min(fh, fh2, fc)``, with ``j`` as above. Superposed over a whole record this pair
    reads the break as happening ``x_bh`` after every rise of the retort; a rise that comes
    after the product has broken is then answered too fast. For records use
    :func:`broken_curve_cold_spot`, which uses this pair only up to the earliest possible break.

    Give both to ``superpose(..., falling_unaccomplished=fall)`` as ``unaccomplished=rise``.

    Parameters
    ----------
    fh_min : float
        Heating rate index fh [min], > 0 (the first line's, for a broken curve).
    jh : float
        Heating lag factor jh [-], > 0.
    fc_min : float, optional
        Cooling rate index fc [min], > 0.
    jc : float, optional
        Cooling lag factor jc [-], > 0.
    fh2_min : float, optional
        Rate index of the second line of a broken heating curve, fh2 [min], > 0.
    break_min : float, optional
        Break time x_bh from the corrected zero [min], >= 0.

    Returns
    -------
    rise, fall : callable
        ``S(t)`` [-] for an array of times [min] (``functools.partial`` objects).

    Raises
    ------
    ModelInputError
        A parameter not finite and > 0 (break time >= 0), or only one of ``fh2_min`` and
        ``break_min``.

    References
    ----------
    .. [1] C. O. Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    .. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    fh = _rate_index("fh_min", fh_min)
    j_h = _lag_factor("jh", jh)
    if (fh2_min is None) != (break_min is None):
        missing = "break_min" if break_min is None else "fh2_min"
        raise ModelInputError(
            f"{missing} is missing; a broken heating curve needs both fh2_min [min] and "
            "break_min [min]"
        )
    f_fall = fh if fc_min is None else min(fh, _rate_index("fc_min", fc_min))
    j_fall = min(j_h, 1.0) if jc is None else min(j_h, _lag_factor("jc", jc))
    if fh2_min is None:
        rise = functools.partial(rising_unaccomplished, fh_min=fh, jh=j_h)
    else:
        fh2 = _rate_index("fh2_min", fh2_min)
        x_bh = _break_time("break_min", break_min)
        f_fall = min(f_fall, fh2)
        rise = functools.partial(rising_unaccomplished_broken, fh_min=fh, jh=j_h, fh2_min=fh2,
                                 break_min=x_bh)
    fall = functools.partial(falling_unaccomplished, fc_min=f_fall, jc=j_fall)
    return rise, fall


# ---------------------------------------------------------------------------------------------
# Broken heating curve over a record: the break happens once, at a product temperature.


@dataclass(frozen=True, eq=False)
class BrokenCurveColdSpot:
    """Cold spot of a broken-heating-curve product over a retort record.

    Parameters
    ----------
    cold_spot_C : numpy.ndarray
        Predicted cold-spot temperature on the record's grid [°C]: never above the product's
        under the assumptions of :func:`broken_curve_cold_spot`.
    earliest_break_min : float or None
        Earliest time the product can have reached the break temperature (the highest cold spot
        the bracket allows reaches it) [min]; None if it cannot have on this record.
    latest_break_min : float or None
        Time by which it surely has (the model's own cold spot reaches it) [min]; None if not
        on this record.
    thickened_lag_factor : float
        Lag factor [-] given to rises of the retort after the earliest break.
    """

    cold_spot_C: np.ndarray
    earliest_break_min: float | None
    latest_break_min: float | None
    thickened_lag_factor: float


def _first_crossing(time: np.ndarray, values: np.ndarray, level: float):
    """First index with ``values >= level`` and the crossing time, linear within the step."""
    above = np.flatnonzero(values >= level)
    if above.size == 0:
        return None, None
    i = int(above[0])
    if i == 0:
        return 0, float(time[0])
    v0, v1 = float(values[i - 1]), float(values[i])
    frac = (level - v0) / (v1 - v0) if v1 > v0 else 1.0
    return i, float(time[i - 1] + min(max(frac, 0.0), 1.0) * (time[i] - time[i - 1]))


def _lower_resample(src_t: np.ndarray, src_v: np.ndarray, n: int, dt: float) -> np.ndarray:
    """Samples ``v_k`` at ``k·dt`` whose piecewise-linear interpolant is nowhere above the
    piecewise-linear record ``(src_t, src_v)`` (held at its ends).

    On a grid interval the record is linear unless one of its breakpoints lies strictly inside;
    there both ends take the record's minimum over the interval. Elsewhere the record's own
    values are kept, so a record whose breakpoints lie on the grid is reproduced exactly.
    """
    grid = np.arange(n) * dt
    out = np.interp(grid, src_t, src_v)
    position = src_t / dt
    nearest = np.rint(position)
    inside = np.abs(position - nearest) > 1e-9 * np.maximum(1.0, np.abs(position))
    if np.any(inside):
        interval = np.floor(position[inside]).astype(int)
        keep = (interval >= 0) & (interval < n - 1)
        interval, values = interval[keep], src_v[inside][keep]
        lowest = np.full(max(n - 1, 0), np.inf)
        np.minimum.at(lowest, interval, values)
        broken = np.isfinite(lowest)
        lowest = np.where(broken, np.minimum(lowest, np.minimum(out[:-1], out[1:])), np.inf)
        out[:-1] = np.minimum(out[:-1], lowest)
        out[1:] = np.minimum(out[1:], lowest)
    return out


def broken_curve_cold_spot(
    time_min,
    retort_C,
    initial_C,
    *,
    fh_min,
    jh,
    fh2_min,
    break_min,
    break_temperature_C,
    fc_min=None,
    jc=None,
    jh2=None,
    max_ages: int | None = None,
) -> BrokenCurveColdSpot:
    """Cold spot of a product with a broken heating curve, for any retort record.

    Method: the bounding superposition (``superpose`` with a falling response; the lowest cold
    spot a bracket of step responses allows, Ferson et al. [3]) of the broken heating curve
    (Ball 1923 [1]; Stumbo 1973 [2]) with the break read as an event of the product, not of
    the response (see the module docstring):

    1. ``lower``: the time-invariant pair of :func:`bounding_kernels` (rises: the broken curve,
       falls: the fast two-stage response on the fastest line) over the whole record.
    2. ``upper``: the highest cold spot the heating curve allows before the break (the same
       bracket with the fast side the two-stage response on ``fh``, ``jh``, whose asymptote is
       the first line): ``-superpose(t, -T_R, -T_0, ...)``. The product cannot reach the break
       temperature before ``upper`` does, at ``t_e``; ``lower`` reaching it gives ``t_l``.
    3. After ``t_e``: the record is split at the last grid time ``t_s`` before ``t_e`` and at
       the first grid time ``t_l'`` at or after ``t_l``; the cold spot is the sum of

       - the changes up to ``t_s`` (the record held at ``T_R(t_s)`` after it) superposed with
         Ball's lag form on ``fh2' = max(fh, fh2)`` and ``jh`` on the second line's clock: a
         change made at ``τ`` is given the age ``(t - t_e) + (fh2'/fh)·(t_e - τ)`` when
         ``t_e - τ < x_bh``, ``t - τ + (fh2'/fh - 1)·x_bh`` when older, i.e. the broken curve
         with its break at ``min(τ + x_bh, t_e)`` (the record is resampled onto that clock,
         never above itself); falls with the fast response of the pair;
       - the changes from ``t_s`` to ``t_l'`` with the thickened product's rise response, the
         lag form on ``fh2'`` with ``max(jh, jh2)`` (default :data:`THICKENED_LAG_FACTOR`),
         and the fast fall response of the pair;
       - the changes after ``t_l'`` with the same rise response and the thickened product's
         fall response, the two-stage response on ``min(fh2, fc)`` with the pair's lag factor;

       and, before ``t_l'``, no more than ``lower``.

    For a retort that only rises before ``t_e`` and stays constant after it, the result is the
    broken curve with its break moved from ``x_bh`` to ``t_e`` (``t_e <= x_bh`` for a step at
    the corrected zero; the two differ by the spread of the bracket at the break, 0.3 min for
    fh 21.3 min, jh 1.70).

    Parameters
    ----------
    time_min : array_like
        Uniform time grid starting at 0 [min] (as for ``superpose``).
    retort_C : array_like
        Retort temperature on that grid [°C].
    initial_C : float
        Uniform initial product temperature [°C].
    fh_min, jh : float
        First line of the broken heating curve: fh [min] and jh [-], > 0.
    fh2_min : float
        Second line's rate index fh2 [min], > 0.
    break_min : float
        x_bh, break time from the corrected zero of the heat penetration test [min], >= 0.
    break_temperature_C : float
        Cold-spot temperature at which the product breaks [°C]
        (:func:`break_temperature` of the heat penetration test).
    fc_min, jc : float, optional
        Cooling rate index [min] and lag factor [-], as for :func:`bounding_kernels`.
    jh2 : float, optional
        Lag factor [-] of the thickened product's response to a retort change made after the
        break, > 0; the larger of it and ``jh`` is used (default
        :data:`THICKENED_LAG_FACTOR`, the largest conduction value: the filed curve does not
        measure it).
    max_ages : int, optional
        Passed to ``superpose`` (fewer: faster and lower).

    Returns
    -------
    BrokenCurveColdSpot
        The cold spot [°C] and the earliest and latest break times [min].

    Raises
    ------
    ModelInputError
        A parameter out of range, or what ``superpose`` refuses (grid, shapes, non-finite
        values).

    References
    ----------
    .. [1] C. O. Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    .. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    .. [3] Ferson et al., *Constructing Probability Boxes and Dempster-Shafer Structures*,
       SAND2002-4015, 2003.
    """
    fh = _rate_index("fh_min", fh_min)
    j_h = _lag_factor("jh", jh)
    fh2 = _rate_index("fh2_min", fh2_min)
    x_bh = _break_time("break_min", break_min)
    level = float(break_temperature_C)
    if not math.isfinite(level):
        raise ModelInputError(
            f"break_temperature_C = {break_temperature_C!r}; expected a finite temperature [°C]"
        )
    j_thick = max(j_h, THICKENED_LAG_FACTOR if jh2 is None else _lag_factor("jh2", jh2))
    kw = {} if max_ages is None else {"max_ages": max_ages}
    rise, fall = bounding_kernels(fh, j_h, fc_min, jc, fh2_min=fh2, break_min=x_bh)
    t = np.asarray(time_min, dtype=float)
    retort = np.asarray(retort_C, dtype=float)
    t0 = float(initial_C)
    lower = superpose(t, retort, t0, rise, falling_unaccomplished=fall, **kw)
    first_line_fast = functools.partial(falling_unaccomplished, fc_min=fh, jc=j_h)
    upper = -superpose(t, -retort, -t0, rise, falling_unaccomplished=first_line_fast, **kw)
    i_e, t_e = _first_crossing(t, upper, level)
    i_l, t_l = _first_crossing(t, lower, level)
    if i_e is None or t.size == 1:
        return BrokenCurveColdSpot(lower, t_e, t_l, j_thick)
    n = t.size
    dt = (t[-1] - t[0]) / (n - 1)
    f_slow = max(fh, fh2)
    if i_e == 0:  # broken from the start: every change, the first step too, on the thick side
        split, before, base = 0, np.full(n, t0), t0
    else:
        split, base = i_e - 1, float(retort[i_e - 1])
        stretch = f_slow / fh - 1.0
        b0 = t_e - x_bh
        mapped = t + stretch * (np.clip(t - b0, 0.0, x_bh) - min(max(-b0, 0.0), x_bh))
        held = retort.copy()
        held[split + 1:] = base
        n_map = math.ceil(mapped[-1] / dt - 1e-9) + 1
        on_clock = _lower_resample(mapped, held, n_map, dt)
        second_line = functools.partial(rising_unaccomplished, fh_min=f_slow, jh=j_h)
        clock_cold = superpose(np.arange(n_map) * dt, on_clock, t0, second_line,
                               falling_unaccomplished=fall, **kw)
        position = np.minimum(mapped / dt, n_map - 1)
        nearest = np.rint(position).astype(int)
        floor = np.floor(position).astype(int)
        ceil = np.minimum(floor + 1, n_map - 1)
        aligned = np.abs(position - nearest) <= 1e-9 * np.maximum(1.0, position)
        before = np.where(aligned, clock_cold[np.minimum(nearest, n_map - 1)],
                          np.minimum(clock_cold[floor], clock_cold[ceil]))
    thickened = functools.partial(rising_unaccomplished, fh_min=f_slow, jh=j_thick)
    # changes after t_s until the product has surely broken (grid index i_l): falls as fast as
    # the fastest line allows (the product may still be thin)
    surely = n if i_l is None else max(i_l, split)
    i_l = min(surely, n - 1)
    held = retort[split:].copy()
    held[i_l - split:] = retort[i_l]
    after = superpose(t[split:] - t[split], held, base, thickened,
                      falling_unaccomplished=fall, **kw) - base
    cold = lower.copy()
    cold[i_e:] = before[i_e:] + after[i_e - split:]
    # changes after that: the thickened product's own falls (fh2 or fc, the faster)
    if i_l < n - 1:
        f_thick = fh2 if fc_min is None else min(fh2, _rate_index("fc_min", fc_min))
        j_fall = min(j_h, 1.0) if jc is None else min(j_h, _lag_factor("jc", jc))
        thick_fall = functools.partial(falling_unaccomplished, fc_min=f_thick, jc=j_fall)
        cold[i_l:] += superpose(t[i_l:] - t[i_l], retort[i_l:], float(retort[i_l]), thickened,
                                falling_unaccomplished=thick_fall, **kw) - retort[i_l]
    # before it, no more than the time-invariant pair (a guard against the envelope's rounding)
    cold[i_e:surely] = np.minimum(cold[i_e:surely], lower[i_e:surely])
    return BrokenCurveColdSpot(cold, t_e, t_l, j_thick)
