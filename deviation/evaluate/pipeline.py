"""The one evaluation pipeline: case -> profile -> cold-spot prediction -> lethality -> spoilage
-> guidance.

CLI, TUI, reports and replay all call :func:`evaluate_case`; none computes physics on its own.
Internal units: °C and minutes.
"""

from __future__ import annotations

import functools
import math
from dataclasses import replace
from typing import Any

import numpy as np

from deviation import ENGINE_VERSION
from deviation.errors import CaseError, RecordError
from deviation.evaluate import checks, systems
from deviation.evaluate.cold_spot import (
    ColdSpotModel,
    Delivered,
    F_of,
    cold_spot_model,
    cooling_time_min,
    deliver,
    filed_profile,
    scheduled_F_min,
)
from deviation.evaluate.continuous import affected_containers, evaluate_stream
from deviation.evaluate.output import ColdSpot, CycleOut, Evaluation, FlagOut, LowIntervalOut
from deviation.evaluate.whatif import (
    continue_as_filed,
    extension_to_target,
    gap_worst_profile,
    monte_carlo,
    reprocess_as_filed,
)
from deviation.guidance.vocabulary import INFORMATION_FLAG_CODES
from deviation.inputs import cycle
from deviation.inputs import logs as prof
from deviation.inputs.case import Case, LoadedCase, Process
from deviation.physics.lethality import general_method, lethal_rate
from deviation.physics.spoilage import (
    expected_nonsterile_containers,
    log10_nonsterile_probability,
    log_reductions,
    lot_nonsterile_probability,
    nonsterile_probability,
)

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


def build_retort_profile(loaded: LoadedCase, model: ColdSpotModel) -> tuple[prof.RetortProfile, list[FlagOut]]:
    """The retort profile and the instrument flags: the log if there is one (on the lower of the
    recorder and the temperature-indicating device), else the filed cycle, with the events laid
    over it."""
    case = loaded.case
    process, dev = case.process, case.deviation
    events = dev.events
    flags: list[FlagOut] = []
    if loaded.retort_log_text is not None:
        profile = _parse_cached(loaded.retort_log_text, loaded.retort_log_source or "retort log", "retort")
        profile, flags = checks.lower_instrument(profile)
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
    for i, start, end, low in _low_intervals(events, process, profile):
        try:
            profile = cycle.apply_temperature_low(profile, start, end, low)
        except RecordError as exc:
            raise CaseError(f"deviation.events[{i}]: {exc.message}", source=loaded.source) from None
    return profile, flags


def _low_intervals(events, process: Process, profile: prof.RetortProfile):
    """The low intervals the events show: each ``temperature-low`` as entered, and each
    ``reading`` below the process temperature from its time until the next reading at or above
    it (or the end of the record): one reading does not show when the retort came back."""
    out = [(i, ev.start_min, ev.end_min, ev.temperature_C) for i, ev in enumerate(events)
           if ev.kind == "temperature-low"]
    readings = sorted((ev.at_min, ev.temperature_C, i) for i, ev in enumerate(events) if ev.kind == "reading")
    PT = process.process_temperature_C
    end_of_record = float(profile.time_min[-1])
    at_PT = np.flatnonzero(profile.temperature_C >= PT - 1e-9)
    hold_start = float(profile.time_min[at_PT[0]]) if at_PT.size else end_of_record
    for k, (at, value, i) in enumerate(readings):
        # Below the process temperature during the come-up is the come-up, not a drop.
        if value >= PT or at > end_of_record or at < hold_start:
            continue
        later = [r for r in readings[k + 1:] if r[1] >= PT]
        until = min(later[0][0], end_of_record) if later else end_of_record
        lowest = min([value] + [r[1] for r in readings[k + 1:] if r[0] < until])
        if until > at:
            out.append((i, at, until, lowest))
    return out


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


# Flags that leave the lethality not fully established: the factor, the record or the model
# cannot be judged by lethality alone.
_NOT_FULLY_ESTABLISHED = {"critical-factor-out", "record-gap", "scheduled-F-below-target", "model-vs-filed",
                          "implausible-input", "circulation-loss", "rotation-out", "rotation-stopped",
                          "water-level-low"}

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


def _log10(x: float) -> float | None:
    return float(math.log10(x)) if x > 0.0 and math.isfinite(x) else None


def _spoilage(F: float, process: Process) -> tuple[float, float | None]:
    """Per-container nonsterile probability of a spoilage F, and its log10 (no underflow)."""
    m = process.microbiology
    p = float(nonsterile_probability(F, m.spoilage_D_min, m.spores_per_container))
    lp = float(log10_nonsterile_probability(F, m.spoilage_D_min, m.spores_per_container))
    return p, (lp if math.isfinite(lp) else None)


def _settings(rule_set):
    """The tolerances of the rule set in use (the defaults when guidance is not computed)."""
    from deviation.guidance import Settings

    if rule_set is None:
        return default_rule_set().settings
    return getattr(rule_set, "settings", None) or Settings()


def _measured(loaded: LoadedCase, process: Process, profile: prof.RetortProfile,
              conservative: bool, flags: list[FlagOut] | None = None) -> Delivered:
    """A measured cold-spot log, checked against the retort log and integrated as it is (the
    lower reading between samples by default, nothing credited across a gap over the limit)."""
    measured = _parse_cached(loaded.cold_spot_log_text, loaded.cold_spot_log_source or "cold-spot log",
                             "cold-spot")
    limit = loaded.case.deviation.record_gap_limit_min
    found = cycle.check_cold_spot_log(measured, profile, limit, loaded.case.deviation.initial_temperature_C)
    if flags is not None:
        flags += [FlagOut(code=f.code, message=f.message, start_min=f.start_min, end_min=f.end_min,
                          value=f.value) for f in found]
    gaps = [(f.start_min, f.end_min) for f in found] if conservative else []
    F, cum = general_method(measured.time_min, measured.temperature_C, process.reference_temperature_C,
                            process.z_C, conservative=conservative, uncredited_min=gaps)
    retort_on = np.interp(measured.time_min, profile.time_min, profile.temperature_C)
    return Delivered(measured.time_min, retort_on, measured.temperature_C, cum, float(F), None, conservative)



def _broken_curve_out(model, delivered) -> dict[str, Any] | None:
    """The broken heating curve's parameters and when the product broke on this record."""
    if model.broken is None:
        return None
    b = model.broken
    earliest, latest = delivered.break_window_min or (None, None)
    return {"fh_min": b["fh_min"], "fh2_min": b["fh2_min"], "break_min": b["break_min"],
            "break_temperature_C": b["break_temperature_C"],
            "earliest_break_min": earliest, "latest_break_min": latest}

def evaluate_case(loaded: LoadedCase, *, conservative: bool = True, rule_set=None,
                  what_if: bool = True, uncertainty: bool | None = None) -> Evaluation:
    """Evaluate one deviation case.

    Parameters
    ----------
    loaded : the case with its log contents.
    conservative : read a recorded log between two readings at the lower one, and never credit
        more than the lower lethal rate between samples (the default: a single reading does not
        show the temperature stayed above a value between readings, FDA Guide to Inspections of
        Low Acid Canned Food Manufacturers, Part 1). False reads straight lines between readings.
    rule_set : guidance rules (``deviation.guidance.RuleSet``); ``None`` loads the defaults;
        ``False`` computes no guidance (the default tolerances apply).
    what_if : compute the extension to target (a root search: a few more model runs) and the
        lethality of a full reprocess.
    uncertainty : run the Monte Carlo estimate (``None``: when the case has ``[deviation.uncertainty]``).

    Notes
    -----
    The headline ``delivered_F_min`` is the figure the guidance stands on: the model's F on the
    record (lower reading between samples, no heat credited across a gap over the limit), and,
    when the model over-predicts the filed process, the lower relative F (model F x target /
    scheduled F). The friendlier interpolated figure stands beside it, labelled.
    """
    case = loaded.case
    process, dev = case.process, case.deviation
    model = cold_spot_model(process)
    PT = process.process_temperature_C
    micro = process.microbiology
    settings = _settings(rule_set)

    profile, instrument_flags = build_retort_profile(loaded, model)
    analysis = cycle.analyse_cycle(
        profile,
        process_temperature_C=PT,
        process_time_min=process.process_time_min,
        come_up_time_min=process.come_up_time_min,
        initial_temperature_C=dev.initial_temperature_C,
        minimum_initial_temperature_C=process.minimum_initial_temperature_C,
        gap_limit_min=dev.record_gap_limit_min,
    )
    continuous = process.system is not None and process.system.continuous
    # A continuous shell is brought up before production and holds while containers pass: its
    # record has no come-up, hold or cooling of a container's own (each one's are worked out below).
    skip = {"long-come-up", "short-hold", "record-ends-before-cooling"} if continuous else set()
    flags = [FlagOut(code=f.code, message=f.message, start_min=f.start_min, end_min=f.end_min, value=f.value)
             for f in analysis.flags if f.code not in skip] + instrument_flags
    log = (_parse_cached(loaded.retort_log_text, loaded.retort_log_source or "retort log", "retort")
           if loaded.retort_log_text is not None else None)
    system_found, system_facts = systems.system_flags(case, log)
    flags += system_found
    # Deviations are read on the record as the recorder shows it; the lethality is that of the
    # retort's slowest-heating zone (the distribution test's offset below the sensor).
    record = profile
    profile = systems.cold_zone(profile, case)

    # The model's F on the record: the lower reading between samples, and across a gap over the
    # limit the worst case (no heat: the retort at the cooling-water temperature through a gap in
    # the hold, and no lethality credited in any such gap); beside it the interpolated figure
    # (straight lines, gaps credited as if the record had gone on).
    t_rec = profile.time_min
    gaps = [(float(t_rec[i]), float(t_rec[i + 1]))
            for i in np.flatnonzero(np.diff(t_rec) > dev.record_gap_limit_min)]
    worst = None
    stream = None
    if continuous:
        if loaded.cold_spot_log_text is not None:
            raise CaseError("a measured cold-spot log is one container's; a continuous system is evaluated "
                            "container by container from the shell's record (leave cold_spot_log out)",
                            source=loaded.source)
        worst = (gap_worst_profile(profile, analysis, dev.record_gap_limit_min, process.cooling_water_temperature_C)
                 if gaps else None)
        stream = evaluate_stream(case, worst or profile, model, conservative=conservative)
        delivered = deliver(stream.worst_profile, dev.initial_temperature_C, process, model, conservative=False)
        interpolated = delivered.F_min
        source = model.name
    elif loaded.cold_spot_log_text is not None:
        delivered = _measured(loaded, process, profile, conservative, flags)
        interpolated = delivered.F_min if not conservative else _measured(loaded, process, profile, False).F_min
        source = "measured"
    else:
        worst = (gap_worst_profile(profile, analysis, dev.record_gap_limit_min, process.cooling_water_temperature_C)
                 if gaps else None)
        delivered = deliver(worst or profile, dev.initial_temperature_C, process, model,
                            conservative=conservative, uncredited_min=gaps)
        interpolated = delivered.F_min
        if gaps or (conservative and profile.recorded):
            interpolated = deliver(profile, dev.initial_temperature_C, process, model, conservative=False).F_min
        source = model.name

    scheduled_F = scheduled_F_min(process)
    target = process.target_F_min
    z_label = "F0" if (process.z_C == 10.0 and process.reference_temperature_C == 121.1) else "F"
    if scheduled_F < target:
        flags.append(_flag("scheduled-F-below-target",
                           f"The model gives {z_label} {scheduled_F:.2f} min for the filed process as scheduled, "
                           f"below the filed target {target:.2f} min: it does not reproduce the "
                           "filed process, so the lethality computed here is not fully established.",
                           value=scheduled_F))
    flags += checks.model_vs_filed(scheduled_F, target, settings.model_vs_filed_tolerance, z_label)
    ball_F, ball_jh = checks.ball_formula_F(process, model)
    flags += checks.ball_flags(ball_F, ball_jh, scheduled_F, settings.ball_formula_tolerance, model)
    flags += checks.parameter_flags(process, model, settings.jh_theory_tolerance)
    flags += checks.surface_flags(process, model)

    # The headline: the relative F (the model's own error cancelled) where the model over-predicts
    # the filed process, never a figure above the model's own.
    # A continuous system's figure is its worst container's: the engine's slot bound, never above
    # that container's own F.
    model_F = min(stream.worst_F_min, delivered.F_min) if stream is not None else delivered.F_min
    relative_F = model_F * target / scheduled_F if source != "measured" else None
    scale = min(1.0, target / scheduled_F) if source != "measured" else 1.0
    if stream is not None:
        # A continuous system's nominal passage is the filed process, on the engine's own grid:
        # the relative correction is taken against it, which also cancels the grid's own error.
        scale = min(1.0, target / stream.entries.nominal_F_min)
        relative_F = model_F * target / stream.entries.nominal_F_min
    headline = model_F * scale
    if stream is not None:
        basis = (f"the worst container of the stream (entering at {stream.worst_entry_min:.2f} min), its own "
                 "history through the shell" + (f", x target / scheduled F ({target:.2f} / {scheduled_F:.2f})"
                                                if scale < 1.0 else ""))
    elif source == "measured":
        basis = "measured cold spot, General Method" + (" (lower reading between samples)" if conservative else "")
    else:
        reading = []
        if conservative and profile.recorded:
            reading.append("the lower reading between samples")
        if gaps:
            reading.append("no heat across the gaps over the limit")
        if model.broken is not None:
            reading.append(f"a broken heating curve, the product thickening at "
                           f"{model.broken['break_temperature_C']:.1f} °C")
        basis = "the model's F on the record" + (f" ({'; '.join(reading)})" if reading else "")
        if scale < 1.0:
            basis = (f"relative F: {basis} x target / scheduled F ({target:.2f} / {scheduled_F:.2f}), "
                     "because the model over-predicts the filed process")
    F0 = headline if z_label == "F0" else F_of(delivered, 121.1, 10.0) * scale
    m = micro
    spoil_z = m.spoilage_z_C if m.spoilage_z_C is not None else process.z_C
    spoil_ref = (m.spoilage_reference_temperature_C if m.spoilage_reference_temperature_C is not None
                 else process.reference_temperature_C)
    same_kinetics = spoil_z == process.z_C and spoil_ref == process.reference_temperature_C
    spoil_F = headline if same_kinetics else F_of(delivered, spoil_ref, spoil_z) * scale
    spoil_ratio = spoil_F / headline if headline > 0.0 else 1.0  # the filed figures at the same ratio
    F0_ratio = F0 / headline if headline > 0.0 else 1.0

    cf_flags, cf_rows = _critical_factor_flags(case)
    flags += cf_flags
    flags += _implausible_flags(case, record)
    # An alternate matters only when the scheduled process itself was missed on a time or
    # temperature factor; a cycle that met the scheduled process needs no alternate.
    missed = {f.code for f in analysis.flags} & _ALTERNATE_CAN_COVER
    alternates = _alternates(case, record, analysis.come_up_min) if missed and not continuous else []
    if alternates:
        a = alternates[0]
        flags.append(_flag("alternate-process-met",
                           f"The record holds at or above {a['process_temperature_C']:.1f} °C for "
                           f"{a['held_min']:.1f} min, meeting the filed alternate process "
                           f"({a['process_time_min']:.0f} min at {a['process_temperature_C']:.1f} °C)."))

    # Projection and what-if (only where the model predicts from the retort record), on the same
    # footing as the headline.
    running = _is_running(record, analysis) and not continuous
    projected = headline
    if running and source != "measured":
        ext_profile, _ = continue_as_filed(worst or profile, process, analysis, model)
        projected = deliver(ext_profile, dev.initial_temperature_C, process, model,
                            conservative=conservative, uncredited_min=gaps).F_min * scale
    if continuous:
        extension, reason = None, ("a continuous system: each entry has its own F (see the affected "
                                   "containers); there is no one hold to extend")
    else:
        extension, reason = (extension_to_target(loaded, worst or profile, analysis, model, delivered,
                                                 conservative, source, running, target_model_F_min=target / scale,
                                                 uncredited_min=gaps)
                             if what_if else (None, "not computed"))

    reprocess = (reprocess_as_filed(loaded, model, headline, conservative, delivered.final_field_C)
                 if what_if else None)
    if reprocess is not None and scale < 1.0 and reprocess.get("reprocess_F_min") is not None:
        reprocess["reprocess_F_min"] *= scale
        reprocess["total_F_with_reprocess_min"] = headline + reprocess["reprocess_F_min"]
    if uncertainty is None:
        uncertainty = dev.uncertainty is not None
    mc = None
    if uncertainty and continuous:
        mc = {"reason": "a continuous system: the Monte Carlo is not run container by container"}
    elif uncertainty and model.broken is not None and source != "measured":
        mc = {"reason": "a broken heating curve: the break is an event of the product (its temperature "
                        "and time move with every sample), so the Monte Carlo over fh and jh is not run"}
    elif uncertainty:
        from deviation.inputs.case import UncertaintySpec

        mc = monte_carlo(loaded, worst or profile, model, dev.uncertainty or UncertaintySpec(),
                         conservative, source, headline, F_scale=scale, spoilage=(F0_ratio, spoil_ratio))

    # Botulinum. A model that over-predicts the filed process beyond the tolerance is not trusted
    # on it: the relative F cancels the model's error only to first order (a faster model credits a
    # short hold relatively more than the filed cycle), so its F0 is judged against 12D with the
    # correction taken twice. Lethality established: a gap over the limit hides what the retort
    # did; the headline already takes no heat across it, and 12D must be met even so.
    required = micro.botulinum_log_reductions_required
    over = scheduled_F / target - 1.0 > settings.model_vs_filed_tolerance and source != "measured"
    F0_botulinum = F0 * scale if over else F0
    bot = float(log_reductions(F0_botulinum, micro.botulinum_D_min))
    if over:
        note = (f" For botulinum its F0 {F0:.2f} min counts only after the relative correction is taken "
                f"once more: {F0_botulinum:.2f} min ({bot:.1f} log reductions).")
        flags = [f.model_copy(update={"message": f.message + note}) if f.code == "model-vs-filed" else f
                 for f in flags]
        if bot < required:
            flags.append(_flag("botulinum-not-shown", "Botulinum safety is not shown with this model." + note,
                               value=F0_botulinum))
    established = not (gaps and bot < required)
    worst_F0 = F0 if worst is not None else None

    affected = None
    if stream is not None:
        twice = scale if over else 1.0

        def word(F_model: float) -> str:
            F = F_model * scale
            if F * F0_ratio * twice / micro.botulinum_D_min < required:
                return "reprocess-or-destroy"
            return "reprocess" if F < target else "evaluate"

        affected = affected_containers(case, stream, word, scale)
    codes = {f.code for f in flags}
    fully = established and not (codes & _NOT_FULLY_ESTABLISHED)

    p, lp = _spoilage(spoil_F, process)
    p_target, lp_target = _spoilage(target * spoil_ratio, process)
    p_sched, lp_sched = _spoilage(scheduled_F * scale * spoil_ratio, process)
    expected = float(expected_nonsterile_containers(p, dev.lot_size_containers))
    lot_P, lot_lP = (lot_nonsterile_probability(lp, dev.lot_size_containers) if lp is not None
                     else (0.0, None))
    deviation_codes = codes - INFORMATION_FLAG_CODES
    low = analysis.lowest_during_hold_C
    facts: dict[str, float | bool | str | None] = {
        "delivered_F_min": headline,
        "model_F_min": model_F,
        "relative_F_min": relative_F,
        "interpolated_F_min": interpolated,
        "F0_min": F0,
        "ball_formula_F_min": ball_F,
        "target_F_min": target,
        "scheduled_F_min": scheduled_F,
        "F_margin_min": headline - target,
        "botulinum_log_reductions": bot,
        "botulinum_log_reductions_required": micro.botulinum_log_reductions_required,
        "spoilage_probability": p,
        "target_spoilage_probability": p_target,
        "expected_nonsterile_containers": expected,
        "lot_nonsterile_probability": lot_P,
        # log10 twins: the reasons show a probability that underflowed from its exponent
        "log10_spoilage_probability": lp,
        "log10_target_spoilage_probability": lp_target,
        "log10_lot_nonsterile_probability": lot_lP if lot_lP is not None and math.isfinite(lot_lP) else None,
        "log10_expected_nonsterile_containers": (lp + math.log10(dev.lot_size_containers)) if lp is not None else None,
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
        "scheduled_F_ratio": scheduled_F / target,
        "degree_minutes_below_C_min": float(sum(i.degree_minutes_below for i in analysis.low_intervals)),
        "uncertainty_probability_below_target": mc.get("probability_below_target") if mc else None,
        "uncertainty_F_p05_min": mc.get("F_p05_min") if mc else None,
        "deviation_found": bool(deviation_codes),
        "covered_by_alternate": bool(alternates),
        "lethality_established": established,
        "lethality_fully_established": fully,
        "critical_factor_out": "critical-factor-out" in codes,
        "cycle_running": running,
        "measured_cold_spot": source == "measured",
        **system_facts,
        "gap_worst_case_F_min": worst_F0,
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
        delivered_F_min=headline,
        F_basis=basis,
        broken_curve=_broken_curve_out(model, delivered),
        model_F_min=model_F,
        relative_F_min=relative_F,
        interpolated_F_min=interpolated,
        F0_min=F0,
        ball_formula_F_min=ball_F,
        scheduled_F_min=scheduled_F,
        target_F_min=target,
        F_margin_min=headline - target,
        projected_F_min=projected,
        extension_to_target_min=extension,
        extension_reason=reason,
        reprocess_F_min=reprocess["reprocess_F_min"] if reprocess else None,
        total_F_with_reprocess_min=reprocess["total_F_with_reprocess_min"] if reprocess else None,
        reprocess=reprocess,
        uncertainty=mc,
        spoilage_probability=p,
        target_spoilage_probability=p_target,
        scheduled_spoilage_probability=p_sched,
        expected_nonsterile_containers=expected,
        log10_spoilage_probability=lp,
        log10_target_spoilage_probability=lp_target,
        log10_scheduled_spoilage_probability=lp_sched,
        log10_expected_nonsterile_containers=(lp + math.log10(dev.lot_size_containers)) if lp is not None else None,
        lot_nonsterile_probability=lot_P,
        log10_lot_nonsterile_probability=lot_lP if lot_lP is not None and math.isfinite(lot_lP) else None,
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
            retort_source=record.source,
            retort_sha256=record.sha256,
        ),
        facts=facts,
        guidance=guidance,
        cold_spot=ColdSpot(
            time_min=delivered.time_min.tolist(),
            retort_C=np.asarray(delivered.retort_C).tolist(),
            temperature_C=np.asarray(delivered.cold_spot_C).tolist(),
            lethal_rate=np.asarray(L).tolist(),
            cumulative_F_min=(np.asarray(delivered.cumulative_F_min) * scale).tolist(),
            source=source,
            cumulative_scale=scale,
        ),
        system=process.system.kind if process.system is not None else None,
        affected_containers=affected,
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
