"""Heat penetration test files: CSV text to a checked :class:`HeatPenData`.

The CSV format: a time column ``time_min`` (or ``time``, ISO-8601), a retort column ``retort_C``
or ``retort_F``, and one column per thermocouple whose name ends in ``_C`` or ``_F`` (its unit);
the thermocouple's name is the column name without the suffix. Every problem is a
:class:`~deviation.errors.RecordError` naming the line, the column and what was expected.
"""

from __future__ import annotations

import hashlib
from datetime import datetime
from pathlib import Path

import numpy as np

from deviation.errors import RecordError
from deviation.inputs import logs as _profile
from deviation.inputs.units import fahrenheit_to_celsius
from deviation.physics.calibration.results import HeatPenData

_WHAT = "heat penetration file"


def _read_text(path: Path, source: str) -> tuple[str, str]:
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise RecordError(f"cannot read the {_WHAT}: {exc.strerror or exc}",
                          source=source) from None
    digest = hashlib.sha256(raw).hexdigest()
    try:
        text = raw.decode("utf-16") if raw.startswith((b"\xff\xfe", b"\xfe\xff")) else raw.decode(
            "utf-8-sig")
    except UnicodeDecodeError as exc:
        raise RecordError(
            f"the {_WHAT} is not UTF-8 text (byte 0x{raw[exc.start]:02x} at offset {exc.start}); "
            "expected a CSV file saved as UTF-8",
            source=source,
        ) from None
    return text, digest


def _header(header: list[str], line: int, source: str):
    """Time column, retort column and thermocouple columns of the header."""
    names = [name.strip() for name in header]
    listed = ", ".join(repr(name) for name in names)
    time_cols = [i for i, n in enumerate(names) if n.lower() in ("time_min", "time")]
    retort_cols = [i for i, n in enumerate(names) if n.lower() in ("retort_c", "retort_f")]
    for cols, what, expected in ((time_cols, "time", "time_min (minutes) or time (ISO-8601 timestamps)"),
                                 (retort_cols, "retort", "retort_C or retort_F")):
        if len(cols) > 1:
            raise RecordError(f"line {line}: {len(cols)} {what} columns in the header ("
                              + ", ".join(names[i] for i in cols) + f"); expected one: {expected}",
                              source=source)
        if not cols:
            raise RecordError(f"line {line}: no {what} column in the header (found {listed}); expected "
                              f"{expected} in a {_WHAT}", source=source)
    time_index, retort_index = time_cols[0], retort_cols[0]
    time_name = names[time_index].lower()
    retort_unit = names[retort_index][-1].upper()
    thermocouples: list[tuple[str, int, str, str]] = []  # (name, index, column, unit)
    seen: dict[str, str] = {}
    for index, column in enumerate(names):
        if index in (time_index, retort_index):
            continue
        if not column:
            raise RecordError(
                f"line {line}: column {index + 1} has no name; expected a thermocouple column "
                "named like tc1_C or tc1_F",
                source=source,
            )
        if len(column) < 3 or column[-2:].upper() not in ("_C", "_F"):
            raise RecordError(
                f"line {line}, column {column}: not a thermocouple column (no _C or _F unit "
                "suffix); expected every column other than the time and retort columns to be a "
                "thermocouple named like tc1_C or tc1_F",
                source=source,
            )
        name = column[:-2]
        if name.lower() in seen:
            raise RecordError(
                f"line {line}: thermocouple {seen[name.lower()][:-2]} appears twice in the "
                f"header (columns "
                f"{seen[name.lower()]} and {column}); expected each thermocouple once",
                source=source,
            )
        seen[name.lower()] = column
        thermocouples.append((name, index, column, column[-1].upper()))
    if not thermocouples:
        raise RecordError(
            f"line {line}: no thermocouple column in the header (found {listed}); expected at "
            "least one column named like tc1_C or tc1_F",
            source=source,
        )
    return (time_name, time_index), (names[retort_index], retort_index, retort_unit), thermocouples


def _column_to_celsius(values: np.ndarray, column: str, unit: str, lines: list[int],
                       source: str, what: str) -> np.ndarray:
    """Unit look-alike checks and the plausible range, as for retort logs (profile.py)."""
    finite = np.isfinite(values)
    if not finite.any():
        return values
    with np.errstate(over="ignore", invalid="ignore"):
        highest = int(np.nanargmax(values))
        twin = f"{column[:-2]}_{'F' if unit == 'C' else 'C'}"
        if unit == "C":
            as_C_if_F = fahrenheit_to_celsius(values[finite])
            if values[highest] > _profile.HIGHEST_CELSIUS_READING_C and np.all(
                (as_C_if_F >= _profile.LOWEST_PLAUSIBLE_C)
                & (as_C_if_F <= _profile.HIGHEST_PLAUSIBLE_C)
            ):
                raise RecordError(
                    f"column {column}: values look like °F (highest {values[highest]:g} at line "
                    f"{lines[highest]}, above the {_profile.HIGHEST_CELSIUS_READING_C:g} °C no "
                    f"retort reaches); if the {what} is in Fahrenheit name the column {twin}",
                    source=source,
                )
            celsius = values
        else:
            if values[highest] < _profile.LOWEST_FAHRENHEIT_MAXIMUM_F:
                raise RecordError(
                    f"column {column}: values look like °C (all below "
                    f"{_profile.LOWEST_FAHRENHEIT_MAXIMUM_F:g} °F, highest {values[highest]:g} "
                    f"at line {lines[highest]}; a heat penetration test reaches about 240-265 "
                    f"°F); if the {what} is in Celsius name the column {twin}",
                    source=source,
                )
            celsius = fahrenheit_to_celsius(values)
        bad = np.flatnonzero(finite & ((celsius < _profile.LOWEST_PLAUSIBLE_C)
                                       | (celsius > _profile.HIGHEST_PLAUSIBLE_C)))
    if bad.size:
        i = int(bad[0])
        found = f"{values[i]:g} °{unit}" + (f" ({celsius[i]:.1f} °C)" if unit == "F" else "")
        raise RecordError(
            f"line {lines[i]}, column {column}: temperature {found} is impossible; expected "
            f"{_profile.LOWEST_PLAUSIBLE_C:g} to {_profile.HIGHEST_PLAUSIBLE_C:g} °C",
            source=source,
        )
    return np.asarray(celsius, dtype=float)


def read_heat_penetration_csv(path_or_text, *, source: str | None = None) -> HeatPenData:
    """Read a heat penetration test (CSV), validating every row.

    Parameters
    ----------
    path_or_text : str or os.PathLike
        A ``pathlib.Path`` or a string without a line break is a file path (UTF-8, with or
        without BOM, or UTF-16 with BOM); any other string is the CSV text itself.
    source : str, optional
        Name used in messages (default: the path, or ``"<text>"``).

    Returns
    -------
    HeatPenData
        Times shifted so the first row is 0 [min]; temperatures in [°C].

    Raises
    ------
    RecordError
        Naming the file line (1-based, every line counted), the column, the value found and what
        was expected.

    Notes
    -----
    Naming rule for the header (names trimmed; ``time_min``/``time``/``retort_*`` matched
    case-insensitively):

    - one time column: ``time_min`` (minutes) or ``time`` (ISO-8601 timestamps);
    - one retort column: ``retort_C`` or ``retort_F``;
    - every other column is a thermocouple, its unit given by the suffix ``_C`` or ``_F``
      (e.g. ``tc1_C``, ``tc2_F``); the thermocouple's name is the column name without the
      suffix. A column without a unit suffix is an error (a unit is never guessed).

    ``#`` comment lines and blank lines are skipped. An empty field in a thermocouple column is a
    missing reading (a thermocouple lost for some rows); an empty time or retort field is an
    error. Unit look-alike checks and the plausible range -50 to 160 °C are those of the retort
    logs (common practice).
    """
    digest = None
    if isinstance(path_or_text, Path) or (isinstance(path_or_text, str)
                                          and "\n" not in path_or_text
                                          and "\r" not in path_or_text):
        src = str(path_or_text) if source is None else source
        text, digest = _read_text(Path(path_or_text), src)
    else:
        src = "<text>" if source is None else source
        text = str(path_or_text)
    if text.startswith("\ufeff"):
        text = text[1:]
    lines = _profile._data_lines(text)
    rows = _profile._csv_rows(lines, src, _WHAT) if lines else []
    if not rows:
        raise RecordError(
            f"the {_WHAT} is empty; expected a header line naming time_min, retort_C and the "
            "thermocouple columns (tc1_C, ...), then at least 2 rows of readings",
            source=src,
        )
    header_line, header = rows[0]
    (time_name, time_index), (retort_name, retort_index, retort_unit), tcs = _header(
        header, header_line, src)
    data = rows[1:]
    if len(data) < 2:
        found = "no readings" if not data else f"only 1 reading (line {data[0][0]})"
        raise RecordError(f"the {_WHAT} has {found}; expected at least 2 rows", source=src)

    needed = len(header)
    line_numbers: list[int] = []
    time_texts: list[str] = []
    times: list[float] = []
    stamps: list[datetime] = []
    retort: list[float] = []
    readings = np.full((len(data), len(tcs)), np.nan)
    for row, (line, fields) in enumerate(data):
        if len(fields) < needed:
            raise RecordError(
                f"line {line}: {len(fields)} field(s) found; expected {needed} (the columns of "
                "the header)",
                source=src,
            )
        time_text = fields[time_index].strip()
        if time_name == "time_min":
            times.append(_profile._number(time_text, line, "time_min", "minutes from steam on",
                                          src))
        else:
            stamps.append(_profile._timestamp(time_text, line, src))
        retort.append(_profile._number(fields[retort_index], line, retort_name,
                                       f"a temperature [°{retort_unit}]", src))
        for k, (_, index, column, unit) in enumerate(tcs):
            if fields[index].strip():  # empty: no reading from this thermocouple on this row
                readings[row, k] = _profile._number(fields[index], line, column,
                                                    f"a temperature [°{unit}]", src)
        line_numbers.append(line)
        time_texts.append(time_text)

    time_min = _profile.checked_times(time_name, times, stamps, line_numbers, time_texts, src)

    retort_C = _column_to_celsius(np.array(retort), retort_name, retort_unit, line_numbers, src,
                                  _WHAT)
    thermocouples: dict[str, np.ndarray] = {}
    columns: dict[str, str] = {}
    for k, (name, _, column, unit) in enumerate(tcs):
        values = readings[:, k]
        if np.count_nonzero(np.isfinite(values)) < 2:
            raise RecordError(
                f"column {column}: {np.count_nonzero(np.isfinite(values))} reading(s); expected "
                "at least 2 (a thermocouple that failed from the start: remove its column)",
                source=src,
            )
        thermocouples[name] = _column_to_celsius(values, column, unit, line_numbers, src, _WHAT)
        columns[name] = column
    return HeatPenData(time_min=time_min, retort_C=retort_C, thermocouples=thermocouples,
                       columns=columns, source=src, sha256=digest)
