"""Conduction heating at the geometric centre of a container: analytical series solutions.

A container of conduction-heating product, initially at a uniform temperature ``T_0``, whose
surroundings are at the retort temperature ``T_R`` from ``t = 0``. The fraction of the temperature
change not yet accomplished at the centre,

    S(t) = (T_R - T(t)) / (T_R - T_0),

is, for a finite cylinder, the product of the infinite-cylinder Bessel series and the infinite-slab
series (product solution), and for a brick the product of three slab series
(Carslaw & Jaeger [1], ch. III (slab), ch. VII (cylinder) and the product rule for
intersecting regions; Powers [2], ch. 5; chapter numbers from memory).

Two surface conditions:

- surface held at the retort temperature (Dirichlet; infinite surface heat transfer
  coefficient), the default: eigenvalues are the zeros of J0 and ``(2n+1)π/2``;
- a finite surface heat transfer coefficient ``h`` (Robin boundary ``-k ∂T/∂n = h (T_s - T_R)``;
  water immersion, water spray, steam-air), given as ``h/k`` [1/m]: the eigenvalues are the roots
  of ``λ tan λ = Bi`` (slab, ``Bi = h a / k`` on the half-thickness ``a``) and
  ``λ J1(λ) = Bi J0(λ)`` (cylinder, ``Bi = h R / k``) ([1] ch. III and VII, the "radiation"
  boundary; Incropera & DeWitt [4] §5.5-5.6 and Table 5.1; section numbers from memory). One
  ``h`` applies to the whole surface; a container wall's own resistance belongs in it.

Every function here is pure numpy/scipy: arrays and floats in, arrays and floats out.

References
----------
.. [1] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford:
   Clarendon Press, 1959.
.. [2] D. L. Powers, *Boundary Value Problems*, ch. 5.
.. [3] F. C. W. Olson and J. M. Jackson, "Heating curves: theory and practical application",
   *Industrial and Engineering Chemistry* 34 (1942) 337-341.
.. [4] F. P. Incropera and D. P. DeWitt, *Fundamentals of Heat and Mass Transfer*, New York:
   Wiley, ch. 5 (transient conduction).
"""

from __future__ import annotations

import math
from functools import lru_cache, partial

import numpy as np
from scipy.special import erfc, j0, j1, jn_zeros

from deviation.errors import ModelError

__all__ = [
    "ModelInputError",
    "brick_centre_unaccomplished",
    "cylinder_centre_unaccomplished",
    "decay_rate_brick_s",
    "decay_rate_cylinder_s",
    "diffusivity_from_fh_brick",
    "diffusivity_from_fh_cylinder",
    "fh_from_diffusivity_brick",
    "fh_from_diffusivity_cylinder",
    "first_coefficient_cylinder",
    "first_coefficient_slab",
    "first_eigenvalue_cylinder",
    "first_eigenvalue_slab",
    "slab_centre_unaccomplished",
    "theoretical_centre_jh_brick",
    "theoretical_centre_jh_cylinder",
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


def finite_times(time_min) -> np.ndarray:
    """``time_min`` as a float array [min]; :class:`ModelInputError` on a non-finite value."""
    t = np.asarray(time_min, dtype=float)
    if not np.all(np.isfinite(t)):
        raise ModelInputError("time_min contains a non-finite value; expected finite times [min]")
    return t


def _time_s(time_min) -> np.ndarray:
    return finite_times(time_min) * SECONDS_PER_MINUTE


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


# --- a finite surface heat transfer coefficient (Biot boundary): eigenvalues and coefficients ---
#
# Slab, half-thickness a, Bi = h a / k ([1] ch. III; [4] §5.5):
#     λ tan λ = Bi,  one root in each (nπ, nπ + π/2),  C_n = 2 sin λ_n / (λ_n + sin λ_n cos λ_n).
# Infinite cylinder, radius R, Bi = h R / k ([1] ch. VII; [4] §5.6):
#     λ J1(λ) = Bi J0(λ),  one root between each zero of J1 (0 first) and the next zero of J0,
#     C_n = 2 Bi / ((λ_n² + Bi²) J0(λ_n)) = 2 J1(λ_n) / (λ_n (J0(λ_n)² + J1(λ_n)²)).
# The two cylinder forms are equal on the roots (substitute J1 = Bi J0 / λ); the second is used
# because J0(λ_n) -> 0 as Bi -> inf, where the first loses digits (relative error ~ eps Bi / λ).
# Bi -> inf gives the Dirichlet values: (2n+1)π/2 with 4(-1)^n/((2n+1)π), and J0's zeros with
# 2/(β J1(β)).

# Each bracket is halved this many times: 80 halvings take a bracket of width <= π below 3e-24,
# under a rounding unit of any root for Bi >= 1e-15 (the first root is ~ √Bi for small Bi).
_BISECTION_STEPS = 80


@lru_cache(maxsize=8)
def _bessel_j1_zeros(count: int) -> np.ndarray:
    """First ``count`` positive zeros of J1 (cached like :func:`_bessel_j0_zeros`)."""
    zeros = jn_zeros(1, count) if count else np.zeros(0)
    zeros.flags.writeable = False
    return zeros


def _bracketed_roots(root_above, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Roots of increasing functions, one per bracket ``(lo, hi)``, by vectorised bisection.

    ``root_above(x)`` is True where the bracket's root lies above ``x``. Bisection, not Newton:
    every step keeps the root inside its bracket, whatever Bi (tan and J1/J0 have poles at the
    upper ends).
    """
    lo, hi = lo.copy(), hi.copy()
    for _ in range(_BISECTION_STEPS):
        mid = 0.5 * (lo + hi)
        above = root_above(mid)
        lo = np.where(above, mid, lo)
        hi = np.where(above, hi, mid)
    return 0.5 * (lo + hi)


def _read_only(*arrays):
    for a in arrays:
        a.flags.writeable = False
    return arrays


@lru_cache(maxsize=32)
def _slab_modes(biot: float | None, count: int) -> tuple[np.ndarray, np.ndarray]:
    """First ``count`` eigenvalues λ_n [-] and mid-plane coefficients C_n [-] of a slab.

    ``biot`` None: surface at the retort temperature. Cached: a cold-spot model calls it with the
    same Bi for every evaluation.
    """
    k = np.arange(count)
    sign = (-1.0) ** k
    if biot is None:
        lam = (k + 0.5) * np.pi
        return _read_only(lam, 2.0 * sign / lam)
    # x tan x - Bi increases from -Bi to +inf on (kπ, kπ + π/2); written without the division,
    # x sin x - Bi cos x carries the sign of cos there, (-1)^k.
    lam = _bracketed_roots(lambda x: (x * np.sin(x) - biot * np.cos(x)) * sign < 0.0,
                           k * np.pi, (k + 0.5) * np.pi)
    sin, cos = np.sin(lam), np.cos(lam)
    return _read_only(lam, 2.0 * sin / (lam + sin * cos))


@lru_cache(maxsize=32)
def _cylinder_modes(biot: float | None, count: int) -> tuple[np.ndarray, np.ndarray]:
    """First ``count`` eigenvalues λ_n [-] and axis coefficients C_n [-] of an infinite cylinder.

    ``biot`` None: surface at the retort temperature (the zeros of J0).
    """
    upper = np.array(_bessel_j0_zeros(count))
    if biot is None:
        return _read_only(upper, 2.0 / (upper * j1(upper)))
    lower = np.concatenate(([0.0], _bessel_j1_zeros(count - 1)))
    # x J1/J0 - Bi increases from -Bi to +inf on (j1_k, j0_{k+1}) (derivative x (J0² + J1²)/J0²);
    # J0 has the sign (-1)^k there.
    sign = (-1.0) ** np.arange(count)
    lam = _bracketed_roots(lambda x: (x * j1(x) - biot * j0(x)) * sign < 0.0, lower, upper)
    j0_lam, j1_lam = j0(lam), j1(lam)
    return _read_only(lam, 2.0 * j1_lam / (lam * (j0_lam**2 + j1_lam**2)))


_MODES = {"slab": _slab_modes, "cylinder": _cylinder_modes}


def _biot_sorted(fourier_sorted: np.ndarray, n_terms: int, kind: str, biot: float) -> np.ndarray:
    """Unaccomplished fraction at the centre of a slab or on the axis of a cylinder with a Biot
    boundary, for ascending Fo (on the half-thickness or the radius): ``S = Σ C_n exp(-λ_n² Fo)``.

    The series is complete to double precision once ``λ_{N+1}² Fo > 40``. Below that S is set to
    1: the surface with a finite h is never warmer than the retort, so by the comparison
    principle the centre heats no faster than with the surface at the retort temperature,
    ``S_Dirichlet <= S <= 1``; there ``1 - S_Dirichlet`` is below 1e-22 for ``n_terms >= 40``
    (slab: ``2 erfc(1/(2√Fo)) < 1e-44`` with ``λ_41 > 40π``; cylinder: the bound of
    :func:`_cylinder_sorted` with ``λ_41`` above the 40th zero of J1). So S(0) = 1 exactly and the
    truncated series' oscillation at t -> 0+ never appears; the choice is the cooler side.
    """
    lam, coeffs = _MODES[kind](biot, n_terms + 1)
    complete_from = _NEGLIGIBLE_EXPONENT / lam[-1] ** 2
    s = np.zeros_like(fourier_sorted)
    n_short = int(np.searchsorted(fourier_sorted, complete_from, side="left"))
    s[:n_short] = 1.0
    _add_exponential_terms(s, fourier_sorted, coeffs[:-1], lam[:-1] ** 2, n_short)
    return s


_DIRICHLET_SERIES = {"slab": _slab_sorted, "cylinder": _cylinder_sorted}


def _surface_h_over_k(h_over_k_per_m) -> float | None:
    """h/k of the surface [1/m]; None for the surface at the retort temperature (None or inf)."""
    if h_over_k_per_m is None:
        return None
    value = float(h_over_k_per_m)
    if value == math.inf:
        return None
    return _positive("h_over_k_per_m", value)


# A container is a set of axes, each ("slab", half-thickness [m]) or ("cylinder", radius [m]);
# the centre's S is the product over the axes, each on its own Fo and Bi.


def _cylinder_axes(radius_m, height_m) -> tuple[tuple[str, float], ...]:
    return (("cylinder", _positive("radius_m", radius_m)),
            ("slab", 0.5 * _positive("height_m", height_m)))


def _brick_axes(length_m, width_m, thickness_m) -> tuple[tuple[str, float], ...]:
    return tuple(("slab", 0.5 * _positive(name, side)) for name, side in
                 (("length_m", length_m), ("width_m", width_m), ("thickness_m", thickness_m)))


def _centre_unaccomplished(time_min, diffusivity_m2_s, axes, h_over_k_per_m, n_terms):
    """Product over ``axes`` of the one-dimensional centre series, clipped to [0, 1]."""
    alpha = _positive("diffusivity_m2_s", diffusivity_m2_s)
    h_over_k = _surface_h_over_k(h_over_k_per_m)
    n = _n_terms(n_terms)
    t_s = _time_s(time_min)
    s = np.ones_like(t_s)
    for kind, length_m in axes:
        if h_over_k is None:
            series = _DIRICHLET_SERIES[kind]
        else:
            series = partial(_biot_sorted, kind=kind, biot=h_over_k * length_m)
        s = s * _evaluate(alpha * t_s / length_m**2, series, n)
    return np.clip(s, 0.0, 1.0)


def slab_centre_unaccomplished(
    time_min, diffusivity_m2_s, thickness_m, n_terms=DEFAULT_N_TERMS, *, h_over_k_per_m=None
) -> np.ndarray:
    """Unaccomplished temperature fraction at the mid-plane of an infinite slab.

    Method: infinite-slab Fourier series with the erfc series at short times (Carslaw &
    Jaeger [1], ch. III); with a finite ``h`` the Biot-root series (``λ tan λ = Bi``,
    ``Bi = h (thickness/2) / k``).

    Parameters
    ----------
    time_min : array_like
        Time since the retort temperature step [min]; times <= 0 give 1.
    diffusivity_m2_s : float
        Thermal diffusivity of the product [m²/s].
    thickness_m : float
        Full thickness of the slab [m].
    n_terms : int, optional
        Number of series terms (>= 40).
    h_over_k_per_m : float, optional
        Surface heat transfer coefficient over the product's thermal conductivity, ``h / k``
        [1/m]. ``None`` (default) or ``inf``: surface held at the retort temperature.

    Returns
    -------
    numpy.ndarray
        ``S = (T_R - T) / (T_R - T_0)`` at the mid-plane [-], in [0, 1], shape of ``time_min``;
        ``S(0) = 1`` exactly.

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959, ch. III.
    """
    half = 0.5 * _positive("thickness_m", thickness_m)
    return _centre_unaccomplished(time_min, diffusivity_m2_s, (("slab", half),), h_over_k_per_m,
                                  n_terms)


def cylinder_centre_unaccomplished(
    time_min, diffusivity_m2_s, radius_m, height_m, n_terms=DEFAULT_N_TERMS, *,
    h_over_k_per_m=None,
) -> np.ndarray:
    """Unaccomplished temperature fraction at the geometric centre of a finite cylinder.

    Method: product solution of the infinite-cylinder Bessel series and the infinite-slab series
    (Carslaw & Jaeger [1]; Powers [2], ch. 5) for a step in retort temperature at ``t = 0``;
    surface at the retort temperature, or with a finite ``h`` the Biot-root series
    (``λ J1(λ) = Bi J0(λ)`` with ``Bi = h R / k``; ``λ tan λ = Bi`` with ``Bi = h (H/2) / k``)
    ([1] ch. III, VII; Incropera & DeWitt [4] §5.5-5.6, §5.8).

    Parameters
    ----------
    time_min : array_like
        Time since the retort temperature step [min]; times <= 0 give 1.
    diffusivity_m2_s : float
        Thermal diffusivity of the product [m²/s].
    radius_m : float
        Inside radius of the container [m].
    height_m : float
        Inside (full) height of the container [m].
    n_terms : int, optional
        Number of terms in each series (>= 40). Short times are handled without oscillation
        whatever the number of terms.
    h_over_k_per_m : float, optional
        Surface heat transfer coefficient over the product's thermal conductivity, ``h / k``
        [1/m], the same on the side and the ends. ``None`` (default) or ``inf``: surface held at
        the retort temperature.

    Returns
    -------
    numpy.ndarray
        ``S = (T_R - T) / (T_R - T_0)`` at the centre [-], in [0, 1], shape of ``time_min``;
        ``S(0) = 1`` exactly.

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959, ch. III, VII.
    .. [2] D. L. Powers, *Boundary Value Problems*, ch. 5.
    .. [4] Incropera & DeWitt, *Fundamentals of Heat and Mass Transfer*, ch. 5.
    """
    return _centre_unaccomplished(time_min, diffusivity_m2_s, _cylinder_axes(radius_m, height_m),
                                  h_over_k_per_m, n_terms)


def brick_centre_unaccomplished(
    time_min, diffusivity_m2_s, length_m, width_m, thickness_m, n_terms=DEFAULT_N_TERMS, *,
    h_over_k_per_m=None,
) -> np.ndarray:
    """Unaccomplished temperature fraction at the centre of a brick (rectangular container).

    Method: product of three infinite-slab series (Carslaw & Jaeger [1], ch. III, and the product
    rule); surface at the retort temperature, or with a finite ``h`` the Biot-root series on
    each axis (``λ tan λ = Bi``, ``Bi = h (side/2) / k``; Incropera & DeWitt [4] §5.5, §5.8).

    Parameters
    ----------
    time_min : array_like
        Time since the retort temperature step [min]; times <= 0 give 1.
    diffusivity_m2_s : float
        Thermal diffusivity of the product [m²/s].
    length_m, width_m, thickness_m : float
        Inside dimensions of the container [m].
    n_terms : int, optional
        Number of terms in each slab series (>= 40).
    h_over_k_per_m : float, optional
        Surface heat transfer coefficient over the product's thermal conductivity, ``h / k``
        [1/m], the same on every face. ``None`` (default) or ``inf``: surface held at the retort
        temperature.

    Returns
    -------
    numpy.ndarray
        ``S = (T_R - T) / (T_R - T_0)`` at the centre [-], in [0, 1], shape of ``time_min``;
        ``S(0) = 1`` exactly.

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959, ch. III.
    .. [4] Incropera & DeWitt, *Fundamentals of Heat and Mass Transfer*, ch. 5.
    """
    return _centre_unaccomplished(time_min, diffusivity_m2_s,
                                  _brick_axes(length_m, width_m, thickness_m), h_over_k_per_m,
                                  n_terms)


# --- first-term relations: fh, diffusivity, theoretical jh -------------------------------------
#
# Late in heating only the first term of each series survives, S ≈ jh · exp(-λ t) with
# λ = α Σ λ1²/a² [1/s] over the axes (a the radius or half-side, λ1 the first eigenvalue at that
# axis's Bi; with the surface at the retort temperature, β1²/R² + π²/H² for a finite cylinder,
# H the full height) and jh the product of the axes' first coefficients C1. On log10 S against t
# the slope is -λ/ln10, and Ball's fh is minus its reciprocal: fh = ln10 / λ [s] =
# ln10 / (60 λ) [min]. With the surface at the retort temperature this is the Olson & Jackson
# (1942) relation [3]; the form is derived here from the series' first term (the published form
# quoted from memory agrees with it).

_BETA1 = float(jn_zeros(0, 1)[0])


def _first_mode(axes, h_over_k) -> tuple[float, float]:
    """First-mode decay rate per unit diffusivity ``Σ λ1²/a²`` [1/m²] and centre jh ``Π C1`` [-]."""
    rate_per_alpha_m2, jh = 0.0, 1.0
    for kind, length_m in axes:
        biot = None if h_over_k is None else h_over_k * length_m
        lam, coeffs = _MODES[kind](biot, 1)
        rate_per_alpha_m2 += float(lam[0]) ** 2 / length_m**2
        jh *= float(coeffs[0])
    return rate_per_alpha_m2, jh


def _diffusivity_from_fh(fh_min, axes, h_over_k_per_m) -> float:
    fh_s = _positive("fh_min", fh_min) * SECONDS_PER_MINUTE
    return LN10 / (fh_s * _first_mode(axes, _surface_h_over_k(h_over_k_per_m))[0])


def _fh_from_diffusivity(diffusivity_m2_s, axes, h_over_k_per_m) -> float:
    alpha = _positive("diffusivity_m2_s", diffusivity_m2_s)
    rate_per_alpha_m2 = _first_mode(axes, _surface_h_over_k(h_over_k_per_m))[0]
    return LN10 / (alpha * rate_per_alpha_m2) / SECONDS_PER_MINUTE


def diffusivity_from_fh_cylinder(fh_min, radius_m, height_m, *, h_over_k_per_m=None) -> float:
    """Thermal diffusivity from the heating rate index of a finite cylinder.

    Method: first-term decay of the conduction series (Olson & Jackson 1942 [3]),
    ``fh = ln10 / (α (λr²/R² + λz²/(H/2)²))`` with fh in seconds; with the surface at the retort
    temperature ``λr = β1 = 2.4048``, ``λz = π/2``, otherwise the first Biot roots.

    Parameters
    ----------
    fh_min : float
        Heating rate index fh [min].
    radius_m : float
        Inside radius [m].
    height_m : float
        Inside (full) height [m].
    h_over_k_per_m : float, optional
        Surface heat transfer coefficient over thermal conductivity ``h / k`` [1/m]; ``None``:
        surface at the retort temperature.

    Returns
    -------
    float
        Thermal diffusivity [m²/s].

    References
    ----------
    .. [3] Olson & Jackson, *Ind. Eng. Chem.* 34 (1942) 337-341.
    """
    return _diffusivity_from_fh(fh_min, _cylinder_axes(radius_m, height_m), h_over_k_per_m)


def fh_from_diffusivity_cylinder(diffusivity_m2_s, radius_m, height_m, *,
                                 h_over_k_per_m=None) -> float:
    """Heating rate index of a finite cylinder from the thermal diffusivity.

    Method: first-term decay of the conduction series (Olson & Jackson 1942 [3]), eigenvalues
    as in :func:`diffusivity_from_fh_cylinder`.

    Parameters
    ----------
    diffusivity_m2_s : float
        Thermal diffusivity [m²/s].
    radius_m : float
        Inside radius [m].
    height_m : float
        Inside (full) height [m].
    h_over_k_per_m : float, optional
        ``h / k`` of the surface [1/m]; ``None``: surface at the retort temperature.

    Returns
    -------
    float
        fh [min].

    References
    ----------
    .. [3] Olson & Jackson, *Ind. Eng. Chem.* 34 (1942) 337-341.
    """
    return _fh_from_diffusivity(diffusivity_m2_s, _cylinder_axes(radius_m, height_m),
                                h_over_k_per_m)


def diffusivity_from_fh_brick(fh_min, length_m, width_m, thickness_m, *,
                              h_over_k_per_m=None) -> float:
    """Thermal diffusivity from the heating rate index of a brick.

    Method: first-term decay of the three slab series (Olson & Jackson 1942 [3]),
    ``fh = ln10 / (α Σ λi²/(Li/2)²)`` with fh in seconds; ``λi = π/2`` with the surface at the
    retort temperature (``fh = ln10 / (α π² (1/L² + 1/W² + 1/T²))``), otherwise the first root
    of ``λ tan λ = h (Li/2) / k``.

    Parameters
    ----------
    fh_min : float
        Heating rate index fh [min].
    length_m, width_m, thickness_m : float
        Inside dimensions [m].
    h_over_k_per_m : float, optional
        ``h / k`` of the surface [1/m]; ``None``: surface at the retort temperature.

    Returns
    -------
    float
        Thermal diffusivity [m²/s].

    References
    ----------
    .. [3] Olson & Jackson, *Ind. Eng. Chem.* 34 (1942) 337-341.
    """
    return _diffusivity_from_fh(fh_min, _brick_axes(length_m, width_m, thickness_m),
                                h_over_k_per_m)


def fh_from_diffusivity_brick(diffusivity_m2_s, length_m, width_m, thickness_m, *,
                              h_over_k_per_m=None) -> float:
    """Heating rate index of a brick from the thermal diffusivity.

    Method: first-term decay of the three slab series (Olson & Jackson 1942 [3]), eigenvalues as
    in :func:`diffusivity_from_fh_brick`.

    Parameters
    ----------
    diffusivity_m2_s : float
        Thermal diffusivity [m²/s].
    length_m, width_m, thickness_m : float
        Inside dimensions [m].
    h_over_k_per_m : float, optional
        ``h / k`` of the surface [1/m]; ``None``: surface at the retort temperature.

    Returns
    -------
    float
        fh [min].

    References
    ----------
    .. [3] Olson & Jackson, *Ind. Eng. Chem.* 34 (1942) 337-341.
    """
    return _fh_from_diffusivity(diffusivity_m2_s, _brick_axes(length_m, width_m, thickness_m),
                                h_over_k_per_m)


def _theoretical_jh(axes_of, dims, h_over_k_per_m) -> float:
    h_over_k = _surface_h_over_k(h_over_k_per_m)
    if any(d is None for d in dims):
        if h_over_k is not None:
            raise ModelInputError("with h_over_k_per_m the theoretical jh depends on the "
                                  "container's size; expected its dimensions [m]")
        dims = (1.0,) * len(dims)  # surface at the retort temperature: jh is the same at any size
    return _first_mode(axes_of(*dims), h_over_k)[1]


def theoretical_centre_jh_cylinder(radius_m=None, height_m=None, *, h_over_k_per_m=None) -> float:
    """Theoretical jh at the centre of a finite cylinder: ``C1(Bi_R) · C1(Bi_H/2)``.

    With the surface at the retort temperature ``2/(β1 J1(β1)) · 4/π ≈ 1.602 · 1.273 ≈ 2.040``
    whatever the size; with a finite ``h`` it falls towards 1 as Bi falls (see
    :func:`first_coefficient_cylinder`, :func:`first_coefficient_slab`), so a measured jh is
    compared with the value at the container's Bi.

    Parameters
    ----------
    radius_m, height_m : float, optional
        Inside radius and (full) height [m]; needed only with ``h_over_k_per_m``.
    h_over_k_per_m : float, optional
        ``h / k`` of the surface [1/m]; ``None``: surface at the retort temperature.

    Returns
    -------
    float
        jh [-].

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959.
    .. [2] D. L. Powers, *Boundary Value Problems*, ch. 5.
    """
    return _theoretical_jh(_cylinder_axes, (radius_m, height_m), h_over_k_per_m)


def theoretical_centre_jh_brick(length_m=None, width_m=None, thickness_m=None, *,
                                h_over_k_per_m=None) -> float:
    """Theoretical jh at the centre of a brick: the product of the three slabs' ``C1(Bi)``.

    With the surface at the retort temperature ``(4/π)³ ≈ 1.273³ ≈ 2.064`` whatever the size.

    Parameters
    ----------
    length_m, width_m, thickness_m : float, optional
        Inside dimensions [m]; needed only with ``h_over_k_per_m``.
    h_over_k_per_m : float, optional
        ``h / k`` of the surface [1/m]; ``None``: surface at the retort temperature.

    Returns
    -------
    float
        jh [-].

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959.
    """
    return _theoretical_jh(_brick_axes, (length_m, width_m, thickness_m), h_over_k_per_m)


# ---------------------------------------------------------------------------------------------
# First eigenvalue and coefficient of one axis at a given Biot number.


def _biot(biot) -> float | None:
    if biot is None or math.isinf(biot):
        return None
    return _positive("biot", biot)


def first_eigenvalue_slab(biot) -> float:
    """First root λ1 of ``λ tan λ = Bi`` (slab, half-thickness L, Bi = h L / k) [-].

    ``biot=None`` (or inf) is the surface held at the retort temperature: λ1 = π/2.
    Carslaw & Jaeger, *Conduction of Heat in Solids*, ch. III (section from memory).
    """
    return float(_slab_modes(_biot(biot), 1)[0][0])


def first_eigenvalue_cylinder(biot) -> float:
    """First root λ1 of ``λ J1(λ) = Bi J0(λ)`` (infinite cylinder, Bi = h R / k) [-].

    ``biot=None`` (or inf): the first zero of J0, 2.4048. Carslaw & Jaeger, ch. VII (section from
    memory).
    """
    return float(_cylinder_modes(_biot(biot), 1)[0][0])


def first_coefficient_slab(biot) -> float:
    """First coefficient C1 of the mid-plane series of a slab (Bi = h L / k, L half-thickness) [-].

    ``C1 = 2 sin λ1 / (λ1 + sin λ1 cos λ1)``; ``biot=None`` (or inf): 4/π. The theoretical
    mid-plane jh of the slab. Incropera & DeWitt, *Fundamentals of Heat and Mass Transfer*,
    Table 5.1 (C1, plane wall).
    """
    return float(_slab_modes(_biot(biot), 1)[1][0])


def first_coefficient_cylinder(biot) -> float:
    """First coefficient C1 of the axis series of an infinite cylinder (Bi = h R / k) [-].

    ``C1 = 2 J1(λ1) / (λ1 (J0(λ1)² + J1(λ1)²))`` ``= 2 Bi / ((λ1² + Bi²) J0(λ1))``;
    ``biot=None`` (or inf): ``2/(β1 J1(β1)) = 1.602``. Incropera & DeWitt, Table 5.1 (C1,
    infinite cylinder).
    """
    return float(_cylinder_modes(_biot(biot), 1)[1][0])


def decay_rate_cylinder_s(diffusivity_m2_s, radius_m, height_m, h_over_k_per_m=None) -> float:
    """First-mode decay rate at the centre of a finite cylinder [1/s]: α (λr²/R² + λz²/(H/2)²).

    ``h_over_k_per_m`` is h/k of the surface [1/m]; ``None`` for the surface at the retort
    temperature (then ``ln10 / rate`` is the fh of :func:`fh_from_diffusivity_cylinder`).
    """
    axes = _cylinder_axes(radius_m, height_m)
    rate_per_alpha_m2 = _first_mode(axes, _surface_h_over_k(h_over_k_per_m))[0]
    return _positive("diffusivity_m2_s", diffusivity_m2_s) * rate_per_alpha_m2


def decay_rate_brick_s(diffusivity_m2_s, length_m, width_m, thickness_m, h_over_k_per_m=None) -> float:
    """First-mode decay rate at the centre of a brick [1/s]: α Σ λi²/(Li/2)²."""
    axes = _brick_axes(length_m, width_m, thickness_m)
    rate_per_alpha_m2 = _first_mode(axes, _surface_h_over_k(h_over_k_per_m))[0]
    return _positive("diffusivity_m2_s", diffusivity_m2_s) * rate_per_alpha_m2
