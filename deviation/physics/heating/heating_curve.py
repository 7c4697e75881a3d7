"""Empirical heating-curve step response (Ball's first-order-with-lag model).

On ``log(T_R - T)`` against time a heat-penetration curve is, after a lag, a straight line of slope
``-1/fh`` whose intercept at zero time (the corrected zero when the come-up is not instantaneous) is
``jh · (T_R - T_0)`` (Ball [1]). Read as the cold spot's
response to a step in retort temperature at ``t = 0`` it gives the unaccomplished fraction

    S(t) = min(1, jh · 10^(-t/fh)),

the ``min`` holding the cold spot at its initial temperature during the lag, while the straight
line would still put it below the initial temperature (``jh > 1``). The same form with ``fc, jc``
describes cooling.

References
----------
.. [1] C. O. Ball, "Thermal process time for canned food", *Bulletin of the National Research
   Council* 7, part 1, no. 37 (1923).
"""

from __future__ import annotations

import math

import numpy as np

from deviation.physics.heating.conduction import ModelInputError

__all__ = ["step_unaccomplished"]


def step_unaccomplished(time_min, fh_min, jh) -> np.ndarray:
    """Unaccomplished temperature fraction after a retort temperature step, heating-curve model.

    Method: Ball's first-order response with lag factor (Ball 1923 [1]),
    ``S(t) = min(1, jh · 10^(-t/fh))`` for ``t >= 0`` and ``S = 1`` before the step.

    Parameters
    ----------
    time_min : array_like
        Time since the retort temperature step [min].
    fh_min : float
        Heating (or cooling, fc) rate index [min].
    jh : float
        Heating (or cooling, jc) lag factor [-], > 0.

    Returns
    -------
    numpy.ndarray
        ``S = (T_R - T) / (T_R - T_0)`` [-], in [0, 1], shape of ``time_min``.

    References
    ----------
    .. [1] C. O. Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    """
    fh = float(fh_min)
    if not math.isfinite(fh) or fh <= 0.0:
        raise ModelInputError(f"fh_min = {fh_min!r}; expected a finite number > 0 [min]")
    j = float(jh)
    if not math.isfinite(j) or j <= 0.0:
        raise ModelInputError(f"jh = {jh!r}; expected a finite number > 0")
    t = np.asarray(time_min, dtype=float)
    if not np.all(np.isfinite(t)):
        raise ModelInputError("time_min contains a non-finite value; expected finite times [min]")
    # log10 form: no overflow of 10^(-t/fh) for large negative t (those are set to 1 anyway)
    log10_s = math.log10(j) - np.maximum(t, 0.0) / fh
    s = np.power(10.0, np.minimum(log10_s, 0.0))
    return np.where(t < 0.0, 1.0, s)
