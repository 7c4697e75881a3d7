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

References
----------
.. [1] C. O. Ball, "Thermal process time for canned food", *Bulletin of the National Research
   Council* 7, part 1, no. 37 (1923).
.. [2] D. R. Coughanowr and L. B. Koppel, *Process Systems Analysis and Control*, McGraw-Hill,
   1965 (first-order systems in series; chapter from memory).
.. [3] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford:
   Clarendon Press, 1959.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable

import numpy as np

from deviation.physics.heating.conduction import ModelInputError

__all__ = [
    "bounding_kernels",
    "falling_unaccomplished",
    "rising_unaccomplished",
    "step_unaccomplished",
]

LN10 = math.log(10.0)


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


def _times(time_min) -> np.ndarray:
    t = np.asarray(time_min, dtype=float)
    if not np.all(np.isfinite(t)):
        raise ModelInputError("time_min contains a non-finite value; expected finite times [min]")
    return t


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
    t = _times(time_min)
    # log10 form: no overflow of 10^(-t/fh) for large negative t (those are set to 1 anyway)
    log10_s = math.log10(max(j, 1.0)) - np.maximum(t, 0.0) / fh
    return np.power(10.0, np.minimum(log10_s, 0.0))


def step_unaccomplished(time_min, fh_min, jh) -> np.ndarray:
    """Unaccomplished fraction after a retort temperature step, heating-curve model.

    The name kept for existing callers: the same response as :func:`rising_unaccomplished`,
    Ball's lag form ``min(1, max(jh, 1) · 10^(-t/fh))`` (Ball 1923 [1]), continuous at
    ``t = 0``.

    Parameters
    ----------
    time_min : array_like
        Time since the retort temperature step [min].
    fh_min : float
        Heating (or cooling, fc) rate index [min], > 0.
    jh : float
        Heating (or cooling, jc) lag factor [-], > 0.

    Returns
    -------
    numpy.ndarray
        ``S = (T_R - T) / (T_R - T_0)`` [-], in [0, 1], shape of ``time_min``.

    Raises
    ------
    ModelInputError
        ``fh_min`` or ``jh`` not finite and > 0, or a non-finite time.

    References
    ----------
    .. [1] C. O. Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
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
    t = _times(time_min)
    after = np.maximum(t, 0.0)
    tau1 = f / LN10
    if j <= 1.0:
        s = j * np.exp(-after / tau1)
    else:
        tau2 = tau1 * (1.0 - 1.0 / j)
        # (τ1 e1 - τ2 e2)/(τ1 - τ2) = j e1 - (j - 1) e2 with τ1/(τ1 - τ2) = j
        s = j * np.exp(-after / tau1) - (j - 1.0) * np.exp(-after / tau2)
    return np.where(t > 0.0, np.clip(s, 0.0, 1.0), 1.0)


def bounding_kernels(
    fh_min, jh, fc_min=None, jc=None
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

    Give both to ``superpose(..., falling_unaccomplished=fall)`` as ``unaccomplished=rise``.

    Parameters
    ----------
    fh_min : float
        Heating rate index fh [min], > 0.
    jh : float
        Heating lag factor jh [-], > 0.
    fc_min : float, optional
        Cooling rate index fc [min], > 0.
    jc : float, optional
        Cooling lag factor jc [-], > 0.

    Returns
    -------
    rise, fall : callable
        ``S(t)`` [-] for an array of times [min] (``functools.partial`` objects).

    Raises
    ------
    ModelInputError
        A parameter not finite and > 0.

    References
    ----------
    .. [1] C. O. Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    """
    fh = _rate_index("fh_min", fh_min)
    j_h = _lag_factor("jh", jh)
    f_fall = fh if fc_min is None else min(fh, _rate_index("fc_min", fc_min))
    j_fall = min(j_h, 1.0) if jc is None else min(j_h, _lag_factor("jc", jc))
    rise = functools.partial(rising_unaccomplished, fh_min=fh, jh=j_h)
    fall = functools.partial(falling_unaccomplished, fc_min=f_fall, jc=j_fall)
    return rise, fall
