"""The one evaluation pipeline: case -> profile -> cold-spot prediction -> lethality -> spoilage
-> guidance.

CLI, TUI, reports and replay all call :func:`evaluate_case`; none computes physics on its own.
Internal units: °C and minutes.
"""

from __future__ import annotations

import functools
from dataclasses import replace
from typing import Any

import numpy as np

from deviation import ENGINE_VERSION
from deviation.errors import CaseError, RecordError
from deviation.evaluate.cold_spot import (
    ColdSpotModel,
    Delivered,
    cold_spot_model,
    cooling_time_min,
    deliver,
    filed_profile,
    scheduled_F_min,
)
from deviation.evaluate.output import ColdSpot, CycleOut, Evaluation, FlagOut, LowIntervalOut
from deviation.evaluate.whatif import (
    continue_as_filed,
    extension_to_target,
    gap_worst_case_F,
    monte_carlo,
    reprocess_as_filed,
)
from deviation.inputs import cycle
from deviation.inputs import logs as prof
from deviation.inputs.case import Case, LoadedCase, Process
from deviation.physics.lethality import general_method, lethal_rate
from deviation.physics.spoilage import (
    expected_nonsterile_containers,
    log_reductions,
    nonsterile_probability,
)

# ---------------------------------------------------------------------------------------------
# Output model


# ---------------------------------------------------------------------------------------------
# Cold-spot models


# ---------------------------------------------------------------------------------------------
# The pipeline


@functools.lru_cache(maxsize=64)
def _parse_cached(text: str, source: str, kind: str) -> prof.RetortProfile:
    """Parse a log once: re-evaluations (what-if, TUI refresh, replay) reuse the parsed record."""
    return prof.parse_log_text(text, source=source, kind=kind)


@functools.lru_cache(maxsize=1)
def default_rule_set():
    """The shipped rules, read once per process."""
    from deviation import guidance as rules_mod

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
        profile = filed_profile(process, start_C=dev.initial_temperature_C if start is None else start,
                                 come_up_min=come_up, hold_min=hold,
                                 cooling_min=cooling_time_min(process, model))
        profile = replace(profile, source="filed cycle + events" if events else "filed cycle")
    for i, ev in enumerate(events):
        if ev.kind == "temperature-low":
            try:
                profile = cycle.apply_temperature_low(profile, ev.start_min, ev.end_min, ev.temperature_C)
            except RecordError as exc:
                raise CaseError(f"deviation.events[{i}]: {exc.message}", source=loaded.source) from None
    return profile


def _is_running(profile: prof.RetortProfile, analysis: cycle.CycleAnalysis) -> bool:
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
        run = cycle.longest_run_at_or_above(profile, alt.process_temperature_C)
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
    analysis = cycle.analyse_cycle(
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
        ext_profile, cool_at = continue_as_filed(profile, process, analysis, model)
        projected = deliver(ext_profile, dev.initial_temperature_C, process, model,
                            conservative=conservative, cooling_start_min=cool_at).F_min
    extension, reason = (extension_to_target(loaded, profile, analysis, model, delivered, conservative, source,
                                    running) if what_if else (None, "not computed"))

    reprocess = (reprocess_as_filed(loaded, model, delivered.F_min, conservative, delivered.final_field_C)
                 if what_if else None)
    if uncertainty is None:
        uncertainty = dev.uncertainty is not None
    mc = None
    if uncertainty:
        from deviation.inputs.case import UncertaintySpec

        mc = monte_carlo(loaded, profile, analysis, model, dev.uncertainty or UncertaintySpec(),
                          conservative, source, delivered.F_min)

    # Lethality established / fully established.
    gap_over = analysis.max_gap_min > dev.record_gap_limit_min
    # A gap over the limit hides what the retort did. Lethality counts as established for safety
    # only if, even with no heat at all during every such gap, the botulinum reduction is met.
    established = True
    worst_gap_F = None
    if gap_over and source != "measured":
        worst_gap_F = gap_worst_case_F(profile, analysis, dev.record_gap_limit_min, loaded, model, conservative)
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
        from deviation import guidance as rules_mod  # the rules layer sits after the core

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


__all__ = ["evaluate_case", "evaluate_snapshot",
           "check_record", "default_rule_set"]
