"""The cold-spot model of a filed process and its run over a retort record (General Method F).

Builds the heat-penetration model named in ``[process.heat_penetration]`` from the pure physics
and runs it on a uniform grid; the filed cycle and its F are computed here too.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, replace
from typing import Any, Callable

import numpy as np

from deviation.errors import ModelError
from deviation.inputs import cycle
from deviation.inputs import logs as prof
from deviation.inputs.case import Process
from deviation.physics.heating import conduction, heating_curve
from deviation.physics.heating.superposition import superpose
from deviation.physics.lethality import general_method

# The finest and coarsest grid the cold-spot prediction runs on [min]: the recorder's own
# interval within these bounds (piecewise-linear superposition is exact between grid points).
_FINEST_STEP_MIN = 1.0 / 60.0
_COARSEST_STEP_MIN = 0.1
# Age resolution of the bounding heating-curve model: 1200 sampled ages hold F within 1 % of
# 2500 (only lower: every rounding widens a window) at half the time, which keeps a live watch
# and the floor screen within a recorder's interval.
_BOUNDING_MAX_AGES = 1200
# ... and of the broken heating curve's record model (four such superpositions a record): 600
# ages, only lower again; measured on the rice pudding demo: F0 3.654 against 3.663 min at
# 1200, in 48 ms instead of 91.
_BROKEN_MAX_AGES = 600


@dataclass(frozen=True)
class ColdSpotModel:
    """Step responses (fraction unaccomplished) of the cold spot for one process.

    ``heating`` answers every rise of the retort temperature and ``falling`` every fall (the
    bounding heating-curve model, where they differ); with ``falling`` None one linear kernel
    answers both (the conduction series, exact for a linear conduction model). ``fd`` is set for
    the finite-difference model: ``fd(time_min, retort_C, initial_C)`` returns the solver's
    result (cold spot and final field); ``heating`` is then ``None``.
    """

    name: str
    heating: Callable[[np.ndarray], np.ndarray] | None
    falling: Callable[[np.ndarray], np.ndarray] | None
    fh_min: float
    fd: Callable[..., Any] | None = None
    h_over_k_per_m: float | None = None  # the Biot boundary's h/k [1/m]; None: surface at the retort
    # A broken heating curve: the keyword arguments of ``heating_curve.broken_curve_cold_spot``
    # (the record model: the product breaks once, at a temperature), which ``deliver`` runs;
    # ``heating``/``falling`` are then the time-invariant pair, for no F on a record.
    broken: dict | None = None


def _h_over_k(process: Process) -> float | None:
    hp = process.heat_penetration
    if hp.surface_heat_transfer_W_m2K is None:
        return None
    return hp.surface_heat_transfer_W_m2K / hp.thermal_conductivity_W_mK


def _finite_difference_model(process: Process) -> ColdSpotModel:
    """Teixeira et al. (1969) finite differences, surface at the retort or with a Biot boundary."""
    from deviation.physics.heating import finite_difference as fdm

    hp, box = process.heat_penetration, process.container
    h_over_k = _h_over_k(process)
    if box.shape == "cylinder":
        radius_m, height_m = box.diameter_mm / 2000.0, box.height_mm / 1000.0
        rate_per_alpha = conduction.decay_rate_cylinder_s(1.0, radius_m, height_m, h_over_k)
        # 31 x 41 nodes: F within 0.3% of the series for the demo cans (26 x 33 gave -0.5%).
        dims = dict(radius_m=radius_m, height_m=height_m, nr=31, nz=41)
        solver = fdm.cylinder_fd
    else:
        dims = dict(length_m=box.length_mm / 1000.0, width_m=box.width_mm / 1000.0,
                    thickness_m=box.thickness_mm / 1000.0)
        rate_per_alpha = conduction.decay_rate_brick_s(1.0, *dims.values(), h_over_k)
        solver = fdm.brick_fd
    # fh = ln10 / (alpha * first-mode rate): with a finite h the eigenvalues come from Bi.
    alpha = hp.thermal_diffusivity_m2_s or math.log(10.0) / (hp.fh_min * 60.0 * rate_per_alpha)
    fh = hp.fh_min or math.log(10.0) / (alpha * rate_per_alpha) / 60.0

    def run(time_min, retort_C, initial_C):
        return solver(time_min, retort_C, initial_C=initial_C, diffusivity_m2_s=alpha,
                      surface_htc_W_m2K=hp.surface_heat_transfer_W_m2K,
                      thermal_conductivity_W_mK=hp.thermal_conductivity_W_mK, **dims)

    return ColdSpotModel("finite-difference", None, None, float(fh), fd=run, h_over_k_per_m=h_over_k)


def _broken_curve_model(process: Process) -> ColdSpotModel:
    """Ball's broken heating curve (Ball 1923; Stumbo 1973) read as an event of the product.

    The product breaks once, when its cold spot reaches the filed ``break_temperature_C`` (the
    heat penetration test's temperature at the break: required, never guessed, since the F moves
    either way with it).
    """
    hp = process.heat_penetration
    level = float(hp.break_temperature_C)
    rise, fall = heating_curve.bounding_kernels(hp.fh_min, hp.jh, hp.fc_min, hp.jc,
                                                fh2_min=hp.fh2_min, break_min=hp.break_min)
    broken = dict(fh_min=hp.fh_min, jh=hp.jh, fh2_min=hp.fh2_min, break_min=hp.break_min,
                  break_temperature_C=level, fc_min=hp.fc_min, jc=hp.jc)
    return ColdSpotModel("heating-curve", rise, fall, float(hp.fh_min), broken=broken)


def cold_spot_model(process: Process) -> ColdSpotModel:
    """Build the heat-penetration model named in ``[process.heat_penetration]``.

    - ``conduction``: the analytical centre series (Carslaw & Jaeger), surface at the retort
      temperature or, with ``surface_heat_transfer_W_m2K``, a Biot boundary; a filed fh (which
      already holds the surface's effect) is mapped to the diffusivity through the Biot
      eigenvalues, so the surface is not counted twice.
    - ``heating-curve``: Ball's parameters read as the bounding pair of step responses
      (:func:`deviation.physics.heating.heating_curve.bounding_kernels`): rises answered by
      Ball's lag form, falls by the fast two-stage form, so the cold spot never runs ahead of
      the product. With ``fh2_min`` and ``break_min``, Ball's broken heating curve: the product
      breaks once, at the filed break temperature, and never earlier than it could have
      (:func:`deviation.physics.heating.heating_curve.broken_curve_cold_spot`).
    - ``finite-difference``: Teixeira et al. (1969).
    """
    hp, box = process.heat_penetration, process.container
    if hp.model == "finite-difference":
        return _finite_difference_model(process)
    if hp.model == "conduction":
        h_over_k = _h_over_k(process)
        if box.shape == "cylinder":
            radius_m, height_m = box.diameter_mm / 2000.0, box.height_mm / 1000.0
            alpha = hp.thermal_diffusivity_m2_s or conduction.diffusivity_from_fh_cylinder(
                hp.fh_min, radius_m, height_m, h_over_k_per_m=h_over_k)
            fh = hp.fh_min or conduction.fh_from_diffusivity_cylinder(
                alpha, radius_m, height_m, h_over_k_per_m=h_over_k)
            fn = functools.partial(conduction.cylinder_centre_unaccomplished,
                                   diffusivity_m2_s=alpha, radius_m=radius_m, height_m=height_m,
                                   h_over_k_per_m=h_over_k)
        else:
            dims = box.length_mm / 1000.0, box.width_mm / 1000.0, box.thickness_mm / 1000.0
            alpha = hp.thermal_diffusivity_m2_s or conduction.diffusivity_from_fh_brick(
                hp.fh_min, *dims, h_over_k_per_m=h_over_k)
            fh = hp.fh_min or conduction.fh_from_diffusivity_brick(alpha, *dims, h_over_k_per_m=h_over_k)
            fn = functools.partial(conduction.brick_centre_unaccomplished, diffusivity_m2_s=alpha,
                                   length_m=dims[0], width_m=dims[1], thickness_m=dims[2],
                                   h_over_k_per_m=h_over_k)
        return ColdSpotModel("conduction", fn, None, float(fh), h_over_k_per_m=h_over_k)
    if hp.model == "heating-curve" and hp.fh2_min is not None:
        return _broken_curve_model(process)
    if hp.model == "heating-curve":
        rise, fall = heating_curve.bounding_kernels(hp.fh_min, hp.jh, hp.fc_min, hp.jc)
        return ColdSpotModel("heating-curve", rise, fall, float(hp.fh_min))
    raise ModelError(f"unknown heat-penetration model {hp.model!r}", source="process.heat_penetration.model")


def _grid_step(time_min: np.ndarray) -> float:
    dt = float(np.median(np.diff(time_min))) if time_min.size > 1 else _COARSEST_STEP_MIN
    return min(max(dt, _FINEST_STEP_MIN), _COARSEST_STEP_MIN)


@dataclass(frozen=True)
class Delivered:
    time_min: np.ndarray
    retort_C: np.ndarray
    cold_spot_C: np.ndarray
    cumulative_F_min: np.ndarray
    F_min: float
    final_field_C: np.ndarray | None = None  # finite-difference model only
    conservative: bool = False  # the lower reading between samples was taken
    uncredited_min: tuple = ()  # windows [min] in which no lethality was credited
    # A broken heating curve: (earliest, latest) time the product can have broken [min, record clock]
    break_window_min: tuple[float | None, float | None] | None = None


def model_grid(profile: prof.RetortProfile, conservative: bool, model: ColdSpotModel | None = None):
    """The uniform grid (from 0) the models run on and the retort on it.

    The recorder's own interval within 1 s and 0.1 min; the bounding heating-curve model (not a
    convolution: its cost grows with the grid) always runs on 0.1 min, far finer than any fh.

    ``conservative`` reads a *recorded* profile at the lower reading between samples (FDA, Guide
    to Inspections of Low Acid Canned Food Manufacturers, Part 1: a single reading does not show
    the temperature stayed above a value between readings); a profile built from the filed
    process is exact between its points and is read as it is.
    """
    t0 = float(profile.time_min[0])
    shifted = replace(profile, time_min=profile.time_min - t0, indicating_C=None)
    step = _COARSEST_STEP_MIN if model is not None and model.falling is not None else _grid_step(shifted.time_min)
    grid, retort = cycle.resample_uniform(shifted, step, conservative=conservative and profile.recorded)
    return t0, grid, retort


def deliver(profile: prof.RetortProfile, initial_C: float, process: Process, model: ColdSpotModel,
            *, conservative: bool, uncredited_min=(), max_ages: int | None = None) -> Delivered:
    """Predict the cold spot for a retort profile and integrate its lethality (General Method).

    ``uncredited_min``: time windows [min] in which no lethality is credited (gaps in the
    record longer than allowed). ``max_ages``: a coarser resolution of the bounding
    heating-curve model (faster, and only lower), for searches.
    """
    conservative = conservative and profile.recorded
    t0, grid, retort = model_grid(profile, conservative, model)
    field, window = None, None
    if model.broken is not None:
        found = heating_curve.broken_curve_cold_spot(grid, retort, initial_C, **model.broken,
                                                     max_ages=max_ages or _BROKEN_MAX_AGES)
        cold = found.cold_spot_C
        window = tuple(None if b is None else b + t0
                       for b in (found.earliest_break_min, found.latest_break_min))
    elif model.fd is not None:
        result = model.fd(grid, retort, initial_C)
        cold, field = result.cold_spot_C, result.final_field_C
    else:
        extra = {} if model.falling is None else {"max_ages": max_ages or _BOUNDING_MAX_AGES}
        cold = superpose(grid, retort, initial_C, model.heating, falling_unaccomplished=model.falling, **extra)
    F, cum = general_method(grid, cold, process.reference_temperature_C, process.z_C,
                            conservative=conservative,
                            uncredited_min=[(a - t0, b - t0) for a, b in uncredited_min])
    return Delivered(grid + t0, retort, cold, cum, float(F), field, conservative,
                     tuple(uncredited_min), window)


def F_of(delivered: Delivered, reference_temperature_C: float, z_C: float) -> float:
    """F [min] of the same cold-spot history at another Tref and z (General Method)."""
    return float(general_method(delivered.time_min, delivered.cold_spot_C, reference_temperature_C, z_C,
                                conservative=delivered.conservative,
                                uncredited_min=delivered.uncredited_min)[0])


def filed_profile(process: Process, *, start_C: float, come_up_min: float, hold_min: float,
                   cooling_min: float) -> prof.RetortProfile:
    return cycle.filed_cycle(
        process_temperature_C=process.process_temperature_C,
        come_up_time_min=come_up_min,
        process_time_min=hold_min,
        start_temperature_C=start_C,
        cooling_water_temperature_C=process.cooling_water_temperature_C,
        cooling_time_min=cooling_min,
    )


def cooling_time_min(process: Process, model: ColdSpotModel) -> float:
    """Cooling duration credited for a filed cycle [min]: as filed, else max(30, 1.5 fh) (common practice)."""
    return float(process.cooling_time_min or max(30.0, 1.5 * model.fh_min))


def scheduled_profile(process: Process, model: ColdSpotModel) -> prof.RetortProfile:
    """The filed cycle: come-up ramp, hold at process temperature, cooling step."""
    start = process.come_up_start_temperature_C
    return filed_profile(
        process,
        start_C=process.minimum_initial_temperature_C if start is None else start,
        come_up_min=process.come_up_time_min,
        hold_min=process.process_time_min,
        cooling_min=cooling_time_min(process, model),
    )


@functools.lru_cache(maxsize=128)
def _scheduled_F_cached(process_json: str) -> float:
    process = Process.model_validate_json(process_json)
    model = cold_spot_model(process)
    return deliver(scheduled_profile(process, model), process.minimum_initial_temperature_C, process, model,
                   conservative=False).F_min


def scheduled_F_min(process: Process) -> float:
    """F [min] the model gives for the filed cycle as scheduled (cached per process).

    The filed cycle is built from the scheduled process, exact between its points, so the
    "lower reading between samples" of a recorded log does not apply to it.
    """
    return _scheduled_F_cached(process.model_dump_json())
