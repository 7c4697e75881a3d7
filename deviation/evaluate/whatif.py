"""What-if answers: the rest of a running cycle as filed, the least extension that reaches the
target, a full reprocess, the worst case across record gaps, and the Monte Carlo spread."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from deviation.evaluate.cold_spot import (
    ColdSpotModel,
    Delivered,
    cooling_time_min,
    deliver,
    filed_profile,
    model_grid,
    scheduled_F_min,
)
from deviation.inputs import cycle
from deviation.inputs import logs as prof
from deviation.inputs.case import LoadedCase, Process
from deviation.physics.heating.heating_curve import bounding_kernels
from deviation.physics.spoilage import log10_nonsterile_probability, nonsterile_probability
from deviation.physics.uncertainty import lognormal_factors, sample_F, sample_F_bounding, summarise

# Longest extension searched for before giving up [min], and the step it is given in [min].
_EXTENSION_LIMIT_MIN = 600.0
_EXTENSION_STEP_MIN = 0.1
# Age resolution of the bounding superposition for the Monte Carlo samples of the heating-curve
# model (each sample runs on its own; 300 sampled ages instead of 2500 cut the time about five-fold
# and, every rounding widening a window, only lower F, which the nominal ratio then cancels).
_MC_MAX_AGES = 600
# ... and for the extension's root search: every F it tries is only lower, so the minutes it
# finds are never too few.
_SEARCH_MAX_AGES = 600


def continue_as_filed(profile: prof.RetortProfile, process: Process, analysis: cycle.CycleAnalysis,
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
                             profile.source + " + rest as filed", None, recorded=profile.recorded)
    return ext, hold_end


def insert_hold(profile: prof.RetortProfile, at_min: float, extra_min: float, PT: float) -> prof.RetortProfile:
    """Insert ``extra_min`` minutes at process temperature at time ``at_min`` (before cooling)."""
    t, T = profile.time_min, profile.temperature_C
    before = t <= at_min
    T_at = float(np.interp(at_min, t, T))
    new_t = np.concatenate([t[before], [at_min, at_min + extra_min], t[~before] + extra_min])
    new_T = np.concatenate([T[before], [max(T_at, PT), PT], T[~before]])
    keep = np.concatenate([[True], np.diff(new_t) > 0])
    return prof.RetortProfile(new_t[keep], new_T[keep], profile.source + " + extension", None,
                              recorded=profile.recorded)


def gap_worst_profile(profile: prof.RetortProfile, analysis: cycle.CycleAnalysis, limit_min: float,
                      cooling_water_C: float) -> prof.RetortProfile | None:
    """The record with every gap over the limit inside the hold read as no heat at all.

    A gap between recorder readings longer than the limit hides what the retort did; the
    process authority credits no lethality across it (FDA, Guide to Inspections of Low Acid
    Canned Food Manufacturers, Part 1: incomplete records). The retort is taken at the cooling
    water temperature through each such gap. Returns None when there is no such gap.
    """
    t, T = profile.time_min, profile.temperature_C
    if analysis.hold_start_min is None:
        return None
    gaps = np.flatnonzero(np.diff(t) > limit_min)
    hold_end = analysis.hold_end_min if analysis.hold_end_min is not None else t[-1]
    gaps = [i for i in gaps if t[i + 1] > analysis.hold_start_min and t[i] < hold_end]
    if not gaps:
        return None
    new_t, new_T, last = [], [], 0
    for i in gaps:
        new_t += [t[last:i + 1], [t[i] + 1e-3, t[i + 1] - 1e-3]]
        new_T += [T[last:i + 1], [cooling_water_C, cooling_water_C]]
        last = i + 1
    new_t.append(t[last:]); new_T.append(T[last:])
    return prof.RetortProfile(np.concatenate(new_t), np.concatenate(new_T),
                              profile.source + " (no heat across gaps)", None, recorded=profile.recorded)


def extension_to_target(loaded: LoadedCase, profile: prof.RetortProfile, analysis: cycle.CycleAnalysis,
                        model: ColdSpotModel, delivered: Delivered, conservative: bool,
                        source: str, running: bool, *, target_model_F_min: float,
                        uncredited_min=()) -> tuple[float | None, str | None]:
    """Least extra minutes at process temperature, added before cooling, that reach the target F.

    ``target_model_F_min`` is the model F that makes the headline F reach the filed target
    (the target itself, or more when the headline is the relative F of a model that
    over-predicts the filed process). F grows with extra time at process temperature: the least
    whole tenth of a minute that reaches the target is searched for (:func:`least_passing_step`)
    and is always one whose F was computed, so the answer is never too few minutes.
    """
    process, dev = loaded.case.process, loaded.case.deviation
    target = target_model_F_min
    if source == "measured":
        return None, "the cold spot is measured, not predicted: no model to extend"
    if analysis.hold_start_min is None and not running:
        return None, "the record never reached the process temperature: there is no hold to extend"

    def F_with(extra: float) -> float:
        if running:
            ext, _ = continue_as_filed(profile, process, analysis, model, extra_hold_min=extra)
        else:
            at = analysis.hold_end_min if analysis.hold_end_min is not None else float(profile.time_min[-1])
            ext = insert_hold(profile, at, extra, process.process_temperature_C) if extra else profile
        if extra and not running:  # an inserted hold moves every later gap along with the record
            later = [(a + extra, b + extra) if a >= at else (a, b) for a, b in uncredited_min]
        else:
            later = uncredited_min
        return deliver(ext, dev.initial_temperature_C, process, model, conservative=conservative,
                       uncredited_min=later, max_ages=_SEARCH_MAX_AGES).F_min - target

    # With nothing added, a finished cycle's F is the delivered F already computed.
    base = F_with(0.0) if running else delivered.F_min - target
    if base >= 0.0:
        return 0.0, None
    steps = least_passing_step(lambda k: F_with(k * _EXTENSION_STEP_MIN), base,
                               limit=round(_EXTENSION_LIMIT_MIN / _EXTENSION_STEP_MIN))
    if steps is None:
        return None, f"no extension up to {_EXTENSION_LIMIT_MIN:.0f} min reaches the target"
    return round(steps * _EXTENSION_STEP_MIN, 1), None


def least_passing_step(f, f0: float, *, limit: int, first: int = 50) -> int | None:
    """Least ``k`` in ``1..limit`` with ``f(k) >= 0``, for ``f`` non-decreasing with ``f(0) = f0 < 0``.

    The answer is always one where ``f`` was evaluated and passed, next to one where it failed
    (or ``k = 1``), so a reported extension is checked, never inferred. The bracket grows by
    secant extrapolation (``f`` is convex in added hold time while the cold spot still rises,
    so the secant overshoots the root and brackets it at once), then closes by false position
    on the integers (the Illinois variant: an end kept twice has its value halved), probing the
    estimate's neighbour each time, and bisects when three steps have not halved the bracket
    (the conservative reading makes F a little uneven, by up to a few hundredths of a minute),
    so even an uneven ``f`` takes at most about a hundred evaluations. Returns None when
    ``f(limit) < 0``. On the demo cases 4 to 7 evaluations (each a whole cold-spot prediction)
    where Brent's method with a check of its rounded root took 7 to 14.
    """
    seen: dict[int, float] = {0: f0}

    def F(k: int) -> float:
        if k not in seen:
            seen[k] = f(k)
        return seen[k]

    lo, hi = 0, min(first, limit)
    while F(hi) < 0.0:
        if hi >= limit:
            return None
        slope = (F(hi) - F(lo)) / (hi - lo)
        guess = hi - F(hi) / slope if slope > 0.0 else 4 * hi
        lo, hi = hi, min(limit, max(hi + 1, min(4 * hi, math.ceil(1.1 * guess))))
    # Illinois false position on the integers: the end kept twice has its value halved.
    f_lo, f_hi, kept, widths = F(lo), F(hi), 0, [hi - lo]
    while hi - lo > 1:
        if len(widths) > 3 and widths[-1] > widths[-4] // 2:  # three steps without halving
            k = (lo + hi) // 2
        else:
            x = lo - f_lo * (hi - lo) / (f_hi - f_lo)
            k = min(hi - 1, max(lo + 1, math.ceil(x)))
        if F(k) >= 0.0:
            hi, f_hi = k, F(k)
            kept = kept - 1 if kept < 0 else -1  # lo kept
            if kept <= -2:
                f_lo /= 2.0
            if k - 1 > lo:  # the estimate is usually right: its neighbour settles it
                if F(k - 1) < 0.0:
                    lo, f_lo = k - 1, F(k - 1)
                else:
                    hi, f_hi = k - 1, F(k - 1)
        else:
            lo, f_lo = k, F(k)
            kept = kept + 1 if kept > 0 else 1  # hi kept
            if kept >= 2:
                f_hi /= 2.0
            if k + 1 < hi:
                if F(k + 1) >= 0.0:
                    hi, f_hi = k + 1, F(k + 1)
                else:
                    lo, f_lo = k + 1, F(k + 1)
        widths.append(hi - lo)
    return hi


def monte_carlo(loaded: LoadedCase, profile: prof.RetortProfile, model: ColdSpotModel, spec,
                conservative: bool, source: str, delivered_F: float, *, F_scale: float = 1.0,
                spoilage: tuple[float, float] | None = None) -> dict[str, Any]:
    """Monte Carlo over fh (or diffusivity), jh, fc, jc, initial temperature and spores.

    ``F_scale`` is the headline's relative correction (1, or target / scheduled F when the model
    over-predicts the filed process), applied to every sample as to the headline.
    """
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
        fc_factor = lognormal_factors(rng, spec.fc_relative_sd, n)
        jc_factor = lognormal_factors(rng, spec.jc_relative_sd, n)
        initial = dev.initial_temperature_C + spec.initial_temperature_sd_C * rng.standard_normal(n)
        t0, grid, retort = model_grid(profile, conservative, model)
        hp = process.heat_penetration
        if model.name == "heating-curve":
            fh, jh = hp.fh_min * fh_factor, hp.jh * jh_factor
            fc = hp.fc_min * fc_factor if hp.fc_min is not None else None
            jc = (hp.jc if hp.jc is not None else 1.0) * jc_factor if hp.fc_min is not None else None
            # The bounding superposition runs sample by sample, at a coarser age resolution.

            def kernels(i):
                return bounding_kernels(fh[i], jh[i], None if fc is None else fc[i],
                                        None if jc is None else jc[i])

            cons = conservative and profile.recorded
            F = sample_F_bounding(grid, retort, initial, kernels,
                                  reference_temperature_C=process.reference_temperature_C, z_C=process.z_C,
                                  conservative=cons, max_ages=_MC_MAX_AGES)
            # Centre the spread on the model's own figure: the nominal parameters on this grid
            # against the model's F on the full grid.
            nominal = sample_F_bounding(grid, retort, np.array([dev.initial_temperature_C]),
                                        lambda i: bounding_kernels(hp.fh_min, hp.jh, hp.fc_min, hp.jc),
                                        reference_temperature_C=process.reference_temperature_C,
                                        z_C=process.z_C, conservative=cons, max_ages=_MC_MAX_AGES)[0]
            if nominal > 0.0:
                F = F * (delivered_F / F_scale) / nominal
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

            F = sample_F(grid, retort, initial, step, reference_temperature_C=process.reference_temperature_C,
                         z_C=process.z_C, conservative=conservative and profile.recorded)
        F = F_scale * F
    spores = micro.spores_per_container * 10.0 ** (spec.spores_log10_sd * rng.standard_normal(n))
    # Spoilage at the organism's own Tref and z: F scaled as the headline's spoilage F is.
    ratio = spoilage[1] if spoilage else 1.0
    p = nonsterile_probability(F * ratio, micro.spoilage_D_min, spores)
    log10_p = log10_nonsterile_probability(F * ratio, micro.spoilage_D_min, spores)
    out.update(summarise(F, np.asarray(p), target_F_min=process.target_F_min,
                         botulinum_D_min=micro.botulinum_D_min,
                         F0_ratio=spoilage[0] if spoilage else 1.0,
                         log10_spoilage_probability=np.asarray(log10_p)))
    return out


def reprocess_as_filed(loaded: LoadedCase, model: ColdSpotModel, delivered_F: float, conservative: bool,
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
        F = scheduled_F_min(process)
        return {"reprocess_F_min": F, "total_F_with_reprocess_min": delivered_F + F,
                "reprocess_from_temperature_C": process.minimum_initial_temperature_C,
                "reprocess_from": "the filed minimum initial temperature"}
    come_up_start = process.come_up_start_temperature_C
    profile = filed_profile(process, start_C=start_C if come_up_start is None else come_up_start,
                             come_up_min=process.come_up_time_min, hold_min=process.process_time_min,
                             cooling_min=cooling_time_min(process, model))
    F = deliver(profile, initial, process, model, conservative=conservative).F_min
    return {"reprocess_F_min": F, "total_F_with_reprocess_min": delivered_F + F,
            "reprocess_from_temperature_C": start_C, "reprocess_from": basis}
