"""The cycle read from a retort record: the filed cycle built from the scheduled process, events
laid over it, the record resampled for the models, and the analysis against the scheduled
process (come-up, hold, drops below process temperature, gaps, initial temperature) with its
flags.

Conservative habits follow the FDA *Guide to Inspections of Low Acid Canned Food Manufacturers*
(Part 1): a single reading does not show the temperature stayed above a value between readings,
and the bottom of the recorder trace is what counts.

References
----------
.. [1] 21 CFR 113.40 and 21 CFR 113.100.
.. [2] U.S. FDA, *Guide to Inspections of Low Acid Canned Food Manufacturers*, Part 1.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from deviation.errors import RecordError
from deviation.inputs.logs import RetortProfile

__all__ = ["Flag", "LowInterval", "CycleAnalysis", "filed_cycle", "apply_temperature_low",
           "resample_uniform", "analyse_cycle", "longest_run_at_or_above", "check_cold_spot_log"]


# Differences of time below this are floating-point rounding, not a deviation [min] (6e-5 s).
_EPS_MIN = 1e-6


# Two times closer than this are the same breakpoint [min].
_SAME_TIME_MIN = 1e-9


@dataclass(frozen=True)
class Flag:
    """One finding about a cycle, in plain words for an operator.

    Parameters
    ----------
    code : str
        Kebab-case kind: ``temperature-low``, ``short-hold``, ``long-come-up``,
        ``low-initial-temperature``, ``record-gap``, ``process-temperature-not-reached``,
        ``record-ends-before-cooling``
    message : str
        What was found, with times [min] and readings [°C]
    start_min, end_min : float or None
        Interval the finding covers [min]
    value : float or None
        The figure that matters: lowest reading [°C], gap length [min], minutes short or over
        [min], degrees below [°C]
    """

    code: str
    message: str
    start_min: float | None = None
    end_min: float | None = None
    value: float | None = None


@dataclass(frozen=True)
class LowInterval:
    """An interval during the hold with the retort below process temperature.

    Parameters
    ----------
    start_min, end_min : float
        Interpolated crossings of the process temperature [min]
    lowest_C : float
        Lowest reading in the interval [°C]
    degree_minutes_below : float
        Integral of (process temperature - T)+ over the interval on the straight lines between
        readings (exact trapezoid with the crossing triangles) [°C·min]
    """

    start_min: float
    end_min: float
    lowest_C: float
    degree_minutes_below: float

    @property
    def duration_min(self) -> float:
        """Length of the interval [min]."""
        return self.end_min - self.start_min


@dataclass(frozen=True)
class CycleAnalysis:
    """What the record shows about one cycle against the scheduled process.

    Parameters
    ----------
    hold_start_min : float or None
        Time of the first reading at/above process temperature; None if never reached [min]
    hold_end_min : float or None
        Time of the last reading at/above process temperature (start of the final cooling) [min]
    come_up_min : float or None
        Come-up time, from the first row to the hold start [min]
    hold_duration_min : float or None
        ``hold_end_min - hold_start_min`` [min]
    low_intervals : list of LowInterval
        Intervals inside the hold with the retort below process temperature
    max_gap_min : float
        Longest time between consecutive readings [min]
    lowest_during_hold_C : float or None
        Lowest reading from hold start to hold end [°C]
    ends_before_cooling : bool
        The last reading is still at/above process temperature: the cycle may still be running
    flags : list of Flag
        Findings, in the order: initial temperature, process temperature not reached, come-up,
        drops (in time order), hold length or record end, gaps (in time order)
    """

    hold_start_min: float | None
    hold_end_min: float | None
    come_up_min: float | None
    hold_duration_min: float | None
    low_intervals: list[LowInterval]
    max_gap_min: float
    lowest_during_hold_C: float | None
    ends_before_cooling: bool
    flags: list[Flag]

    @property
    def codes(self) -> list[str]:
        """Codes of the flags, in order."""
        return [flag.code for flag in self.flags]


def filed_cycle(
    *,
    process_temperature_C: float,
    come_up_time_min: float,
    process_time_min: float,
    start_temperature_C: float,
    cooling_water_temperature_C: float,
    cooling_time_min: float,
    step_min: float = 1 / 60,
) -> RetortProfile:
    """Retort temperature of the cycle as filed in the scheduled process.

    A straight come-up ramp from the start temperature to the process temperature over the
    come-up time, the hold at process temperature for the process time, then a step to the
    cooling water temperature for the cooling time.

    Parameters
    ----------
    process_temperature_C : float
        Process temperature [°C]
    come_up_time_min : float
        Come-up time, steam on to process temperature; 0 starts at process temperature [min]
    process_time_min : float
        Process time (the hold), from the end of come-up [min]
    start_temperature_C : float
        Retort temperature at steam on [°C]
    cooling_water_temperature_C : float
        Cooling water temperature [°C]
    cooling_time_min : float
        Cooling time after the hold [min]
    step_min : float
        Grid step [min]; default 1 s

    Returns
    -------
    RetortProfile
        On the uniform grid ``k * step_min`` from 0, source ``"filed cycle"``

    Notes
    -----
    Phase boundaries are placed on the nearest grid point (at most half a step away; exact for
    times in whole seconds at the default step). The hold includes both its end points; the step
    to cooling water happens over the one grid step after the hold.
    """
    for name, value, low in (
        ("come_up_time_min", come_up_time_min, 0.0),
        ("cooling_time_min", cooling_time_min, 0.0),
    ):
        if not (math.isfinite(value) and value >= low):
            raise ValueError(f"filed_cycle: {name} must be 0 or more, got {value!r}")
    for name, value in (("process_time_min", process_time_min), ("step_min", step_min)):
        if not (math.isfinite(value) and value > 0.0):
            raise ValueError(f"filed_cycle: {name} must be positive, got {value!r}")
    n_come_up = int(round(come_up_time_min / step_min))
    n_hold_end = n_come_up + max(1, int(round(process_time_min / step_min)))
    total_min = come_up_time_min + process_time_min + cooling_time_min
    n_total = max(n_hold_end, int(round(total_min / step_min)))
    index = np.arange(n_total + 1)
    time_min = index * step_min
    rise_C = process_temperature_C - start_temperature_C
    ramp_C = start_temperature_C + rise_C * index / max(n_come_up, 1)
    temperature_C = np.where(
        index < n_come_up,
        ramp_C,
        np.where(index <= n_hold_end, process_temperature_C, cooling_water_temperature_C),
    )
    return RetortProfile(
        time_min=time_min, temperature_C=temperature_C, source="filed cycle", sha256=None,
        recorded=False,
    )


def _with_breakpoints(
    profile: RetortProfile, times_min: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Profile arrays with linearly interpolated points added at ``times_min`` (unless present)."""
    t = profile.time_min
    T = profile.temperature_C
    nearest = np.clip(np.searchsorted(t, times_min), 1, t.size - 1)
    present = (np.abs(t[nearest] - times_min) <= _SAME_TIME_MIN) | (
        np.abs(t[nearest - 1] - times_min) <= _SAME_TIME_MIN
    )
    new = np.unique(times_min[~present])
    if new.size == 0:
        return t.copy(), T.copy()
    time_min = np.concatenate([t, new])
    temperature_C = np.concatenate([T, np.interp(new, t, T)])
    order = np.argsort(time_min, kind="stable")
    return time_min[order], temperature_C[order]


def apply_temperature_low(
    profile: RetortProfile, start_min: float, end_min: float, temperature_C: float
) -> RetortProfile:
    """Overlay a recorded temperature drop: the lowest reading holds for the whole interval.

    ``T = min(T, temperature_C)`` on ``[start_min, end_min]``, with breakpoints inserted at both
    ends so the interval is exact. Conservative: a process authority reads the bottom of the
    recorder trace [2]_.

    Parameters
    ----------
    profile : RetortProfile
        Retort temperature history
    start_min, end_min : float
        Interval of the drop, on the profile's time axis [min]
    temperature_C : float
        Lowest retort temperature recorded in the interval [°C]

    Returns
    -------
    RetortProfile
        Source ``"<source> + events"``; the digest of the base file is kept

    Raises
    ------
    RecordError
        The interval is reversed, not finite, or lies outside the record

    References
    ----------
    .. [2] U.S. FDA, *Guide to Inspections of Low Acid Canned Food Manufacturers*, Part 1.
    """
    t = profile.time_min
    if not (math.isfinite(start_min) and math.isfinite(end_min) and math.isfinite(temperature_C)):
        raise RecordError(
            f"temperature-low event from {start_min} to {end_min} min at {temperature_C} °C: "
            "expected finite numbers",
            source=profile.source,
        )
    if end_min < start_min:
        raise RecordError(
            f"temperature-low event ends ({end_min:g} min) before it starts ({start_min:g} min); "
            "expected start_min <= end_min",
            source=profile.source,
        )
    if end_min < t[0] - _SAME_TIME_MIN or start_min > t[-1] + _SAME_TIME_MIN:
        raise RecordError(
            f"temperature-low event from {start_min:g} to {end_min:g} min lies outside the record "
            f"({t[0]:g} to {t[-1]:g} min); expected an interval within the record",
            source=profile.source,
        )
    start = max(start_min, float(t[0]))
    end = min(end_min, float(t[-1]))
    time_min, temp_C = _with_breakpoints(profile, np.array([start, end]))
    inside = (time_min >= start - _SAME_TIME_MIN) & (time_min <= end + _SAME_TIME_MIN)
    temp_C = np.where(inside, np.minimum(temp_C, temperature_C), temp_C)
    source = profile.source
    if not source.endswith(" + events"):
        source = f"{source} + events"
    # The indicating device's readings are applied before events (the pipeline evaluates on
    # the lower of the two instruments first), so they are not carried past this point.
    return RetortProfile(
        time_min=time_min, temperature_C=temp_C, source=source, sha256=profile.sha256,
        recorded=profile.recorded,
    )


def resample_uniform(
    profile: RetortProfile, step_min: float, *, conservative: bool = False
) -> tuple[np.ndarray, np.ndarray]:
    """Temperature on a uniform time grid.

    Parameters
    ----------
    profile : RetortProfile
        Temperature history
    step_min : float
        Grid step [min]
    conservative : bool
        False: straight lines between readings. True: between two readings the lower of the two
        holds (a single reading does not show the temperature stayed above a value between
        readings [2]_), and each grid value is the lowest of that step function over the two grid
        steps next to it, so the straight lines through the grid values never rise above it and
        no dip between grid points is lost.

    Returns
    -------
    time_min : numpy.ndarray
        ``k * step_min`` from 0 up to the last time (a final partial step is dropped) [min]
    temperature_C : numpy.ndarray
        Temperature at each grid time [°C]; before the first reading the first reading holds

    References
    ----------
    .. [2] U.S. FDA, *Guide to Inspections of Low Acid Canned Food Manufacturers*, Part 1.
    """
    if not (math.isfinite(step_min) and step_min > 0.0):
        raise ValueError(f"resample_uniform: step_min must be positive, got {step_min!r}")
    t = profile.time_min
    T = profile.temperature_C
    n = int(math.floor(t[-1] / step_min + 1e-9))
    grid = np.arange(n + 1) * step_min
    if not conservative:
        return grid, np.interp(grid, t, T)
    lo = np.clip(np.searchsorted(t, grid, side="right") - 1, 0, t.size - 1)   # reading at/before
    hi = np.clip(np.searchsorted(t, grid, side="left"), 0, t.size - 1)        # reading at/after
    if n == 0:
        return grid, np.minimum(T[lo], T[hi])
    # Lowest value of the lower-of-two step function over each grid step [g_k, g_k+1]: the
    # readings from the one at/before g_k to the one at/after g_k+1.
    segment_min = np.minimum.reduceat(T, lo)[:-1]  # T[lo_k : lo_k+1], or just T[lo_k] when equal
    step_min_C = np.minimum(segment_min, np.minimum(T[lo[1:]], T[hi[1:]]))
    values = np.empty(n + 1)
    values[0] = step_min_C[0]
    values[-1] = step_min_C[-1]
    values[1:-1] = np.minimum(step_min_C[:-1], step_min_C[1:])
    return grid, values


def _positive_part_integral(t: np.ndarray, deficit: np.ndarray) -> np.ndarray:
    """Exact integral of max(deficit, 0) over each segment, deficit linear between points."""
    d0 = deficit[:-1]
    d1 = deficit[1:]
    dt = np.diff(t)
    both = 0.5 * (np.maximum(d0, 0.0) + np.maximum(d1, 0.0)) * dt
    mixed = (d0 > 0.0) != (d1 > 0.0)
    positive = np.maximum(np.maximum(d0, d1), 0.0)
    span = np.abs(d0 - d1)
    with np.errstate(divide="ignore", invalid="ignore"):
        triangle = np.where(span > 0.0, 0.5 * dt * positive * positive / span, 0.0)
    return np.where(mixed, triangle, both)


def analyse_cycle(
    profile: RetortProfile,
    *,
    process_temperature_C: float,
    process_time_min: float,
    come_up_time_min: float,
    initial_temperature_C: float | None = None,
    minimum_initial_temperature_C: float | None = None,
    gap_limit_min: float = 2.0,
    tolerance_C: float = 0.0,
) -> CycleAnalysis:
    """Compare a retort record with the scheduled process and flag every deviation it shows.

    Parameters
    ----------
    profile : RetortProfile
        Retort temperature history, time from steam on (first row) [min]
    process_temperature_C : float
        Process temperature of the scheduled process [°C]
    process_time_min : float
        Process time (hold) of the scheduled process [min]
    come_up_time_min : float
        Filed come-up time [min]
    initial_temperature_C : float or None
        Initial temperature of the product measured for this lot [°C]
    minimum_initial_temperature_C : float or None
        Minimum initial temperature of the scheduled process [°C]
    gap_limit_min : float
        Longest allowed time between readings [min]
    tolerance_C : float
        A reading at or above ``process_temperature_C - tolerance_C`` counts as at process
        temperature [°C]

    Returns
    -------
    CycleAnalysis

    Notes
    -----
    Choices, all conservative reading of the record [2]_:

    - Hold start and hold end are *reading times*: the first and the last reading at/above
      process temperature. The record does not show process temperature before the first such
      reading or after the last one, so come-up is never understated and the hold never
      overstated. The hold includes any drops inside it; each drop is flagged separately.
    - A drop inside the hold runs between the interpolated crossings of the process temperature
      on the straight lines between readings; its degree-minutes integrate (PT - T)+ exactly on
      those lines.
    - The record "ends before cooling" when its last reading is still at/above process
      temperature; then the hold so far and the minutes remaining are reported instead of a
      short hold.
    - With a tolerance, "below process temperature" means below ``process_temperature_C -
      tolerance_C`` and degree-minutes are counted from that threshold.
    - Differences under 1e-6 min are floating-point rounding and are not flagged.
    """
    if not math.isfinite(process_temperature_C):
        raise ValueError(
            f"analyse_cycle: process_temperature_C must be finite, got {process_temperature_C!r}"
        )
    if not (math.isfinite(process_time_min) and process_time_min > 0.0):
        raise ValueError(
            f"analyse_cycle: process_time_min must be positive, got {process_time_min!r}"
        )
    if not (math.isfinite(come_up_time_min) and come_up_time_min >= 0.0):
        raise ValueError(
            f"analyse_cycle: come_up_time_min must be 0 or more, got {come_up_time_min!r}"
        )
    if not (gap_limit_min > 0.0):
        raise ValueError(f"analyse_cycle: gap_limit_min must be positive, got {gap_limit_min!r}")
    if not (math.isfinite(tolerance_C) and tolerance_C >= 0.0):
        raise ValueError(f"analyse_cycle: tolerance_C must be 0 or more, got {tolerance_C!r}")

    t = profile.time_min
    T = profile.temperature_C
    threshold_C = process_temperature_C - tolerance_C
    pt_text = f"{process_temperature_C:.1f} °C"
    if tolerance_C:
        pt_text += f" (less {tolerance_C:g} °C tolerance)"
    flags: list[Flag] = []

    # Initial temperature.
    if initial_temperature_C is not None and minimum_initial_temperature_C is not None:
        short_C = minimum_initial_temperature_C - initial_temperature_C
        if short_C > 0.0:
            flags.append(Flag(
                "low-initial-temperature",
                f"initial temperature {initial_temperature_C:.1f} °C is {short_C:.1f} °C below "
                f"the minimum initial temperature {minimum_initial_temperature_C:.1f} °C of the "
                "scheduled process",
                value=short_C,
            ))

    # Gaps in the record.
    step = np.diff(t)
    max_gap_min = float(step.max())
    gaps = np.flatnonzero(step > gap_limit_min)
    gap_flags = [
        Flag(
            "record-gap",
            f"no reading from {a:.2f} to {b:.2f} min: a gap of {g:.2f} min, longer "
            f"than the {gap_limit_min:g} min allowed between readings",
            start_min=a, end_min=b, value=g,
        )
        for a, b, g in zip(t[gaps].tolist(), t[gaps + 1].tolist(), step[gaps].tolist())
    ]

    above = T >= threshold_C
    above_index = np.flatnonzero(above)
    if above_index.size == 0:
        highest = int(np.argmax(T))
        flags.append(Flag(
            "process-temperature-not-reached",
            f"the retort never reached the process temperature {pt_text}: highest reading "
            f"{T[highest]:.1f} °C at {t[highest]:.2f} min; no hold at process temperature is on "
            "the record",
            start_min=float(t[0]), end_min=float(t[-1]), value=float(T[highest]),
        ))
        flags.extend(gap_flags)
        return CycleAnalysis(
            hold_start_min=None, hold_end_min=None, come_up_min=None, hold_duration_min=None,
            low_intervals=[], max_gap_min=max_gap_min, lowest_during_hold_C=None,
            ends_before_cooling=False, flags=flags,
        )

    i0 = int(above_index[0])
    i1 = int(above_index[-1])
    hold_start = float(t[i0])
    hold_end = float(t[i1])
    come_up = hold_start - float(t[0])
    hold_duration = hold_end - hold_start
    lowest_during_hold = float(T[i0 : i1 + 1].min())

    if come_up > come_up_time_min + _EPS_MIN:
        over = come_up - come_up_time_min
        flags.append(Flag(
            "long-come-up",
            f"come-up took {come_up:.2f} min (first reading at/above {pt_text} at "
            f"{hold_start:.2f} min), {over:.2f} min longer than the filed come-up time "
            f"{come_up_time_min:g} min",
            start_min=float(t[0]), end_min=hold_start, value=over,
        ))

    # Drops below process temperature inside the hold: runs of readings below, each bounded by
    # readings at/above on both sides, so both crossings interpolate within a segment.
    low_intervals: list[LowInterval] = []
    below = ~above[i0 : i1 + 1]
    if below.any():
        edges = np.diff(below.astype(np.int8))
        first = np.flatnonzero(edges == 1) + 1 + i0   # first reading below in each run
        last = np.flatnonzero(edges == -1) + i0       # last reading below in each run
        deficit = threshold_C - T
        before, after = first - 1, last + 1
        start = t[before] + (t[first] - t[before]) * (
            -deficit[before] / (deficit[first] - deficit[before])
        )
        end = t[last] + (t[after] - t[last]) * (deficit[last] / (deficit[last] - deficit[after]))
        segment_area = _positive_part_integral(t, deficit)
        cumulative = np.concatenate([[0.0], np.cumsum(segment_area)])
        area = cumulative[last + 1] - cumulative[first - 1]  # segments first-1 .. last
        # Lowest reading of each run and its first time, without a loop over runs: the readings
        # below inside the hold are exactly the runs' members, in order.
        members = np.flatnonzero(below) + i0
        run_id = np.searchsorted(first, members, side="right") - 1
        lowest = np.minimum.reduceat(T[members], np.searchsorted(members, first))
        is_lowest = T[members] == lowest[run_id]
        lowest_at = members[is_lowest][np.unique(run_id[is_lowest], return_index=True)[1]]
        # Python floats format far faster than numpy scalars in the messages.
        rows = zip(
            start.tolist(), end.tolist(), lowest.tolist(), area.tolist(), t[lowest_at].tolist()
        )
        for s, e, low, dm, at in rows:
            low_intervals.append(LowInterval(s, e, low, dm))
            flags.append(Flag(
                "temperature-low",
                f"retort below the process temperature {pt_text} from {s:.2f} to {e:.2f} min "
                f"({e - s:.2f} min) during the hold; lowest reading {low:.1f} °C at {at:.2f} min; "
                f"{dm:.2f} °C·min below",
                start_min=s, end_min=e, value=low,
            ))

    ends_before_cooling = i1 == t.size - 1
    if ends_before_cooling:
        remaining = max(process_time_min - hold_duration, 0.0)
        if remaining > _EPS_MIN:
            rest = f"{remaining:.2f} min of the filed process time {process_time_min:g} min remain"
        else:
            rest = f"the filed process time {process_time_min:g} min is already covered"
        flags.append(Flag(
            "record-ends-before-cooling",
            f"the record ends at {t[-1]:.2f} min with the retort still at {T[-1]:.1f} °C "
            f"(at/above {pt_text}) and no cooling on the record: the cycle may still be running; "
            f"hold so far {hold_duration:.2f} min from {hold_start:.2f} min, {rest}",
            start_min=hold_start, end_min=hold_end, value=remaining,
        ))
    elif hold_duration < process_time_min - _EPS_MIN:
        short = process_time_min - hold_duration
        flags.append(Flag(
            "short-hold",
            f"hold at/above {pt_text} from {hold_start:.2f} to {hold_end:.2f} min is "
            f"{hold_duration:.2f} min, {short:.2f} min short of the filed process time "
            f"{process_time_min:g} min",
            start_min=hold_start, end_min=hold_end, value=short,
        ))

    flags.extend(gap_flags)
    return CycleAnalysis(
        hold_start_min=hold_start,
        hold_end_min=hold_end,
        come_up_min=come_up,
        hold_duration_min=hold_duration,
        low_intervals=low_intervals,
        max_gap_min=max_gap_min,
        lowest_during_hold_C=lowest_during_hold,
        ends_before_cooling=bool(ends_before_cooling),
        flags=flags,
    )


def longest_run_at_or_above(
    profile: RetortProfile, temperature_C: float
) -> tuple[float, float] | None:
    """Longest stretch of consecutive readings at/above a temperature (for alternate processes).

    Parameters
    ----------
    profile : RetortProfile
        Retort temperature history
    temperature_C : float
        Temperature of the alternate process [°C]

    Returns
    -------
    (start_min, end_min) or None
        Times of the first and last reading of the longest run (the earliest when tied); None if
        no reading is at/above the temperature [min]. Reading times, not interpolated crossings:
        the record does not show the temperature beyond them [2]_.

    References
    ----------
    .. [2] U.S. FDA, *Guide to Inspections of Low Acid Canned Food Manufacturers*, Part 1.
    """
    t = profile.time_min
    above = profile.temperature_C >= temperature_C
    if not above.any():
        return None
    edges = np.diff(np.concatenate([[0], above.astype(np.int8), [0]]))
    first = np.flatnonzero(edges == 1)
    last = np.flatnonzero(edges == -1) - 1
    longest = int(np.argmax(t[last] - t[first]))
    return float(t[first[longest]]), float(t[last[longest]])


def check_cold_spot_log(cold: RetortProfile, retort: RetortProfile, gap_limit_min: float,
                        initial_C: float | None = None) -> list[Flag]:
    """A measured cold-spot log checked against the retort log it belongs with.

    Refused (``RecordError``): the same readings as the retort log (a file named twice), or a
    cold spot hotter than the hottest the retort had been so far (a product heated by its
    surface cannot be, beyond where it started; 1 °C allowed for the two sensors). Flagged: a gap between cold-spot
    readings longer than the limit (no lethality is credited across it).
    """
    if (cold.time_min.shape == retort.time_min.shape and np.allclose(cold.time_min, retort.time_min)
            and np.allclose(cold.temperature_C, retort.temperature_C, atol=0.05)):
        raise RecordError("the cold-spot log holds the same readings as the retort log; expected the "
                          "thermocouple at the container's cold spot, not the retort", source=cold.source)
    start = max(float(cold.temperature_C[0]), initial_C if initial_C is not None else -np.inf)
    hottest_so_far = np.maximum(np.maximum.accumulate(retort.temperature_C), start)
    at = np.interp(cold.time_min, retort.time_min, hottest_so_far, left=hottest_so_far[0])
    above = np.flatnonzero(cold.temperature_C > at + _COLD_SPOT_SENSOR_TOLERANCE_C)
    if above.size:
        i = int(above[0])
        raise RecordError(
            f"at {cold.time_min[i]:g} min the cold spot reads {cold.temperature_C[i]:.1f} °C, above the "
            f"hottest the retort had been by then ({at[i]:.1f} °C); a container heated by the retort "
            "cannot be hotter: check that the two logs belong together and their time axes",
            source=cold.source)
    flags = []
    for i in np.flatnonzero(np.diff(cold.time_min) > gap_limit_min):
        a, b = float(cold.time_min[i]), float(cold.time_min[i + 1])
        flags.append(Flag("record-gap", f"cold-spot log: no reading from {a:.2f} to {b:.2f} min, a gap of "
                          f"{b - a:.2f} min, longer than the {gap_limit_min:g} min allowed; no lethality is "
                          "credited across it", start_min=a, end_min=b, value=b - a))
    return flags


# Two sensors (retort probe, thermocouple) may disagree by this much [°C] (common practice).
_COLD_SPOT_SENSOR_TOLERANCE_C = 1.0
