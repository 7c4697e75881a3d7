"""Monte Carlo propagation of heat-penetration and microbiological uncertainty to F and spoilage.

Pure numpy/scipy. Every sample shares the retort record; each has its own heating parameters
(fh, jh, fc, jc or the diffusivity), initial temperature and spore load. The cold spot of all
samples is computed at once: a batch of Duhamel superpositions (piecewise-linear retort, kernel
means by two-point Gauss-Legendre quadrature on each interval), one FFT convolution per chunk of
samples, with the heating-curve model's rises and falls answered by their own step responses as
in :mod:`deviation.physics.heating.heating_curve`.

References
----------
.. [1] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959 (Duhamel).
.. [2] W. D. Bigelow et al., "Heat penetration in processing canned foods", Bull. 16-L, National
   Canners Association, 1920 (General Method).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from scipy import fft as _fft

from deviation.physics.lethality import general_method


# Two Gauss-Legendre nodes per interval: the mean of a smooth step response over one recorder
# interval to O(dt^4), enough for a spread estimate (the deterministic path uses six).
_GL_X = 0.5 * (np.array([-1.0, 1.0]) / np.sqrt(3.0) + 1.0)

BatchStep = Callable[[np.ndarray, slice], np.ndarray]
"""``f(t, rows) -> S``: unaccomplished fraction for samples ``rows`` at times ``t`` (2-D) [-]."""


def _convolve_rows(increments: np.ndarray, kernels: np.ndarray) -> np.ndarray:
    """Causal convolution of one increment series with each row of ``kernels`` (first m terms)."""
    m = kernels.shape[1]
    size = _fft.next_fast_len(2 * m - 1, real=True)
    spectrum = _fft.rfft(increments, size)[None, :] * _fft.rfft(kernels, size, axis=1)
    return _fft.irfft(spectrum, size, axis=1)[:, :m]


def _kernel_means(step: BatchStep, rows: slice, k: int, n: int, dt: float) -> np.ndarray:
    """Kernel means K_j over [(j-1)dt, j dt], j = 1..n-1, for each sample: shape (k, n-1)."""
    left = dt * np.arange(n - 1)
    sub = left[None, :, None] + dt * _GL_X[None, None, :]
    S = step(np.broadcast_to(sub, (k, n - 1, 2)).reshape(k, -1), rows).reshape(k, n - 1, 2)
    return 1.0 - S.mean(axis=2)


def batch_cold_spot(time_min: np.ndarray, retort_C: np.ndarray, initial_C: np.ndarray,
                    step: BatchStep, rows: slice) -> np.ndarray:
    """Cold-spot temperatures [°C] of a batch of samples, shape (samples, time).

    Parameters
    ----------
    time_min : uniform grid from 0 [min]
    retort_C : retort temperature on the grid [°C]
    initial_C : initial temperature of each sample in the batch [°C]
    step : batch step response ``step(t2d, rows)`` (a linear model: every change of the
        retort responds with it)
    rows : the samples of this batch (passed to ``step``)
    """
    t = np.asarray(time_min, float)
    n = t.size
    dt = t[1] - t[0] if n > 1 else 0.0
    T0 = np.asarray(initial_C, float)[:, None]
    k = T0.shape[0]
    U0 = 1.0 - step(np.broadcast_to(t, (k, n)), rows)
    cold = T0 + (retort_C[0] - T0) * U0
    if n == 1:
        return cold
    inc = np.diff(retort_C)
    cold[:, 1:] += _convolve_rows(inc, _kernel_means(step, rows, k, n, dt))
    return cold


def sample_F(time_min: np.ndarray, retort_C: np.ndarray, initial_C: np.ndarray, step: BatchStep, *,
             reference_temperature_C: float, z_C: float, conservative: bool = False,
             chunk: int = 100) -> np.ndarray:
    """General Method F [min] at the cold spot for every sample of a linear model (chunks bound
    the memory)."""
    initial_C = np.asarray(initial_C, float)
    out = np.empty(initial_C.size)
    for i0 in range(0, initial_C.size, chunk):
        rows = slice(i0, min(i0 + chunk, initial_C.size))
        cold = batch_cold_spot(time_min, retort_C, initial_C[rows], step, rows)
        L = 10.0 ** ((cold - reference_temperature_C) / z_C)
        dt = np.diff(time_min)
        if conservative:
            out[rows] = (np.minimum(L[:, 1:], L[:, :-1]) * dt).sum(axis=1)
        else:
            out[rows] = (0.5 * (L[:, 1:] + L[:, :-1]) * dt).sum(axis=1)
    return out


def sample_F_bounding(time_min: np.ndarray, retort_C: np.ndarray, initial_C: np.ndarray,
                      kernels: Callable[[int], tuple[Callable, Callable]], *, reference_temperature_C: float,
                      z_C: float, conservative: bool = False, max_ages: int = 2500) -> np.ndarray:
    """General Method F [min] for every sample of the bounding heating-curve model.

    The bounding superposition (:func:`deviation.physics.heating.superposition.superpose` with
    a falling response) is not a convolution, so each sample runs on its own;
    ``kernels(i) -> (rise, fall)`` gives sample ``i``'s two step responses; ``max_ages`` sets
    the resolution of the bracket (fewer ages: faster and lower).
    """
    from deviation.physics.heating.superposition import superpose

    initial_C = np.asarray(initial_C, float)
    out = np.empty(initial_C.size)
    for i in range(initial_C.size):
        rise, fall = kernels(i)
        cold = superpose(time_min, retort_C, float(initial_C[i]), rise, falling_unaccomplished=fall,
                         max_ages=max_ages)
        out[i] = general_method(time_min, cold, reference_temperature_C, z_C, conservative=conservative)[0]
    return out


def lognormal_factors(rng: np.random.Generator, relative_sd: float, n: int) -> np.ndarray:
    """Positive multiplicative factors with mean 1 and the given relative standard deviation."""
    if relative_sd <= 0.0:
        return np.ones(n)
    sigma2 = np.log1p(relative_sd ** 2)
    return rng.lognormal(mean=-0.5 * sigma2, sigma=np.sqrt(sigma2), size=n)


def summarise(F_min: np.ndarray, spoilage_probability: np.ndarray, *, target_F_min: float,
              botulinum_D_min: float, F0_ratio: float = 1.0,
              log10_spoilage_probability: np.ndarray | None = None) -> dict[str, float]:
    """Percentiles and exceedance figures of a Monte Carlo run.

    ``F0_ratio``: F0 (Tref 121.1 °C, z 10 °C) over the process's own F for this cycle, so the
    botulinum percentile is judged on F0 whatever the process's z.
    """
    below = float(np.mean(F_min < target_F_min))
    return {
        "F_p05_min": float(np.percentile(F_min, 5)),
        "F_p50_min": float(np.percentile(F_min, 50)),
        "F_p95_min": float(np.percentile(F_min, 95)),
        "probability_below_target": below,
        "probability_F_below_target": below,
        "spoilage_probability_p95": float(np.percentile(spoilage_probability, 95)),
        # the percentile of the log10s: the same sample (log10 is monotone), never underflowing
        "log10_spoilage_probability_p95": (float(np.percentile(log10_spoilage_probability, 95))
                                           if log10_spoilage_probability is not None else None),
        "botulinum_log_reductions_p05": float(np.percentile(F_min, 5) * F0_ratio / botulinum_D_min),
    }


__all__ = ["batch_cold_spot", "sample_F", "sample_F_bounding", "lognormal_factors", "summarise",
           "general_method"]
