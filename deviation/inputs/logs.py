"""Retort and cold-spot logs: CSV text to a checked :class:`RetortProfile`.

A retort log (or a cold-spot log from a heat penetration test) is a CSV file with one reading a
row. It is validated on reading: every problem is reported as a
:class:`~deviation.errors.RecordError` naming the file line, the column, the value found and
what was expected. The profile is then analysed against the scheduled process in
:mod:`deviation.inputs.cycle`.

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
import gc
import hashlib
import math
import re
import warnings
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

import numpy as np

from deviation.errors import DeviationError, RecordError
from deviation.inputs import limits
from deviation.inputs.files import read_bounded
from deviation.inputs.units import fahrenheit_to_celsius

__all__ = [
    "RetortProfile",
    "parse_log_text",
    "read_log",
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
    indicating_C : numpy.ndarray or None
        Readings of the temperature-indicating device beside the recorder's, NaN where a row has
        none [°C]; ``None`` when the log has no such column
    recorded : bool
        True for readings taken from a recorder (a log); False for a history built from the
        filed process, which is exact between its points (no "lower reading between samples")
    columns : dict or None
        The retort system's own recorded columns (``water_level_above_top_mm``, ``rotation_rpm``,
        ``reel_speed_fraction``), name to array, NaN where a row has no reading

    Notes
    -----
    The arrays are copied and made read-only. Two profiles are equal when their arrays are
    exactly equal and their source and digest are the same.
    """

    time_min: np.ndarray
    temperature_C: np.ndarray
    source: str
    sha256: str | None = None
    indicating_C: np.ndarray | None = None
    recorded: bool = True
    columns: dict | None = None  # other recorded columns (SYSTEM_COLUMNS), NaN where a row has none

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
        if self.indicating_C is not None:
            indicating = np.array(self.indicating_C, dtype=float)
            if indicating.shape != time_min.shape:
                raise ValueError("RetortProfile: indicating_C must have the shape of time_min")
            indicating.setflags(write=False)
            object.__setattr__(self, "indicating_C", indicating)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, RetortProfile):
            return NotImplemented
        return (
            self.source == other.source
            and self.sha256 == other.sha256
            and np.array_equal(self.time_min, other.time_min)
            and np.array_equal(self.temperature_C, other.temperature_C)
            and self.recorded == other.recorded
            and (self.indicating_C is None) == (other.indicating_C is None)
            and (self.indicating_C is None
                 or np.array_equal(self.indicating_C, other.indicating_C, equal_nan=True))
        )

    __hash__ = None  # arrays are not hashable; equality is by value

    @property
    def duration_min(self) -> float:
        """Time from the first to the last reading [min]."""
        return float(self.time_min[-1] - self.time_min[0])


# --------------------------------------------------------------------------------------------
# Reading logs
# --------------------------------------------------------------------------------------------


def _kind_name(kind: str) -> str:
    try:
        return _KINDS[kind]
    except KeyError:
        raise ValueError(f"kind must be 'retort' or 'cold-spot', got {kind!r}") from None


def split_lines(text: str) -> list[str]:
    """The lines of a record as every reader counts them: ``\r\n``, a lone ``\r`` and ``\n``
    each end a line (so line numbers in messages agree between ``evaluate`` and ``watch``)."""
    return _LINE_BREAK.split(text)


def _data_lines(text: str) -> list[tuple[int, str]]:
    """(file line number, line) for every line that is not blank and not a ``#`` comment."""
    kept = []
    for number, line in enumerate(split_lines(text), start=1):
        stripped = line.strip()
        if stripped and not stripped.startswith("#"):
            kept.append((number, line))
    return kept


def _plain_rows(lines: list[tuple[int, str]]) -> list[tuple[int, list[str]]]:
    """The kept lines split at the commas, rows of empty fields left out (no quotes in the text)."""
    return [(number, line.split(",")) for number, line in lines if line.replace(",", "").strip()]


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
    # Quote at most a few short field names: a file named by mistake (a password file, an
    # environment dump) must not be echoed into the message.
    looks_like_header = ("time" in header[0].lower() and any(sep in header[0] for sep in ";\t"))
    if len(header) == 1 and "," not in header[0] and not looks_like_header:
        listed = "one field with no comma: not a CSV header"
    elif len(header) == 1:
        listed = repr(header[0].strip()[:40])
    else:
        shown = [repr(name.strip()[:20] + ("..." if len(name.strip()) > 20 else "")) for name in header[:4]]
        listed = ", ".join(shown) + (", ..." if len(header) > 4 else "")
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


# Columns a retort system's recorder may carry beside the temperature (21 CFR 113.40: water level,
# rotation and reel speed are critical factors recorded with the cycle).
SYSTEM_COLUMNS = {
    "water_level_above_top_mm": ("a water level above the top layer [mm]", -2000.0, 2000.0),
    "rotation_rpm": ("a rotation speed [rpm]", 0.0, 100.0),
    "reel_speed_fraction": ("the reel speed as a fraction of the filed speed [-]", 0.0, 2.0),
}


def _system_columns(header: list[str]) -> dict[str, int]:
    names = [name.strip().lower() for name in header]
    return {name: names.index(name) for name in SYSTEM_COLUMNS if name in names}


def _indicating_column(header: list[str], line: int, source: str) -> tuple[str, int] | None:
    """The optional column of the temperature-indicating device: (name, index) or None."""
    names = [name.strip().lower() for name in header]
    found = [(n, i) for i, n in enumerate(names) if n in ("indicating_temperature_c", "indicating_temperature_f")]
    if len(found) > 1:
        raise RecordError(
            f"line {line}: more than one indicating_temperature column in the header; expected "
            "indicating_temperature_C or indicating_temperature_F once", source=source)
    if not found:
        return None
    name, index = found[0]
    return ("indicating_temperature_C" if name.endswith("_c") else "indicating_temperature_F"), index


def _fast_columns(data, time_index: int, temperature_index: int, width: int, *, iso: bool = False):
    """Both columns of a log whose every row is well-formed, read at once; None otherwise.

    Well-formed: exactly the header's number of fields, in the temperature column (and a
    ``time_min`` column) a finite decimal number, in a ``time`` column (``iso``) a naive
    timestamp written exactly ``YYYY-MM-DDTHH:MM:SS`` (the form recorders write). Anything else
    goes row by row, for the exact message. With ``iso`` the times come back as minutes from
    the first row (an array), as :func:`checked_times` would compute them.
    """
    if any(len(fields) != width for _, fields in data):
        return None
    temperatures = _fast_numbers([fields[temperature_index] for _, fields in data])
    if temperatures is None:
        return None
    cells = [fields[time_index] for _, fields in data]
    times = _fast_timestamps(cells) if iso else _fast_numbers(cells)
    if times is None:
        return None
    return times, temperatures


def _fast_numbers(cells: list[str]) -> list[float] | None:
    # numpy reads what _number reads, and also 1_000, nan and inf: those go row by row.
    if "_" in "".join(cells):
        return None
    try:
        values = np.array(cells, dtype=float)
    except ValueError:
        return None
    if not np.all(np.isfinite(values)):
        return None
    return values.tolist()


def _fast_timestamps(cells: list[str]) -> np.ndarray | None:
    """Minutes from the first timestamp when every cell is ``YYYY-MM-DDTHH:MM:SS`` (naive), the
    same figures ``datetime.fromisoformat`` gives row by row; None for anything else."""
    try:
        with warnings.catch_warnings():  # numpy warns on an offset; such a column goes row by row
            warnings.simplefilter("ignore")
            stamps = np.array(cells, dtype="datetime64[s]")
    except ValueError:
        return None
    # Written back, the same text: exactly that form (no offset, fraction, space or short form,
    # each one read row by row), and a date and time numpy and the datetime module both accept.
    if stamps.size == 0 or np.isnat(stamps).any() or stamps.min() < np.datetime64("0001-01-01T00:00:00") \
            or stamps.max() > np.datetime64("9999-12-31T23:59:59") \
            or not np.array_equal(np.datetime_as_string(stamps, unit="s"), np.array(cells)):
        return None
    return (stamps - stamps[0]).astype(np.int64) / 60.0


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


def checked_times(time_name: str, times, stamps: list, line_numbers: list[int],
                  time_texts: list[str], source: str) -> np.ndarray:
    """Minutes from the first row [min], checked: not negative, strictly increasing.

    ``times`` holds parsed ``time_min`` values, ``stamps`` parsed ISO timestamps (one of the two
    is used, by ``time_name``; for ``time``, ``times`` may instead hold the minutes from the first
    timestamp already, an array, with ``stamps`` empty). Raises :class:`RecordError` naming the line and the value.
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
    elif not stamps and isinstance(times, np.ndarray):  # read at once (_fast_columns)
        time_min = times
        unit_text = ""
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
    # A bounded span before anything is built on it: one glitched row must not make a
    # resampled record of millions of points.
    span_max = limits.current().record_span_max_min
    over = np.flatnonzero(time_min > span_max)
    if over.size:
        i = int(over[0])
        jump = f", {step[i - 1]:g} min after the reading before it (line {line_numbers[i - 1]})" if i else ""
        raise RecordError(
            f"line {line_numbers[i]}, column {time_name}: time {time_texts[i]}{unit_text} is "
            f"{time_min[i]:g} min after the first reading{jump}; a record spans at most "
            f"{span_max:g} min (a glitched row?)",
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
    # Thousands of small rows, none of them in a reference cycle: the cycle collector, run again
    # and again while they are made, took half the reading time of a 7,600-row record.
    collecting = gc.isenabled()
    gc.disable()
    try:
        return _parse_log_text(text, source=source, sha256=sha256, kind=kind)
    finally:
        if collecting:
            gc.enable()


def _parse_log_text(text: str, *, source: str, sha256: str | None, kind: str) -> RetortProfile:
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
    # Without quotes a row is its line split at the commas (what the csv module would give).
    rows = _plain_rows(lines) if '"' not in text else _csv_rows(lines, source, what)
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
    rows_max = limits.current().record_rows_max
    if len(data) > rows_max:
        raise RecordError(
            f"the {what} has {len(data):,} readings, over the {rows_max:,} one record may have",
            source=source,
        )
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

    indicating = _indicating_column(header, header_line, source) if kind == "retort" else None
    needed = max(time_index, temperature_index) + 1
    unit = "°C" if temperature_name == "temperature_C" else "°F"
    indicating_values: list[float] = []
    system = _system_columns(header) if kind == "retort" else {}
    system_values: dict[str, list[float]] = {name: [] for name in system}
    expected_temperature = f"a temperature [{unit}]"
    line_numbers: list[int] = []
    time_texts: list[str] = []
    temperatures: list[float] = []
    times: list[float] = []
    stamps: list[datetime] = []
    fast = (_fast_columns(data, time_index, temperature_index, len(header), iso=time_name == "time")
            if indicating is None and not system else None)
    if fast is not None:
        # Every row well-formed: read the columns at once (the row-by-row reading below gives
        # the exact message for a row that is not).
        times, temperatures = fast
        line_numbers = [line for line, _ in data]
        time_texts = [fields[time_index].strip() for _, fields in data]
        data = []
    for line, fields in data:
        if len(fields) < needed:
            raise RecordError(
                f"line {line}: {len(fields)} field(s) found; expected at least {needed} "
                f"(columns {time_name} and {temperature_name} as in the header)",
                source=source,
            )
        if len(fields) > len(header):
            comma = (" - decimal commas? write decimals with a point (28.00, not 28,00)"
                     if all(f.strip().isdigit() for f in fields) else "")
            raise RecordError(
                f"line {line}: {len(fields)} fields, the header has {len(header)}{comma}; expected one "
                "value per column",
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
        if indicating is not None:
            # Sparse: the indicating device is read at intervals, so an empty cell is no reading.
            cell = fields[indicating[1]].strip() if indicating[1] < len(fields) else ""
            indicating_values.append(np.nan if not cell else _number(
                cell, line, indicating[0],
                f"a temperature [{'°C' if indicating[0].endswith('_C') else '°F'}] or an empty cell",
                source))
        for name, index in system.items():
            cell = fields[index].strip() if index < len(fields) else ""
            words, low, high = SYSTEM_COLUMNS[name]
            value = np.nan if not cell else _number(cell, line, name, f"{words} or an empty cell", source)
            if not np.isnan(value) and not low <= value <= high:
                raise RecordError(f"line {line}, column {name}: {value:g} is outside {low:g} to {high:g}; "
                                  f"expected {words}", source=source)
            system_values[name].append(value)
        line_numbers.append(line)
        time_texts.append(time_text)

    time_min = checked_times(time_name, times, stamps, line_numbers, time_texts, source)

    # Temperature: the right unit, then a plausible value.
    values = np.array(temperatures)
    # Absurd values overflow to inf in the conversions; they are reported as impossible.
    with np.errstate(over="ignore", invalid="ignore"):
        profile = _checked_profile(
            values, temperature_name, unit, line_numbers, time_min, what, source, sha256
        )
        if kind == "retort":
            _within_reading_bounds(profile.temperature_C, values, unit, temperature_name, line_numbers, source)
        if system_values:
            from dataclasses import replace

            profile = replace(profile, columns={k: np.array(v) for k, v in system_values.items()})
        if indicating is None:
            return profile
        return _with_indicating(profile, np.array(indicating_values), indicating[0], line_numbers,
                                what, source)


def _within_reading_bounds(temperature_C, values, unit, column, line_numbers, source) -> None:
    """A retort reading inside the bounds of ``rules/limits.toml`` (0 to 150 °C by default)."""
    lim = limits.current()
    out = np.flatnonzero((temperature_C < lim.retort_reading_min_C) | (temperature_C > lim.retort_reading_max_C))
    if out.size:
        i = int(out[0])
        found = f"{values[i]:g} {unit}" + (f" ({temperature_C[i]:.1f} °C)" if unit == "°F" else "")
        raise RecordError(
            f"line {line_numbers[i]}, column {column}: reading {found} is outside "
            f"{lim.retort_reading_min_C:g} to {lim.retort_reading_max_C:g} °C, where a retort reads",
            source=source,
        )


def _with_indicating(profile: RetortProfile, values: np.ndarray, column: str,
                     line_numbers: list[int], what: str, source: str) -> RetortProfile:
    """Check the indicating device's readings (unit, plausibility) and add them to the profile."""
    have = np.isfinite(values)
    if not np.any(have):
        return profile
    readings = values[have]
    lines = [n for n, h in zip(line_numbers, have) if h]
    unit = "°C" if column.endswith("_C") else "°F"
    # The same unit and plausibility checks as the recorder column, on the readings present.
    checked = _checked_profile(readings, column.replace("indicating_", ""), unit, lines,
                               np.arange(readings.size, dtype=float), what, source, None)
    indicating_C = np.full(values.shape, np.nan)
    indicating_C[have] = checked.temperature_C
    from dataclasses import replace

    return replace(profile, indicating_C=indicating_C)


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
        raw = read_bounded(Path(path), what=f"the {what}", named_in=source)
    except DeviationError as exc:
        raise RecordError(exc.message, source=source) from None
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


# --------------------------------------------------------------------------------------------
# Analysis
# --------------------------------------------------------------------------------------------


