"""The one evaluation pipeline: case -> profile -> cold-spot prediction -> lethality -> spoilage
-> guidance.

CLI, TUI, reports and replay all call :func:`evaluate_case`; none computes physics on its own.
Internal units: °C and minutes.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, replace
from typing import Any, Callable

import numpy as np
from pydantic import BaseModel, Field
from scipy.optimize import brentq

from deviation import ENGINE_VERSION
from deviation.inputs import logs as prof
from deviation.inputs.case import Case, LoadedCase, Process
from deviation.errors import CaseError, ModelError, RecordError
from deviation.physics.heating import conduction, heating_curve
from deviation.physics.heating.superposition import superpose
from deviation.physics.lethality import general_method, lethal_rate
from deviation.physics.uncertainty import lognormal_factors, sample_F, summarise
from deviation.physics.spoilage import (
    expected_nonsterile_containers,
    log_reductions,
    nonsterile_probability,
)

CAUTION = (
    "This is guidance, not a release. The process authority decides, in writing, what becomes "
    "of the lot; local regulations govern."
)

# The finest and coarsest grid the cold-spot prediction runs on [min]: the recorder's own
# interval within these bounds (piecewise-linear superposition is exact between grid points).
_FINEST_STEP_MIN = 1.0 / 60.0
_COARSEST_STEP_MIN = 0.1
# Longest extension searched for before giving up [min].
_EXTENSION_LIMIT_MIN = 600.0


# ---------------------------------------------------------------------------------------------
# Output model


class FlagOut(BaseModel):
    code: str
    message: str
    start_min: float | None = None
    end_min: float | None = None
    value: float | None = None


class ColdSpot(BaseModel):
    time_min: list[float]
    retort_C: list[float]
    temperature_C: list[float]
    lethal_rate: list[float]
    cumulative_F_min: list[float]
    source: str = Field(description="'measured' or the model used")


class LowIntervalOut(BaseModel):
    start_min: float
    end_min: float
    lowest_C: float
    degree_minutes_below: float


class CycleOut(BaseModel):
    hold_start_min: float | None
    hold_end_min: float | None
    hold_duration_min: float | None
    come_up_min: float | None
    lowest_during_hold_C: float | None
    max_gap_min: float
    running: bool
    low_intervals: list[LowIntervalOut]
    retort_source: str
    retort_sha256: str | None


class Evaluation(BaseModel):
    """Everything one evaluation found; JSON keys are a contract (see README)."""

    engine_version: str
    process_id: str
    product: str
    lot: str
    retort_id: str
    model: str
    conservative: bool
    delivered_F_min: float
    scheduled_F_min: float
    target_F_min: float
    F_margin_min: float
    projected_F_min: float | None
    extension_to_target_min: float | None
    extension_reason: str | None
    reprocess_F_min: float | None
    total_F_with_reprocess_min: float | None
    reprocess: dict[str, Any] | None
    uncertainty: dict[str, Any] | None
    spoilage_probability: float
    target_spoilage_probability: float
    scheduled_spoilage_probability: float
    expected_nonsterile_containers: float
    botulinum_log_reductions: float
    botulinum_log_reductions_required: float
    lethality_established: bool
    lethality_fully_established: bool
    covered_by_alternate: bool
    alternate_met: list[dict[str, float]]
    critical_factors: list[dict[str, Any]]
    flags: list[FlagOut]
    cycle: CycleOut
    facts: dict[str, float | bool | str | None]
    guidance: dict[str, Any] | None
    caution: str = CAUTION
    cold_spot: ColdSpot
    case_sha256: str


# ---------------------------------------------------------------------------------------------
# Cold-spot models


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


def _grid(profile: prof.RetortProfile, conservative: bool, cooling_start_min: float | None):
    """The uniform grid (from 0) the models run on, the retort on it, and steam-off on the grid."""
    t0 = float(profile.time_min[0])
    shifted = replace(profile, time_min=profile.time_min - t0)
    step = _grid_step(shifted.time_min)
    grid, retort = prof.resample_uniform(shifted, step, conservative=conservative)
    start = None
    if cooling_start_min is not None:
        # Snap steam-off down to the grid, so the segment in which the retort starts to fall
        # responds with the cooling kernel wherever steam-off falls inside it.
        start = math.floor((cooling_start_min - t0) / step + 1e-9) * step
    return t0, grid, retort, start


def deliver(profile: prof.RetortProfile, initial_C: float, process: Process, model: ColdSpotModel,
            *, conservative: bool, cooling_start_min: float | None) -> Delivered:
    """Predict the cold spot for a retort profile and integrate its lethality (General Method)."""
    t0, grid, retort, start = _grid(profile, conservative, cooling_start_min)
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


def _filed_profile(process: Process, *, start_C: float, come_up_min: float, hold_min: float,
                   cooling_min: float) -> prof.RetortProfile:
    return prof.filed_cycle(
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
    return _filed_profile(
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


def _continue_as_filed(profile: prof.RetortProfile, process: Process, analysis: prof.CycleAnalysis,
                       model: ColdSpotModel, extra_hold_min: float = 0.0) -> tuple[prof.RetortProfile, float]:
    """The record so far, then the rest of the filed cycle from its last point.

    Returns the extended profile and the time cooling starts [min].
    """
    t, T = profile.time_min, profile.temperature_C
    t_end, T_end = float(t[-1]), float(T[-1])
    PT = process.process_temperature_C
    parts_t, parts_T = [t], [T]
    now = t_end
    if analysis.hold_start_min is None:
        # Still coming up: ramp to process temperature over what is left of the filed come-up
        # (at least one minute), then the whole hold.
        ramp = max(process.come_up_time_min - t_end, 1.0)
        now += ramp
        parts_t.append([now]); parts_T.append([PT])
        hold_left = process.process_time_min
    else:
        if T_end < PT:
            now += 1.0 / 60.0
            parts_t.append([now]); parts_T.append([PT])
        hold_left = max(process.process_time_min - (t_end - analysis.hold_start_min), 0.0)
    hold_end = now + hold_left + extra_hold_min
    if hold_end > now:
        parts_t.append([hold_end]); parts_T.append([PT])
    cool = cooling_time_min(process, model)
    parts_t.append([hold_end + 1.0 / 60.0, hold_end + cool])
    parts_T.append([process.cooling_water_temperature_C] * 2)
    ext = prof.RetortProfile(np.concatenate([np.asarray(p, float) for p in parts_t]),
                             np.concatenate([np.asarray(p, float) for p in parts_T]),
                             profile.source + " + rest as filed", None)
    return ext, hold_end


def _insert_hold(profile: prof.RetortProfile, at_min: float, extra_min: float, PT: float) -> prof.RetortProfile:
    """Insert ``extra_min`` minutes at process temperature at time ``at_min`` (before cooling)."""
    t, T = profile.time_min, profile.temperature_C
    before = t <= at_min
    T_at = float(np.interp(at_min, t, T))
    new_t = np.concatenate([t[before], [at_min, at_min + extra_min], t[~before] + extra_min])
    new_T = np.concatenate([T[before], [max(T_at, PT), PT], T[~before]])
    keep = np.concatenate([[True], np.diff(new_t) > 0])
    return prof.RetortProfile(new_t[keep], new_T[keep], profile.source + " + extension", None)


# ---------------------------------------------------------------------------------------------
# The pipeline


@functools.lru_cache(maxsize=64)
def _parse_cached(text: str, source: str, kind: str) -> prof.RetortProfile:
    """Parse a log once: re-evaluations (what-if, TUI refresh, replay) reuse the parsed record."""
    return prof.parse_log_text(text, source=source, kind=kind)


@functools.lru_cache(maxsize=1)
def default_rule_set():
    """The shipped rules, read once per process."""
    from deviation.guidance import rules as rules_mod

    return rules_mod.load_rule_set([])


def build_retort_profile(loaded: LoadedCase, model: ColdSpotModel) -> prof.RetortProfile:
    """The retort profile: the log if there is one, else the filed cycle with the events laid over it."""
    case = loaded.case
    process, dev = case.process, case.deviation
    events = dev.events
    if loaded.retort_log_text is not None:
        profile = _parse_cached(loaded.retort_log_text, loaded.retort_log_source or "retort log", "retort")
    else:
        come_up = process.come_up_time_min
        hold = process.process_time_min
        for ev in events:
            if ev.kind == "come-up-time":
                come_up = ev.come_up_time_min
            elif ev.kind == "hold-time":
                hold = ev.process_time_min
        start = process.come_up_start_temperature_C
        profile = _filed_profile(process, start_C=dev.initial_temperature_C if start is None else start,
                                 come_up_min=come_up, hold_min=hold,
                                 cooling_min=cooling_time_min(process, model))
        profile = replace(profile, source="filed cycle + events" if events else "filed cycle")
    for i, ev in enumerate(events):
        if ev.kind == "temperature-low":
            try:
                profile = prof.apply_temperature_low(profile, ev.start_min, ev.end_min, ev.temperature_C)
            except RecordError as exc:
                raise CaseError(f"deviation.events[{i}]: {exc.message}", source=loaded.source) from None
    return profile


def _is_running(profile: prof.RetortProfile, analysis: prof.CycleAnalysis) -> bool:
    """The record stops while the cycle still runs: at the hold, or still rising towards it."""
    if analysis.ends_before_cooling:
        return True
    T = profile.temperature_C
    return analysis.hold_start_min is None and bool(T[-1] >= np.max(T))


def _flag(code: str, message: str, **kw) -> FlagOut:
    return FlagOut(code=code, message=message, **kw)


def _critical_factor_flags(case: Case) -> tuple[list[FlagOut], list[dict[str, Any]]]:
    filed = {f.name.strip().lower(): f for f in case.process.critical_factors}
    flags, rows = [], []
    for reading in case.deviation.critical_factor_readings:
        factor = filed[reading.name.strip().lower()]
        out = (factor.min is not None and reading.value < factor.min) or (
            factor.max is not None and reading.value > factor.max)
        rows.append({"name": factor.name, "unit": factor.unit, "value": reading.value,
                     "min": factor.min, "max": factor.max, "out": bool(out)})
        if out:
            limit = (f"at least {factor.min:g}" if factor.min is not None and reading.value < factor.min
                     else f"at most {factor.max:g}")
            flags.append(_flag("critical-factor-out",
                               f"Critical factor '{factor.name}' read {reading.value:g} {factor.unit}".rstrip()
                               + f"; the scheduled process requires {limit} {factor.unit}".rstrip()
                               + ". Lethality alone cannot judge this factor.", value=reading.value))
    return flags, rows


def _implausible_flags(case: Case, profile: prof.RetortProfile) -> list[FlagOut]:
    process, dev = case.process, case.deviation
    PT = process.process_temperature_C
    out = []
    if dev.initial_temperature_C >= PT:
        out.append(_flag("implausible-input",
                         f"Initial temperature {dev.initial_temperature_C:.1f} °C is at or above the process "
                         f"temperature {PT:.1f} °C: check the entry.", value=dev.initial_temperature_C))
    top = float(np.max(profile.temperature_C))
    if top > PT + 15.0:
        out.append(_flag("implausible-input",
                         f"Retort record reaches {top:.1f} °C, more than 15 °C above the process temperature "
                         f"{PT:.1f} °C: check the recorder and the units.", value=top))
    if abs(process.reference_temperature_C - PT) > 25.0:
        out.append(_flag("implausible-input",
                         f"Reference temperature {process.reference_temperature_C:.1f} °C is far from the process "
                         f"temperature {PT:.1f} °C: check Tref.", value=process.reference_temperature_C))
    return out


# Deviations of the scheduled process that a filed alternate (another temperature and time) can cover.
_ALTERNATE_CAN_COVER = {"temperature-low", "short-hold", "process-temperature-not-reached", "long-come-up"}


def _alternates(case: Case, profile: prof.RetortProfile, come_up_min: float | None) -> list[dict[str, float]]:
    """Filed alternate processes the recorded cycle satisfies (held continuously at or above)."""
    process, dev = case.process, case.deviation
    met = []
    for alt in process.alternate:
        run = prof.longest_run_at_or_above(profile, alt.process_temperature_C)
        if run is None:
            continue
        start, end = run
        min_it = alt.minimum_initial_temperature_C
        min_it = process.minimum_initial_temperature_C if min_it is None else min_it
        alt_come_up = process.come_up_time_min if alt.come_up_time_min is None else alt.come_up_time_min
        if end - start + 1e-9 >= alt.process_time_min and start <= alt_come_up + 1e-9 \
                and dev.initial_temperature_C >= min_it:
            met.append({"process_temperature_C": alt.process_temperature_C,
                        "process_time_min": alt.process_time_min, "held_min": end - start})
    return met


def _spoilage(F: float, process: Process) -> float:
    m = process.microbiology
    return float(nonsterile_probability(F, m.spoilage_D_min, m.spores_per_container))


def _gap_worst_case_F(profile: prof.RetortProfile, analysis: prof.CycleAnalysis, limit: float,
                      loaded: LoadedCase, model: ColdSpotModel, conservative: bool) -> float | None:
    """F when every over-limit gap inside the hold is read as no heat at all (cooling water)."""
    t, T = profile.time_min, profile.temperature_C
    if analysis.hold_start_min is None:
        return None
    gaps = np.flatnonzero(np.diff(t) > limit)
    hold_end = analysis.hold_end_min if analysis.hold_end_min is not None else t[-1]
    gaps = [i for i in gaps if t[i + 1] > analysis.hold_start_min and t[i] < hold_end]
    if not gaps:
        return None
    cold_C = loaded.case.process.cooling_water_temperature_C
    new_t, new_T, last = [], [], 0
    for i in gaps:
        new_t += [t[last:i + 1], [t[i] + 1e-3, t[i + 1] - 1e-3]]
        new_T += [T[last:i + 1], [cold_C, cold_C]]
        last = i + 1
    new_t.append(t[last:]); new_T.append(T[last:])
    worst = prof.RetortProfile(np.concatenate(new_t), np.concatenate(new_T), profile.source, None)
    d = deliver(worst, loaded.case.deviation.initial_temperature_C, loaded.case.process, model,
                conservative=conservative, cooling_start_min=analysis.hold_end_min)
    return d.F_min


def evaluate_case(loaded: LoadedCase, *, conservative: bool = False, rule_set=None,
                  what_if: bool = True, uncertainty: bool | None = None) -> Evaluation:
    """Evaluate one deviation case.

    Parameters
    ----------
    loaded : the case with its log contents.
    conservative : read the retort between two readings at the lower one, and never credit
        more than the lower lethal rate between samples.
    rule_set : guidance rules (``deviation.guidance.rules.RuleSet``); ``None`` loads the defaults.
    what_if : compute the extension to target (a root search: a few more model runs) and the
        lethality of a full reprocess.
    uncertainty : run the Monte Carlo estimate (``None``: when the case has ``[deviation.uncertainty]``).
    """
    case = loaded.case
    process, dev = case.process, case.deviation
    model = cold_spot_model(process)
    PT = process.process_temperature_C
    micro = process.microbiology

    profile = build_retort_profile(loaded, model)
    analysis = prof.analyse_cycle(
        profile,
        process_temperature_C=PT,
        process_time_min=process.process_time_min,
        come_up_time_min=process.come_up_time_min,
        initial_temperature_C=dev.initial_temperature_C,
        minimum_initial_temperature_C=process.minimum_initial_temperature_C,
        gap_limit_min=dev.record_gap_limit_min,
    )
    flags = [FlagOut(code=f.code, message=f.message, start_min=f.start_min, end_min=f.end_min, value=f.value)
             for f in analysis.flags]

    # Delivered lethality: measured cold spot integrated directly, else the model on the record.
    if loaded.cold_spot_log_text is not None:
        measured = _parse_cached(loaded.cold_spot_log_text, loaded.cold_spot_log_source or "cold-spot log",
                                 "cold-spot")
        F, cum = general_method(measured.time_min, measured.temperature_C, process.reference_temperature_C,
                                process.z_C, conservative=conservative)
        retort_on = np.interp(measured.time_min, profile.time_min, profile.temperature_C)
        delivered = Delivered(measured.time_min, retort_on, measured.temperature_C, cum, float(F))
        source = "measured"
    else:
        delivered = deliver(profile, dev.initial_temperature_C, process, model,
                            conservative=conservative, cooling_start_min=analysis.hold_end_min)
        source = model.name

    scheduled_F = scheduled_F_min(process, conservative=conservative)
    if scheduled_F < process.target_F_min:
        flags.append(_flag("scheduled-F-below-target",
                           f"The model gives F0 {scheduled_F:.2f} min for the filed process as scheduled, "
                           f"below the filed target {process.target_F_min:.2f} min: it does not reproduce the "
                           "filed process, so the lethality computed here is not fully established.",
                           value=scheduled_F))
    cf_flags, cf_rows = _critical_factor_flags(case)
    flags += cf_flags
    flags += _implausible_flags(case, profile)
    # An alternate matters only when the scheduled process itself was missed on a time or
    # temperature factor; a cycle that met the scheduled process needs no alternate.
    missed = {f.code for f in analysis.flags} & _ALTERNATE_CAN_COVER
    alternates = _alternates(case, profile, analysis.come_up_min) if missed else []
    if alternates:
        a = alternates[0]
        flags.append(_flag("alternate-process-met",
                           f"The record holds at or above {a['process_temperature_C']:.1f} °C for "
                           f"{a['held_min']:.1f} min, meeting the filed alternate process "
                           f"({a['process_time_min']:.0f} min at {a['process_temperature_C']:.1f} °C)."))

    # Projection and what-if (only where the model predicts from the retort record).
    running = _is_running(profile, analysis)
    projected = delivered.F_min
    if running and source != "measured":
        ext_profile, cool_at = _continue_as_filed(profile, process, analysis, model)
        projected = deliver(ext_profile, dev.initial_temperature_C, process, model,
                            conservative=conservative, cooling_start_min=cool_at).F_min
    extension, reason = (_extension(loaded, profile, analysis, model, delivered, conservative, source,
                                    running) if what_if else (None, "not computed"))

    reprocess = (_reprocess(loaded, model, delivered.F_min, conservative, delivered.final_field_C)
                 if what_if else None)
    if uncertainty is None:
        uncertainty = dev.uncertainty is not None
    mc = None
    if uncertainty:
        from deviation.inputs.case import UncertaintySpec

        mc = _monte_carlo(loaded, profile, analysis, model, dev.uncertainty or UncertaintySpec(),
                          conservative, source, delivered.F_min)

    # Lethality established / fully established.
    gap_over = analysis.max_gap_min > dev.record_gap_limit_min
    # A gap over the limit hides what the retort did. Lethality counts as established for safety
    # only if, even with no heat at all during every such gap, the botulinum reduction is met.
    established = True
    worst_gap_F = None
    if gap_over and source != "measured":
        worst_gap_F = _gap_worst_case_F(profile, analysis, dev.record_gap_limit_min, loaded, model, conservative)
        if worst_gap_F is not None and (log_reductions(worst_gap_F, micro.botulinum_D_min)
                                        < micro.botulinum_log_reductions_required):
            established = False
    codes = {f.code for f in flags}
    fully = established and not (codes & {"critical-factor-out", "record-gap", "scheduled-F-below-target",
                                          "implausible-input"})

    p = _spoilage(delivered.F_min, process)
    bot = float(log_reductions(delivered.F_min, micro.botulinum_D_min))
    deviation_codes = codes - {"alternate-process-met"}
    low = analysis.lowest_during_hold_C
    facts: dict[str, float | bool | str | None] = {
        "delivered_F_min": delivered.F_min,
        "target_F_min": process.target_F_min,
        "scheduled_F_min": scheduled_F,
        "F_margin_min": delivered.F_min - process.target_F_min,
        "botulinum_log_reductions": bot,
        "botulinum_log_reductions_required": micro.botulinum_log_reductions_required,
        "spoilage_probability": p,
        "target_spoilage_probability": _spoilage(process.target_F_min, process),
        "expected_nonsterile_containers": float(expected_nonsterile_containers(p, dev.lot_size_containers)),
        "lot_size_containers": float(dev.lot_size_containers),
        "max_record_gap_min": analysis.max_gap_min,
        "record_gap_limit_min": dev.record_gap_limit_min,
        "lowest_retort_during_hold_C": low,
        "process_temperature_C": PT,
        "temperature_drop_C": max(PT - low, 0.0) if low is not None else None,
        "hold_deficit_min": (max(process.process_time_min - analysis.hold_duration_min, 0.0)
                             if analysis.hold_duration_min is not None and not analysis.ends_before_cooling
                             else None),
        "come_up_excess_min": (max(analysis.come_up_min - process.come_up_time_min, 0.0)
                               if analysis.come_up_min is not None else None),
        "initial_temperature_deficit_C": max(process.minimum_initial_temperature_C - dev.initial_temperature_C, 0.0),
        "scheduled_F_ratio": scheduled_F / process.target_F_min,
        "degree_minutes_below_C_min": float(sum(i.degree_minutes_below for i in analysis.low_intervals)),
        "deviation_found": bool(deviation_codes),
        "covered_by_alternate": bool(alternates),
        "lethality_established": established,
        "lethality_fully_established": fully,
        "critical_factor_out": "critical-factor-out" in codes,
        "cycle_running": running,
        "measured_cold_spot": source == "measured",
        "gap_worst_case_F_min": worst_gap_F,
        # Text for reasons only (rules cannot compare on it): the factors out, with their limits.
        "critical_factors_out": "; ".join(
            f"{r['name']} {r['value']:g} {r['unit']} ("
            + (f"min {r['min']:g}" if r["min"] is not None and r["value"] < r["min"] else f"max {r['max']:g}")
            + f" {r['unit']})" for r in cf_rows if r["out"]) or None,
    }
    guidance = None
    if rule_set is not False:
        from deviation.guidance import rules as rules_mod  # the rules layer sits after the core

        rs = rule_set if rule_set is not None else default_rule_set()
        guidance = rules_mod.evaluate_guidance(rs, facts, [f.code for f in flags]).model_dump(mode="json")

    L = lethal_rate(delivered.cold_spot_C, process.reference_temperature_C, process.z_C)
    return Evaluation(
        engine_version=ENGINE_VERSION,
        process_id=process.id,
        product=process.product,
        lot=dev.lot,
        retort_id=dev.retort_id,
        model=source,
        conservative=conservative,
        delivered_F_min=delivered.F_min,
        scheduled_F_min=scheduled_F,
        target_F_min=process.target_F_min,
        F_margin_min=delivered.F_min - process.target_F_min,
        projected_F_min=projected,
        extension_to_target_min=extension,
        extension_reason=reason,
        reprocess_F_min=reprocess["reprocess_F_min"] if reprocess else None,
        total_F_with_reprocess_min=reprocess["total_F_with_reprocess_min"] if reprocess else None,
        reprocess=reprocess,
        uncertainty=mc,
        spoilage_probability=p,
        target_spoilage_probability=facts["target_spoilage_probability"],
        scheduled_spoilage_probability=_spoilage(scheduled_F, process),
        expected_nonsterile_containers=facts["expected_nonsterile_containers"],
        botulinum_log_reductions=bot,
        botulinum_log_reductions_required=micro.botulinum_log_reductions_required,
        lethality_established=established,
        lethality_fully_established=fully,
        covered_by_alternate=bool(alternates),
        alternate_met=alternates,
        critical_factors=cf_rows,
        flags=flags,
        cycle=CycleOut(
            hold_start_min=analysis.hold_start_min,
            hold_end_min=analysis.hold_end_min,
            hold_duration_min=analysis.hold_duration_min,
            come_up_min=analysis.come_up_min,
            lowest_during_hold_C=analysis.lowest_during_hold_C,
            max_gap_min=analysis.max_gap_min,
            running=running,
            low_intervals=[LowIntervalOut(start_min=i.start_min, end_min=i.end_min, lowest_C=i.lowest_C,
                                          degree_minutes_below=i.degree_minutes_below)
                           for i in analysis.low_intervals],
            retort_source=profile.source,
            retort_sha256=profile.sha256,
        ),
        facts=facts,
        guidance=guidance,
        cold_spot=ColdSpot(
            time_min=delivered.time_min.tolist(),
            retort_C=np.asarray(delivered.retort_C).tolist(),
            temperature_C=np.asarray(delivered.cold_spot_C).tolist(),
            lethal_rate=np.asarray(L).tolist(),
            cumulative_F_min=np.asarray(delivered.cumulative_F_min).tolist(),
            source=source,
        ),
        case_sha256=loaded.sha256,
    )


def _extension(loaded: LoadedCase, profile: prof.RetortProfile, analysis: prof.CycleAnalysis,
               model: ColdSpotModel, delivered: Delivered, conservative: bool,
               source: str, running: bool) -> tuple[float | None, str | None]:
    """Least extra minutes at process temperature, added before cooling, that reach the target F.

    Root finding (Brent's method) on F(extra) - target; F grows with extra time at process
    temperature, so the root is unique.
    """
    process, dev = loaded.case.process, loaded.case.deviation
    target = process.target_F_min
    if source == "measured":
        return None, "the cold spot is measured, not predicted: no model to extend"
    if analysis.hold_start_min is None and not running:
        return None, "the record never reached the process temperature: there is no hold to extend"

    def F_with(extra: float) -> float:
        if running:
            ext, cool_at = _continue_as_filed(profile, process, analysis, model, extra_hold_min=extra)
        else:
            at = analysis.hold_end_min if analysis.hold_end_min is not None else float(profile.time_min[-1])
            ext, cool_at = _insert_hold(profile, at, extra, process.process_temperature_C), at + extra
            if extra == 0.0:
                ext = profile
        return deliver(ext, dev.initial_temperature_C, process, model, conservative=conservative,
                       cooling_start_min=cool_at).F_min - target

    # With nothing added, a finished cycle's F is the delivered F already computed.
    base = F_with(0.0) if running else delivered.F_min - target
    if base >= 0.0:
        return 0.0, None
    hi = 5.0
    while F_with(hi) < 0.0:
        hi *= 2.0
        if hi > _EXTENSION_LIMIT_MIN:
            return None, f"no extension up to {_EXTENSION_LIMIT_MIN:.0f} min reaches the target"
    root = brentq(F_with, 0.0, hi, xtol=0.01)
    # Round up to the next 0.1 min: never report less time than the target needs.
    return math.ceil(root * 10.0 - 1e-9) / 10.0, None


def _monte_carlo(loaded: LoadedCase, profile: prof.RetortProfile, analysis: prof.CycleAnalysis,
                 model: ColdSpotModel, spec, conservative: bool, source: str,
                 delivered_F: float) -> dict[str, Any]:
    """Monte Carlo over fh (or diffusivity), jh, initial temperature and spores per container."""
    process, dev = loaded.case.process, loaded.case.deviation
    micro = process.microbiology
    n = spec.samples
    rng = np.random.default_rng(spec.seed)
    out: dict[str, Any] = {"samples": n, "seed": spec.seed, "spreads": spec.model_dump(exclude={"samples", "seed"})}
    if source == "measured":
        out["reason"] = "the cold spot is measured: only the spore load is uncertain"
        F = np.full(n, delivered_F)
    else:
        fh_factor = lognormal_factors(rng, spec.fh_relative_sd, n)
        jh_factor = lognormal_factors(rng, spec.jh_relative_sd, n)
        initial = dev.initial_temperature_C + spec.initial_temperature_sd_C * rng.standard_normal(n)
        t0, grid, retort, start = _grid(profile, conservative, analysis.hold_end_min)
        hp = process.heat_penetration
        if model.name == "heating-curve":
            fh = hp.fh_min * fh_factor
            jh = hp.jh * jh_factor

            def step(t2, rows):
                return np.minimum(1.0, jh[rows, None] * 10.0 ** (-t2 / fh[rows, None]))
        else:
            # Conduction: the step response depends on alpha*t only (at a fixed Biot number), and
            # fh is proportional to 1/alpha, so a sample with fh scaled by f has S(t / f).
            # Tabulate once, interpolate.
            t_tab = np.linspace(0.0, grid[-1] / fh_factor.min() + 1.0, 8192)
            if model.fd is not None:  # the solver's own unit-step response
                S_tab = 1.0 - np.asarray(model.fd(t_tab, np.ones_like(t_tab), 0.0).cold_spot_C, float)
            else:
                S_tab = np.asarray(model.heating(t_tab), float)
            scale = 1.0 / fh_factor

            def step(t2, rows):
                return np.interp(t2 * scale[rows, None], t_tab, S_tab)
        cooling = model.cooling if start is not None else None
        F = sample_F(grid, retort, initial, step, reference_temperature_C=process.reference_temperature_C,
                     z_C=process.z_C, conservative=conservative, cooling_step=cooling,
                     cooling_start_min=start if cooling is not None else None)
    spores = micro.spores_per_container * 10.0 ** (spec.spores_log10_sd * rng.standard_normal(n))
    p = nonsterile_probability(F, micro.spoilage_D_min, spores)
    out.update(summarise(F, np.asarray(p), target_F_min=process.target_F_min,
                         botulinum_D_min=micro.botulinum_D_min))
    return out


def _reprocess(loaded: LoadedCase, model: ColdSpotModel, delivered_F: float, conservative: bool,
               final_field_C: np.ndarray | None = None) -> dict[str, Any]:
    """F a full reprocess as filed adds, from a uniform product temperature, and the total.

    F values at the same Tref and z add. The reprocess starts from ``reprocess_from_temperature_C``
    when given, else from the filed minimum initial temperature (a reprocess must start from a
    re-established initial temperature), or from the field the finite-difference model left.
    """
    process, dev = loaded.case.process, loaded.case.deviation
    start_C = dev.reprocess_from_temperature_C
    initial = start_C
    basis = "deviation.reprocess_from_temperature_C"
    if start_C is None and final_field_C is not None:
        # The finite-difference model knows the uneven field the lot was left with.
        initial = final_field_C
        start_C = float(np.min(final_field_C))
        basis = "the field left by the finite-difference model at the end of the record (coldest node shown)"
    elif start_C is None:
        # From the filed minimum initial temperature a reprocess as filed is the filed cycle.
        F = scheduled_F_min(process, conservative=conservative)
        return {"reprocess_F_min": F, "total_F_with_reprocess_min": delivered_F + F,
                "reprocess_from_temperature_C": process.minimum_initial_temperature_C,
                "reprocess_from": "the filed minimum initial temperature"}
    come_up_start = process.come_up_start_temperature_C
    profile = _filed_profile(process, start_C=start_C if come_up_start is None else come_up_start,
                             come_up_min=process.come_up_time_min, hold_min=process.process_time_min,
                             cooling_min=cooling_time_min(process, model))
    F = deliver(profile, initial, process, model, conservative=conservative,
                cooling_start_min=process.come_up_time_min + process.process_time_min).F_min
    return {"reprocess_F_min": F, "total_F_with_reprocess_min": delivered_F + F,
            "reprocess_from_temperature_C": start_C, "reprocess_from": basis}


def evaluate_snapshot(snapshot: dict, **kw) -> Evaluation:
    """Evaluate a stored snapshot (replay): no file is read."""
    return evaluate_case(LoadedCase.from_snapshot(snapshot), **kw)


def check_record(loaded: LoadedCase) -> None:
    """Parse the logs of a case early, so bad input is reported before anything is stored."""
    # Through the evaluation's cache: the evaluation that follows does not parse them again.
    if loaded.retort_log_text is not None:
        _parse_cached(loaded.retort_log_text, loaded.retort_log_source or "retort log", "retort")
    if loaded.cold_spot_log_text is not None:
        _parse_cached(loaded.cold_spot_log_text, loaded.cold_spot_log_source or "cold-spot log", "cold-spot")


__all__ = ["Evaluation", "evaluate_case", "evaluate_snapshot", "cold_spot_model", "CAUTION",
           "RecordError", "check_record"]
