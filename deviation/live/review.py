"""Daily record review: every retort cycle of a day's production schedule screened against its
filed process.

21 CFR 113.100(b) asks that the processing and production records be reviewed by a qualified
person within one working day after processing; a missed drop on a recorder file nobody looked
at is the deviation that ships. :func:`review_day` reads the day's schedule (a *manifest*, CSV or
TOML, see :func:`read_manifest`), evaluates each cycle's recorder file with the General Method
against its filed process (:func:`deviation.evaluate.evaluate_case`, the same pipeline every face
uses), and gives each cycle one line: reviewed clean, deviation found (its flags and guidance; a
deviation record is opened in the store at once), or could not be reviewed and why. A missing,
unreadable, copied or mismatched recorder file is never clean.

Opening records is idempotent: the ``entered`` event's key is a hash of the schedule row (as
read) and the recorder file's SHA-256, so reviewing the same day again opens nothing twice. A
corrected row is a new entry.

Cycles are evaluated in a process pool (``fork``, as :func:`deviation.records.replay.replay`);
the parent alone writes to the store, in the order results arrive.
"""

from __future__ import annotations

import csv
import hashlib
import json
import multiprocessing as mp
import os
import time
import tomllib
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field
from datetime import date as Date
from datetime import datetime
from datetime import time as Time
from pathlib import Path
from typing import Any

from deviation.errors import CaseError, DeviationError, StoreError

STATUSES = ("clean", "deviation", "not-reviewed")
STEAM_ON_TOLERANCE_MIN = 10.0
REQUIRED = ("lot", "retort", "process", "recorder_file", "steam_on", "initial_temperature", "lot_size")
# Other spellings a plant's export may use for the same column (the case file's names among them).
ALIASES = {"retort_id": "retort", "process_ref": "process", "retort_log": "recorder_file",
           "recorder": "recorder_file", "lot_size_containers": "lot_size", "steam_on_time": "steam_on"}
OPTIONAL = ("plant", "date", "product", "record_gap_limit_min", "note")
CF_PREFIX = "cf:"  # a CSV column "cf:fill weight" holds a critical-factor reading


# ---------------------------------------------------------------------------------------------
# The manifest


@dataclass
class Entry:
    """One cycle of the schedule, as read (``problems`` lists what makes it unreviewable)."""

    where: str  # "schedule.csv line 4" / "day.toml cycle 3"
    lot: str = ""
    retort: str = ""
    process: str = ""
    recorder_file: str = ""
    steam_on: str = ""  # ISO, normalised
    initial_temperature_C: float | None = None
    lot_size: int | None = None
    plant: str = ""
    date: str = ""
    product: str = ""
    record_gap_limit_min: float | None = None
    note: str = ""
    critical_factor_readings: list[dict] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)

    def identity(self) -> dict:
        """What the entry says, normalised (the part of the entry key that comes from the row)."""
        d = asdict(self)
        d.pop("where")
        d.pop("problems")
        return d


@dataclass
class Manifest:
    path: Path
    sha256: str
    plant: str
    date: str
    entries: list[Entry]

    @property
    def folder(self) -> Path:
        return self.path.parent


def _norm(name: str) -> str:
    key = name.strip()
    if key.lower().startswith(CF_PREFIX):
        return CF_PREFIX + key[len(CF_PREFIX):].strip()
    key = key.lower().replace(" ", "_").replace("-", "_")
    if key.endswith(("_c", "_f")):
        key = key[:-2] + key[-2:].upper()
    return ALIASES.get(key, key)


def _parse_steam_on(value: Any, day: str, where: str) -> tuple[str, list[str]]:
    """ISO text of the steam-on time; ``HH:MM`` takes the day's date."""
    if isinstance(value, datetime):
        return value.isoformat(timespec="minutes" if value.second == 0 else "seconds"), []
    if isinstance(value, Time):
        value = value.isoformat()
    text = str(value).strip()
    if not text:
        return "", [f"{where}: steam_on is empty (the time steam was turned on is a required record)"]
    try:
        moment = datetime.fromisoformat(text)
    except ValueError:
        try:
            clock = Time.fromisoformat(text)
        except ValueError:
            return "", [f"{where}: steam_on '{text}' is not a time (expected 2026-12-01T06:05 or 06:05)"]
        if not day:
            return "", [f"{where}: steam_on '{text}' has no date: give a date column, [day] date or --date"]
        moment = datetime.combine(Date.fromisoformat(day), clock)
    return moment.isoformat(timespec="minutes" if moment.second == 0 else "seconds"), []


def _entry(values: dict, where: str, *, plant: str, day: str) -> Entry:
    from deviation.inputs.units import fahrenheit_to_celsius

    e = Entry(where=where)
    for name in ("lot", "retort", "process", "recorder_file"):
        text = str(values.get(name) if values.get(name) is not None else "").strip()
        if not text:
            e.problems.append(f"{where}: {name} is empty")
        setattr(e, name, text)
    for name in ("plant", "date", "product", "note"):
        setattr(e, name, str(values.get(name) or "").strip())
    e.plant = e.plant or plant
    e.date = e.date or day
    if e.date:
        try:
            e.date = Date.fromisoformat(e.date).isoformat()
        except ValueError:
            e.problems.append(f"{where}: date '{e.date}' is not a date (expected 2026-12-01)")
            e.date = ""
    e.steam_on, problems = _parse_steam_on(values.get("steam_on", ""), e.date, where)
    e.problems += problems
    if e.steam_on and not e.date:
        e.date = e.steam_on[:10]
    it_C, it_F = values.get("initial_temperature_C"), values.get("initial_temperature_F")
    raw, unit = (it_C, "C") if str(it_C if it_C is not None else "").strip() else (it_F, "F")
    if not str(raw if raw is not None else "").strip():
        e.problems.append(f"{where}: initial_temperature_C is empty (the initial temperature is a "
                          "required record, 21 CFR 113.100)")
    else:
        try:
            x = float(raw)
            e.initial_temperature_C = x if unit == "C" else fahrenheit_to_celsius(x)
        except (TypeError, ValueError):
            e.problems.append(f"{where}: initial_temperature_{unit} '{raw}' is not a number")
    raw = values.get("lot_size")
    try:
        e.lot_size = int(str(raw).strip())
        if e.lot_size < 1:
            raise ValueError
    except (TypeError, ValueError):
        e.problems.append(f"{where}: lot_size '{raw if raw is not None else ''}' is not a whole number of "
                          "containers (1 or more)")
        e.lot_size = None
    raw = values.get("record_gap_limit_min")
    if raw is not None and str(raw).strip():
        try:
            e.record_gap_limit_min = float(raw)
        except (TypeError, ValueError):
            e.problems.append(f"{where}: record_gap_limit_min '{raw}' is not a number")
    readings = values.get("critical_factor_readings") or []
    for key, raw in values.items():
        if key.startswith(CF_PREFIX) and str(raw).strip():
            readings = [*readings, {"name": key[len(CF_PREFIX):], "value": raw}]
    for r in readings:
        try:
            e.critical_factor_readings.append({"name": str(r["name"]), "value": float(r["value"])})
        except (KeyError, TypeError, ValueError):
            e.problems.append(f"{where}: critical-factor reading {r!r} needs a name and a number")
    return e


def _close_names(missing: str, columns: Sequence[str]) -> str:
    import difflib

    near = difflib.get_close_matches(missing, list(columns), n=1)
    return f" (did you mean '{near[0]}'?)" if near else ""


def _check_columns(columns: Sequence[str], source: str) -> None:
    have = set(columns)
    for need in REQUIRED:
        if need == "initial_temperature":
            if not {"initial_temperature_C", "initial_temperature_F"} & have:
                raise CaseError("the schedule has no initial_temperature_C (or initial_temperature_F) "
                                f"column{_close_names('initial_temperature_C', columns)}", source=source)
        elif need not in have:
            raise CaseError(f"the schedule has no '{need}' column{_close_names(need, columns)}; "
                            f"required: {', '.join(REQUIRED[:5])}, initial_temperature_C, lot_size",
                            source=source)


def read_manifest(path: str | Path, *, plant: str = "", date: str = "") -> Manifest:
    """Read a day's production schedule.

    CSV (``.csv``): a header row and one row per cycle; ``#`` lines and blank lines are skipped.
    TOML (``.toml``): an optional ``[day]`` table (``plant``, ``date``) and one ``[[cycle]]``
    table per cycle. Columns / keys (units in the names, °F accepted where °C is):

    ``lot``, ``retort``, ``process`` (the filed process: a library id ``ID`` or ``ID@N``, or a
    process TOML file, relative to the schedule), ``recorder_file`` (the cycle's retort log,
    relative to the schedule), ``steam_on`` (``2026-12-01T06:05``, or ``06:05`` with the day's
    date), ``initial_temperature_C``, ``lot_size`` (containers); optional ``plant``, ``date``,
    ``product``, ``record_gap_limit_min``, ``note``, and critical-factor readings (CSV columns
    ``cf:NAME``; TOML ``critical_factor_readings = [{name, value}]``).

    Raises
    ------
    CaseError
        The file cannot be read, or lacks a required column. A bad value in one row does not
        stop the day: that cycle is reported as not reviewed, naming the row and field.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise CaseError("schedule file not found", source=str(path)) from None
    except OSError as exc:
        raise CaseError(f"schedule cannot be read: {exc.strerror}", source=str(path)) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise CaseError(f"not UTF-8 text ({exc.reason} at byte {exc.start})", source=str(path)) from None
    sha = hashlib.sha256(raw).hexdigest()
    if path.suffix.lower() == ".toml":
        entries, plant, date = _read_toml(text, path, plant=plant, date=date)
    else:
        entries = _read_csv(text, path, plant=plant, date=date)
    if not entries:
        raise CaseError("the schedule lists no cycle", source=str(path))
    return Manifest(path=path, sha256=sha, plant=plant, date=date, entries=entries)


def _read_csv(text: str, path: Path, *, plant: str, date: str) -> list[Entry]:
    header: list[str] | None = None
    entries = []
    for number, line in enumerate(text.splitlines(), 1):
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        cells = next(csv.reader([line]))
        if header is None:
            header = [_norm(c) for c in cells]
            _check_columns(header, str(path))
            continue
        if not any(c.strip() for c in cells):
            continue
        where = f"{path.name} line {number}"
        if len(cells) > len(header):
            problem = (f"{where}: {len(cells)} fields, the header has {len(header)} (a comma inside a "
                       "value needs quotes)")
            entries.append(Entry(where=where, problems=[problem]))
            continue
        values = dict(zip(header, (c.strip() for c in cells)))
        entries.append(_entry(values, where, plant=plant, day=date))
    if header is None:
        raise CaseError("the schedule has no header row", source=str(path))
    return entries


def _read_toml(text: str, path: Path, *, plant: str, date: str) -> tuple[list[Entry], str, str]:
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(f"TOML syntax error: {exc}", source=str(path)) from None
    day = data.get("day") or {}
    if not isinstance(day, dict):
        raise CaseError("[day] must be a table (plant, date)", source=str(path))
    plant = plant or str(day.get("plant") or "")
    date = date or str(day.get("date") or "")
    cycles = data.get("cycle")
    if not isinstance(cycles, list) or not all(isinstance(c, dict) for c in cycles):
        raise CaseError("the schedule needs one [[cycle]] table per cycle", source=str(path))
    entries = []
    for i, table in enumerate(cycles, 1):
        values = {_norm(k): v for k, v in table.items()}
        entries.append(_entry(values, f"{path.name} [[cycle]] {i}", plant=plant, day=date))
    return entries, plant, date


# ---------------------------------------------------------------------------------------------
# Filed processes


@dataclass(frozen=True)
class FiledProcess:
    table: dict  # the [process] table
    ref: dict | None  # the library's (ref, process_id, process_version, sha256); None for a file
    source: str


def resolve_process(ref: str, *, folder: Path, store) -> FiledProcess:
    """The filed process a schedule names: a process TOML file (relative to ``folder``) or a
    library id (``ID`` latest active version, ``ID@N``) in ``store``."""
    from deviation.records import processes as library

    path = Path(ref) if Path(ref).is_absolute() else folder / ref
    if ref.lower().endswith(".toml") or path.is_file():
        table = library.read_process_file(path)
        return FiledProcess(table=table, ref=None, source=str(path))
    if store is None:
        raise CaseError(f"process '{ref}' names a filed process, which needs the record store "
                        "(drop --no-record, or name a process TOML file)")
    entry = library.lookup(store, ref)
    library.validate_process(entry.process, source=f"process {entry.ref}")
    ref_obj = library.ResolvedRef(ref, entry.process_id, entry.version, entry.sha256)
    return FiledProcess(table=dict(entry.process), ref=ref_obj.to_dict(), source=f"process {entry.ref}")


# ---------------------------------------------------------------------------------------------
# Screening one cycle (runs in a worker)


def entry_key(entry: Entry, recorder_sha256: str) -> str:
    """The idempotency key of the record a deviation opens (``entered`` event id)."""
    blob = json.dumps({"entry": entry.identity(), "recorder_sha256": recorder_sha256}, sort_keys=True,
                      separators=(",", ":"), ensure_ascii=True)
    return "rv-" + hashlib.sha256(blob.encode()).hexdigest()[:32]


def _first_timestamp(text: str) -> datetime | None:
    """The first reading's time of a log with an ISO ``time`` column (None otherwise)."""
    header = None
    for line in text.split("\n", 200)[:200]:  # the header and the first reading are near the top
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        cells = [c.strip() for c in line.split(",")]
        if header is None:
            header = [c.lower() for c in cells]
            if "time" not in header or "time_min" in header:
                return None
            continue
        try:
            return datetime.fromisoformat(cells[header.index("time")])
        except (ValueError, IndexError):
            return None
    return None


def _steam_on_problem(text: str, steam_on: str, tolerance_min: float) -> str | None:
    first = _first_timestamp(text)
    if first is None or not steam_on:
        return None
    planned = datetime.fromisoformat(steam_on)
    if (first.tzinfo is None) != (planned.tzinfo is None):
        first, planned = first.replace(tzinfo=None), planned.replace(tzinfo=None)
    off_min = abs((first - planned).total_seconds()) / 60.0
    if off_min > tolerance_min:
        return (f"the recorder file begins at {first.isoformat(sep=' ', timespec='minutes')}, the schedule "
                f"says steam on at {planned.isoformat(sep=' ', timespec='minutes')} ({off_min:.0f} min apart, "
                f"more than {tolerance_min:g}): it is not this cycle's record, or the schedule is wrong")
    return None


def _case_dict(entry: Entry, process: FiledProcess, recorder_path: str) -> dict:
    dev: dict[str, Any] = {"lot": entry.lot, "retort_id": entry.retort, "plant": entry.plant, "date": entry.date,
                           "lot_size_containers": entry.lot_size, "initial_temperature_C": entry.initial_temperature_C,
                           "retort_log": recorder_path,
                           "description": f"daily record review: {entry.where}, steam on {entry.steam_on}"
                                          + (f"; {entry.note}" if entry.note else "")}
    if entry.record_gap_limit_min is not None:
        dev["record_gap_limit_min"] = entry.record_gap_limit_min
    if entry.critical_factor_readings:
        dev["critical_factor_readings"] = entry.critical_factor_readings
    if process.ref:
        dev["process_ref"] = f"{process.ref['process_id']}@{process.ref['process_version']}"
    return {"process": process.table, "deviation": dev}


def _summary(ev) -> dict:
    g = ev.guidance or {}
    return {"delivered_F_min": ev.delivered_F_min, "target_F_min": ev.target_F_min,
            "scheduled_F_min": ev.scheduled_F_min, "botulinum_log_reductions": ev.botulinum_log_reductions,
            "botulinum_log_reductions_required": ev.botulinum_log_reductions_required,
            "lowest_during_hold_C": ev.cycle.lowest_during_hold_C,
            "flags": [{"code": f.code, "message": f.message, "start_min": f.start_min, "end_min": f.end_min}
                      for f in ev.flags],
            "disposition": g.get("disposition"),
            "guidance": {"disposition": g.get("disposition"),
                         "reasons": [{"rule_id": r.get("rule_id"), "text": r.get("text"), "basis": r.get("basis")}
                                     for r in g.get("reasons", [])],
                         "actions": list(g.get("actions", []))}}


def screen_cycle(task: dict, rule_set, *, conservative: bool = True,
                 steam_on_tolerance_min: float = STEAM_ON_TOLERANCE_MIN) -> dict:
    """Evaluate one cycle (``task`` from :func:`review_day`); the line it gets, and for a
    deviation the snapshot and the full evaluation for the record."""
    from deviation.evaluate import evaluate_case
    from deviation.inputs.case import LoadedCase, parse_case

    entry: Entry = task["entry"]
    out: dict[str, Any] = {"index": task["index"]}
    path = Path(task["recorder_path"])
    try:
        raw = path.read_bytes()
    except OSError as exc:
        why = f"recorder file {entry.recorder_file} cannot be read now: {exc.strerror}"
        return dict(out, status="not-reviewed", why=[why])
    if hashlib.sha256(raw).hexdigest() != task["recorder_sha256"]:
        return dict(out, status="not-reviewed",
                    why=[f"recorder file {entry.recorder_file} changed while the review ran: review it again"])
    try:
        text = raw.decode("utf-8-sig")
        problem = _steam_on_problem(text, entry.steam_on, steam_on_tolerance_min)
        if problem:
            return dict(out, status="not-reviewed", why=[f"{entry.where}: {problem}"])
        process: FiledProcess = task["process"]
        case = parse_case(_case_dict(entry, process, entry.recorder_file), source=entry.where)
        loaded = LoadedCase(case=case, source=f"{task['manifest']} ({entry.where})", sha256=task["recorder_sha256"],
                            retort_log_text=text, retort_log_source=str(path))
        ev = evaluate_case(loaded, conservative=conservative, rule_set=rule_set, what_if=False)
        # Clean is the rules' word, not the absence of flags: a note on the model (e.g. Ball's
        # formula differs) with disposition no-deviation is shown, but is no deviation of the cycle.
        clean = (ev.guidance or {}).get("disposition") == "no-deviation"
        out.update(_summary(ev), status="clean" if clean else "deviation", why=[])
        if not clean:
            # The record keeps the full evaluation (what-if answers included), as `record new` does.
            full = evaluate_case(loaded, conservative=conservative, rule_set=rule_set, what_if=True)
            snap = loaded.snapshot()
            snap["review"] = {"manifest": task["manifest"], "manifest_sha256": task["manifest_sha256"],
                              "where": entry.where, "steam_on": entry.steam_on,
                              "recorder_file": entry.recorder_file, "recorder_sha256": task["recorder_sha256"]}
            if process.ref:
                snap["process_ref"] = dict(process.ref)
            out.update(_summary(full), evaluation=full.model_dump(mode="json"), snapshot=snap)
    except UnicodeDecodeError as exc:
        return dict(out, status="not-reviewed",
                    why=[f"recorder file {entry.recorder_file} is not UTF-8 text ({exc.reason} at byte {exc.start})"])
    except DeviationError as exc:
        why = str(exc) if str(exc).startswith(entry.where) else f"{entry.where}: {exc}"
        return dict(out, status="not-reviewed", why=[why])
    except Exception as exc:  # noqa: BLE001 - one bad file must not stop the day's review
        return dict(out, status="not-reviewed", why=[f"{entry.where}: evaluation failed ({type(exc).__name__}: {exc})"])
    return out


_WORKER: dict[str, Any] = {}


def _init_worker(rule_paths: Sequence[str], options: dict) -> None:
    if "rules" not in _WORKER:  # forked: inherited from the parent; spawned: load them here
        from deviation.records.replay import rule_set_from

        _WORKER["rules"] = rule_set_from(rule_paths)
    _WORKER["options"] = options


def _screen_task(task: dict) -> dict:
    return screen_cycle(task, _WORKER["rules"], **_WORKER["options"])


# ---------------------------------------------------------------------------------------------
# The day


def _line(entry: Entry, index: int) -> dict:
    return {"index": index, "where": entry.where, "lot": entry.lot, "retort": entry.retort,
            "process": entry.process, "process_id": None, "process_version": None, "product": entry.product,
            "plant": entry.plant, "date": entry.date, "steam_on": entry.steam_on,
            "initial_temperature_C": entry.initial_temperature_C, "lot_size": entry.lot_size,
            "recorder_file": entry.recorder_file, "recorder_sha256": None, "status": "not-reviewed",
            "why": list(entry.problems), "flags": [], "disposition": None, "guidance": None,
            "delivered_F_min": None, "target_F_min": None, "entry_key": None, "record_id": None,
            "record": None}


def _read_recorder(entry: Entry, folder: Path) -> tuple[Path, str | None, str | None]:
    """The recorder file's path and SHA-256, or why it cannot be read."""
    path = Path(entry.recorder_file)
    path = path if path.is_absolute() else folder / path
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        return path, None, f"{entry.where}: recorder file not found: {entry.recorder_file}"
    except IsADirectoryError:
        return path, None, f"{entry.where}: recorder file {entry.recorder_file} is a folder, not a file"
    except OSError as exc:
        return path, None, f"{entry.where}: recorder file {entry.recorder_file} cannot be read: {exc.strerror}"
    if not raw.strip():
        return path, None, f"{entry.where}: recorder file {entry.recorder_file} is empty"
    return path, hashlib.sha256(raw).hexdigest(), None


def _open_record(store, line: dict, result: dict, *, actor: str, role: str, conservative: bool) -> None:
    """Open (or find, on a second run) the deviation record of one cycle."""
    key = line["entry_key"]
    ref = result.get("process_ref")
    try:
        rid = store.create_record(result["snapshot"], actor=actor, role=role, lot=line["lot"],
                                  retort_id=line["retort"], process_id=line["process_id"],
                                  process_version=str(ref["process_version"]) if ref else None, event_id=key)
        line["record_id"] = rid
        if any(e.event_id == f"{key}-ev" for e in store.events(rid)):
            line["record"] = "already open"
            return
        store.add_evaluation(rid, result["evaluation"], actor=actor, role=role, snapshot_seq=1,
                             options={"conservative": conservative, "what_if": True, "review": True},
                             event_id=f"{key}-ev")
        line["record"] = "opened"
    except StoreError as exc:
        line["record"] = "not opened"
        line["record_error"] = str(exc)


def review_day(manifest: Manifest, *, store=None, actor: str = "reviewer", role: str = "operator",
               rule_paths: Sequence[str] = (), conservative: bool = True, jobs: int | None = None,
               steam_on_tolerance_min: float = STEAM_ON_TOLERANCE_MIN,
               progress: Callable[[int, int, dict], None] | None = None) -> dict:
    """Screen every cycle of ``manifest``; open a record in ``store`` for each deviation.

    Parameters
    ----------
    manifest : the day's schedule (:func:`read_manifest`)
    store : the record store (None: screen only, open no record; library ids cannot be resolved)
    actor, role : who reviews; opening a record needs the ``enter`` action (role operator)
    rule_paths : plant rule files laid over the default rules
    conservative : evaluate conservatively (the lower reading between two)
    jobs : worker processes (default: the machine's cores)
    steam_on_tolerance_min : largest distance between the schedule's steam-on and the first
        reading of a recorder file with clock times [min]
    progress : called ``progress(done, total, line)`` as each cycle is screened

    Returns
    -------
    dict
        The JSON of ``deviation review``: ``cycles`` (one line each, schedule order), ``counts``,
        the day, the manifest's SHA-256, engine version, rule-set hash, caution, timing.
    """
    from deviation import ENGINE_VERSION
    from deviation.evaluate import CAUTION
    from deviation.records.replay import rule_set_from

    if store is not None:
        from deviation.records import roles

        role = roles.check_role(actor, role, "enter")
    t0 = time.perf_counter()
    rule_set = rule_set_from(rule_paths)
    lines = [_line(e, i) for i, e in enumerate(manifest.entries)]
    processes: dict[str, FiledProcess | str] = {}
    tasks, seen_sha = [], {}
    for i, entry in enumerate(manifest.entries):
        line = lines[i]
        if entry.problems:
            continue
        if entry.process not in processes:
            try:
                processes[entry.process] = resolve_process(entry.process, folder=manifest.folder, store=store)
            except DeviationError as exc:
                processes[entry.process] = f"filed process '{entry.process}': {exc}"
        process = processes[entry.process]
        if isinstance(process, str):
            line["why"].append(f"{entry.where}: {process}")
            continue
        line["process_id"] = process.ref["process_id"] if process.ref else process.table.get("id")
        line["process_version"] = process.ref["process_version"] if process.ref else None
        line["product"] = line["product"] or process.table.get("product", "")
        path, sha, problem = _read_recorder(entry, manifest.folder)
        line["recorder_sha256"] = sha
        if problem:
            line["why"].append(problem)
            continue
        if sha in seen_sha:
            first = lines[seen_sha[sha]]
            line["why"].append(f"{entry.where}: recorder file {entry.recorder_file} holds the same record as "
                               f"{first['where']} (lot {first['lot']}, {first['recorder_file']}): a copied or "
                               "wrong file")
            continue
        seen_sha[sha] = i
        line["entry_key"] = entry_key(entry, sha)
        tasks.append({"index": i, "entry": entry, "process": process, "recorder_path": str(path),
                      "recorder_sha256": sha, "manifest": str(manifest.path), "manifest_sha256": manifest.sha256})

    total, done = len(lines), 0

    def finish(line: dict) -> None:
        nonlocal done
        done += 1
        if progress:
            progress(done, total, line)

    for line in lines:  # the lines that were never screenable are final now
        if line["why"]:
            finish(line)

    def take(result: dict) -> None:
        line = lines[result["index"]]
        task_process = processes[manifest.entries[result["index"]].process]
        for k, v in result.items():
            if k not in ("index", "evaluation", "snapshot"):
                line[k] = v
        if line["status"] == "deviation" and store is not None:
            result["process_ref"] = task_process.ref
            _open_record(store, line, result, actor=actor, role=role, conservative=conservative)
        finish(line)

    options = {"conservative": conservative, "steam_on_tolerance_min": steam_on_tolerance_min}
    jobs = max(1, min(jobs or os.cpu_count() or 1, len(tasks) or 1))
    if jobs == 1 or len(tasks) < 2 * jobs:
        jobs = 1
        for task in tasks:
            take(screen_cycle(task, rule_set, **options))
    else:
        import deviation.evaluate  # noqa: F401 - loaded once here, inherited by the forked workers

        _WORKER["rules"] = rule_set
        ctx = mp.get_context("fork") if "fork" in mp.get_all_start_methods() else mp.get_context("spawn")
        if store is not None and hasattr(store, "engine"):
            store.engine.dispose()  # no database connection may cross a fork
        chunk = max(1, min(8, len(tasks) // (jobs * 8) or 1))
        try:
            with ctx.Pool(jobs, initializer=_init_worker, initargs=(list(rule_paths), options)) as pool:
                for result in pool.imap_unordered(_screen_task, tasks, chunksize=chunk):
                    take(result)
        finally:
            _WORKER.pop("rules", None)
    elapsed = time.perf_counter() - t0
    counts = {s.replace("-", "_"): sum(1 for line in lines if line["status"] == s) for s in STATUSES}
    counts["records_opened"] = sum(1 for line in lines if line["record"] == "opened")
    counts["records_already_open"] = sum(1 for line in lines if line["record"] == "already open")
    counts["records_not_opened"] = sum(1 for line in lines if line["record"] == "not opened")
    return {"manifest": str(manifest.path), "manifest_sha256": manifest.sha256,
            "plant": manifest.plant or _common(lines, "plant"), "date": manifest.date or _common(lines, "date"),
            "cycles": lines, "count": total, "counts": counts, "recorded": store is not None,
            "store": getattr(store, "name", None), "reviewer": actor, "engine_version": ENGINE_VERSION,
            "rule_set_sha256": rule_set.sha256, "conservative": conservative, "jobs": jobs,
            "elapsed_s": elapsed, "cycles_per_s": total / elapsed if elapsed > 0 else None,
            "caution": CAUTION}


def _common(lines: list[dict], key: str) -> str:
    values = sorted({line[key] for line in lines if line.get(key)})
    return ", ".join(values)


__all__ = [
    "STATUSES",
    "Entry",
    "FiledProcess",
    "Manifest",
    "entry_key",
    "read_manifest",
    "resolve_process",
    "review_day",
    "screen_cycle",
]
