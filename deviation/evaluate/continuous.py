"""Continuous systems in the evaluation: which containers a deviation touched, and their F.

A reel-and-spiral cooker or a hydrostatic tower (21 CFR 113.40(d), (f)) takes containers one
after another; a drop or a stop touches only those inside at the time, each for its own part of
its passage. :func:`deviation.physics.continuous.continuous_entries` gives every entry slot its
own F (a lower bound for every container in the slot); here the slots become the
``affected_containers`` intervals of the evaluation, each with its own guidance word, and the
worst container's history becomes the evaluation's cold spot.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Callable

import numpy as np

from deviation.errors import ModelError
from deviation.evaluate.cold_spot import ColdSpotModel, cooling_time_min, model_grid
from deviation.inputs.case import Case
from deviation.inputs.logs import RetortProfile
from deviation.physics import continuous as physics


@dataclass(frozen=True)
class StreamResult:
    entries: physics.ContinuousEntries  # every entry slot, on the grid's time axis
    t0_min: float  # the grid's origin on the record's axis
    worst_profile: RetortProfile  # the history the worst container saw (shell, then cooling)
    worst_entry_min: float
    worst_F_min: float  # the model's F of the worst slot, before the relative correction


def _speed(case: Case) -> tuple[list[float], list[float]]:
    """Change points of the conveyor's relative speed from the reel-stop and reel-speed events."""
    spans = sorted((ev.start_min, ev.end_min, 0.0 if ev.kind == "reel-stop" else ev.speed_fraction)
                   for ev in case.deviation.events if ev.kind in ("reel-stop", "reel-speed"))
    times, fractions = [0.0], [1.0]
    for start, end, fraction in spans:
        if start < times[-1]:
            raise ModelError(f"conveyor events overlap at {start:g} min; give each change once",
                             source="deviation.events")
        if start > times[-1] or fractions[-1] != 1.0:
            times.append(start)
            fractions.append(fraction)
        else:
            fractions[-1] = fraction
        times.append(end)
        fractions.append(1.0)
    return times, fractions


def _step_response(model: ColdSpotModel, span_min: float):
    """The model's cold-spot step response as a linear kernel (conduction, finite differences)."""
    if model.falling is not None:
        raise ModelError("a continuous system is evaluated container by container with a linear cold-spot "
                         "model: file model = \"conduction\" (or \"finite-difference\"); the heating-curve "
                         "model's bounding pair is not a convolution", source="process.heat_penetration.model")
    if model.fd is None:
        return model.heating
    t_tab = np.linspace(0.0, span_min, 4096)
    S_tab = 1.0 - np.asarray(model.fd(t_tab, np.ones_like(t_tab), 0.0).cold_spot_C, float)
    S_tab = np.minimum.accumulate(np.clip(S_tab, 0.0, 1.0))  # never rising again (the engine checks)
    return lambda t: np.interp(t, t_tab, S_tab, left=1.0)


def evaluate_stream(case: Case, profile: RetortProfile, model: ColdSpotModel, *,
                    conservative: bool) -> StreamResult:
    """Every entry slot's F on the shell record, and the worst container's own history."""
    process, dev = case.process, case.deviation
    system, stream = process.system, dev.stream
    t0, grid, shell = model_grid(profile, conservative)
    times, fractions = _speed(case)
    cooling = cooling_time_min(process, model)
    entries = physics.continuous_entries(
        grid, shell, residence_min=process.process_time_min, containers_per_min=system.containers_per_min(),
        entry_start_min=stream.entry_start_min - t0, entry_end_min=stream.entry_end_min - t0,
        unaccomplished=_step_response(model, float(grid[-1]) + cooling + 1.0),
        initial_C=dev.initial_temperature_C, cooling_C=process.cooling_water_temperature_C,
        cooling_min=cooling, process_temperature_C=process.process_temperature_C,
        conservative=conservative and profile.recorded, speed_change_min=tuple(max(t - t0, 0.0) for t in times),
        speed_fraction=tuple(fractions), reference_temperature_C=process.reference_temperature_C,
        z_C=process.z_C)
    i = int(np.argmin(entries.F_min))
    e, x = float(entries.entry_min[i]), float(entries.exit_min[i])
    inside = (grid >= e) & (grid <= x)
    t = np.concatenate([grid[inside] - e, [x - e + 1.0 / 60.0, x - e + cooling]])
    T = np.concatenate([shell[inside], [process.cooling_water_temperature_C] * 2])
    keep = np.concatenate([[True], np.diff(t) > 0])
    worst = RetortProfile(t[keep], T[keep], f"{profile.source}: the container entering at {e + t0:.2f} min",
                          None, recorded=False)
    return StreamResult(entries, t0, worst, e + t0, float(entries.F_min[i]))


def affected_containers(case: Case, result: StreamResult, word: Callable[[float], str],
                        scale: float) -> list[dict]:
    """The entry-time intervals: every container inside the shell at any moment of the deviation
    (with its own lowest F and guidance word), and the unaffected ranges before and after.

    ``word`` maps a slot's model F to its guidance word; ``scale`` is the headline's relative
    correction, applied to the F shown.
    """
    stream = case.deviation.stream
    t0 = result.t0_min
    first = datetime.fromisoformat(stream.first_entry) if stream.first_entry else None
    out = []
    for g in physics.group_entries(result.entries, word):
        start, end = g["entry_start_min"] + t0, g["entry_end_min"] + t0
        row = {"entry_start_min": start, "entry_end_min": end, "containers": int(g["containers"]),
               "min_F_min": float(g["min_F_min"]) * scale, "disposition": g["category"],
               "lowest_shell_C": g.get("lowest_shell_C"), "longest_residence_min": g.get("longest_residence_min"),
               "off_filed_speed": bool(g.get("off_filed_speed", False))}
        if first is not None:
            row["entry_start"] = (first + timedelta(minutes=start - stream.entry_start_min)).isoformat(timespec="seconds")
            row["entry_end"] = (first + timedelta(minutes=end - stream.entry_start_min)).isoformat(timespec="seconds")
        out.append(row)
    return out


__all__ = ["StreamResult", "affected_containers", "evaluate_stream"]
