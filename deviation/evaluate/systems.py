"""What each retort system's own critical factors show (21 CFR 113.40; 9 CFR 318.305).

- still steam (113.40(a)): the vent schedule, time and temperature; a schedule not met leaves
  air in the retort, and no heat model can credit the cycle then;
- water immersion (113.40(b)): the water level above the top layer (a layer out of the water is
  named), and the circulation;
- water spray and steam-air (113.40(g), other systems): the circulation;
- discontinuous agitating (113.40(e)): the rotation speed within its filed range;
- continuous systems (113.40(d), (f)): reel stops and slow reels (the containers each touched
  are worked out in :mod:`deviation.evaluate.continuous`).

Each reading comes from ``[[deviation.events]]`` or from a column of the retort log
(``water_level_above_top_mm``, ``rotation_rpm``, ``reel_speed_fraction``). Flags only; the rules
say what follows.
"""

from __future__ import annotations

import math

import numpy as np

from deviation.evaluate.output import FlagOut
from deviation.inputs.case import Case
from deviation.inputs.logs import RetortProfile


def _flag(code: str, message: str, **kw) -> FlagOut:
    return FlagOut(code=code, message=message, **kw)


def _column_intervals(profile: RetortProfile | None, column: str, bad) -> list[tuple[float, float, float]]:
    """Intervals (start, end, worst value) where a recorded column's readings are ``bad``.

    A bad reading counts from its time until the next good reading (or the end of the record):
    one reading does not show when the factor came back.
    """
    if profile is None or not profile.columns or column not in profile.columns:
        return []
    t, v = profile.time_min, profile.columns[column]
    have = ~np.isnan(v)
    t, v = t[have], v[have]
    out, start, worst = [], None, None
    for time, value in zip(t, v):
        if bad(value):
            if start is None:
                start, worst = float(time), float(value)
            else:
                worst = min(worst, float(value))
        elif start is not None:
            out.append((start, float(time), worst))
            start = None
    if start is not None:
        out.append((start, float(profile.time_min[-1]), worst))
    return out


def system_flags(case: Case, log: RetortProfile | None) -> tuple[list[FlagOut], dict]:
    """Flags of the retort system's own critical factors, and the facts the rules read."""
    system = case.process.system
    events = case.deviation.events
    flags: list[FlagOut] = []
    facts = {"vent_study_on_file": bool(system.vent_study_on_file) if system else False}
    kind = system.kind if system else "still-steam"

    for ev in events:
        if ev.kind == "venting" and system is not None and kind == "still-steam":
            short = ev.vent_time_min < system.vent_time_min
            cool = ev.vent_temperature_C < system.vent_temperature_C
            if short or cool:
                what = []
                if short:
                    what.append(f"vents open {ev.vent_time_min:g} min (filed: at least {system.vent_time_min:g})")
                if cool:
                    what.append(f"to {ev.vent_temperature_C:.1f} °C (filed: at least {system.vent_temperature_C:.1f} °C)")
                flags.append(_flag("vent-schedule-not-met",
                                   "Vent schedule not met: " + " and ".join(what) + ". Air left in the "
                                   "retort lowers the temperature where it collects; no heat model can credit "
                                   "the cycle unless a temperature distribution study on file covers it "
                                   "(21 CFR 113.40(a)(12)).", value=ev.vent_time_min))

    if kind == "water-immersion" and system is not None:
        filed = system.water_level_above_top_mm
        lows = [(ev.start_min, ev.end_min, ev.level_above_top_mm) for ev in events
                if ev.kind == "water-level" and ev.level_above_top_mm < filed]
        lows += _column_intervals(log, "water_level_above_top_mm", lambda v: v < filed)
        for start, end, level in lows:
            if level < 0.0:
                height = case.process.container.height_mm or case.process.container.thickness_mm or 1.0
                exposed = max(1, math.ceil(-level / height))
                if system.layers:
                    top = system.layers
                    names = (f"the top layer (layer {top} of {top})" if exposed == 1 else
                             f"the top {min(exposed, top)} layers (layers {max(top - exposed + 1, 1)} to "
                             f"{top} of {top})")
                else:
                    names = "the top layer" if exposed == 1 else f"the top {exposed} layers"
                flags.append(_flag(
                    "water-level-below-top-layer",
                    f"The water fell {-level:.0f} mm below the top layer of containers from {start:.1f} to "
                    f"{end:.1f} min: {names} {'was' if exposed == 1 else 'were'} out of the water. Identify "
                    "those containers and set them "
                    "aside; their lethality cannot be credited (FDA, Guide to Inspections of Low Acid Canned "
                    "Food Manufacturers, Part 2).", start_min=start, end_min=end, value=level))
            else:
                flags.append(_flag(
                    "water-level-low",
                    f"The water stood {level:.0f} mm above the top layer from {start:.1f} to {end:.1f} min, "
                    f"below the filed {filed:.0f} mm (21 CFR 113.40(b)).", start_min=start, end_min=end,
                    value=level))

    if kind in ("water-immersion", "water-spray", "steam-air"):
        for ev in events:
            if ev.kind == "circulation-loss":
                flags.append(_flag("circulation-loss",
                                   f"The circulation of the heating medium stopped from {ev.start_min:.1f} to "
                                   f"{ev.end_min:.1f} min: the temperature distribution the process was filed "
                                   "with is not shown for that time.", start_min=ev.start_min, end_min=ev.end_min))

    if kind == "agitating-batch" and system is not None:
        lo, hi = system.rotation_rpm_min, system.rotation_rpm_max
        spans = [(ev.start_min, ev.end_min, ev.rpm) for ev in events if ev.kind == "rotation"]
        spans += _column_intervals(log, "rotation_rpm", lambda v: not lo <= v <= hi)
        for start, end, rpm in spans:
            if rpm == 0.0:
                flags.append(_flag("rotation-stopped",
                                   f"The rotation stopped from {start:.1f} to {end:.1f} min: the heat "
                                   "penetration filed for an agitated container does not hold while it stands "
                                   "(21 CFR 113.40(e)).", start_min=start, end_min=end, value=0.0))
            elif not lo <= rpm <= hi:
                flags.append(_flag("rotation-out",
                                   f"The rotation ran at {rpm:g} rpm from {start:.1f} to {end:.1f} min, outside "
                                   f"the filed {lo:g} to {hi:g} rpm (21 CFR 113.40(e)).", start_min=start,
                                   end_min=end, value=rpm))

    if system is not None and system.continuous:
        for ev in events:
            if ev.kind == "reel-stop":
                flags.append(_flag("reel-stop",
                                   f"The {'reel' if kind == 'continuous-rotary' else 'conveyor'} stopped from "
                                   f"{ev.start_min:.1f} to {ev.end_min:.1f} min: the containers inside stayed "
                                   "longer, at whatever the shell temperature was (see the affected "
                                   "containers).", start_min=ev.start_min, end_min=ev.end_min))
            elif ev.kind == "reel-speed" and ev.speed_fraction < 1.0:
                flags.append(_flag("reel-speed-low",
                                   f"The {'reel' if kind == 'continuous-rotary' else 'conveyor'} ran at "
                                   f"{ev.speed_fraction:.0%} of the filed speed from {ev.start_min:.1f} to "
                                   f"{ev.end_min:.1f} min (21 CFR 113.40(d), (f)).", start_min=ev.start_min,
                                   end_min=ev.end_min, value=ev.speed_fraction))
    return flags, facts


def cold_zone(profile: RetortProfile, case: Case) -> RetortProfile:
    """The record lowered by the cold-zone offset of the temperature distribution test (the
    lethality is that of the retort's slowest-heating zone, not of the recorder's sensor)."""
    system = case.process.system
    if system is None or system.cold_zone_offset_C <= 0.0:
        return profile
    from dataclasses import replace

    return replace(profile, temperature_C=profile.temperature_C - system.cold_zone_offset_C,
                   source=profile.source + f" (cold zone, {system.cold_zone_offset_C:g} °C below the sensor)")


__all__ = ["cold_zone", "system_flags"]
