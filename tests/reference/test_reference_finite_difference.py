"""Finite-difference solver against the published Biot-number eigenvalue solutions.

With a surface heat transfer coefficient ``h`` (Robin boundary ``-k dT/dn = h (T_s - T_R)``),
a step in retort temperature gives at the centre (Carslaw & Jaeger, *Conduction of Heat in
Solids*, 2nd ed., 1959, §3.11 (slab) and §7.7 (cylinder), section numbers from memory; the same
series in Incropera & DeWitt, *Fundamentals of Heat and Mass Transfer*, §5.6):

- infinite slab of half-thickness L, ``Bi = hL/k``: ``S = Σ C_n exp(-λ_n² Fo)``,
  ``λ tan λ = Bi``, ``C_n = 4 sin λ_n / (2 λ_n + sin 2λ_n)``;
- infinite cylinder of radius R, ``Bi = hR/k``: ``λ J1(λ) / J0(λ) = Bi``,
  ``C_n = 2 J1(λ_n) / (λ_n (J0(λ_n)² + J1(λ_n)²))``;
- finite cylinder and brick: the product of these (product solution, same references).

The roots are found here independently with ``scipy.optimize.brentq`` and checked against
Incropera & DeWitt Table 5.1 (values from memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import j0, j1, jn_zeros

from deviation.physics.heating import conduction
from deviation.physics.heating.finite_difference import brick_fd, cylinder_fd

N_TERMS = 80


def slab_roots(biot, count=N_TERMS):
    """λ_n of ``λ sin λ = Bi cos λ``: one in each ``(nπ, nπ + π/2)``."""
    return np.array([
        brentq(lambda x: x * np.sin(x) - biot * np.cos(x), k * np.pi + 1e-12,
               k * np.pi + 0.5 * np.pi - 1e-12)
        for k in range(count)
    ])


def cylinder_roots(biot, count=N_TERMS):
    """λ_n of ``λ J1(λ) = Bi J0(λ)``: one between each zero of J1 (0 first) and of J0."""
    upper = jn_zeros(0, count)
    lower = np.concatenate([[0.0], jn_zeros(1, max(count - 1, 1))])[:count]
    return np.array([
        brentq(lambda x: x * j1(x) - biot * j0(x), lo + 1e-12, hi - 1e-12)
        for lo, hi in zip(lower, upper)
    ])


def slab_centre(fourier, biot):
    lam = slab_roots(biot)
    c = 4.0 * np.sin(lam) / (2.0 * lam + np.sin(2.0 * lam))
    return np.exp(-np.outer(fourier, lam**2)) @ c


def cylinder_centre(fourier, biot):
    lam = cylinder_roots(biot)
    c = 2.0 * j1(lam) / (lam * (j0(lam) ** 2 + j1(lam) ** 2))
    return np.exp(-np.outer(fourier, lam**2)) @ c


# Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, Table 5.1 (from memory):
# Bi: (plane wall ζ1, C1), (infinite cylinder ζ1, C1)
TABLE_5_1 = {
    0.1: ((0.3111, 1.0161), (0.4417, 1.0246)),
    1.0: ((0.8603, 1.1191), (1.2558, 1.2071)),
    10.0: ((1.4289, 1.2620), (2.1795, 1.5677)),
}


@pytest.mark.parametrize("biot", sorted(TABLE_5_1))
def test_first_eigenvalue_and_coefficient_match_table_5_1(biot):
    (wall_root, wall_c), (cyl_root, cyl_c) = TABLE_5_1[biot]
    lam = slab_roots(biot, 1)[0]
    mu = cylinder_roots(biot, 1)[0]
    # the table prints four decimals: agree to half a unit in the last place
    assert lam == pytest.approx(wall_root, abs=6e-5)
    assert 4.0 * np.sin(lam) / (2.0 * lam + np.sin(2.0 * lam)) == pytest.approx(wall_c, abs=6e-5)
    assert mu == pytest.approx(cyl_root, abs=6e-5)
    assert 2.0 * j1(mu) / (mu * (j0(mu) ** 2 + j1(mu) ** 2)) == pytest.approx(cyl_c, abs=6e-5)


RADIUS_M, HEIGHT_M = 0.0405, 0.111
ALPHA = conduction.diffusivity_from_fh_cylinder(40.0, RADIUS_M, HEIGHT_M)
K_W_MK = 0.5  # thermal conductivity of a moist food, order of magnitude (common practice)


@pytest.mark.parametrize("htc_W_m2K", [25.0, 250.0])
def test_finite_cylinder_biot_step_matches_product_solution(htc_W_m2K):
    """Product of the infinite-cylinder and slab Biot series (Carslaw & Jaeger; Incropera &
    DeWitt §5.6); Bi_r = 2.0 and 20, Bi_z = 2.8 and 28."""
    t = np.arange(0.0, 121.0, 1.0)
    s = (cylinder_centre(ALPHA * 60.0 * t / RADIUS_M**2, htc_W_m2K * RADIUS_M / K_W_MK)
         * slab_centre(ALPHA * 60.0 * t / (HEIGHT_M / 2) ** 2,
                       htc_W_m2K * (HEIGHT_M / 2) / K_W_MK))
    exact = 121.1 - (121.1 - 40.0) * s
    res = cylinder_fd(t, np.full_like(t, 121.1), initial_C=40.0, diffusivity_m2_s=ALPHA,
                      radius_m=RADIUS_M, height_m=HEIGHT_M, surface_htc_W_m2K=htc_W_m2K,
                      thermal_conductivity_W_mK=K_W_MK)
    # from 3 min (80 terms converge there); 0.1 °C: the default 26 x 33 grid's spatial error
    # (measured 0.023 °C at Bi_r = 2 and 0.074 °C at Bi_r = 20, 0.064 °C of it spatial: it
    # stays with 6-s steps; the Dirichlet series check on the same grid has 0.10 °C)
    assert np.max(np.abs(res.cold_spot_C - exact)[3:]) < 0.1


def test_brick_biot_step_matches_triple_slab_product():
    """Product of three slab Biot series (Carslaw & Jaeger; Incropera & DeWitt §5.6)."""
    sides = (0.12, 0.08, 0.035)
    htc = 100.0
    alpha = conduction.diffusivity_from_fh_brick(30.0, *sides)
    t = np.arange(0.0, 91.0, 1.0)
    s = np.ones_like(t)
    for side in sides:
        half = side / 2.0
        s = s * slab_centre(alpha * 60.0 * t / half**2, htc * half / K_W_MK)
    exact = 121.1 - (121.1 - 40.0) * s
    res = brick_fd(t, np.full_like(t, 121.1), initial_C=40.0, diffusivity_m2_s=alpha,
                   length_m=sides[0], width_m=sides[1], thickness_m=sides[2],
                   surface_htc_W_m2K=htc, thermal_conductivity_W_mK=K_W_MK, n=17)
    assert np.max(np.abs(res.cold_spot_C - exact)[3:]) < 0.06


def test_large_biot_approaches_the_dirichlet_series():
    """Bi -> infinity recovers the surface-at-retort series (Carslaw & Jaeger): at h = 1e6
    W/m²K (Bi ~ 8e4) the Robin solver matches the Dirichlet one to 0.01 °C."""
    t = np.arange(0.0, 61.0, 1.0)
    kw = dict(initial_C=40.0, diffusivity_m2_s=ALPHA, radius_m=RADIUS_M, height_m=HEIGHT_M)
    robin = cylinder_fd(t, np.full_like(t, 121.1), surface_htc_W_m2K=1e6,
                        thermal_conductivity_W_mK=K_W_MK, **kw)
    dirichlet = cylinder_fd(t, np.full_like(t, 121.1), **kw)
    assert np.max(np.abs(robin.cold_spot_C - dirichlet.cold_spot_C)) < 0.01
