"""The floor entry as data: what the operator typed, turned into a case the engine evaluates.

No widgets here. A :class:`FloorEntry` holds the typed text of each field (kept as typed, so a
draft restores exactly what was on the screen) and the readings taken while the cycle runs.
:func:`build_case` lays the readings over the filed cycle as ``[[deviation.events]]``
(``temperature-low`` intervals, the lowest reading applied to the whole interval, as a process
authority reads the bottom of the trace) and validates the result with the case contract
(:func:`deviation.inputs.case.parse_case`), so every message is the one the CLI gives for the same
value in a case file.

Times are minutes from steam on (the cycle start); "now" is the clock minus the cycle start.
"""

from __future__ import annotations

import hashlib
import json
import re
from dataclasses import asdict, dataclass, field, replace
from datetime import datetime, timedelta
from typing import Any, Callable

from deviation.errors import CaseError, DeviationError
from deviation.inputs.case import Case, LoadedCase, parse_case

# A low interval opened and closed within the same recorder second still lasts one second [min]:
# the engine needs end > start, and one second is the finest record the engine resolves.
_SHORTEST_LOW_MIN = 1.0 / 60.0
DRAFT_VERSION = 1

# Field name on the screen -> key of [deviation] in the case contract.
FIELD_KEYS = {
    "lot": "lot",
    "retort": "retort_id",
    "lot_size": "lot_size_containers",
    "initial_temperature": "initial_temperature_C",
}
KEY_FIELDS = {v: k for k, v in FIELD_KEYS.items()}


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
    readings: list[Reading] = field(default_factory=list)
    retort_log_text: str | None = None
    retort_log_source: str | None = None

    # -- drafts ------------------------------------------------------------------------------

    def to_draft(self) -> dict:
        d = asdict(self)
        d["readings"] = [asdict(r) for r in self.readings]
        d["draft_version"] = DRAFT_VERSION
        return d

    @classmethod
    def from_draft(cls, d: dict | None) -> "FloorEntry":
        if not isinstance(d, dict) or d.get("draft_version") != DRAFT_VERSION:
            return cls()
        known = {k: d[k] for k in ("process_key", "lot", "retort", "lot_size", "initial_temperature",
                                   "cycle_start", "cycle_start_iso", "retort_log_text",
                                   "retort_log_source") if k in d}
        readings = []
        for r in d.get("readings") or []:
            try:
                readings.append(Reading(float(r["time_min"]), float(r["temperature_C"]),
                                        str(r.get("kind", "typed"))))
            except (KeyError, TypeError, ValueError):
                continue  # a damaged reading is dropped, not the whole draft
        return cls(**known, readings=readings)

    def is_blank(self) -> bool:
        return self == FloorEntry(process_key=self.process_key)


# ---------------------------------------------------------------------------------------------
# Times


_CLOCK = re.compile(r"^\s*(\d{1,2}):(\d{2})(?::(\d{2}))?\s*$")


def parse_cycle_start(text: str, now: datetime) -> datetime:
    """The cycle start from ``HH:MM[:SS]`` (today, or yesterday if that is in the future) or ISO.

    Raises
    ------
    DeviationError
        The text is neither.
    """
    m = _CLOCK.match(text)
    if m:
        h, mi, s = int(m.group(1)), int(m.group(2)), int(m.group(3) or 0)
        if h > 23 or mi > 59 or s > 59:
            raise DeviationError(f"'{text}' is not a clock time (HH:MM, 00:00 to 23:59)",
                                 source="cycle start")
        start = now.replace(hour=h, minute=mi, second=s, microsecond=0)
        if start > now + timedelta(minutes=1):  # a night shift: steam went on before midnight
            start -= timedelta(days=1)
        return start
    try:
        return datetime.fromisoformat(text.strip())
    except ValueError:
        raise DeviationError(f"'{text}' is not a clock time (HH:MM) or an ISO date-time",
                             source="cycle start") from None


def minutes_since(start: datetime, now: datetime) -> float:
    """Minutes from ``start`` to ``now`` (never negative) [min]."""
    if start.tzinfo is None and now.tzinfo is not None:
        now = now.replace(tzinfo=None)
    return max((now - start).total_seconds() / 60.0, 0.0)


def parse_time(text: str, start: datetime | None, now: datetime) -> float:
    """A typed time: minutes from steam on (``34.5``) or a clock time (``08:34``) [min]."""
    text = text.strip()
    if _CLOCK.match(text):
        if start is None:
            raise DeviationError("a clock time needs the cycle start (steam on) set first; or type "
                                 "minutes from steam on", source="time")
        return minutes_since(start, parse_cycle_start(text, now))
    try:
        value = float(text)
    except ValueError:
        raise DeviationError(f"'{text}' is not minutes from steam on (e.g. 34.5) or a clock time "
                             "(HH:MM)", source="time") from None
    if not value >= 0.0 or value != value:
        raise DeviationError(f"{text} min: a time from steam on cannot be negative", source="time")
    return value


def parse_reading(text: str) -> float:
    """A retort reading typed in [°C] (the case contract checks its range)."""
    try:
        return float(text.strip())
    except ValueError:
        raise DeviationError(f"'{text}' is not a temperature in °C (e.g. 118.5)", source="reading") from None


# ---------------------------------------------------------------------------------------------
# Readings -> events


def low_intervals(readings: list[Reading], process_temperature_C: float,
                  now_min: float | None) -> tuple[list[dict], bool]:
    """Temperature-low events from the readings, and whether the last one is still open.

    A reading below the process temperature opens an interval (or lowers its lowest reading);
    a reading at or above it closes the interval at that time. An interval still open counts
    until ``now_min`` (or the latest reading when the clock is not known).
    """
    events: list[dict] = []
    open_: list[float] | None = None  # [start, latest, lowest]
    for r in sorted(readings, key=lambda r: r.time_min):
        if r.temperature_C < process_temperature_C:
            if open_ is None:
                open_ = [r.time_min, r.time_min, r.temperature_C]
            else:
                open_[1], open_[2] = r.time_min, min(open_[2], r.temperature_C)
        elif open_ is not None:
            events.append(_low(open_[0], r.time_min, open_[2], closed=True))
            open_ = None
    running = open_ is not None
    if open_ is not None:
        end = max(open_[1], now_min if now_min is not None else open_[1])
        events.append(_low(open_[0], end, open_[2], closed=False))
    return events, running


def _low(start: float, end: float, lowest: float, *, closed: bool) -> dict:
    end = max(end, start + _SHORTEST_LOW_MIN)
    note = "from floor entry" if closed else "from floor entry; still low, counted until now"
    return {"kind": "temperature-low", "start_min": round(start, 4), "end_min": round(end, 4),
            "temperature_C": lowest, "note": note}


# ---------------------------------------------------------------------------------------------
# The case


@dataclass(frozen=True)
class BuiltCase:
    """The entry as a validated case, ready for the engine and the store."""

    loaded: LoadedCase
    data: dict
    now_min: float | None
    low_running: bool


def case_data(process: dict, entry: FloorEntry, now_min: float | None) -> tuple[dict, bool]:
    """The case mapping (``[process]`` and ``[deviation]``) for an entry, not yet validated."""
    dev: dict[str, Any] = {}
    for name, key in FIELD_KEYS.items():
        text = getattr(entry, name).strip()
        if text:
            dev[key] = text  # as typed: the case contract parses it (same message as the CLI)
    pt = process.get("process_temperature_C")
    events, running = ([], False)
    if entry.readings:
        if not isinstance(pt, (int, float)):
            raise CaseError("the filed process has no process_temperature_C to compare readings with",
                            source="process")
        events, running = low_intervals(entry.readings, float(pt), now_min)
    if events:
        dev["events"] = events
    dev["description"] = "entered at the retort with the terminal UI"
    return {"process": process, "deviation": dev}, running


def build_case(process: dict, entry: FloorEntry, now_min: float | None,
               *, source: str = "floor entry") -> BuiltCase:
    """Validate the entry as a case.

    Raises
    ------
    CaseError
        One ``field.path: message`` line per problem (the CLI's messages).
    """
    data, running = case_data(process, entry, now_min)
    case: Case = parse_case(data, source=source)
    digest = hashlib.sha256(json.dumps(data, sort_keys=True, default=str).encode())
    digest.update(b"\0" + (entry.retort_log_text or "").encode())
    loaded = LoadedCase(case=case, source=source, sha256=digest.hexdigest(),
                        retort_log_text=entry.retort_log_text,
                        retort_log_source=entry.retort_log_source)
    return BuiltCase(loaded, data, now_min, running)


def field_messages(exc: CaseError) -> tuple[dict[str, str], list[str]]:
    """Split a case error into messages per screen field and the rest (``field.path: message``)."""
    per: dict[str, str] = {}
    rest: list[str] = []
    for line in exc.message.splitlines():
        path, _, msg = line.partition(": ")
        key = path.removeprefix("deviation.")
        name = KEY_FIELDS.get(key) if path.startswith("deviation.") else None
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

__all__ = ["FloorEntry", "Reading", "BuiltCase", "build_case", "case_data", "low_intervals",
           "field_messages", "parse_cycle_start", "parse_time", "parse_reading", "minutes_since",
           "with_reading", "without_last_reading", "FIELD_KEYS", "Clock"]
