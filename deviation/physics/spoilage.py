"""Survivors, probability of a non-sterile container, and botulinum log reductions.

First-order inactivation: a process of sterilizing value F leaves ``N = N0 · 10^(-F/D)``
organisms per container on average (Stumbo [1]). Survivors are taken Poisson-distributed among
containers, so a container holds at least one with probability ``1 - exp(-N)`` (≈ N when small).
Botulinum safety is judged by the log reductions ``F / D``: the 12D process (``F/D >= 12``;
with D121.1 = 0.21 min, F = 2.52 min) [1].

References
----------
.. [1] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., New York: Academic
   Press, 1973.
"""

from __future__ import annotations

import numpy as np

from deviation.errors import CaseError

__all__ = [
    "SpoilageInputError",
    "survivors_per_container",
    "nonsterile_probability",
    "log10_nonsterile_probability",
    "lot_nonsterile_probability",
    "expected_nonsterile_containers",
    "log_reductions",
    "F_for_log_reductions",
]

BOTULINUM_D_MIN = 0.21  # D at 121.1 °C [min], C. botulinum types A/B (Stumbo 1973)
TWELVE_D = 12.0


class SpoilageInputError(CaseError, ValueError):
    """A spoilage parameter is out of range (a ``CaseError`` and a ``ValueError``)."""


def _out(value):
    """A float for 0-d results, an ndarray otherwise."""
    value = np.asarray(value, dtype=float)
    return float(value) if value.ndim == 0 else value


def _array(name: str, value, *, minimum: float, strict: bool = False) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    bad = ~np.isfinite(arr) | ((arr <= minimum) if strict else (arr < minimum))
    if np.any(bad):
        found = arr.ravel()[int(np.flatnonzero(bad.ravel())[0])]
        relation = ">" if strict else ">="
        raise SpoilageInputError(
            f"{name} = {found!r}; expected a finite number {relation} {minimum:g}"
        )
    return arr


def _log10_survivors(F_min, D_min, spores_per_container) -> np.ndarray:
    F = _array("F_min", F_min, minimum=-np.inf)
    D = _array("D_min", D_min, minimum=0.0, strict=True)
    n0 = _array("spores_per_container", spores_per_container, minimum=0.0)
    with np.errstate(divide="ignore"):  # N0 = 0 -> log10 = -inf -> no survivors
        return np.log10(n0) - F / D


def survivors_per_container(F_min, D_min, spores_per_container):
    """Expected number of surviving organisms per container: ``N = N0 · 10^(-F/D)``.

    Method: first-order (log-linear) inactivation (Stumbo 1973 [1]).

    Parameters
    ----------
    F_min : float or array_like
        Delivered sterilizing value at the D value's reference temperature [min].
    D_min : float or array_like
        Decimal reduction time of the organism at the reference temperature [min], > 0.
    spores_per_container : float or array_like
        Initial load N0 [organisms per container], >= 0.

    Returns
    -------
    float or numpy.ndarray
        N [organisms per container]; ``inf`` rather than an overflow warning if it exceeds the
        float range (only for negative F).

    References
    ----------
    .. [1] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    log10_n = _log10_survivors(F_min, D_min, spores_per_container)
    with np.errstate(over="ignore"):
        return _out(np.power(10.0, log10_n))


def nonsterile_probability(F_min, D_min, spores_per_container):
    """Probability that a container holds at least one surviving organism: ``1 - exp(-N)``.

    Method: first-order inactivation (Stumbo 1973 [1]) with survivors Poisson-distributed
    among containers; computed as ``-expm1(-N)`` with N formed in log space, so that it is exact
    for tiny N and gives 1, without overflow, for huge N.

    Parameters
    ----------
    F_min : float or array_like
        Delivered sterilizing value [min].
    D_min : float or array_like
        Decimal reduction time at the reference temperature [min], > 0.
    spores_per_container : float or array_like
        Initial load N0 [organisms per container], >= 0.

    Returns
    -------
    float or numpy.ndarray
        Probability [-], in [0, 1].

    References
    ----------
    .. [1] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    log10_n = _log10_survivors(F_min, D_min, spores_per_container)
    # above 10^3 survivors exp(-N) is 0 in double precision: skip forming N (no overflow)
    n = np.power(10.0, np.minimum(log10_n, 3.0))
    return _out(-np.expm1(-n))


def log10_nonsterile_probability(F_min, D_min, spores_per_container):
    """log10 of the probability that a container holds at least one survivor (no underflow).

    Method: as :func:`nonsterile_probability`, ``p = 1 - exp(-N)``, taken in log space:
    ``log10 p = log10(-expm1(-N))``, which for small ``N`` is ``log10 N = log10 N0 - F/D``
    to within ``N/2`` relative, so a probability below 1e-308 keeps its exponent instead of
    becoming 0 (Stumbo 1973, as cited there).

    Parameters are those of :func:`nonsterile_probability` (a load of 0 gives ``-inf``); the
    result is log10 of the probability [-], <= 0 (float or numpy.ndarray).
    """
    log10_n = np.asarray(_log10_survivors(F_min, D_min, spores_per_container), dtype=float)
    # Where N is representable use the exact form; below 1e-300, p = N (1 - N/2 + ...) exactly
    # enough that log10 p = log10 N.
    n = np.power(10.0, np.clip(log10_n, -300.0, 3.0))
    with np.errstate(divide="ignore"):
        exact = np.log10(-np.expm1(-n))
    return _out(np.where(log10_n < -300.0, log10_n, exact))


def lot_nonsterile_probability(log10_probability, lot_size_containers):
    """Probability that a lot holds at least one nonsterile container, and its log10.

    Method: containers independent, ``P = 1 - (1 - p)^n``, formed as
    ``-expm1(n · log1p(-p))`` from ``log10 p`` so that neither small nor large values lose
    precision.

    Parameters
    ----------
    log10_probability : float
        log10 of the per-container probability [-] (from :func:`log10_nonsterile_probability`).
    lot_size_containers : float
        Containers in the lot [-], >= 0.

    Returns
    -------
    tuple of float
        ``(P, log10 P)`` [-].
    """
    lp = float(log10_probability)
    n = float(_array("lot_size_containers", lot_size_containers, minimum=0.0))
    if not lp <= 0.0:
        raise SpoilageInputError(f"log10_probability = {lp!r}; expected a number <= 0")
    if n == 0.0 or lp == -np.inf:
        return 0.0, -np.inf
    if lp < -300.0:  # P = n p (1 - ...) : no term of the expansion is representable but the first
        log10_P = lp + np.log10(n)
        return float(10.0 ** log10_P) if log10_P > -300.0 else 0.0, float(log10_P)
    p = 10.0 ** lp
    P = float(-np.expm1(n * np.log1p(-p))) if p < 1.0 else 1.0
    if P > 0.0:
        return P, float(np.log10(P))
    return 0.0, float(lp + np.log10(n))


def expected_nonsterile_containers(probability, lot_size_containers):
    """Expected number of non-sterile containers in a lot: ``p · lot size``.

    Parameters
    ----------
    probability : float or array_like
        Probability that one container is non-sterile [-], in [0, 1].
    lot_size_containers : float or array_like
        Containers in the lot [-], >= 0.

    Returns
    -------
    float or numpy.ndarray
        Expected non-sterile containers [-].
    """
    p = _array("probability", probability, minimum=0.0)
    if np.any(p > 1.0):
        raise SpoilageInputError(f"probability = {float(np.max(p))!r}; expected a number in [0, 1]")
    lot = _array("lot_size_containers", lot_size_containers, minimum=0.0)
    return _out(p * lot)


def log_reductions(F_min, D_min):
    """Decimal (log10) reductions delivered by a process: ``F / D``.

    Method: first-order inactivation; the 12D principle requires ``F / D_bot >= 12`` for
    *C. botulinum* (Stumbo 1973 [1]). ``F_min`` and ``D_min`` [min] as for
    :func:`nonsterile_probability` (``D_min`` at the same reference temperature as F); returns
    the log reductions [-] (float or numpy.ndarray).

    References
    ----------
    .. [1] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    F = _array("F_min", F_min, minimum=-np.inf)
    D = _array("D_min", D_min, minimum=0.0, strict=True)
    return _out(F / D)


def F_for_log_reductions(log_reductions, D_min):
    """Sterilizing value needed for a number of log reductions: ``F = n · D``.

    Parameters
    ----------
    log_reductions : float or array_like
        Decimal reductions required [-] (12 for the botulinum 12D process).
    D_min : float or array_like
        Decimal reduction time at the reference temperature [min], > 0.

    Returns
    -------
    float or numpy.ndarray
        F [min] (12 × 0.21 min = 2.52 min for the 12D process, Stumbo 1973 [1]).

    References
    ----------
    .. [1] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    n = _array("log_reductions", log_reductions, minimum=-np.inf)
    D = _array("D_min", D_min, minimum=0.0, strict=True)
    return _out(n * D)
