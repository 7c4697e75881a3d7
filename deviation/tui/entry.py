"""The floor entry as data: what the operator typed, checked, and turned into a case to evaluate.

No widgets here. Every value typed on the floor screen passes through one of the ``check_*`` /
``parse_*`` functions below before it is kept (they are pure: text and the filed process in, a
value or a :class:`~deviation.errors.DeviationError` in plain words out), so a later shared
validation layer (``deviation.inputs``) can take their place in one step. The bounds they apply
are the named constants at the top of this module.

A :class:`FloorEntry` holds the typed text of each field (kept as typed, so a draft restores
exactly what was on the screen, including a reading typed but not yet entered) and the readings
taken while the cycle runs. :func:`build_case` lays the readings over the filed cycle as
``[[deviation.events]]`` (``temperature-low`` intervals, the lowest reading applied to the whole
interval, as a process authority reads the bottom of the trace) and validates the result with
the case contract (:func:`deviation.inputs.case.parse_case`). :func:`entry_snapshot` is what the
saved record keeps beside the case, so every accepted reading is in the record, also one at
process temperature that opens or closes no interval.

Times are minutes from steam on (the cycle start); "now" is the clock minus the cycle start.
"""

from __future__ import annotations

import hashlib
import json
import math
import re
from dataclasses import asdict, dataclass, field, replace
from datetime import datetime, timedelta
from typing import Any, Callable

from deviation.errors import CaseError, DeviationError
from deviation.inputs import limits
from deviation.inputs.case import Case, LoadedCase, parse_case

# ---------------------------------------------------------------------------------------------
# Bounds of what the floor screen accepts. The shared ones come from the validation layer
# (rules/limits.toml, where a plant may change them); the floor's own stricter ones are named here.

#: A retort reading typed in must be above this [°C]: 0 or below is a blank or a sensor fault.
READING_MIN_C = limits.current().retort_reading_min_C
#: ... and at most this [°C]: no retort for low-acid food runs above it (rules/limits.toml; the
#: retort-log reader refuses a °C column above it too).
READING_MAX_C = limits.current().retort_reading_max_C
#: A reading more than this above the filed process temperature is refused: a retort does not
#: overshoot its set point that far; it is a slip (°F, a digit) or the wrong instrument [°C].
READING_ABOVE_PROCESS_MAX_C = 10.0
#: An initial temperature (product at steam on) must be at least this [°C] (frozen product is
#: not retorted as such) ...
INITIAL_MIN_C = -20.0
#: ... and below this [°C]: product at steam on is below boiling; above is a °F slip or a retort
#: reading typed in the wrong field (rules/limits.toml). It must also be below the filed process
#: temperature.
INITIAL_MAX_C = limits.current().initial_temperature_max_C
#: The largest lot the floor screen takes [containers].
LOT_SIZE_MAX = 10_000_000
#: Longest lot code, retort id, plant or shift [characters].
TEXT_MAX_CHARS = 64
#: A typed time this far after the terminal's clock is the clocks' difference, not the future [min].
CLOCK_TOLERANCE_MIN = 0.5
#: A steam-on clock time later than now is read as yesterday (a night shift) only if that puts
#: steam on at most this long ago [min]; anything older is refused (type the date with the time).
STEAM_ON_YESTERDAY_MAX_MIN = 240.0
#: A steam on longer ago than this is refused [min]: the floor screen follows a cycle as it runs.
STEAM_ON_MAX_AGE_MIN = 24 * 60.0

# A low interval opened and closed within the same recorder second still lasts one second [min]:
# the engine needs end > start, and one second is the finest record the engine resolves.
_SHORTEST_LOW_MIN = 1.0 / 60.0
DRAFT_VERSION = 2

# Field name on the screen -> (label the operator reads, key of [deviation] in the case contract).
FIELD_LABELS = {
    "lot": "Lot",
    "retort": "Retort",
    "lot_size": "Lot size",
    "initial_temperature": "Initial °C",
    "cycle_start": "Steam on",
    "plant": "Plant",
    "shift": "Shift",
    "reading": "Reading °C",
    "at": "At",
}
FIELD_KEYS = {
    "lot": "lot",
    "retort": "retort_id",
    "lot_size": "lot_size_containers",
    "initial_temperature": "initial_temperature_C",
    "plant": "plant",
}
KEY_FIELDS = {v: k for k, v in FIELD_KEYS.items()}
#: Fields the case needs before anything can be evaluated.
REQUIRED = ("lot", "retort", "lot_size", "initial_temperature")


def refused(name: str, message: str) -> DeviationError:
    """A refusal of the value typed in field ``name``, in plain words, naming the field's label."""
    return DeviationError(message, source=FIELD_LABELS.get(name, name))


@dataclass(frozen=True)
class Reading:
    """One entry while the cycle runs.

    ``kind``: ``low`` ("temperature low now"), ``back`` ("back at process temperature now") or
    ``typed`` (a time and reading typed in).
    """

    time_min: float
    temperature_C: float
    kind: str = "typed"

    def describe(self) -> str:
        word = {"low": "▼ low", "back": "▲ back", "typed": "• read"}.get(self.kind, self.kind)
        return f"{word:7s} {self.time_min:6.1f} min  {self.temperature_C:6.1f} °C"


@dataclass
class FloorEntry:
    """What the operator has typed so far (text as typed; readings as numbers)."""

    process_key: str | None = None
    lot: str = ""
    retort: str = ""
    lot_size: str = ""
    initial_temperature: str = ""
    cycle_start: str = ""  # "HH:MM" or "HH:MM:SS" (clock time of steam on), or ISO date-time
    cycle_start_iso: str | None = None  # the cycle start resolved to a date-time (kept in drafts)
    plant: str = ""
    shift: str = ""
    reading: str = ""  # typed in "Reading °C" but not entered yet
    at: str = ""  # typed in "At" but not entered yet
    readings: list[Reading] = field(default_factory=list)
    retort_log_text: str | None = None
    retort_log_source: str | None = None
    following: str | None = None  # the log being followed (resumed with the draft)

    # -- drafts ------------------------------------------------------------------------------

    def to_draft(self) -> dict:
        d = asdict(self)
        d["readings"] = [asdict(r) for r in self.readings]
        d["draft_version"] = DRAFT_VERSION
        return d

    @classmethod
    def from_draft(cls, d: dict | None) -> "FloorEntry":
        if not isinstance(d, dict) or d.get("draft_version") not in (1, DRAFT_VERSION):
            return cls()
        text_fields = ("process_key", "lot", "retort", "lot_size", "initial_temperature", "cycle_start",
                       "cycle_start_iso", "plant", "shift", "reading", "at", "retort_log_text",
                       "retort_log_source", "following")
        known = {k: d[k] for k in text_fields if isinstance(d.get(k), str)}
        readings = []
        for r in d.get("readings") or []:
            try:
                reading = Reading(float(r["time_min"]), float(r["temperature_C"]), str(r.get("kind", "typed")))
            except (KeyError, TypeError, ValueError):
                continue  # a damaged reading is dropped, not the whole draft
            if math.isfinite(reading.time_min) and math.isfinite(reading.temperature_C):
                readings.append(reading)
        return cls(**known, readings=readings)

    def is_blank(self) -> bool:
        return self == FloorEntry(process_key=self.process_key)

    def has_record(self) -> bool:
        """Something that shows what the retort did: a reading or a retort log."""
        return bool(self.readings) or self.retort_log_text is not None


# ---------------------------------------------------------------------------------------------
# Numbers and text


_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")
_CONTROL = re.compile(r"[\x00-\x1f\x7f]")


def parse_number(text: str, name: str, example: str) -> float:
    """A finite number typed in field ``name``; refused in plain words otherwise."""
    value = text.strip()
    if not value:
        raise refused(name, f"nothing typed; type a number (e.g. {example})")
    if _DECIMAL_COMMA.match(value):
        raise refused(name, f"'{value}': use a point for decimals ({value.replace(',', '.')})")
    if not _NUMBER.match(value):
        raise refused(name, f"'{_shown(value)}' is not a number (e.g. {example})")
    number = float(value)
    if not math.isfinite(number):
        raise refused(name, f"'{_shown(value)}' is not a number a thermometer or a clock gives (e.g. {example})")
    return number


def _shown(text: str, limit: int = 24) -> str:
    """Typed text quoted back: control characters made visible, long text cut."""
    text = _CONTROL.sub("�", text)
    return text if len(text) <= limit else text[:limit] + "…"


def check_text(text: str, name: str, *, required: bool) -> str:
    """Lot, retort, plant or shift: trimmed, not blank when required, printable, not too long."""
    value = text.strip()
    if not value:
        if required:
            raise refused(name, "not entered")
        return ""
    if _CONTROL.search(value):
        raise refused(name, f"'{_shown(value)}' holds a control character; type letters, digits and signs")
    if len(value) > TEXT_MAX_CHARS:
        raise refused(name, f"{len(value)} characters; at most {TEXT_MAX_CHARS}")
    return value


def check_lot_size(text: str) -> int:
    """Containers in the lot: a whole number from 1 to :data:`LOT_SIZE_MAX`."""
    value = text.strip().replace("_", "")
    if not value:
        raise refused("lot_size", "not entered")
    if not re.fullmatch(r"\d+", value):
        raise refused("lot_size", f"'{_shown(value)}' is not a number of containers (a whole number, "
                                  f"1 to {LOT_SIZE_MAX:,})")
    n = int(value)
    if not 1 <= n <= LOT_SIZE_MAX:
        raise refused("lot_size", f"{n:,} containers; a lot has 1 to {LOT_SIZE_MAX:,}")
    return n


def fahrenheit_hint(value: float, low_C: float, high_C: float) -> str | None:
    """``"245 looks like °F (= 118.3 °C); enter °C"`` when ``value`` read as °F falls in
    [``low_C``, ``high_C``], else None."""
    as_C = (value - 32.0) * 5.0 / 9.0
    if low_C <= as_C <= high_C:
        return f"{value:g} looks like °F (= {as_C:.1f} °C); enter °C"
    return None


def check_reading(text: str, process_temperature_C: float | None) -> float:
    """A retort reading typed in [°C]: a finite number in (:data:`READING_MIN_C`,
    :data:`READING_MAX_C`], not more than :data:`READING_ABOVE_PROCESS_MAX_C` above the filed
    process temperature; a °F slip is named with the value in °C."""
    value = parse_number(text, "reading", "118.5")
    pt = process_temperature_C
    high = READING_MAX_C if pt is None else min(READING_MAX_C, pt + READING_ABOVE_PROCESS_MAX_C)
    if value <= READING_MIN_C or value > high:
        hint = fahrenheit_hint(value, (pt if pt is not None else READING_MAX_C) - 40.0, high) \
            if value > high else None
        if hint:
            raise refused("reading", hint)
        if value <= READING_MIN_C:
            raise refused("reading", f"{value:g} °C is not a retort reading (above {READING_MIN_C:g} °C "
                                     "expected; a sensor fault or a slip?)")
        if value > READING_MAX_C:
            raise refused("reading", f"{value:g} °C is above {READING_MAX_C:g} °C, which no retort reaches")
        raise refused("reading", f"{value:g} °C is more than {READING_ABOVE_PROCESS_MAX_C:g} °C above the "
                                 f"process temperature {pt:g} °C; check the instrument and the figure")
    return value


def check_initial_temperature(text: str, process_temperature_C: float | None) -> float:
    """The product's temperature at steam on [°C]: finite, from :data:`INITIAL_MIN_C` to below
    :data:`INITIAL_MAX_C` and below the filed process temperature; a °F slip is named."""
    if not text.strip():
        raise refused("initial_temperature", "not entered")
    value = parse_number(text, "initial_temperature", "45")
    high = INITIAL_MAX_C if process_temperature_C is None else min(INITIAL_MAX_C, process_temperature_C)
    if INITIAL_MIN_C <= value < high:
        return value
    if value >= high:
        hint = fahrenheit_hint(value, INITIAL_MIN_C, high - 1e-9)
        if process_temperature_C is not None and value >= process_temperature_C:
            also = f"; if it is °F (= {(value - 32.0) * 5.0 / 9.0:.1f} °C), enter °C" if hint else ""
            raise refused("initial_temperature", f"{value:g} °C is at or above the process temperature "
                                                 f"{process_temperature_C:g} °C: the initial temperature is "
                                                 f"the product's at steam on, not the retort's{also}")
        if hint:
            raise refused("initial_temperature", hint)
        raise refused("initial_temperature", f"{value:g} °C: the product at steam on is below "
                                             f"{INITIAL_MAX_C:g} °C (boiling)")
    raise refused("initial_temperature", f"{value:g} °C is below {INITIAL_MIN_C:g} °C; frozen product is "
                                         "not retorted as such")


# ---------------------------------------------------------------------------------------------
# Times


_CLOCK = re.compile(r"^\s*(\d{1,2}):(\d{2})(?::(\d{2}))?\s*$")


def _clock_time(text: str, name: str) -> tuple[int, int, int] | None:
    """(hour, minute, second) of ``HH:MM[:SS]``; None when ``text`` is not written as a clock time;
    refused when it is, but no time of day."""
    m = _CLOCK.match(text)
    if not m:
        return None
    h, mi, s = int(m.group(1)), int(m.group(2)), int(m.group(3) or 0)
    if h > 23 or mi > 59 or s > 59:
        raise refused(name, f"'{_shown(text.strip())}' is not a clock time (HH:MM, 00:00 to 23:59)")
    return h, mi, s


def _hhmm(t: datetime) -> str:
    return t.strftime("%H:%M:%S") if t.second else t.strftime("%H:%M")


def _naive_local(t: datetime) -> datetime:
    return t.astimezone().replace(tzinfo=None) if t.tzinfo is not None else t


def _duration(minutes: float) -> str:
    h, m = divmod(int(round(minutes)), 60)
    return f"{h} h {m:02d} min" if h else f"{m} min"


def parse_cycle_start(text: str, now: datetime) -> datetime:
    """Steam on from ``HH:MM[:SS]`` (today; yesterday for a night shift) or an ISO date-time.

    A clock time later than now is read as yesterday only if that is at most
    :data:`STEAM_ON_YESTERDAY_MAX_MIN` ago; a steam on in the future or more than
    :data:`STEAM_ON_MAX_AGE_MIN` ago is refused.

    Raises
    ------
    DeviationError
        In plain words, naming the field "Steam on".
    """
    now = _naive_local(now)
    tolerance = timedelta(minutes=CLOCK_TOLERANCE_MIN)
    clock = _clock_time(text, "cycle_start")
    if clock is not None:
        start = now.replace(hour=clock[0], minute=clock[1], second=clock[2], microsecond=0)
        if start > now + tolerance:  # a night shift: steam went on before midnight
            start -= timedelta(days=1)
            ago = (now - start).total_seconds() / 60.0
            if ago > STEAM_ON_YESTERDAY_MAX_MIN:
                raise refused("cycle_start", (
                    f"{_hhmm(start)} is later than now ({_hhmm(now)}); read as yesterday it would be "
                    f"{_duration(ago)} ago, longer than a cycle runs: check the time, or type the date "
                    f"and time ({start.strftime('%Y-%m-%dT%H:%M')})"))
        return start
    try:
        start = _naive_local(datetime.fromisoformat(text.strip()))
    except ValueError:
        raise refused("cycle_start", f"'{_shown(text.strip())}' is not a clock time (HH:MM) or a date and "
                                     "time (2026-11-20T08:00)") from None
    if start > now + tolerance:
        raise refused("cycle_start", f"{start:%Y-%m-%d %H:%M} is in the future (now {now:%Y-%m-%d %H:%M})")
    if (now - start).total_seconds() / 60.0 > STEAM_ON_MAX_AGE_MIN:
        raise refused("cycle_start", f"{start:%Y-%m-%d %H:%M} is more than {_duration(STEAM_ON_MAX_AGE_MIN)} "
                                     "ago; the floor screen follows a cycle as it runs (enter an old "
                                     "cycle as a case file with the CLI)")
    return start


def describe_start(start: datetime, now: datetime) -> str:
    """How the screen names steam on: the clock time, with the day when it is not today."""
    now = _naive_local(now)
    if start.date() == now.date():
        return _hhmm(start)
    if start.date() == (now - timedelta(days=1)).date():
        return f"{_hhmm(start)} yesterday"
    return f"{start:%Y-%m-%d} {_hhmm(start)}"


def minutes_since(start: datetime, now: datetime) -> float:
    """Minutes from ``start`` to ``now`` (never negative) [min]."""
    return max((_naive_local(now) - _naive_local(start)).total_seconds() / 60.0, 0.0)


def parse_time(text: str, start: datetime | None, now: datetime) -> float:
    """A typed time of a reading [min from steam on]: minutes (``34.5``) or a clock time
    (``08:34``), between steam on and now.

    Raises
    ------
    DeviationError
        Steam on not set, not a time, before steam on or in the future (plain words, field "At").
    """
    value = text.strip()
    if start is None:
        raise refused("at", "set Steam on first (the clock time the cycle started): a typed time is "
                            "checked against it")
    now = _naive_local(now)
    now_min = minutes_since(start, now)
    if not value:
        raise refused("at", "nothing typed; type minutes from steam on (e.g. 34.5) or a clock time (HH:MM)")
    clock = _clock_time(value, "at")
    if clock is not None:
        first = start.replace(hour=clock[0], minute=clock[1], second=clock[2], microsecond=0)
        tolerance = timedelta(minutes=CLOCK_TOLERANCE_MIN)
        # The reading was taken between steam on and now: today's clock time, or the next day's
        # for a cycle that runs over midnight.
        when = first if first >= start - tolerance else first + timedelta(days=1)
        if when > now + tolerance:
            if first < start:
                raise refused("at", f"{_hhmm(first)} is before steam on ({describe_start(start, now)})")
            raise refused("at", f"{_hhmm(when)} is in the future (now {now:%H:%M})")
        return round(max((when - start).total_seconds() / 60.0, 0.0), 4)
    minutes = parse_number(value, "at", "34.5")
    if minutes < 0.0:
        raise refused("at", f"{minutes:g} min: a time from steam on cannot be negative")
    if minutes > now_min + CLOCK_TOLERANCE_MIN:
        raise refused("at", f"{minutes:g} min from steam on is in the future (now {now_min:.1f} min)")
    return minutes


def parse_reading(text: str, process_temperature_C: float | None = None) -> float:
    """A retort reading typed in [°C] (see :func:`check_reading`)."""
    return check_reading(text, process_temperature_C)


# ---------------------------------------------------------------------------------------------
# The form as a whole


@dataclass(frozen=True)
class CheckedFields:
    """The form's values checked: what may go into the case, and what is refused or missing."""

    values: dict[str, Any]  # case key -> value (only accepted fields)
    errors: dict[str, str]  # screen field -> refusal, in plain words ("Lot size: ...")
    missing: tuple[str, ...]  # required screen fields not typed yet

    @property
    def complete(self) -> bool:
        return not self.errors and not self.missing


def check_fields(entry: FloorEntry, process_temperature_C: float | None) -> CheckedFields:
    """Check every form field of ``entry`` (steam on apart: see :func:`parse_cycle_start`)."""
    values: dict[str, Any] = {}
    errors: dict[str, str] = {}
    missing = []
    checks: dict[str, Callable[[str], Any]] = {
        "lot": lambda t: check_text(t, "lot", required=True),
        "retort": lambda t: check_text(t, "retort", required=True),
        "lot_size": check_lot_size,
        "initial_temperature": lambda t: check_initial_temperature(t, process_temperature_C),
        "plant": lambda t: check_text(t, "plant", required=False),
        "shift": lambda t: check_text(t, "shift", required=False),
    }
    for name, check in checks.items():
        text = getattr(entry, name)
        if name in REQUIRED and not text.strip():
            missing.append(name)
            continue
        try:
            value = check(text)
        except DeviationError as exc:
            errors[name] = str(exc)
            continue
        if name in FIELD_KEYS and value != "":
            values[FIELD_KEYS[name]] = value
        elif name == "shift" and value:
            values["shift"] = value
    return CheckedFields(values, errors, tuple(missing))


# ---------------------------------------------------------------------------------------------
# Readings -> events


def low_intervals(readings: list[Reading], process_temperature_C: float,
                  now_min: float | None) -> tuple[list[dict], bool]:
    """Temperature-low events from the readings, and whether the last one is still open.

    A reading below the process temperature opens an interval (or lowers its lowest reading);
    a reading at or above it closes the interval at that time. An interval still open counts
    until ``now_min`` (or the latest reading when the clock is not known). Each event's note
    names the readings it stands on.
    """
    events: list[dict] = []
    open_: list | None = None  # [start, latest, lowest, readings]
    for r in sorted(readings, key=lambda r: r.time_min):
        if r.temperature_C < process_temperature_C:
            if open_ is None:
                open_ = [r.time_min, r.time_min, r.temperature_C, [r]]
            else:
                open_[1], open_[2] = r.time_min, min(open_[2], r.temperature_C)
                open_[3].append(r)
        elif open_ is not None:
            events.append(_low(open_[0], r.time_min, open_[2], [*open_[3], r], closed=True))
            open_ = None
    running = open_ is not None
    if open_ is not None:
        end = max(open_[1], now_min if now_min is not None else open_[1])
        events.append(_low(open_[0], end, open_[2], open_[3], closed=False))
    return events, running


def _low(start: float, end: float, lowest: float, readings: list[Reading], *, closed: bool) -> dict:
    end = max(end, start + _SHORTEST_LOW_MIN)
    seen = "; ".join(f"{r.temperature_C:g} °C at {r.time_min:g} min ({r.kind})" for r in readings)
    note = f"from floor entry: {seen}" + ("" if closed else "; still low, counted until now")
    return {"kind": "temperature-low", "start_min": round(start, 4), "end_min": round(end, 4),
            "temperature_C": lowest, "note": note}


def log_running(last_retort_C: float, process_temperature_C: float) -> bool:
    """Whether a retort log that stops at ``last_retort_C`` stops while the cycle runs: the retort
    is not yet in cooling (below the watch's cooling threshold, the lower of
    :data:`deviation.live.watch.COOLING_DONE_C` and 10 °C under the process temperature)."""
    from deviation.live.watch import COOLING_DONE_C

    return last_retort_C >= min(COOLING_DONE_C, process_temperature_C - 10.0)


def cycle_running(process: dict, now_min: float | None, low_open: bool) -> bool:
    """Whether the cycle of a floor entry (no retort log) is still running at ``now_min``: a low
    interval is open, or the filed come-up and hold have not yet run."""
    if now_min is None:
        return False
    if low_open:
        return True
    try:
        end = float(process["come_up_time_min"]) + float(process["process_time_min"])
    except (KeyError, TypeError, ValueError):
        return False
    return now_min < end


# ---------------------------------------------------------------------------------------------
# The case


@dataclass(frozen=True)
class BuiltCase:
    """The entry as a validated case, ready for the engine and the store."""

    loaded: LoadedCase
    data: dict
    now_min: float | None
    low_running: bool


def _description(values: dict) -> str:
    text = "entered at the retort with the terminal UI"
    if values.get("shift"):
        text += f"; shift {values['shift']}"
    return text


def case_data(process: dict, entry: FloorEntry, now_min: float | None,
              checked: CheckedFields | None = None, start: datetime | None = None) -> tuple[dict, bool]:
    """The case mapping (``[process]`` and ``[deviation]``) for an entry, not yet validated.

    The form values go in as checked (numbers as numbers); a field refused or not typed yet is
    left out, so the case contract reports it missing.
    """
    pt = process.get("process_temperature_C")
    checked = checked or check_fields(entry, pt if isinstance(pt, (int, float)) else None)
    dev: dict[str, Any] = dict(checked.values)
    if start is not None:
        dev["date"] = start.date().isoformat()
    events, running = ([], False)
    if entry.readings:
        if not isinstance(pt, (int, float)):
            raise CaseError("the filed process has no process temperature to compare readings with",
                            source="filed process")
        events, running = low_intervals(entry.readings, float(pt), now_min)
    if events:
        dev["events"] = events
    dev["description"] = _description(checked.values)
    return {"process": process, "deviation": dev}, running


def build_case(process: dict, entry: FloorEntry, now_min: float | None,
               *, source: str = "floor entry", start: datetime | None = None) -> BuiltCase:
    """Check the entry and validate it as a case.

    Raises
    ------
    CaseError
        One line per problem, in plain words naming the field ("Lot size: ...").
    """
    pt = process.get("process_temperature_C")
    checked = check_fields(entry, pt if isinstance(pt, (int, float)) else None)
    if not checked.complete:
        lines = list(checked.errors.values())
        lines += [f"{FIELD_LABELS[name]}: not entered" for name in checked.missing]
        raise CaseError("\n".join(lines), source=source)
    data, running = case_data(process, entry, now_min, checked, start)
    try:
        case: Case = parse_case(data, source=source)
    except CaseError as exc:
        raise CaseError(plain_message(exc.message), source=source) from None
    digest = hashlib.sha256(json.dumps(data, sort_keys=True, default=str).encode())
    digest.update(b"\0" + (entry.retort_log_text or "").encode())
    loaded = LoadedCase(case=case, source=source, sha256=digest.hexdigest(),
                        retort_log_text=entry.retort_log_text,
                        retort_log_source=entry.retort_log_source)
    return BuiltCase(loaded, data, now_min, running)


def entry_snapshot(entry: FloorEntry, start: datetime | None) -> dict:
    """What the saved record keeps beside the case: every accepted reading as entered (also one
    that opens or closes no interval), steam on, plant and shift as typed."""
    return {"readings": [asdict(r) for r in sorted(entry.readings, key=lambda r: r.time_min)],
            "steam_on": start.isoformat() if start is not None else None,
            "plant": entry.plant.strip(), "shift": entry.shift.strip(),
            "retort_log_source": entry.retort_log_source}


# ---------------------------------------------------------------------------------------------
# Messages in the words of the trade


_PATH_WORDS = (
    (re.compile(r"^deviation\.events\[(\d+)\](?:\.\w+)?$"), lambda m: f"low interval {int(m.group(1)) + 1}"),
    (re.compile(r"^deviation\.(\w+)$"), lambda m: FIELD_LABELS.get(KEY_FIELDS.get(m.group(1), ""), None)
     or m.group(1).replace("_", " ")),
    (re.compile(r"^process\.(.+)$"), lambda m: "filed process " + m.group(1).replace("_", " ")),
)
_MESSAGE_WORDS = (
    (re.compile(r"^required key is missing$"), lambda m: "not entered"),
    (re.compile(r"^Input should be greater than or equal to (\S+)(?: \(found '?(.*?)'?\))?$"),
     lambda m: f"must be {m.group(1)} or more" + (f" (found {m.group(2)})" if m.group(2) else "")),
    (re.compile(r"^Input should be greater than (\S+)(?: \(found '?(.*?)'?\))?$"),
     lambda m: f"must be more than {m.group(1)}" + (f" (found {m.group(2)})" if m.group(2) else "")),
    (re.compile(r"^Input should be less than or equal to (\S+)(?: \(found '?(.*?)'?\))?$"),
     lambda m: f"must be {m.group(1)} or less" + (f" (found {m.group(2)})" if m.group(2) else "")),
    (re.compile(r"^Input should be a valid (integer|number)[^(]*(?:\(found '?(.*?)'?\))?$"),
     lambda m: ("must be a whole number" if m.group(1) == "integer" else "must be a number")
     + (f" (found {m.group(2)})" if m.group(2) else "")),
    (re.compile(r"^String should have at least 1 character.*$"), lambda m: "not entered"),
    (re.compile(r"^unknown key \(not part of the case contract\)$"), lambda m: "not a field of a case"),
)


def plain_message(text: str) -> str:
    """Case-contract messages (``deviation.lot_size_containers: Input should be ...``) in the
    words of the floor screen (``Lot size: must be 1 or more``), one line per problem."""
    out = []
    for line in text.splitlines():
        path, sep, msg = line.partition(": ")
        words = None
        if sep:
            for pattern, say in _PATH_WORDS:
                m = pattern.match(path)
                if m:
                    words = say(m)
                    break
        if words is None:
            path, msg = "", line
        for pattern, say in _MESSAGE_WORDS:
            m = pattern.match(msg)
            if m:
                msg = say(m)
                break
        out.append(f"{words}: {msg}" if words else msg)
    return "\n".join(out)


def field_messages(exc: CaseError) -> tuple[dict[str, str], list[str]]:
    """Split an entry error into messages per screen field and the rest."""
    per: dict[str, str] = {}
    rest: list[str] = []
    by_label = {label: name for name, label in FIELD_LABELS.items()}
    for line in exc.message.splitlines():
        label, _, msg = line.partition(": ")
        name = by_label.get(label)
        if name and msg:
            per[name] = line
        else:
            rest.append(line)
    return per, rest


def with_reading(entry: FloorEntry, reading: Reading) -> FloorEntry:
    return replace(entry, readings=[*entry.readings, reading])


def without_last_reading(entry: FloorEntry) -> FloorEntry:
    return replace(entry, readings=entry.readings[:-1])


Clock = Callable[[], datetime]

__all__ = ["FloorEntry", "Reading", "BuiltCase", "CheckedFields", "build_case", "case_data", "low_intervals",
           "check_fields", "check_reading", "check_initial_temperature", "check_lot_size", "check_text",
           "parse_number", "fahrenheit_hint", "cycle_running", "log_running", "entry_snapshot", "plain_message",
           "field_messages", "parse_cycle_start", "describe_start", "parse_time", "parse_reading",
           "minutes_since", "with_reading", "without_last_reading", "FIELD_KEYS", "FIELD_LABELS", "Clock",
           "READING_MIN_C", "READING_MAX_C", "READING_ABOVE_PROCESS_MAX_C", "INITIAL_MIN_C", "INITIAL_MAX_C",
           "LOT_SIZE_MAX", "TEXT_MAX_CHARS", "CLOCK_TOLERANCE_MIN", "STEAM_ON_YESTERDAY_MAX_MIN",
           "STEAM_ON_MAX_AGE_MIN"]
