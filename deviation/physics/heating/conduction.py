"""Conduction heating at the geometric centre of a container: analytical series solutions.

A container of conduction-heating product, initially at a uniform temperature ``T_0``, whose
surface is held at the retort temperature ``T_R`` from ``t = 0`` (Dirichlet boundary, infinite
surface heat transfer coefficient). The fraction of the temperature change not yet accomplished at
the centre,

    S(t) = (T_R - T(t)) / (T_R - T_0),

is, for a finite cylinder, the product of the infinite-cylinder Bessel series and the infinite-slab
cosine series (product solution), and for a brick the product of three slab series
(Carslaw & Jaeger [1], ch. III (slab), ch. VII (cylinder) and the product rule for
intersecting regions; Powers [2], ch. 5; chapter numbers from memory).

Every function here is pure numpy/scipy: arrays and floats in, arrays and floats out.

References
----------
.. [1] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford:
   Clarendon Press, 1959.
.. [2] D. L. Powers, *Boundary Value Problems*, ch. 5.
.. [3] F. C. W. Olson and J. M. Jackson, "Heating curves: theory and practical application",
   *Industrial and Engineering Chemistry* 34 (1942) 337-341.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from scipy.optimize import brentq
from scipy.special import erfc, j0, j1, jn_zeros

from deviation.errors import ModelError

__all__ = [
    "first_eigenvalue_slab",
    "first_eigenvalue_cylinder",
    "decay_rate_cylinder_s",
    "decay_rate_brick_s",
    "ModelInputError",
    "cylinder_centre_unaccomplished",
    "brick_centre_unaccomplished",
    "slab_centre_unaccomplished",
    "diffusivity_from_fh_cylinder",
    "fh_from_diffusivity_cylinder",
    "diffusivity_from_fh_brick",
    "fh_from_diffusivity_brick",
    "theoretical_centre_jh_cylinder",
    "theoretical_centre_jh_brick",
]

SECONDS_PER_MINUTE = 60.0
LN10 = math.log(10.0)

# A series term c*exp(-x) with |c| < 2 is below 1e-17 once x > 40: dropping it changes nothing in
# double precision. Used both to truncate each term to the times where it matters and to decide
# where a truncated series is complete.
_NEGLIGIBLE_EXPONENT = 40.0

# Below this Fourier number (on the half-thickness) the slab uses the erfc (short-time) series of
# [1] ch. III; above it the cosine series. Both are complete to double precision there
# (erfc(6.7) ~ 1e-21 for the second erfc term; ten cosine terms reach exp(-54)).
_SLAB_SHORT_TIME_FOURIER = 0.05
_SLAB_ERFC_TERMS = 6

DEFAULT_N_TERMS = 100
# With 40 or more Bessel terms the short-time bound used for the cylinder (below) is within 1e-22
# of the true value wherever it is used, i.e. exact in double precision.
_MIN_N_TERMS = 40


class ModelInputError(ModelError, ValueError):
    """A heat-model parameter or time grid is out of range.

    Both a ``deviation.errors.ModelError`` and a ``ValueError``.
    """


def _positive(name: str, value) -> float:
    value = float(value)
    if not math.isfinite(value) or value <= 0.0:
        raise ModelInputError(f"{name} = {value!r}; expected a finite number > 0")
    return value


def _n_terms(n_terms) -> int:
    n = int(n_terms)
    if n < _MIN_N_TERMS:
        raise ModelInputError(f"n_terms = {n_terms!r}; expected an integer >= {_MIN_N_TERMS}")
    return n


def _time_s(time_min) -> np.ndarray:
    t = np.asarray(time_min, dtype=float)
    if not np.all(np.isfinite(t)):
        raise ModelInputError("time_min contains a non-finite value; expected finite times [min]")
    return t * SECONDS_PER_MINUTE


def _sorted_view(x: np.ndarray):
    """Flattened ``x`` in ascending order and the permutation that undoes the sort (or None)."""
    flat = x.ravel()
    if flat.size < 2 or np.all(flat[1:] >= flat[:-1]):
        return flat, None
    order = np.argsort(flat, kind="stable")
    return flat[order], order


def _add_exponential_terms(out, fourier_sorted, coeffs, rates, start):
    """``out[start:] += sum_n coeffs[n] * exp(-rates[n] * Fo)`` keeping only non-negligible terms.

    ``fourier_sorted`` is ascending, so term ``n`` contributes only on the prefix where
    ``rates[n] * Fo < 40``; beyond it the term is below 1e-17 and is skipped. The loop runs over
    series terms (at most ``n_terms``), never over samples.
    """
    stops = np.searchsorted(fourier_sorted, _NEGLIGIBLE_EXPONENT / rates, side="right")
    work = np.empty(max(int(stops[0]) - start, 0))  # one buffer: no temporaries per term
    for c, r, stop in zip(coeffs, rates, stops):
        if stop <= start:
            break  # rates ascend: every later term is negligible everywhere too
        buf = work[: stop - start]
        np.multiply(fourier_sorted[start:stop], -r, out=buf)
        np.exp(buf, out=buf)
        buf *= c
        out[start:stop] += buf


def _slab_sorted(fourier_sorted: np.ndarray, n_terms: int) -> np.ndarray:
    """Unaccomplished fraction at the mid-plane of an infinite slab, for ascending Fo = αt/a².

    ``a`` is the half-thickness. Short times: ``1 - S = 2 Σ (-1)^n erfc((2n+1) / (2√Fo))``;
    otherwise ``S = Σ 4(-1)^n / ((2n+1)π) exp(-(2n+1)² π² Fo / 4)`` ([1] ch. III).
    """
    s = np.zeros_like(fourier_sorted)
    n_short = int(np.searchsorted(fourier_sorted, _SLAB_SHORT_TIME_FOURIER, side="left"))
    if n_short:
        fo = fourier_sorted[:n_short]
        with np.errstate(divide="ignore"):
            arg = 1.0 / (2.0 * np.sqrt(fo))  # Fo = 0 -> inf -> erfc = 0 -> S = 1 exactly
        u = np.zeros_like(fo)
        for n in range(_SLAB_ERFC_TERMS):
            u += (-1.0) ** n * erfc((2 * n + 1) * arg)
        s[:n_short] = 1.0 - 2.0 * u
    odd = 2.0 * np.arange(n_terms) + 1.0
    coeffs = 4.0 * (-1.0) ** np.arange(n_terms) / (odd * np.pi)
    rates = odd**2 * np.pi**2 / 4.0
    _add_exponential_terms(s, fourier_sorted, coeffs, rates, n_short)
    return s


@lru_cache(maxsize=8)
def _bessel_j0_zeros(count: int) -> np.ndarray:
    """First ``count`` zeros of J0 (cached: ``jn_zeros`` costs milliseconds per call)."""
    zeros = jn_zeros(0, count)
    zeros.flags.writeable = False
    return zeros


def _cylinder_sorted(fourier_sorted: np.ndarray, n_terms: int) -> np.ndarray:
    """Unaccomplished fraction on the axis of an infinite cylinder, for ascending Fo = αt/R².

    ``S = Σ 2 / (β_n J1(β_n)) exp(-β_n² Fo)``, ``J0(β_n) = 0`` ([1] ch. VII).

    The truncated series is complete to double precision once the first omitted term is
    negligible, ``β_{N+1}² Fo > 40``. At shorter times the centre has not yet felt the surface:
    by the comparison principle the cylinder's axis heats no faster than the axis of the square
    prism of half-side R/√2 inscribed in it, so ``S_slab(R/√2)² <= S <= 1`` and the gap is below
    1e-22 wherever it is used for ``n_terms >= 40`` (below 1e-100 for the default 100 terms).
    That bound is used there, so S(0) = 1 exactly and the truncated series' oscillation at
    t -> 0+ never appears.
    """
    betas = _bessel_j0_zeros(n_terms + 1)
    complete_from = _NEGLIGIBLE_EXPONENT / betas[-1] ** 2
    betas = betas[:-1]
    s = np.zeros_like(fourier_sorted)
    n_short = int(np.searchsorted(fourier_sorted, complete_from, side="left"))
    if n_short:
        # square prism of half-side R/sqrt(2) (product of two slabs): Fo on that half-side is 2 Fo
        s[:n_short] = _slab_sorted(2.0 * fourier_sorted[:n_short], n_terms) ** 2
    coeffs = 2.0 / (betas * j1(betas))
    _add_exponential_terms(s, fourier_sorted, coeffs, betas**2, n_short)
    return s


def _evaluate(fourier: np.ndarray, series, n_terms: int) -> np.ndarray:
    """Evaluate an ascending-Fo series on any array shape; Fo <= 0 (before the step) gives 1."""
    fo = np.maximum(fourier, 0.0)
    fo_sorted, order = _sorted_view(fo)
    s_sorted = series(fo_sorted, n_terms)
    if order is None:
        s = s_sorted
    else:
        s = np.empty_like(s_sorted)
        s[order] = s_sorted
    return s.reshape(fourier.shape)


def slab_centre_unaccomplished(
    time_min, diffusivity_m2_s, thickness_m, n_terms=DEFAULT_N_TERMS
) -> np.ndarray:
    """Unaccomplished temperature fraction at the mid-plane of an infinite slab.

    Method: infinite-slab Fourier series with the erfc series at short times (Carslaw &
    Jaeger [1], ch. III).

    Parameters
    ----------
    time_min : array_like
        Time since the surface temperature step [min]; times <= 0 give 1.
    diffusivity_m2_s : float
        Thermal diffusivity of the product [m²/s].
    thickness_m : float
        Full thickness of the slab [m].
    n_terms : int, optional
        Number of cosine-series terms (>= 40).

    Returns
    -------
    numpy.ndarray
        ``S = (T_R - T) / (T_R - T_0)`` at the mid-plane [-], in [0, 1], shape of ``time_min``.

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959, ch. III.
    """
    alpha = _positive("diffusivity_m2_s", diffusivity_m2_s)
    half = 0.5 * _positive("thickness_m", thickness_m)
    n = _n_terms(n_terms)
    fourier = alpha * _time_s(time_min) / half**2
    return np.clip(_evaluate(fourier, _slab_sorted, n), 0.0, 1.0)


def cylinder_centre_unaccomplished(
    time_min, diffusivity_m2_s, radius_m, height_m, n_terms=DEFAULT_N_TERMS
) -> np.ndarray:
    """Unaccomplished temperature fraction at the geometric centre of a finite cylinder.

    Method: product solution of the infinite-cylinder Bessel series and the infinite-slab cosine
    series (Carslaw & Jaeger [1]; Powers [2], ch. 5), for a step in surface temperature at
    ``t = 0`` with the surface then held at the retort temperature (Dirichlet).

    Parameters
    ----------
    time_min : array_like
        Time since the surface temperature step [min]; times <= 0 give 1.
    diffusivity_m2_s : float
        Thermal diffusivity of the product [m²/s].
    radius_m : float
        Inside radius of the container [m].
    height_m : float
        Inside (full) height of the container [m].
    n_terms : int, optional
        Number of terms in each series (>= 40). Short times are handled without oscillation
        whatever the number of terms.

    Returns
    -------
    numpy.ndarray
        ``S = (T_R - T) / (T_R - T_0)`` at the centre [-], in [0, 1], shape of ``time_min``;
        ``S(0) = 1`` exactly.

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959, ch. III, VII.
    .. [2] D. L. Powers, *Boundary Value Problems*, ch. 5.
    """
    alpha = _positive("diffusivity_m2_s", diffusivity_m2_s)
    radius = _positive("radius_m", radius_m)
    half = 0.5 * _positive("height_m", height_m)
    n = _n_terms(n_terms)
    t_s = _time_s(time_min)
    s_cyl = _evaluate(alpha * t_s / radius**2, _cylinder_sorted, n)
    s_slab = _evaluate(alpha * t_s / half**2, _slab_sorted, n)
    return np.clip(s_cyl * s_slab, 0.0, 1.0)


def brick_centre_unaccomplished(
    time_min, diffusivity_m2_s, length_m, width_m, thickness_m, n_terms=DEFAULT_N_TERMS
) -> np.ndarray:
    """Unaccomplished temperature fraction at the centre of a brick (rectangular container).

    Method: product of three infinite-slab series (Carslaw & Jaeger [1], ch. III, and the product
    rule), surface held at the retort temperature from ``t = 0``.

    Parameters
    ----------
    time_min : array_like
        Time since the surface temperature step [min]; times <= 0 give 1.
    diffusivity_m2_s : float
        Thermal diffusivity of the product [m²/s].
    length_m, width_m, thickness_m : float
        Inside dimensions of the container [m].
    n_terms : int, optional
        Number of terms in each slab series (>= 40).

    Returns
    -------
    numpy.ndarray
        ``S = (T_R - T) / (T_R - T_0)`` at the centre [-], in [0, 1], shape of ``time_min``.

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959, ch. III.
    """
    alpha = _positive("diffusivity_m2_s", diffusivity_m2_s)
    n = _n_terms(n_terms)
    t_s = _time_s(time_min)
    s = np.ones_like(t_s)
    for name, side in (("length_m", length_m), ("width_m", width_m), ("thickness_m", thickness_m)):
        half = 0.5 * _positive(name, side)
        s = s * _evaluate(alpha * t_s / half**2, _slab_sorted, n)
    return np.clip(s, 0.0, 1.0)


# --- first-term relations: fh, diffusivity, theoretical jh -------------------------------------
#
# Late in heating only the first term of each series survives, S ≈ j · exp(-λ t) with
# λ = α (β1²/R² + π²/H²) [1/s] for a finite cylinder (β1 the first zero of J0, H the full height:
# the slab's first rate is π²α/(4a²) = π²α/H²). On log10 S against t the slope is -λ/ln10, and
# Ball's fh is minus its reciprocal: fh = ln10 / λ [s] = ln10 / (60 λ) [min]. This is the
# Olson & Jackson (1942) relation [3]; the form is derived here from the series' first term
# (the published form quoted from memory agrees with it).

_BETA1 = float(jn_zeros(0, 1)[0])


def _cylinder_shape_factor_m2(radius_m, height_m) -> float:
    radius = _positive("radius_m", radius_m)
    height = _positive("height_m", height_m)
    return _BETA1**2 / radius**2 + math.pi**2 / height**2


def _brick_shape_factor_m2(length_m, width_m, thickness_m) -> float:
    length = _positive("length_m", length_m)
    width = _positive("width_m", width_m)
    thickness = _positive("thickness_m", thickness_m)
    return math.pi**2 * (1.0 / length**2 + 1.0 / width**2 + 1.0 / thickness**2)


def diffusivity_from_fh_cylinder(fh_min, radius_m, height_m) -> float:
    """Thermal diffusivity from the heating rate index of a finite cylinder.

    Method: first-term decay of the conduction series (Olson & Jackson 1942 [3]),
    ``fh = ln10 / (α (β1²/R² + π²/H²))`` with fh in seconds.

    Parameters
    ----------
    fh_min : float
        Heating rate index fh [min].
    radius_m : float
        Inside radius [m].
    height_m : float
        Inside (full) height [m].

    Returns
    -------
    float
        Thermal diffusivity [m²/s].

    References
    ----------
    .. [3] Olson & Jackson, *Ind. Eng. Chem.* 34 (1942) 337-341.
    """
    fh_s = _positive("fh_min", fh_min) * SECONDS_PER_MINUTE
    return LN10 / (fh_s * _cylinder_shape_factor_m2(radius_m, height_m))


def fh_from_diffusivity_cylinder(diffusivity_m2_s, radius_m, height_m) -> float:
    """Heating rate index of a finite cylinder from the thermal diffusivity.

    Method: first-term decay of the conduction series (Olson & Jackson 1942 [3]).

    Parameters
    ----------
    diffusivity_m2_s : float
        Thermal diffusivity [m²/s].
    radius_m : float
        Inside radius [m].
    height_m : float
        Inside (full) height [m].

    Returns
    -------
    float
        fh [min].

    References
    ----------
    .. [3] Olson & Jackson, *Ind. Eng. Chem.* 34 (1942) 337-341.
    """
    alpha = _positive("diffusivity_m2_s", diffusivity_m2_s)
    return LN10 / (alpha * _cylinder_shape_factor_m2(radius_m, height_m)) / SECONDS_PER_MINUTE


def diffusivity_from_fh_brick(fh_min, length_m, width_m, thickness_m) -> float:
    """Thermal diffusivity from the heating rate index of a brick.

    Method: first-term decay of the three slab series (Olson & Jackson 1942 [3]),
    ``fh = ln10 / (α π² (1/L² + 1/W² + 1/T²))`` with fh in seconds.

    Parameters
    ----------
    fh_min : float
        Heating rate index fh [min].
    length_m, width_m, thickness_m : float
        Inside dimensions [m].

    Returns
    -------
    float
        Thermal diffusivity [m²/s].

    References
    ----------
    .. [3] Olson & Jackson, *Ind. Eng. Chem.* 34 (1942) 337-341.
    """
    fh_s = _positive("fh_min", fh_min) * SECONDS_PER_MINUTE
    return LN10 / (fh_s * _brick_shape_factor_m2(length_m, width_m, thickness_m))


def fh_from_diffusivity_brick(diffusivity_m2_s, length_m, width_m, thickness_m) -> float:
    """Heating rate index of a brick from the thermal diffusivity.

    Method: first-term decay of the three slab series (Olson & Jackson 1942 [3]).

    Parameters
    ----------
    diffusivity_m2_s : float
        Thermal diffusivity [m²/s].
    length_m, width_m, thickness_m : float
        Inside dimensions [m].

    Returns
    -------
    float
        fh [min].

    References
    ----------
    .. [3] Olson & Jackson, *Ind. Eng. Chem.* 34 (1942) 337-341.
    """
    alpha = _positive("diffusivity_m2_s", diffusivity_m2_s)
    shape = _brick_shape_factor_m2(length_m, width_m, thickness_m)
    return LN10 / (alpha * shape) / SECONDS_PER_MINUTE


def theoretical_centre_jh_cylinder() -> float:
    """Theoretical jh at the centre of a finite cylinder: ``2/(β1 J1(β1)) · 4/π ≈ 1.602 · 1.273``.

    Returns
    -------
    float
        jh [-] (≈ 2.040).

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959.
    .. [2] D. L. Powers, *Boundary Value Problems*, ch. 5.
    """
    return 2.0 / (_BETA1 * float(j1(_BETA1))) * 4.0 / math.pi


def theoretical_centre_jh_brick() -> float:
    """Theoretical jh at the centre of a brick: ``(4/π)³ ≈ 1.273³``.

    Returns
    -------
    float
        jh [-] (≈ 2.064).

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959.
    """
    return (4.0 / math.pi) ** 3


# ---------------------------------------------------------------------------------------------
# A finite surface heat transfer coefficient (Biot boundary): first eigenvalues and fh.


def first_eigenvalue_slab(biot) -> float:
    """First root λ1 of ``λ tan λ = Bi`` (slab, half-thickness L, Bi = h L / k) [-].

    ``biot=None`` (or inf) is the surface held at the retort temperature: λ1 = π/2.
    Carslaw & Jaeger, *Conduction of Heat in Solids*, §3.10 (section from memory).
    """
    if biot is None or math.isinf(biot):
        return math.pi / 2.0
    bi = _positive("biot", biot)
    return float(brentq(lambda x: x * math.sin(x) - bi * math.cos(x), 1e-12, math.pi / 2.0, xtol=1e-15))


def first_eigenvalue_cylinder(biot) -> float:
    """First root λ1 of ``λ J1(λ) = Bi J0(λ)`` (infinite cylinder, Bi = h R / k) [-].

    ``biot=None`` (or inf): the first zero of J0, 2.4048. Carslaw & Jaeger §7.6 (from memory).
    """
    if biot is None or math.isinf(biot):
        return _BETA1
    bi = _positive("biot", biot)
    return float(brentq(lambda x: x * j1(x) - bi * j0(x), 1e-12, _BETA1, xtol=1e-15))


def decay_rate_cylinder_s(diffusivity_m2_s, radius_m, height_m, h_over_k_per_m=None) -> float:
    """First-mode decay rate at the centre of a finite cylinder [1/s]: α (λr²/R² + λz²/(H/2)²).

    ``h_over_k_per_m`` is h/k of the surface [1/m]; ``None`` for the surface at the retort
    temperature (then ``ln10 / rate`` is the fh of :func:`fh_from_diffusivity_cylinder`).
    """
    R, half = _positive("radius_m", radius_m), _positive("height_m", height_m) / 2.0
    bi_r = None if h_over_k_per_m is None else h_over_k_per_m * R
    bi_z = None if h_over_k_per_m is None else h_over_k_per_m * half
    lr, lz = first_eigenvalue_cylinder(bi_r), first_eigenvalue_slab(bi_z)
    return _positive("diffusivity_m2_s", diffusivity_m2_s) * (lr**2 / R**2 + lz**2 / half**2)


def decay_rate_brick_s(diffusivity_m2_s, length_m, width_m, thickness_m, h_over_k_per_m=None) -> float:
    """First-mode decay rate at the centre of a brick [1/s]: α Σ λi²/(Li/2)²."""
    rate = 0.0
    for name, full in (("length_m", length_m), ("width_m", width_m), ("thickness_m", thickness_m)):
        half = _positive(name, full) / 2.0
        lam = first_eigenvalue_slab(None if h_over_k_per_m is None else h_over_k_per_m * half)
        rate += lam**2 / half**2
    return _positive("diffusivity_m2_s", diffusivity_m2_s) * rate
