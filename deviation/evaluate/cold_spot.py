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


@dataclass(frozen=True)
class ColdSpotModel:
    """Step responses (fraction unaccomplished) of the cold spot for one process.

    ``fd`` is set for the finite-difference model: ``fd(time_min, retort_C, initial_C)`` returns
    the solver's result (cold spot and final field); ``heating`` is then ``None``.
    """

    name: str
    heating: Callable[[np.ndarray], np.ndarray] | None
    cooling: Callable[[np.ndarray], np.ndarray] | None
    fh_min: float
    fd: Callable[..., Any] | None = None


def _finite_difference_model(process: Process) -> ColdSpotModel:
    """Teixeira et al. (1969) finite differences, surface at the retort or with a Biot boundary."""
    from deviation.physics.heating import finite_difference as fdm

    hp, box = process.heat_penetration, process.container
    h_over_k = (hp.surface_htc_W_m2K / hp.thermal_conductivity_W_mK) if hp.surface_htc_W_m2K else None
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
                      surface_htc_W_m2K=hp.surface_htc_W_m2K,
                      thermal_conductivity_W_mK=hp.thermal_conductivity_W_mK, **dims)

    return ColdSpotModel("finite-difference", None, None, float(fh), fd=run)


def cold_spot_model(process: Process) -> ColdSpotModel:
    """Build the heat-penetration model named in ``[process.heat_penetration]``."""
    hp, box = process.heat_penetration, process.container
    if hp.model == "finite-difference":
        return _finite_difference_model(process)
    if hp.model == "conduction":
        if box.shape == "cylinder":
            radius_m, height_m = box.diameter_mm / 2000.0, box.height_mm / 1000.0
            alpha = hp.thermal_diffusivity_m2_s or conduction.diffusivity_from_fh_cylinder(
                hp.fh_min, radius_m, height_m)
            fh = hp.fh_min or conduction.fh_from_diffusivity_cylinder(alpha, radius_m, height_m)
            fn = functools.partial(conduction.cylinder_centre_unaccomplished,
                                   diffusivity_m2_s=alpha, radius_m=radius_m, height_m=height_m)
        else:
            dims = box.length_mm / 1000.0, box.width_mm / 1000.0, box.thickness_mm / 1000.0
            alpha = hp.thermal_diffusivity_m2_s or conduction.diffusivity_from_fh_brick(hp.fh_min, *dims)
            fh = hp.fh_min or conduction.fh_from_diffusivity_brick(alpha, *dims)
            fn = functools.partial(conduction.brick_centre_unaccomplished, diffusivity_m2_s=alpha,
                                   length_m=dims[0], width_m=dims[1], thickness_m=dims[2])
        return ColdSpotModel("conduction", fn, None, float(fh))
    if hp.model == "heating-curve":
        heat = functools.partial(heating_curve.step_unaccomplished, fh_min=hp.fh_min, jh=hp.jh)
        cool = None
        if hp.fc_min is not None:
            # jc defaults to 1 (no cooling lag): the cold spot then credits the least cooling lethality.
            cool = functools.partial(heating_curve.step_unaccomplished, fh_min=hp.fc_min, jh=hp.jc or 1.0)
        return ColdSpotModel("heating-curve", heat, cool, float(hp.fh_min))
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


def model_grid(profile: prof.RetortProfile, conservative: bool, cooling_start_min: float | None):
    """The uniform grid (from 0) the models run on, the retort on it, and steam-off on the grid."""
    t0 = float(profile.time_min[0])
    shifted = replace(profile, time_min=profile.time_min - t0)
    step = _grid_step(shifted.time_min)
    grid, retort = cycle.resample_uniform(shifted, step, conservative=conservative)
    start = None
    if cooling_start_min is not None:
        # Snap steam-off down to the grid, so the segment in which the retort starts to fall
        # responds with the cooling kernel wherever steam-off falls inside it.
        start = math.floor((cooling_start_min - t0) / step + 1e-9) * step
    return t0, grid, retort, start


def deliver(profile: prof.RetortProfile, initial_C: float, process: Process, model: ColdSpotModel,
            *, conservative: bool, cooling_start_min: float | None) -> Delivered:
    """Predict the cold spot for a retort profile and integrate its lethality (General Method)."""
    t0, grid, retort, start = model_grid(profile, conservative, cooling_start_min)
    field = None
    if model.fd is not None:
        result = model.fd(grid, retort, initial_C)
        cold, field = result.cold_spot_C, result.final_field_C
    else:
        cooling_kw = {}
        if model.cooling is not None and start is not None:
            cooling_kw = dict(cooling_unaccomplished=model.cooling, cooling_start_min=start)
        cold = superpose(grid, retort, initial_C, model.heating, **cooling_kw)
    F, cum = general_method(grid, cold, process.reference_temperature_C, process.z_C,
                            conservative=conservative)
    return Delivered(grid + t0, retort, cold, cum, float(F), field)


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
def _scheduled_F_cached(process_json: str, conservative: bool) -> float:
    process = Process.model_validate_json(process_json)
    model = cold_spot_model(process)
    return deliver(scheduled_profile(process, model), process.minimum_initial_temperature_C, process, model,
                   conservative=conservative,
                   cooling_start_min=process.come_up_time_min + process.process_time_min).F_min


def scheduled_F_min(process: Process, *, conservative: bool = False) -> float:
    """F [min] the model gives for the filed cycle as scheduled (cached per process)."""
    return _scheduled_F_cached(process.model_dump_json(), conservative)
