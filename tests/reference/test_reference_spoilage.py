"""Spoilage and botulinum figures against published values and exact relations.

Sources: C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed. (1973): C. botulinum
D121.1 = 0.21 min, the 12D process F = 12 × 0.21 = 2.52 min; Poisson distribution of survivors
among containers (probability of no survivor e^-N).
"""

import math

import pytest

from deviation.physics.spoilage import (
    F_for_log_reductions,
    expected_nonsterile_containers,
    log_reductions,
    nonsterile_probability,
    survivors_per_container,
)


def test_twelve_d_botulinum():
    # Stumbo 1973: 12D with D121.1 = 0.21 min is 2.52 min
    assert F_for_log_reductions(12, 0.21) == pytest.approx(2.52, rel=1e-14)
    assert log_reductions(2.52, 0.21) == pytest.approx(12.0, rel=1e-14)
    # one spore per container through a 12D process: 1e-12 survivors per container (Stumbo 1973)
    assert survivors_per_container(2.52, 0.21, 1.0) == pytest.approx(1e-12, rel=1e-12)


def test_probability_one_expected_survivor_is_one_minus_inverse_e():
    # N = 1: P(at least one) = 1 - 1/e (Poisson)
    assert nonsterile_probability(0.0, 1.0, 1.0) == pytest.approx(1.0 - 1.0 / math.e, rel=1e-15)
    assert nonsterile_probability(3.0, 1.0, 1e3) == pytest.approx(1.0 - 1.0 / math.e, rel=1e-13)


def test_probability_tiny_n_equals_n():
    # 1 - e^-N = N (1 - N/2 + ...): for N = 1e-12 p = N to relative 5e-13 (exact series)
    p = nonsterile_probability(2.52, 0.21, 1.0)
    assert p == pytest.approx(1e-12, rel=1e-12)


def test_expected_nonsterile_containers_is_probability_times_lot():
    p = nonsterile_probability(5.0, 1.0, 10.0)  # N = 1e-4
    assert p == pytest.approx(-math.expm1(-1e-4), rel=1e-12)
    assert expected_nonsterile_containers(p, 20_000) == pytest.approx(p * 20_000, rel=1e-15)
