"""Cold-spot temperature for any retort profile by superposing step responses (Duhamel).

For a linear heat-transfer model with uniform initial temperature ``T_0`` and unit-step response
``U(t) = 1 - S(t)`` (``S`` the unaccomplished fraction), the cold-spot temperature for a retort
temperature history ``T_R(t)`` is Duhamel's integral ([1], §1.14, section from memory)

    T(t) = T_0 + (T_R(0) - T_0) U(t) + ∫_0^t T_R'(τ) U(t - τ) dτ.

With ``T_R`` taken as piecewise linear between samples on a uniform grid ``t_n = n Δt`` the
integral is a discrete convolution, exact under that assumption:

    T_n = T_0 + (T_R,0 - T_0) U(t_n) + Σ_{k<n} (T_R,k+1 - T_R,k) K_{n-k},
    K_j = (1/Δt) ∫_{(j-1)Δt}^{jΔt} U(u) du,

the kernel means ``K_j`` taken by Gauss-Legendre quadrature on each interval.

References
----------
.. [1] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford:
   Clarendon Press, 1959 (Duhamel's theorem).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
from scipy.signal import fftconvolve

from deviation.physics.heating.conduction import ModelInputError

__all__ = ["superpose"]

# Gauss-Legendre nodes per grid interval for the kernel means. Six nodes integrate the smooth
# conduction response to far below 1e-10 °C at any sensible grid step; the heating-curve model's
# single slope break at the end of the lag costs at most O(Δt²) in one interval.
_GAUSS_NODES = 6
_GL_X, _GL_W = np.polynomial.legendre.leggauss(_GAUSS_NODES)
_GL_X = 0.5 * (_GL_X + 1.0)  # nodes on [0, 1]
_GL_W = 0.5 * _GL_W  # weights sum to 1: a mean, not an integral

# Relative tolerance on the grid spacing (retort logs carry times rounded in the CSV).
_GRID_RTOL = 1e-6

Unaccomplished = Callable[[np.ndarray], np.ndarray]


def _check_grid(time_min) -> tuple[np.ndarray, float]:
    t = np.asarray(time_min, dtype=float)
    if t.ndim != 1 or t.size == 0:
        raise ModelInputError(f"time_min has shape {t.shape}; expected a non-empty 1-D grid [min]")
    if not np.all(np.isfinite(t)):
        raise ModelInputError("time_min contains a non-finite value; expected finite times [min]")
    if t.size == 1:
        if t[0] != 0.0:
            raise ModelInputError(f"time_min starts at {t[0]!r}; expected a grid starting at 0")
        return t, 0.0
    dt = (t[-1] - t[0]) / (t.size - 1)
    if not dt > 0.0:
        raise ModelInputError("time_min does not increase; expected a uniform increasing grid")
    if abs(t[0]) > _GRID_RTOL * dt:
        raise ModelInputError(f"time_min starts at {t[0]!r}; expected a grid starting at 0")
    deviation = np.abs(t - dt * np.arange(t.size))
    worst = int(np.argmax(deviation))
    if deviation[worst] > _GRID_RTOL * dt:
        raise ModelInputError(
            f"time_min is not a uniform grid: sample {worst} is at {t[worst]!r} min, expected "
            f"{worst * dt!r} min (step {dt!r} min); resample the record first"
        )
    return t, dt


def _response(unaccomplished: Unaccomplished, t: np.ndarray, name: str) -> np.ndarray:
    s = np.asarray(unaccomplished(t), dtype=float)
    if s.shape != t.shape or not np.all(np.isfinite(s)):
        raise ModelInputError(
            f"{name} returned shape {s.shape} or non-finite values for {t.size} times; "
            "expected finite unaccomplished fractions of the same shape"
        )
    return 1.0 - s


def _kernel_means(unaccomplished: Unaccomplished, n_intervals: int, dt: float, name: str):
    """Kernel means ``K_j``, ``j = 1..n_intervals``: mean of U over ``[(j-1)Δt, jΔt]``.

    Gauss-Legendre quadrature on each interval.
    """
    # ascending sub-grid: interval by interval, nodes ascending within each
    sub_t = (np.arange(n_intervals)[:, None] + _GL_X[None, :]).ravel() * dt
    u = _response(unaccomplished, sub_t, name).reshape(n_intervals, _GAUSS_NODES)
    return u @ _GL_W


def superpose(
    time_min,
    retort_C,
    initial_C,
    unaccomplished: Unaccomplished,
    *,
    cooling_unaccomplished: Unaccomplished | None = None,
    cooling_start_min: float | None = None,
) -> np.ndarray:
    """Cold-spot temperature for a retort temperature record, by Duhamel superposition.

    Method: Duhamel's theorem for a linear system ([1]), the retort temperature taken as piecewise
    linear between samples, evaluated as one discrete convolution of the retort temperature
    increments with the interval-mean step response.

    Parameters
    ----------
    time_min : array_like
        Uniform time grid starting at 0 [min].
    retort_C : array_like
        Retort temperature on that grid [°C].
    initial_C : float
        Uniform initial product temperature [°C].
    unaccomplished : callable
        ``S(t)`` for ``t`` an array of times [min]: the unaccomplished fraction after a unit step
        in retort temperature at ``t = 0`` (e.g. a ``functools.partial`` of
        ``cylinder_centre_unaccomplished`` or ``step_unaccomplished``).
    cooling_unaccomplished : callable, optional
        Step response used for retort changes at or after ``cooling_start_min`` (e.g. Ball's
        ``fc, jc``). Give both or neither of the two cooling arguments.
    cooling_start_min : float, optional
        Time of steam off / start of cooling [min].

    Returns
    -------
    numpy.ndarray
        Cold-spot temperature at each grid time [°C].

    Raises
    ------
    ModelInputError
        (a ``ModelError`` and a ``ValueError``) if the grid is not uniform from 0, the arrays
        disagree in length or hold non-finite values, or a response callable misbehaves.

    Notes
    -----
    The two-phase option is an approximation made for heating-curve models whose heating and
    cooling parameters differ: each retort change is answered by the kernel of the phase it
    occurs in (segments starting at or after ``cooling_start_min`` use the cooling kernel).
    Changes made during heating keep evolving after cooling starts, so the predicted cold spot
    may still rise after steam-off, as a real conduction-heating cold spot does. For a linear
    conduction model use a single kernel: that is exact.

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959 (Duhamel's theorem).
    """
    t, dt = _check_grid(time_min)
    retort = np.asarray(retort_C, dtype=float)
    if retort.shape != t.shape:
        raise ModelInputError(
            f"retort_C has shape {retort.shape}; expected the shape of time_min {t.shape}"
        )
    if not np.all(np.isfinite(retort)):
        raise ModelInputError("retort_C contains a non-finite value; expected temperatures [°C]")
    t0 = float(initial_C)
    if not math.isfinite(t0):
        raise ModelInputError(f"initial_C = {initial_C!r}; expected a finite temperature [°C]")
    two_phase = cooling_unaccomplished is not None or cooling_start_min is not None
    if two_phase and (cooling_unaccomplished is None or cooling_start_min is None):
        raise ModelInputError(
            "cooling_unaccomplished and cooling_start_min must be given together"
        )
    if two_phase:
        t_cool = float(cooling_start_min)
        if not math.isfinite(t_cool):
            raise ModelInputError(
                f"cooling_start_min = {cooling_start_min!r}; expected a finite time [min]"
            )

    # the initial step T_R(0) - T_0 at t = 0
    first = cooling_unaccomplished if two_phase and t_cool <= 0.0 else unaccomplished
    cold_spot = t0 + (retort[0] - t0) * _response(first, t, "unaccomplished")
    n = t.size
    if n == 1:
        return cold_spot

    increments = np.diff(retort)  # segment k: [t_k, t_k+1]
    kernel = _kernel_means(unaccomplished, n - 1, dt, "unaccomplished")
    if not two_phase:
        cold_spot[1:] += fftconvolve(increments, kernel)[: n - 1]
        return cold_spot

    # segment starts at or after steam-off (with the grid's rounding tolerance) cool
    cooling = t[:-1] >= t_cool - _GRID_RTOL * dt
    heating_increments = np.where(cooling, 0.0, increments)
    cooling_increments = np.where(cooling, increments, 0.0)
    cold_spot[1:] += fftconvolve(heating_increments, kernel)[: n - 1]
    if np.any(cooling):
        cooling_kernel = _kernel_means(
            cooling_unaccomplished, n - 1, dt, "cooling_unaccomplished"
        )
        cold_spot[1:] += fftconvolve(cooling_increments, cooling_kernel)[: n - 1]
    return cold_spot
