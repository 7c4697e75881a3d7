"""Retort records: read retort and cold-spot logs, build the filed cycle, overlay events, flag
deviations.

A retort log (or a cold-spot log from a heat penetration test) is a CSV file with one reading a
row. It is validated on reading: every problem is reported as a
:class:`~deviation.errors.RecordError` naming the file line, the column, the value found and
what was expected. The profile is then analysed against the scheduled process: come-up, hold,
drops below process temperature during the hold, gaps in the record, and initial temperature.

Conservative habits follow the FDA *Guide to Inspections of Low Acid Canned Food Manufacturers*
(Part 1): a single reading does not show the temperature stayed above a value between readings,
and the bottom of the recorder trace is what counts.

References
----------
.. [1] 21 CFR 113.40 (equipment and procedures; recording of critical factors) and 21 CFR 113.100
   (processing and production records).
.. [2] U.S. FDA, *Guide to Inspections of Low Acid Canned Food Manufacturers*, Part 1.
"""

from __future__ import annotations

import csv
import hashlib
import math
import re
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

import numpy as np

from deviation.errors import RecordError
from deviation.inputs.units import fahrenheit_to_celsius

__all__ = [
    "RetortProfile",
    "Flag",
    "LowInterval",
    "CycleAnalysis",
    "parse_log_text",
    "read_log",
    "filed_cycle",
    "apply_temperature_low",
    "resample_uniform",
    "analyse_cycle",
    "longest_run_at_or_above",
    "LOWEST_PLAUSIBLE_C",
    "HIGHEST_PLAUSIBLE_C",
    "HIGHEST_CELSIUS_READING_C",
    "LOWEST_FAHRENHEIT_MAXIMUM_F",
]

#: Below this a reading is impossible for a retort or a container [°C] (common practice).
LOWEST_PLAUSIBLE_C = -50.0
#: Above this a reading is impossible for a retort or a container [°C] (common practice).
HIGHEST_PLAUSIBLE_C = 160.0
#: A temperature_C column whose highest value is above this is taken to be in °F: no retort for
#: low-acid canned food runs above about 135 °C, while 200-270 °F is an ordinary reading
#: [°C] (common practice).
HIGHEST_CELSIUS_READING_C = 150.0
#: A temperature_F column whose values all lie below this is taken to be in °C: a retort at
#: process temperature reads about 240-265 °F [°F] (common practice).
LOWEST_FAHRENHEIT_MAXIMUM_F = 150.0

# Differences of time below this are floating-point rounding, not a deviation [min] (6e-5 s).
_EPS_MIN = 1e-6
# Two times closer than this are the same breakpoint [min].
_SAME_TIME_MIN = 1e-9

_KINDS = {"retort": "retort log", "cold-spot": "cold-spot log"}
_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_NON_FINITE = re.compile(r"[+-]?(?:nan|inf|infinity)", re.IGNORECASE)
_LINE_BREAK = re.compile(r"\r\n|\r|\n")


# --------------------------------------------------------------------------------------------
# Data
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class RetortProfile:
    """A temperature history: retort (or cold-spot) temperature against time.

    Parameters
    ----------
    time_min : numpy.ndarray
        Time from the first row, strictly increasing; steam on = 0 for the filed cycle [min]
    temperature_C : numpy.ndarray
        Temperature at each time [°C]
    source : str
        File path, or ``"filed cycle"`` / ``"filed cycle + events"``
    sha256 : str or None
        SHA-256 hex digest of the file bytes when read from a file

    Notes
    -----
    The arrays are copied and made read-only. Two profiles are equal when their arrays are
    exactly equal and their source and digest are the same.
    """

    time_min: np.ndarray
    temperature_C: np.ndarray
    source: str
    sha256: str | None = None

    def __post_init__(self) -> None:
        time_min = np.array(self.time_min, dtype=float)
        temperature_C = np.array(self.temperature_C, dtype=float)
        if time_min.ndim != 1 or temperature_C.shape != time_min.shape:
            raise ValueError(
                "RetortProfile: time_min and temperature_C must be 1-D arrays of the same length, "
                f"got shapes {time_min.shape} and {temperature_C.shape}"
            )
        if time_min.size < 2:
            raise ValueError(f"RetortProfile: at least 2 readings expected, got {time_min.size}")
        if not (np.all(np.isfinite(time_min)) and np.all(np.isfinite(temperature_C))):
            raise ValueError("RetortProfile: times and temperatures must be finite")
        if np.any(np.diff(time_min) <= 0.0):
            raise ValueError("RetortProfile: time_min must increase strictly")
        time_min.setflags(write=False)
        temperature_C.setflags(write=False)
        object.__setattr__(self, "time_min", time_min)
        object.__setattr__(self, "temperature_C", temperature_C)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, RetortProfile):
            return NotImplemented
        return (
            self.source == other.source
            and self.sha256 == other.sha256
            and np.array_equal(self.time_min, other.time_min)
            and np.array_equal(self.temperature_C, other.temperature_C)
        )

    __hash__ = None  # arrays are not hashable; equality is by value

    @property
    def duration_min(self) -> float:
        """Time from the first to the last reading [min]."""
        return float(self.time_min[-1] - self.time_min[0])


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


# --------------------------------------------------------------------------------------------
# Reading logs
# --------------------------------------------------------------------------------------------


def _kind_name(kind: str) -> str:
    try:
        return _KINDS[kind]
    except KeyError:
        raise ValueError(f"kind must be 'retort' or 'cold-spot', got {kind!r}") from None


def _data_lines(text: str) -> list[tuple[int, str]]:
    """(file line number, line) for every line that is not blank and not a ``#`` comment."""
    kept = []
    for number, line in enumerate(_LINE_BREAK.split(text), start=1):
        stripped = line.strip()
        if stripped and not stripped.startswith("#"):
            kept.append((number, line))
    return kept


def _csv_rows(lines: list[tuple[int, str]], source: str, what: str) -> list[tuple[int, list[str]]]:
    """Split the kept lines into fields (csv module), keeping each row's first line number."""
    reader = csv.reader([line for _, line in lines])
    rows = []
    consumed = 0
    while True:
        first_line = lines[consumed][0] if consumed < len(lines) else None
        try:
            fields = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            raise RecordError(
                f"line {first_line}: cannot be read as CSV ({exc}); expected comma-separated "
                f"values in a {what}",
                source=source,
            ) from None
        consumed = reader.line_num  # a quoted field may span several lines
        if fields and any(field.strip() for field in fields):
            rows.append((first_line, fields))
    return rows


def _header_columns(
    header: list[str], line: int, source: str, what: str
) -> tuple[str, int, str, int]:
    """Find the time and temperature columns: (time name, index, temperature name, index)."""
    names = [name.strip().lower() for name in header]
    canonical = {"time_min": "time_min", "time": "time", "temperature_c": "temperature_C",
                 "temperature_f": "temperature_F"}
    found: dict[str, int] = {}
    for index, name in enumerate(names):
        if name in canonical:
            if canonical[name] in found:
                raise RecordError(
                    f"line {line}: column {canonical[name]} appears twice in the header; "
                    "expected each column once",
                    source=source,
                )
            found[canonical[name]] = index
    listed = ", ".join(repr(name.strip()) for name in header)
    hint = ""
    if len(header) == 1 and (";" in header[0] or "\t" in header[0]):
        hint = "; fields must be separated by commas"
    if "time_min" in found and "time" in found:
        raise RecordError(
            f"line {line}: both time_min and time columns in the header; expected one time column "
            "(time_min in minutes, or time as ISO-8601 timestamps)",
            source=source,
        )
    if "temperature_C" in found and "temperature_F" in found:
        raise RecordError(
            f"line {line}: both temperature_C and temperature_F columns in the header; expected "
            "exactly one temperature column",
            source=source,
        )
    if "time_min" not in found and "time" not in found:
        raise RecordError(
            f"line {line}: no time column in the header (found {listed}{hint}); expected "
            f"time_min (minutes) or time (ISO-8601 timestamps) in a {what}",
            source=source,
        )
    if "temperature_C" not in found and "temperature_F" not in found:
        raise RecordError(
            f"line {line}: no temperature column in the header (found {listed}{hint}); "
            f"expected temperature_C or temperature_F in a {what}",
            source=source,
        )
    time_name = "time_min" if "time_min" in found else "time"
    temperature_name = "temperature_C" if "temperature_C" in found else "temperature_F"
    return time_name, found[time_name], temperature_name, found[temperature_name]


def _number(text: str, line: int, column: str, expected: str, source: str) -> float:
    value = text.strip()
    if not value:
        raise RecordError(
            f"line {line}, column {column}: empty value; expected {expected}", source=source
        )
    if _NON_FINITE.fullmatch(value):
        raise RecordError(
            f"line {line}, column {column}: {value!r} is not a finite number; expected {expected}",
            source=source,
        )
    if not _NUMBER.fullmatch(value):
        raise RecordError(
            f"line {line}, column {column}: {value!r} is not a number; expected {expected}",
            source=source,
        )
    number = float(value)
    if not math.isfinite(number):  # e.g. 1e999
        raise RecordError(
            f"line {line}, column {column}: {value!r} is not a finite number; expected {expected}",
            source=source,
        )
    return number


def _timestamp(text: str, line: int, source: str) -> datetime:
    value = text.strip()
    try:
        return datetime.fromisoformat(value)
    except ValueError:
        raise RecordError(
            f"line {line}, column time: {value!r} is not an ISO-8601 timestamp; expected e.g. "
            "2024-05-01T10:00:00 or 2024-05-01T10:00:00+02:00 (for minutes use the header "
            "time_min)",
            source=source,
        ) from None


def _timestamps_to_minutes(
    stamps: list[datetime], lines: list[int], texts: list[str], source: str
) -> np.ndarray:
    aware = [stamp.utcoffset() is not None for stamp in stamps]
    if any(aware) and not all(aware):
        odd = aware.index(not aware[0])
        this = "has a UTC offset" if aware[odd] else "has no UTC offset"
        first = "has one" if aware[0] else "has none"
        raise RecordError(
            f"line {lines[odd]}, column time: timestamp {texts[odd]} {this} but the first one "
            f"(line {lines[0]}) {first}; expected all timestamps timezone-aware or all naive, "
            "not mixed",
            source=source,
        )
    start = stamps[0]
    return np.array([(stamp - start).total_seconds() / 60.0 for stamp in stamps])


def checked_times(time_name: str, times: list[float], stamps: list, line_numbers: list[int],
                  time_texts: list[str], source: str) -> np.ndarray:
    """Minutes from the first row [min], checked: not negative, strictly increasing.

    ``times`` holds parsed ``time_min`` values, ``stamps`` parsed ISO timestamps (one of the two
    is used, by ``time_name``). Raises :class:`RecordError` naming the line and the value.
    """
    if time_name == "time_min":
        time_min = np.array(times)
        negative = np.flatnonzero(time_min < 0.0)
        if negative.size:
            i = int(negative[0])
            raise RecordError(
                f"line {line_numbers[i]}, column time_min: time {time_texts[i]} min is negative; "
                "expected minutes from steam on (0 or more)",
                source=source,
            )
        unit_text = " min"
    else:
        time_min = _timestamps_to_minutes(stamps, line_numbers, time_texts, source)
        unit_text = ""
    # Check the shifted times: they are what the profile keeps.
    time_min = time_min - time_min[0]
    step = np.diff(time_min)
    bad = np.flatnonzero(step <= 0.0)
    if bad.size:
        i = int(bad[0]) + 1
        if step[i - 1] == 0.0:
            raise RecordError(
                f"duplicate time {time_texts[i]}{unit_text} at line {line_numbers[i]} "
                f"(also at line {line_numbers[i - 1]}); expected each time once",
                source=source,
            )
        raise RecordError(
            f"line {line_numbers[i]}, column {time_name}: time {time_texts[i]}{unit_text} is "
            f"earlier than {time_texts[i - 1]}{unit_text} at line {line_numbers[i - 1]}; expected "
            "times increasing strictly",
            source=source,
        )
    return time_min


def parse_log_text(
    text: str, *, source: str, sha256: str | None = None, kind: str = "retort"
) -> RetortProfile:
    """Read a retort log or cold-spot log from CSV text, validating every row.

    Parameters
    ----------
    text : str
        CSV text. Header: ``time_min`` (minutes) or ``time`` (ISO-8601 timestamps), plus exactly
        one of ``temperature_C`` / ``temperature_F`` (case-insensitive, whitespace ignored);
        other columns are ignored; ``#`` comment lines, blank lines and rows of empty fields are
        skipped. Time steps need not be uniform.
    source : str
        Where the text came from (file path), used in error messages and kept on the profile
    sha256 : str or None
        SHA-256 hex digest of the file bytes
    kind : {"retort", "cold-spot"}
        Changes only the wording of messages

    Returns
    -------
    RetortProfile
        Times shifted so that the first row is 0 [min]; temperatures in [°C]

    Raises
    ------
    RecordError
        With the file line number (1-based, counting every line of the file), the column, the
        value found and what was expected: missing or doubled columns, non-numeric, empty or
        non-finite values, bad or mixed-timezone timestamps, fewer than 2 rows, negative time,
        time not strictly increasing (a duplicate time has its own message), a temperature_C
        column that looks like °F, a temperature_F column that looks like °C, or a temperature
        outside -50 to 160 °C.

    Notes
    -----
    The °F/°C checks are common practice: no retort for low-acid food runs above 150 °C, and
    a retort log in °F whose values all stay below 150 °F (65.6 °C) never came near a process
    temperature. A ``time_min`` column that does not start at 0 is shifted so the first row is 0.
    """
    what = _kind_name(kind)
    if text.startswith("\ufeff"):
        text = text[1:]
    lines = _data_lines(text)
    if not lines:
        raise RecordError(
            f"the {what} is empty; expected a header line naming time_min and temperature_C "
            "(or temperature_F), then at least 2 rows of readings",
            source=source,
        )
    rows = _csv_rows(lines, source, what)
    if not rows:  # only rows of empty fields
        raise RecordError(
            f"the {what} has no header; expected a header line naming time_min and temperature_C "
            "(or temperature_F), then at least 2 rows of readings",
            source=source,
        )
    header_line, header = rows[0]
    time_name, time_index, temperature_name, temperature_index = _header_columns(
        header, header_line, source, what
    )
    data = rows[1:]
    if not data:
        raise RecordError(
            f"the {what} has a header (line {header_line}) but no readings; expected at least "
            "2 rows",
            source=source,
        )
    if len(data) < 2:
        raise RecordError(
            f"the {what} has only 1 reading (line {data[0][0]}); expected at least 2 rows",
            source=source,
        )

    needed = max(time_index, temperature_index) + 1
    unit = "°C" if temperature_name == "temperature_C" else "°F"
    expected_temperature = f"a temperature [{unit}]"
    line_numbers: list[int] = []
    time_texts: list[str] = []
    temperatures: list[float] = []
    times: list[float] = []
    stamps: list[datetime] = []
    for line, fields in data:
        if len(fields) < needed:
            raise RecordError(
                f"line {line}: {len(fields)} field(s) found; expected at least {needed} "
                f"(columns {time_name} and {temperature_name} as in the header)",
                source=source,
            )
        time_text = fields[time_index].strip()
        if time_name == "time_min":
            times.append(_number(time_text, line, "time_min", "minutes from steam on", source))
        else:
            stamps.append(_timestamp(time_text, line, source))
        temperatures.append(
            _number(fields[temperature_index], line, temperature_name, expected_temperature, source)
        )
        line_numbers.append(line)
        time_texts.append(time_text)

    time_min = checked_times(time_name, times, stamps, line_numbers, time_texts, source)

    # Temperature: the right unit, then a plausible value.
    values = np.array(temperatures)
    # Absurd values overflow to inf in the conversions; they are reported as impossible.
    with np.errstate(over="ignore", invalid="ignore"):
        return _checked_profile(
            values, temperature_name, unit, line_numbers, time_min, what, source, sha256
        )


def _checked_profile(values, temperature_name, unit, line_numbers, time_min, what, source, sha256):
    """Check the temperature column (unit, then plausibility) and build the profile."""
    if temperature_name == "temperature_C":
        temperature_C = values
        highest = int(np.argmax(values))
        as_celsius_if_F = fahrenheit_to_celsius(values)
        if values[highest] > HIGHEST_CELSIUS_READING_C and np.all(
            (as_celsius_if_F >= LOWEST_PLAUSIBLE_C) & (as_celsius_if_F <= HIGHEST_PLAUSIBLE_C)
        ):
            raise RecordError(
                f"column temperature_C: values look like °F (highest {values[highest]:g} at line "
                f"{line_numbers[highest]}, above the {HIGHEST_CELSIUS_READING_C:g} °C no retort "
                f"reaches; a retort at process temperature reads about 240-265 °F); if the {what} "
                "is in Fahrenheit use the header temperature_F",
                source=source,
            )
    else:
        highest = int(np.argmax(values))
        if values[highest] < LOWEST_FAHRENHEIT_MAXIMUM_F:
            raise RecordError(
                "column temperature_F: values look like °C (all below "
                f"{LOWEST_FAHRENHEIT_MAXIMUM_F:g} °F, highest {values[highest]:g} at line "
                f"{line_numbers[highest]}; a retort at process temperature reads about "
                "240-265 °F); "
                f"if the {what} is in Celsius use the header "
                "temperature_C",
                source=source,
            )
        temperature_C = fahrenheit_to_celsius(values)
    impossible = np.flatnonzero(
        (temperature_C < LOWEST_PLAUSIBLE_C) | (temperature_C > HIGHEST_PLAUSIBLE_C)
    )
    if impossible.size:
        i = int(impossible[0])
        found = f"{values[i]:g} {unit}"
        if unit == "°F":
            found += f" ({temperature_C[i]:.1f} °C)"
        raise RecordError(
            f"line {line_numbers[i]}, column {temperature_name}: temperature {found} is "
            f"impossible; expected {LOWEST_PLAUSIBLE_C:g} to {HIGHEST_PLAUSIBLE_C:g} °C in a "
            f"{what}",
            source=source,
        )

    return RetortProfile(
        time_min=time_min,
        temperature_C=temperature_C,
        source=source,
        sha256=sha256,
    )


def read_log(path, *, kind: str = "retort") -> RetortProfile:
    """Read a retort log or cold-spot log (CSV file); see :func:`parse_log_text`.

    Parameters
    ----------
    path : str or os.PathLike
        CSV file, UTF-8 (with or without BOM) or UTF-16 with BOM
    kind : {"retort", "cold-spot"}
        Changes only the wording of messages

    Returns
    -------
    RetortProfile
        With ``source = str(path)`` and the SHA-256 of the file bytes

    Raises
    ------
    RecordError
        File unreadable or not text, or any problem :func:`parse_log_text` reports
    """
    what = _kind_name(kind)
    source = str(path)
    try:
        raw = Path(path).read_bytes()
    except OSError as exc:
        raise RecordError(f"cannot read the {what}: {exc.strerror or exc}", source=source) from None
    digest = hashlib.sha256(raw).hexdigest()
    try:
        if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
            text = raw.decode("utf-16")
        else:
            text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise RecordError(
            f"the {what} is not UTF-8 text (byte 0x{raw[exc.start]:02x} at offset {exc.start}); "
            "expected a CSV file saved as UTF-8",
            source=source,
        ) from None
    return parse_log_text(text, source=source, sha256=digest, kind=kind)


# --------------------------------------------------------------------------------------------
# The filed cycle and events
# --------------------------------------------------------------------------------------------


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
        time_min=time_min, temperature_C=temperature_C, source="filed cycle", sha256=None
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
    return RetortProfile(
        time_min=time_min, temperature_C=temp_C, source=source, sha256=profile.sha256
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


# --------------------------------------------------------------------------------------------
# Analysis
# --------------------------------------------------------------------------------------------


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
