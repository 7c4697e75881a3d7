"""Monte Carlo propagation of heat-penetration and microbiological uncertainty to F and spoilage.

Pure numpy/scipy. Every sample shares the retort record; each has its own heating parameters
(fh, jh or the diffusivity), initial temperature and spore load. The cold spot of all samples is
computed at once: a batch of Duhamel superpositions (piecewise-linear retort, kernel means by
two-point Gauss-Legendre quadrature on each interval), one FFT convolution per chunk of samples.

References
----------
.. [1] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959 (Duhamel).
.. [2] W. D. Bigelow et al., "Heat penetration in processing canned foods", Bull. 16-L, National
   Canners Association, 1920 (General Method).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from scipy.signal import fftconvolve

from deviation.physics.lethality import general_method

# Two Gauss-Legendre nodes per interval: the mean of a smooth step response over one recorder
# interval to O(dt^4), enough for a spread estimate (the deterministic path uses six).
_GL_X = 0.5 * (np.array([-1.0, 1.0]) / np.sqrt(3.0) + 1.0)

BatchStep = Callable[[np.ndarray, slice], np.ndarray]
"""``f(t, rows) -> S``: unaccomplished fraction for samples ``rows`` at times ``t`` (2-D) [-]."""


def batch_cold_spot(time_min: np.ndarray, retort_C: np.ndarray, initial_C: np.ndarray,
                    step: BatchStep, rows: slice, *, cooling_step: Callable[[np.ndarray], np.ndarray] | None = None,
                    cooling_start_min: float | None = None) -> np.ndarray:
    """Cold-spot temperatures [°C] of a batch of samples, shape (samples, time).

    Parameters
    ----------
    time_min : uniform grid from 0 [min]
    retort_C : retort temperature on the grid [°C]
    initial_C : initial temperature of each sample in the batch [°C]
    step : batch step response, ``step(t2d, rows)``; changes of the retort before
        ``cooling_start_min`` respond with it
    rows : the samples of this batch (passed to ``step``)
    cooling_step : one step response (shared by all samples) for changes at or after
        ``cooling_start_min`` (two-phase heating-curve model), or ``None``
    """
    t = np.asarray(time_min, float)
    n = t.size
    dt = t[1] - t[0]
    T0 = np.asarray(initial_C, float)[:, None]
    k = T0.shape[0]
    U0 = 1.0 - step(np.broadcast_to(t, (k, n)), rows)
    cold = T0 + (retort_C[0] - T0) * U0
    if n == 1:
        return cold
    inc = np.diff(retort_C)
    # Kernel means K_j over [(j-1)dt, j dt], j = 1..n-1.
    left = dt * np.arange(n - 1)
    sub = left[None, :, None] + dt * _GL_X[None, None, :]
    K = 1.0 - step(np.broadcast_to(sub, (k, n - 1, 2)).reshape(k, -1), rows).reshape(k, n - 1, 2).mean(axis=2)
    if cooling_step is None or cooling_start_min is None:
        cold[:, 1:] += fftconvolve(inc[None, :], K, axes=1)[:, : n - 1]
        return cold
    cooling = t[:-1] >= cooling_start_min - 1e-9 * dt
    heat_inc = np.where(cooling, 0.0, inc)
    cool_inc = np.where(cooling, inc, 0.0)
    cold[:, 1:] += fftconvolve(heat_inc[None, :], K, axes=1)[:, : n - 1]
    Kc = 1.0 - cooling_step(sub.reshape(-1)).reshape(n - 1, 2).mean(axis=1)
    cold[:, 1:] += fftconvolve(cool_inc, Kc)[: n - 1][None, :]
    return cold


def sample_F(time_min: np.ndarray, retort_C: np.ndarray, initial_C: np.ndarray, step: BatchStep, *,
             reference_temperature_C: float, z_C: float, conservative: bool = False,
             cooling_step=None, cooling_start_min=None, chunk: int = 100) -> np.ndarray:
    """General Method F [min] at the cold spot for every sample (chunks bound the memory)."""
    initial_C = np.asarray(initial_C, float)
    out = np.empty(initial_C.size)
    for i0 in range(0, initial_C.size, chunk):
        rows = slice(i0, min(i0 + chunk, initial_C.size))
        cold = batch_cold_spot(time_min, retort_C, initial_C[rows], step, rows, cooling_step=cooling_step,
                               cooling_start_min=cooling_start_min)
        L = 10.0 ** ((cold - reference_temperature_C) / z_C)
        dt = np.diff(time_min)
        if conservative:
            out[rows] = (np.minimum(L[:, 1:], L[:, :-1]) * dt).sum(axis=1)
        else:
            out[rows] = (0.5 * (L[:, 1:] + L[:, :-1]) * dt).sum(axis=1)
    return out


def lognormal_factors(rng: np.random.Generator, relative_sd: float, n: int) -> np.ndarray:
    """Positive multiplicative factors with mean 1 and the given relative standard deviation."""
    if relative_sd <= 0.0:
        return np.ones(n)
    sigma2 = np.log1p(relative_sd ** 2)
    return rng.lognormal(mean=-0.5 * sigma2, sigma=np.sqrt(sigma2), size=n)


def summarise(F_min: np.ndarray, spoilage_probability: np.ndarray, *, target_F_min: float,
              botulinum_D_min: float) -> dict[str, float]:
    """Percentiles and exceedance figures of a Monte Carlo run."""
    return {
        "F_p05_min": float(np.percentile(F_min, 5)),
        "F_p50_min": float(np.percentile(F_min, 50)),
        "F_p95_min": float(np.percentile(F_min, 95)),
        "probability_F_below_target": float(np.mean(F_min < target_F_min)),
        "spoilage_probability_p95": float(np.percentile(spoilage_probability, 95)),
        "botulinum_log_reductions_p05": float(np.percentile(F_min, 5) / botulinum_D_min),
    }


__all__ = ["batch_cold_spot", "sample_F", "lognormal_factors", "summarise", "general_method"]
