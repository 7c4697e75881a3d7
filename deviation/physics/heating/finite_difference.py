"""Conduction heating by finite differences: finite cylinder (r, z) and brick, any boundary history.

The analytical series (``deviation.physics.heating.conduction``) need a uniform initial temperature and a
surface held at the retort temperature. This module solves the heat equation numerically
(Teixeira et al. [3]) and so also takes

- any initial temperature field (e.g. the field a lot was left with after it cooled unevenly),
- a finite surface heat transfer coefficient ``h`` (water spray, steam-air): the Robin (Biot)
  boundary ``-k dT/dn = h (T_s - T_R)``.

Discretisation
--------------
Vertex-centred finite volumes (Patankar [4], ch. 4) on a uniform grid of one symmetry sector:
the cylinder on ``0 <= r <= R``, ``0 <= z <= H/2`` (mirror plane at mid-height), the brick on one
octant ``0 <= x <= L/2``, ``0 <= y <= W/2``, ``0 <= z <= T/2``. Node 0 of every axis lies on the
axis or symmetry plane (the geometric centre is node ``(0, 0[, 0])``) and the last node on the
surface. Control volumes end half-way between nodes; on the cylinder axis the volume is the disc
``r < Δr/2`` and the face at ``Δr/2`` carries all the radial flux, which is the finite-volume form
of the axis limit ``(1/r) ∂/∂r (r ∂T/∂r) -> 2 ∂²T/∂r²``. The scheme is second order in space.

The semi-discrete system is ``du/dt = Σ_j A_j u + b T_R(t)``, ``A_j`` the tridiagonal operator of
axis ``j`` (a Kronecker sum: the sectors are tensor-product grids).

Time stepping
-------------
Douglas ADI (Douglas [1]; Hundsdorfer & Verwer [2], §IV.3) with ``θ = 1/2`` (Crank–Nicolson
weights, second order, unconditionally stable for these commuting, negative semi-definite
operators in 2-D and 3-D):

    E_0 = τ (A u^n + b T̄_R),    (I - θ τ A_j) E_j = E_{j-1},    u^{n+1} = u^n + E_last,

``T̄_R`` the exact mean of the piecewise-linear retort record over the step. Each stage is one
batch of tridiagonal solves along one axis for all lines at once (LAPACK ``gttrf``/``gttrs``
through ``scipy.linalg.lapack``; factors are reused while the step size holds).

Crank–Nicolson weights do not damp the stiffest modes (amplification -> -1), so a sudden change of
the surface temperature at a large step rings (measured: +8 °C above the retort next to the
surface after one 1-min step from 40 to 121.1 °C). Rannacher start-up [5] is used: the two steps
from any step over which the retort moves by more than ``jump_C`` (and the first two steps when
the surface starts more than ``jump_C`` away from the retort) are each taken as two
implicit (``θ = 1``) half steps. Steps are merged only where the retort moves by less than
``jump_C``, so ramps and drops keep the record's resolution and only true jumps start up.

The internal step is the recorder's step, subdivided where a record interval is longer than
``max_step_min`` and merged (several record intervals per step, the retort's exact mean over the
step as forcing) where the record is much finer than the heat transfer needs. The default
``max_step_min`` is ``t_1 / 40``, ``t_1 = 1 / (α λ_1)`` the time constant of the slowest
conduction mode (``fh = ln10 · t_1``; 26 s for fh 40 min); measured to change F0 by under
0.01 % against a step at every 1-s sample.
Between internal steps the cold-spot history is interpolated by a cubic spline (the centre
temperature is smooth for t > 0).

Default grids (measured, see ``tests/heating/test_finite_difference.py`` and
``tests/benchmarks/bench_finite_difference.py``): ``nr = 26, nz = 33`` for a cylinder gives F0
-0.36 % from the analytical series for an 81 × 111 mm can, fh 40 min, on a 2-h cycle with a drop
to 115 °C (-0.56 % at 21 × 26, -0.25 % at 31 × 41: the error falls as the square of the
spacing, and F0 comes out low: conservative); ``n = 13`` nodes per half-dimension for a brick
gives -0.21 % (120 × 80 × 35 mm, fh 30 min). The time error at the default step is below 0.01 %.

References
----------
.. [1] J. Douglas, "Alternating direction methods for three space variables", *Numerische
   Mathematik* 4 (1962) 41-63.
.. [2] W. Hundsdorfer and J. G. Verwer, *Numerical Solution of Time-Dependent
   Advection-Diffusion-Reaction Equations*, Berlin: Springer, 2003, §IV.3.
.. [3] A. A. Teixeira, J. R. Dixon, J. W. Zahradnik and G. E. Zinsmeister, "Computer optimization
   of nutrient retention in the thermal processing of conduction-heated foods",
   *Food Technology* 23 (1969) 845-850.
.. [4] S. V. Patankar, *Numerical Heat Transfer and Fluid Flow*, Washington: Hemisphere, 1980.
.. [5] R. Rannacher, "Finite element solution of diffusion problems with irregular data",
   *Numerische Mathematik* 43 (1984) 309-327.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.linalg import lapack
from scipy.special import jn_zeros

from deviation.physics.heating.conduction import ModelInputError

__all__ = [
    "FDResult",
    "cylinder_fd",
    "brick_fd",
    "DEFAULT_CYLINDER_GRID",
    "DEFAULT_BRICK_NODES",
]

SECONDS_PER_MINUTE = 60.0

# Nodes (axis or symmetry plane to surface, both included). Measured: F0 -0.36 % (cylinder,
# 81 x 111 mm, fh 40 min) and -0.21 % (brick) from the series on a 2-h cycle with a drop.
DEFAULT_CYLINDER_GRID = (26, 33)
DEFAULT_BRICK_NODES = 13

# Default internal step as a fraction of the slowest mode's time constant 1/(α λ1).
_STEP_PER_TIME_CONSTANT = 1.0 / 40.0
# A retort change larger than this within one internal step restarts with implicit half steps.
DEFAULT_JUMP_C = 5.0
_MIN_NODES = 3
_BETA1 = float(jn_zeros(0, 1)[0])


@dataclass(frozen=True)
class FDResult:
    """Result of a finite-difference run.

    Attributes
    ----------
    time_min : numpy.ndarray
        The input time grid [min].
    cold_spot_C : numpy.ndarray
        Temperature at the geometric centre at those times [°C].
    final_field_C : numpy.ndarray
        Temperature field at the last time [°C], on the symmetry sector's nodes: shape
        ``(nr, nz)`` for a cylinder, ``(nx, ny, nz)`` for a brick; index 0 is the axis or
        mid-plane, the last index the surface. Valid as ``initial_C`` of a later run.
    grid : dict
        Node coordinates [m] per axis (``"r_m"``, ``"z_m"`` or ``"x_m"``, ``"y_m"``, ``"z_m"``),
        from the centre outwards.
    """

    time_min: np.ndarray
    cold_spot_C: np.ndarray
    final_field_C: np.ndarray
    grid: dict


# --- input checks ------------------------------------------------------------------------------


def _positive(name: str, value) -> float:
    try:
        value = float(value)
    except (TypeError, ValueError):
        raise ModelInputError(f"{name} = {value!r}; expected a finite number > 0") from None
    if not math.isfinite(value) or value <= 0.0:
        raise ModelInputError(f"{name} = {value!r}; expected a finite number > 0")
    return value


def _nodes(name: str, value) -> int:
    n = int(value)
    if n != value or n < _MIN_NODES:
        raise ModelInputError(f"{name} = {value!r}; expected an integer >= {_MIN_NODES}")
    return n


def _theta(value) -> float:
    theta = float(value)
    if not (0.5 <= theta <= 1.0):
        raise ModelInputError(f"theta = {value!r}; expected a number in [0.5, 1]")
    return theta


def _record(time_min, retort_C) -> tuple[np.ndarray, np.ndarray]:
    t = np.asarray(time_min, dtype=float)
    r = np.asarray(retort_C, dtype=float)
    if t.ndim != 1 or t.size == 0:
        raise ModelInputError(f"time_min has shape {t.shape}; expected a non-empty 1-D grid [min]")
    if r.shape != t.shape:
        raise ModelInputError(
            f"retort_C has shape {r.shape}; expected the shape of time_min {t.shape}"
        )
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(r))):
        raise ModelInputError("time_min or retort_C contains a non-finite value")
    if t.size > 1 and not np.all(np.diff(t) > 0.0):
        worst = int(np.argmin(np.diff(t)))
        raise ModelInputError(
            f"time_min does not increase at sample {worst + 1} ({t[worst + 1]!r} min after "
            f"{t[worst]!r} min); expected a strictly increasing grid [min]"
        )
    return t, r


def _boundary(surface_htc_W_m2K, thermal_conductivity_W_mK):
    """``None`` for a Dirichlet surface, else ``h/k`` [1/m] of the Robin boundary."""
    if surface_htc_W_m2K is None:
        return None
    h = _positive("surface_htc_W_m2K", surface_htc_W_m2K)
    if thermal_conductivity_W_mK is None:
        raise ModelInputError(
            "thermal_conductivity_W_mK is missing; a finite surface_htc_W_m2K needs the "
            "product's thermal conductivity [W/(m K)] for the Biot boundary"
        )
    return h / _positive("thermal_conductivity_W_mK", thermal_conductivity_W_mK)


def _initial_field(initial_C, shape: tuple[int, ...]) -> np.ndarray:
    field = np.asarray(initial_C, dtype=float)
    if field.ndim == 0:
        field = np.full(shape, float(field))
    elif field.shape != shape:
        raise ModelInputError(
            f"initial_C has shape {field.shape}; expected a number or a field of shape {shape} "
            "(the symmetry sector's nodes, e.g. a previous run's final_field_C)"
        )
    if not np.all(np.isfinite(field)):
        raise ModelInputError("initial_C contains a non-finite value; expected temperatures [°C]")
    return field.copy()


# --- spatial operator --------------------------------------------------------------------------


@dataclass(frozen=True)
class _Axis:
    """Tridiagonal operator of one axis on its unknown nodes, ``du/dt = A u + c T_R`` [1/s]."""

    lower: np.ndarray
    diag: np.ndarray
    upper: np.ndarray
    forcing: np.ndarray
    nodes_m: np.ndarray  # all nodes, surface included


def _axis(n_nodes: int, half_m: float, alpha: float, h_over_k, cylindrical: bool) -> _Axis:
    """Vertex-centred finite-volume operator from the axis/symmetry plane (node 0) to the surface.

    Control volume of node i: ``[x_i - Δ/2, x_i + Δ/2]`` clipped to ``[0, half_m]``; planar
    volumes and faces have unit measure, cylindrical ones the factor r (per radian).
    """
    dx = half_m / (n_nodes - 1)
    x = dx * np.arange(n_nodes)
    faces = dx * (np.arange(n_nodes - 1) + 0.5)  # face i+1/2 between nodes i and i+1
    lo = np.maximum(x - 0.5 * dx, 0.0)
    hi = np.minimum(x + 0.5 * dx, half_m)
    if cylindrical:
        volume = 0.5 * (hi**2 - lo**2)
        face_area = faces
        surface_area = half_m
    else:
        volume = hi - lo
        face_area = np.ones_like(faces)
        surface_area = 1.0
    conductance = alpha * face_area / dx  # [m·m²/s] per unit temperature difference
    diag = np.zeros(n_nodes)
    diag[:-1] -= conductance
    diag[1:] -= conductance
    upper = conductance.copy()  # coupling of node i to i+1
    lower = conductance.copy()  # coupling of node i+1 to i
    forcing = np.zeros(n_nodes)
    if h_over_k is None:
        # Dirichlet: the surface node is known; its coupling to the last interior node is forcing
        m = n_nodes - 1
        forcing[m - 1] = conductance[-1]
        diag, forcing, volume = diag[:m], forcing[:m], volume[:m]
        upper, lower = upper[: m - 1], lower[: m - 1]
    else:
        # Robin: surface flux α (h/k) (T_R - T_s) through the surface of the last volume
        exchange = alpha * h_over_k * surface_area
        diag[-1] -= exchange
        forcing[-1] = exchange
    return _Axis(
        lower=lower / volume[1:], diag=diag / volume, upper=upper / volume[:-1],
        forcing=forcing / volume, nodes_m=x,
    )


def _forcing_field(axes: list[_Axis]) -> np.ndarray:
    shape = [a.diag.size for a in axes]
    b = np.zeros(shape)
    for j, a in enumerate(axes):
        view = [1] * len(axes)
        view[j] = -1
        b = b + a.forcing.reshape(view)
    return b


# --- time grid ---------------------------------------------------------------------------------


def _refined_times(t: np.ndarray, max_step_min: float) -> np.ndarray:
    """The record's times with every interval longer than ``max_step_min`` evenly subdivided."""
    dt = np.diff(t)
    n_sub = np.maximum(np.ceil(dt / max_step_min - 1e-9).astype(np.int64), 1)
    starts = np.repeat(t[:-1], n_sub)
    within = np.arange(n_sub.sum()) - np.repeat(np.cumsum(n_sub) - n_sub, n_sub)
    return np.append(starts + within * np.repeat(dt / n_sub, n_sub), t[-1])


def _step_times(s: np.ndarray, retort: np.ndarray, max_step_min: float, jump_C: float):
    """Merge runs of fine record intervals into longer steps, by aligned blocks of 2^m intervals.

    A block is usable when it lasts at most ``max_step_min`` and the retort moves by at most
    ``jump_C`` within it (so ramps and drops keep fine steps). Each interval goes into the
    largest usable block containing it; usability is inherited by sub-blocks, so the chosen
    blocks tile the record. Returns the indices into ``s`` where steps begin and end.
    """
    n = s.size - 1
    level = np.zeros(n, dtype=np.int64)
    m = 1
    while (1 << m) <= n:
        size = 1 << m
        starts = np.arange(0, n - size + 1, size)
        ends = starts + size
        lo = np.minimum(np.minimum.reduceat(retort[:-1], starts)[: starts.size], retort[ends])
        hi = np.maximum(np.maximum.reduceat(retort[:-1], starts)[: starts.size], retort[ends])
        usable = (s[ends] - s[starts] <= max_step_min * (1 + 1e-9)) & (hi - lo <= jump_C)
        if not usable.any():
            break
        block = np.arange(n) // size
        inside = block < starts.size
        ok = np.zeros(n, dtype=bool)
        ok[inside] = usable[block[inside]]
        ok &= level == m - 1  # every sub-block usable too
        level[ok] = m
        m += 1
    begins = np.flatnonzero(np.arange(n) % (np.int64(1) << level) == 0)
    return np.append(begins, n)


class _RetortIntegral:
    """Exact running integral of the piecewise-linear retort record [°C·min]."""

    def __init__(self, t: np.ndarray, r: np.ndarray) -> None:
        self.t, self.r = t, r
        self.slope = np.diff(r) / np.diff(t) if t.size > 1 else np.zeros(0)
        self.cum = np.concatenate([[0.0], np.cumsum(0.5 * (r[1:] + r[:-1]) * np.diff(t))])

    def __call__(self, s: np.ndarray) -> np.ndarray:
        s = np.asarray(s, dtype=float)
        if self.t.size == 1:
            return (s - self.t[0]) * self.r[0]
        i = np.clip(np.searchsorted(self.t, s, side="right") - 1, 0, self.t.size - 2)
        u = s - self.t[i]
        return self.cum[i] + u * (self.r[i] + 0.5 * u * self.slope[i])

    def mean(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return (self(b) - self(a)) / (b - a)


# --- the Douglas ADI march ---------------------------------------------------------------------


class _Factors:
    """LU factors of ``I - θτ A_j`` for every axis, cached per (θτ)."""

    def __init__(self, axes: list[_Axis]) -> None:
        self.axes = axes
        self.cache: dict[float, list[tuple]] = {}

    def get(self, theta_tau_s: float) -> list[tuple]:
        key = round(theta_tau_s, 9)
        found = self.cache.get(key)
        if found is None:
            found = []
            for a in self.axes:
                dl, d, du, du2, ipiv, info = lapack.dgttrf(
                    -theta_tau_s * a.lower, 1.0 - theta_tau_s * a.diag, -theta_tau_s * a.upper
                )
                if info != 0:  # diagonally dominant: cannot happen for valid inputs
                    raise ModelInputError(f"tridiagonal factorisation failed (info {info})")
                found.append((dl, d, du, du2, ipiv))
            if len(self.cache) > 16:
                self.cache.clear()
            self.cache[key] = found
        return found


def _dense(axis: _Axis) -> np.ndarray:
    return np.diag(axis.diag) + np.diag(axis.lower, -1) + np.diag(axis.upper, 1)


def _apply(dense: list[np.ndarray], u: np.ndarray) -> np.ndarray:
    """``Σ_j A_j u`` for a 2-D or 3-D field (small dense axis matrices: a few BLAS calls)."""
    if u.ndim == 2:
        return dense[0] @ u + u @ dense[1].T
    n0, n1, n2 = u.shape
    out = (dense[0] @ u.reshape(n0, n1 * n2)).reshape(u.shape)
    out += np.matmul(dense[1], u)  # stacked over the first axis: acts along axis 1
    out += u @ dense[2].T
    return out


def _solve_lines(factors: list[tuple], e: np.ndarray) -> np.ndarray:
    """``Π_j (I - θτ A_j)^{-1} e``: one batch of tridiagonal solves per axis, all lines at once.

    Each batch hands LAPACK ``gttrs`` a matrix whose columns are the lines along that axis.
    """
    shape = e.shape
    if e.ndim == 2:
        x, info0 = lapack.dgttrs(*factors[0], e)
        x, info1 = lapack.dgttrs(*factors[1], np.ascontiguousarray(x).T)  # columns: z lines
        if info0 or info1:
            raise ModelInputError("tridiagonal solve failed")
        return x.T
    n0, n1, n2 = shape
    x, i0 = lapack.dgttrs(*factors[0], e.reshape(n0, n1 * n2))
    x = np.ascontiguousarray(x).reshape(shape).transpose(1, 0, 2).reshape(n1, n0 * n2)
    x, i1 = lapack.dgttrs(*factors[1], x)
    x = np.ascontiguousarray(x).reshape(n1, n0, n2).transpose(1, 0, 2)
    x, i2 = lapack.dgttrs(*factors[2], np.ascontiguousarray(x).reshape(n0 * n1, n2).T)
    if i0 or i1 or i2:
        raise ModelInputError("tridiagonal solve failed")
    return x.T.reshape(shape)


def _march(axes, field0, nodes_min, integral, jump_C, theta, start_jump):
    """Douglas ADI over the step times ``nodes_min``; returns centre history and final field."""
    dense = [_dense(a) for a in axes]
    forcing = _forcing_field(axes)
    factors = _Factors(axes)
    u = field0.copy()
    n_steps = nodes_min.size - 1
    centre = np.empty(nodes_min.size)
    centre[0] = u.flat[0]
    if n_steps == 0:
        return centre, u

    a, b = nodes_min[:-1], nodes_min[1:]
    mid = 0.5 * (a + b)
    mean_full = integral.mean(a, b)
    mean_first = integral.mean(a, mid)
    mean_second = integral.mean(mid, b)
    # a jump: the retort moves by more than jump_C within one step even at the finest step
    ends_C = np.interp(nodes_min, integral.t, integral.r)
    if jump_C is None:  # plain Crank-Nicolson weights throughout (for comparison only)
        jumps = np.zeros(n_steps, dtype=bool)
    else:
        jumps = np.abs(np.diff(ends_C)) > jump_C
        jumps[0] |= start_jump
    startup = jumps.copy()
    startup[1:] |= jumps[:-1]  # the jump step and the one after it
    tau_s = (b - a) * SECONDS_PER_MINUTE

    last_key, last_factors = None, None
    for n in range(n_steps):
        if startup[n]:
            # Rannacher start-up: two implicit (θ = 1) half steps damp the stiff modes
            half = 0.5 * tau_s[n]
            f = factors.get(half)
            for mean_C in (mean_first[n], mean_second[n]):
                u = u + _solve_lines(f, half * (_apply(dense, u) + forcing * mean_C))
            last_key = None
        else:
            key = theta * tau_s[n]
            if key != last_key:
                last_key, last_factors = key, factors.get(key)
            e = tau_s[n] * (_apply(dense, u) + forcing * mean_full[n])
            u = u + _solve_lines(last_factors, e)
        centre[n + 1] = u.flat[0]
    return centre, u


def _run(t, r, axes, field_full, dirichlet, max_step_min, time_constant_s, jump_C, theta):
    if max_step_min is None:
        max_step_min = _STEP_PER_TIME_CONSTANT * time_constant_s / SECONDS_PER_MINUTE
    max_step_min = _positive("max_step_min", max_step_min)
    if jump_C is not None:
        jump_C = _positive("jump_C", jump_C)
    integral = _RetortIntegral(t, r)
    if t.size > 1:
        refined = _refined_times(t, max_step_min)
        merge_C = DEFAULT_JUMP_C if jump_C is None else jump_C
        steps = _step_times(refined, np.interp(refined, t, r), max_step_min, merge_C)
        nodes = refined[steps]
    else:
        nodes = t.copy()
    # the surface meets a retort temperature it is not at when the run starts: a jump at t = 0
    # (a restart from a smooth field whose surface already sits there needs no start-up)
    surface = np.ones(field_full.shape, dtype=bool)
    surface[tuple(slice(0, -1) for _ in axes)] = False
    start_jump = jump_C is not None and bool(np.max(np.abs(field_full[surface] - r[0])) > jump_C)
    if dirichlet:
        inner = tuple(slice(0, -1) for _ in axes)
        field0 = field_full[inner]
    else:
        field0 = field_full
    centre, u = _march(axes, np.ascontiguousarray(field0), nodes, integral, jump_C, theta,
                       start_jump)
    if dirichlet:
        final = np.full(field_full.shape, float(r[-1]))
        final[inner] = u
    else:
        final = u
    if nodes.size == t.size and np.array_equal(nodes, t):
        cold = centre
    elif nodes.size >= 4:
        cold = CubicSpline(nodes, centre)(t)
    else:
        cold = np.interp(t, nodes, centre)
    return cold, final


# --- public solvers ----------------------------------------------------------------------------


def cylinder_fd(
    time_min,
    retort_C,
    *,
    initial_C,
    diffusivity_m2_s,
    radius_m,
    height_m,
    surface_htc_W_m2K=None,
    thermal_conductivity_W_mK=None,
    nr=DEFAULT_CYLINDER_GRID[0],
    nz=DEFAULT_CYLINDER_GRID[1],
    theta=0.5,
    max_step_min=None,
    jump_C=DEFAULT_JUMP_C,
) -> FDResult:
    """Centre temperature of a finite cylinder of conduction-heating product, any retort record.

    Method: axisymmetric (r, z) vertex-centred finite volumes on the quarter section
    (``0 <= r <= R``, ``0 <= z <= H/2``, mirror plane at mid-height), Douglas ADI with
    Crank–Nicolson weights and Rannacher start-up after jumps (module docstring; [1], [2], [5]).

    Parameters
    ----------
    time_min : array_like
        Strictly increasing record times [min] (need not be uniform).
    retort_C : array_like
        Retort temperature at those times, linear in between [°C].
    initial_C : float or array_like
        Uniform initial product temperature, or a field of shape ``(nr, nz)`` on the grid nodes
        (e.g. an earlier ``final_field_C``) [°C]. With a Dirichlet surface the surface nodes
        take the retort temperature.
    diffusivity_m2_s : float
        Thermal diffusivity of the product [m²/s].
    radius_m, height_m : float
        Inside radius and (full) height of the container [m].
    surface_htc_W_m2K : float, optional
        Surface heat transfer coefficient [W/(m² K)]; ``None`` holds the surface at the retort
        temperature (infinite coefficient).
    thermal_conductivity_W_mK : float, optional
        Product thermal conductivity [W/(m K)]; required with ``surface_htc_W_m2K``.
    nr, nz : int, optional
        Nodes from the axis to the side wall and from the mid-plane to the end (both ends
        included, >= 3).
    theta : float, optional
        Implicitness of the Douglas stages, in [0.5, 1]: 0.5 is Crank–Nicolson (second order),
        1 the implicit Douglas–Rachford scheme (first order).
    max_step_min : float, optional
        Longest internal step [min]; default ``t_1/40`` with ``t_1 = 1/(α λ_1)``.
    jump_C : float or None, optional
        Retort change within one step that triggers a Rannacher start-up [°C]; also the
        largest retort change merged into one step. ``None`` turns the start-up off (plain
        Crank–Nicolson weights; for comparison only).

    Returns
    -------
    FDResult
        Cold-spot (geometric centre) history on ``time_min`` [°C], final field ``(nr, nz)``
        [°C], node coordinates ``{"r_m", "z_m"}`` [m] (z from the mid-plane).

    Raises
    ------
    ModelInputError
        (a ``ModelError`` and a ``ValueError``) for a bad parameter, a missing
        ``thermal_conductivity_W_mK`` with a finite ``surface_htc_W_m2K``, or a bad record.

    References
    ----------
    .. [1] J. Douglas, *Numer. Math.* 4 (1962) 41-63.
    .. [2] Hundsdorfer & Verwer, *Numerical Solution of Time-Dependent
       Advection-Diffusion-Reaction Equations*, Springer, 2003, §IV.3.
    .. [3] Teixeira et al., *Food Technology* 23 (1969) 845-850.
    .. [5] R. Rannacher, *Numer. Math.* 43 (1984) 309-327.
    """
    t, r = _record(time_min, retort_C)
    alpha = _positive("diffusivity_m2_s", diffusivity_m2_s)
    radius = _positive("radius_m", radius_m)
    half = 0.5 * _positive("height_m", height_m)
    nr, nz = _nodes("nr", nr), _nodes("nz", nz)
    theta = _theta(theta)
    h_over_k = _boundary(surface_htc_W_m2K, thermal_conductivity_W_mK)
    field = _initial_field(initial_C, (nr, nz))
    axes = [_axis(nr, radius, alpha, h_over_k, cylindrical=True),
            _axis(nz, half, alpha, h_over_k, cylindrical=False)]
    time_constant_s = 1.0 / (alpha * (_BETA1**2 / radius**2 + math.pi**2 / (2.0 * half) ** 2))
    cold, final = _run(t, r, axes, field, h_over_k is None, max_step_min,
                       time_constant_s, jump_C, theta)
    return FDResult(t, cold, final, {"r_m": axes[0].nodes_m, "z_m": axes[1].nodes_m})


def brick_fd(
    time_min,
    retort_C,
    *,
    initial_C,
    diffusivity_m2_s,
    length_m,
    width_m,
    thickness_m,
    surface_htc_W_m2K=None,
    thermal_conductivity_W_mK=None,
    n=DEFAULT_BRICK_NODES,
    theta=0.5,
    max_step_min=None,
    jump_C=DEFAULT_JUMP_C,
) -> FDResult:
    """Centre temperature of a brick (rectangular container) of conduction-heating product.

    Method: vertex-centred finite volumes on one octant (three symmetry planes), Douglas ADI in
    three directions with Crank–Nicolson weights and Rannacher start-up after jumps (module
    docstring; [1], [2], [5]).

    Parameters
    ----------
    time_min : array_like
        Strictly increasing record times [min] (need not be uniform).
    retort_C : array_like
        Retort temperature at those times, linear in between [°C].
    initial_C : float or array_like
        Uniform initial temperature, or a field of shape ``(n, n, n)`` on the octant's nodes
        (x along the length, y the width, z the thickness; e.g. an earlier ``final_field_C``)
        [°C].
    diffusivity_m2_s : float
        Thermal diffusivity of the product [m²/s].
    length_m, width_m, thickness_m : float
        Inside dimensions [m].
    surface_htc_W_m2K : float, optional
        Surface heat transfer coefficient [W/(m² K)]; ``None``: surface at the retort
        temperature.
    thermal_conductivity_W_mK : float, optional
        Product thermal conductivity [W/(m K)]; required with ``surface_htc_W_m2K``.
    n : int or tuple of int, optional
        Nodes from the centre to the surface along each axis (>= 3); one number for all three.
    theta : float, optional
        Implicitness of the Douglas stages, in [0.5, 1] (0.5: Crank–Nicolson weights).
    max_step_min : float, optional
        Longest internal step [min]; default ``t_1/40``.
    jump_C : float or None, optional
        Retort change within one step that triggers a Rannacher start-up [°C]; also the
        largest retort change merged into one step. ``None`` turns the start-up off (plain
        Crank–Nicolson weights; for comparison only).

    Returns
    -------
    FDResult
        Cold-spot history [°C], final field ``(nx, ny, nz)`` [°C], ``{"x_m", "y_m", "z_m"}`` [m].

    Raises
    ------
    ModelInputError
        (a ``ModelError`` and a ``ValueError``) for a bad parameter or record.

    References
    ----------
    .. [1] J. Douglas, *Numer. Math.* 4 (1962) 41-63.
    .. [2] Hundsdorfer & Verwer, Springer, 2003, §IV.3.
    .. [5] R. Rannacher, *Numer. Math.* 43 (1984) 309-327.
    """
    t, r = _record(time_min, retort_C)
    alpha = _positive("diffusivity_m2_s", diffusivity_m2_s)
    sides = (("length_m", length_m), ("width_m", width_m), ("thickness_m", thickness_m))
    halves = [0.5 * _positive(name, value) for name, value in sides]
    counts = tuple(n) if isinstance(n, (tuple, list)) else (n, n, n)
    if len(counts) != 3:
        raise ModelInputError(f"n = {n!r}; expected an integer or three integers")
    counts = tuple(_nodes("n", c) for c in counts)
    theta = _theta(theta)
    h_over_k = _boundary(surface_htc_W_m2K, thermal_conductivity_W_mK)
    field = _initial_field(initial_C, counts)
    axes = [_axis(c, h, alpha, h_over_k, cylindrical=False) for c, h in zip(counts, halves)]
    time_constant_s = 1.0 / (alpha * sum(math.pi**2 / (2.0 * h) ** 2 for h in halves))
    cold, final = _run(t, r, axes, field, h_over_k is None, max_step_min,
                       time_constant_s, jump_C, theta)
    grid = {"x_m": axes[0].nodes_m, "y_m": axes[1].nodes_m, "z_m": axes[2].nodes_m}
    return FDResult(t, cold, final, grid)
