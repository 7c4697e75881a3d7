"""Live watch of a retort record that a recorder or controller is still writing.

:class:`LogFollower` reads a growing CSV file incrementally; :class:`Watch` re-evaluates the
cycle as rows arrive and emits events (plain dicts, one JSON object each):

- ``{"type": "flag", "time_min", "code", "message", "row", "reading_C", ...}`` for each new
  deviation the moment a reading shows it;
- ``{"type": "update", "time_min", "delivered_F_min", "projected_F_min",
  "extension_to_target_min", ...}`` after each evaluation;
- ``{"type": "final", "reason", ...the evaluation keys...}`` when the cycle ends;
- ``{"type": "skipped", "line", "row_text", "message"}`` for a bad row, reported and left out
  (the watch goes on; a gap it leaves is flagged as any gap);
- ``{"type": "notice", "message"}`` and ``{"type": "record", "record_id", "action"}`` on the way.

No physics here: each reading is judged with :func:`deviation.inputs.logs.analyse_cycle` on the
record so far (the same call, with the same arguments, that :func:`deviation.evaluate.evaluate_case`
makes), and every evaluation is :func:`~deviation.evaluate.evaluate_case` on a case built from
the rows so far. What the watch adds is *when* a finding is certain enough to raise while the
cycle still runs:

- a reading below the process temperature after the hold started, while the filed process time
  has not yet run, is raised at once as ``temperature-low`` (it may be a drop or the hold ending
  early; the record cannot tell yet). When the retort comes back, the completed drop is the same
  flag; when it falls into cooling instead, ``short-hold`` follows;
- a come-up still below process temperature when the filed come-up time has passed is raised at
  once as ``long-come-up``;
- ``short-hold`` and ``process-temperature-not-reached`` wait until the retort is in cooling
  (below the cooling threshold); ``record-ends-before-cooling`` is the normal state of a live
  record and is raised only in the final evaluation;
- ``record-gap`` is raised with the first reading after the gap.

The record in the store (when a store is given) starts at the first deviation: ``entered`` with
the snapshot so far and an ``evaluated`` event; each later batch of rows that brings a new flag,
and the end of the cycle, add ``amended`` (the record so far, so a replay of every evaluation
reproduces it) and ``evaluated``. Updates without a new flag are not stored.

References
----------
.. [1] 21 CFR 113.40 and 113.100 (recording devices; processing and production records).
.. [2] U.S. FDA, *Guide to Inspections of Low Acid Canned Food Manufacturers*, Part 1 (read the
   record conservatively; a deviation caught during the cycle may be met by an alternate process).
"""

from __future__ import annotations

import hashlib
import json
import os
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from deviation.errors import DeviationError, RecordError
from deviation.guidance.vocabulary import INFORMATION_FLAG_CODES

#: A retort below this, after the hold, is in cooling; the watch also waits for the predicted
#: cold spot to fall below it before it calls the cycle done. The lethal rate at 100 °C is
#: 10^((100 - 121.1)/10) = 0.008 per min (z = 10 °C): what cooling still adds below is small
#: (common practice) [°C].
COOLING_DONE_C = 100.0

#: A reading at or below this, or above ROW_MAX_C, is no retort reading: the row is reported and
#: skipped [°C] (the floor screen's bounds for a typed reading, deviation.tui.entry, are the same).
ROW_MIN_C = 0.0
ROW_MAX_C = 150.0
#: The longest record the watch follows, from its first row [min]; a later time is a glitch of the
#: recorder's clock (and would make the evaluation's arrays absurdly long).
MAX_RECORD_MIN = 24 * 60.0
#: More bad rows than this in one read stop the watch: the file is not a retort record.
MAX_SKIPPED_PER_READ = 50

# Flags that hold for the whole cycle once seen: one per cycle.
_ONCE = ("long-come-up", "low-initial-temperature", "short-hold", "process-temperature-not-reached",
         "record-ends-before-cooling", "scheduled-F-below-target", "alternate-process-met")
# Flags that do not start a deviation record (not a finding about this cycle).
_NOT_DEVIATIONS = INFORMATION_FLAG_CODES
# Judged only once the retort is in cooling (or at the end).
_AT_COOLING = ("short-hold", "process-temperature-not-reached")
_EPS_MIN = 1e-6


# ---------------------------------------------------------------------------------------------
# Following a growing file


class LogChanged(RecordError):
    """The watched retort log changed in a way a growing record never does."""


class LogTruncated(LogChanged):
    """The watched file shrank or its bytes already read were rewritten."""


class LogRotated(LogChanged):
    """The watched path now names another file, or none."""


@dataclass
class LogFollower:
    """Read a growing text file line by line, keeping the byte offset.

    A last line without its line end is waited for, not returned. The file must only grow:
    a shrinking file or a change to bytes already read raises :class:`LogTruncated`; the path
    naming another file (rotation, replacement) or none raises :class:`LogRotated`.
    """

    path: Path
    offset: int = 0  # bytes consumed (up to the end of the last complete line)
    lines_read: int = 0
    _fd: int | None = field(default=None, repr=False)
    _ident: tuple[int, int] | None = field(default=None, repr=False)
    _size: int = field(default=0, repr=False)
    # What was read, to catch a row rewritten in place: the SHA-256 of each whole block of
    # BLOCK_BYTES read, the bytes read since the last whole block, and the line count at each
    # block's start (to name where a change is).
    _blocks: list = field(default_factory=list, repr=False)
    _block_lines: list = field(default_factory=list, repr=False)
    _partial: bytes = field(default=b"", repr=False)
    _partial_lines: int = field(default=0, repr=False)  # lines before ``_partial``
    _rotate: int = field(default=0, repr=False)

    #: Bytes per checked block [bytes].
    BLOCK_BYTES = 64 * 1024
    #: Up to this many bytes read, every byte already read is compared at each read; past it, the
    #: last block, the bytes after it and one earlier block in turn (each read costs at most
    #: three blocks, and every block is checked every few hundred reads) [bytes].
    FULL_CHECK_BYTES = 8 * 1024 * 1024

    def __post_init__(self) -> None:
        self.path = Path(self.path)
        try:
            self._fd = os.open(self.path, os.O_RDONLY)
        except FileNotFoundError:
            raise RecordError("retort log not found; start the watch once the recorder has created "
                              "the file", source=str(self.path)) from None
        except OSError as exc:
            raise RecordError(f"cannot read the retort log: {exc.strerror}", source=str(self.path)) from None
        st = os.fstat(self._fd)
        self._ident = (st.st_dev, st.st_ino)

    def close(self) -> None:
        if self._fd is not None:
            os.close(self._fd)
            self._fd = None

    def __enter__(self) -> "LogFollower":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    @property
    def size(self) -> int:
        """File size at the last read [bytes] (a partial last line included)."""
        return self._size

    @property
    def pending(self) -> int:
        """Bytes of a partial last line, waited for [bytes]."""
        return max(self._size - self.offset, 0)

    def _stopped(self) -> str:
        return f"the watch stopped after line {self.lines_read} of the file"

    def _check(self) -> int:
        try:
            st = os.stat(self.path)
        except FileNotFoundError:
            raise LogRotated(f"the retort log was moved or deleted while being watched; {self._stopped()}; "
                             "start a new watch on the recorder's new file", source=str(self.path)) from None
        if (st.st_dev, st.st_ino) != self._ident:
            raise LogRotated(f"the retort log was replaced by another file (rotated or rewritten under the "
                             f"same name) while being watched; {self._stopped()}; start a new watch on "
                             "the new file", source=str(self.path))
        size = os.fstat(self._fd).st_size
        if size < self.offset:
            raise LogTruncated(f"the retort log shrank from {self.offset} to {size} bytes while being "
                               f"watched (truncated); {self._stopped()}; a retort record only grows: "
                               "keep the recorder's file whole", source=str(self.path))
        changed = self._changed_line()
        if changed is not None:
            raise LogTruncated(f"bytes of the retort log already read were changed (rewritten in place), "
                               f"at or after line {changed}, while being watched; {self._stopped()}; a "
                               "retort record only grows: an earlier row must never be rewritten",
                               source=str(self.path))
        return size

    def _changed_line(self) -> int | None:
        """The first line (1-based) at or after which bytes already read differ, or None."""
        n = len(self._blocks)
        block = self.BLOCK_BYTES
        if self._partial:
            now = os.pread(self._fd, len(self._partial), n * block)
            if now != self._partial:
                same = next((i for i, (a, b) in enumerate(zip(now, self._partial)) if a != b),
                            min(len(now), len(self._partial)))
                return self._partial_lines + self._partial[:same].count(b"\n") + 1
        if n == 0:
            return None
        if self.offset <= self.FULL_CHECK_BYTES:
            check = range(n)
        else:
            self._rotate = (self._rotate + 1) % n
            check = sorted({n - 1, self._rotate})
        for i in check:
            if hashlib.sha256(os.pread(self._fd, block, i * block)).digest() != self._blocks[i]:
                return self._block_lines[i] + 1
        return None

    def _keep(self, chunk: bytes) -> None:
        """Remember ``chunk`` (just read) for the check of bytes already read."""
        block = self.BLOCK_BYTES
        data = self._partial + chunk
        lines = self._partial_lines  # lines before the bytes not yet in a whole block
        while len(data) >= block:
            self._block_lines.append(lines)
            self._blocks.append(hashlib.sha256(data[:block]).digest())
            lines += data[:block].count(b"\n")
            data = data[block:]
        self._partial = data
        self._partial_lines = lines

    def read_new(self, *, final: bool = False) -> list[str]:
        """The complete lines added since the last call (without their line ends).

        ``final``: the writer is done, so a last line without a line end counts as complete.
        """
        if self._fd is None:
            raise RecordError("the follower is closed", source=str(self.path))
        size = self._check()
        self._size = size
        if size == self.offset:
            return []
        data = os.pread(self._fd, size - self.offset, self.offset)
        end = data.rfind(b"\n")
        if final:
            end = len(data) - 1
        if end < 0:
            return []  # only a partial line: wait for its end
        chunk = data[:end + 1]
        try:
            text = chunk.decode("utf-8")
        except UnicodeDecodeError as exc:
            line = self.lines_read + chunk[:exc.start].count(b"\n") + 1
            raise RecordError(f"line {line}: not UTF-8 text ({exc.reason}); expected a CSV retort log",
                              source=str(self.path)) from None
        if self.offset == 0 and text.startswith("\ufeff"):
            text = text[1:]
        from deviation.inputs.logs import split_lines

        # a lone CR ends a line here as it does for the log reader, or the two would number
        # the rows differently and a bad row's report would name (and leave out) its neighbour
        lines = split_lines(text)
        if lines and lines[-1] == "":
            lines.pop()
        self.offset += len(chunk)
        self.lines_read += len(lines)
        self._keep(chunk)
        return lines


# ---------------------------------------------------------------------------------------------
# The watch


@dataclass
class _LiveDrop:
    before_min: float  # last reading at/above process temperature
    first_min: float  # first reading below


class Watch:
    """Evaluate a retort cycle as its record grows, and say what it shows the moment it shows it.

    Parameters
    ----------
    process : deviation.inputs.case.Process
        The filed scheduled process
    lot, retort_id : str
        Plant lot code and retort
    initial_temperature_C : float or None
        Measured initial temperature of the product [°C]; None assumes the filed minimum and says so
    lot_size_containers : int
        Containers in the lot [-]
    store : deviation.records.store.Store or None
        Where the deviation record is started at the first deviation (None: no record)
    actor, role : str
        Who runs the watch (the record needs role operator)
    process_ref : deviation.records.processes.ResolvedRef or dict or None
        The filed (id, version) the process came from, kept on the record
    source : str
        The log's path, as the evaluation names it
    record_gap_limit_min : float
        Longest gap between readings accepted [min]
    cooling_done_C : float
        Retort and predicted cold spot below this after the hold: the cycle is done [°C]
    on_event : callable or None
        Called with each event as it is made (flags before the evaluation that follows them)
    """

    def __init__(self, process, *, lot: str, retort_id: str, initial_temperature_C: float | None = None,
                 lot_size_containers: int = 1, store=None, actor: str = "watch", role: str = "operator",
                 process_ref=None, source: str = "retort log", record_gap_limit_min: float = 2.0,
                 cooling_done_C: float = COOLING_DONE_C, conservative: bool = True, rule_set=None,
                 on_event: Callable[[dict], None] | None = None) -> None:
        from deviation.inputs.case import parse_case
        from deviation.records import roles

        self.process = process
        self.store = store
        self.actor = actor
        self.role = roles.check_role(actor, role, "enter") if store is not None else role
        if process_ref is not None and not isinstance(process_ref, dict):
            process_ref = process_ref.to_dict()
        self.process_ref = process_ref
        self.source = str(source)
        self.conservative = conservative
        self.rule_set = rule_set
        self.on_event = on_event
        self.events: list[dict] = []
        self.initial_temperature_assumed = initial_temperature_C is None
        if initial_temperature_C is None:
            initial_temperature_C = process.minimum_initial_temperature_C
        ref_text = (f"{process_ref['process_id']}@{process_ref['process_version']}"
                    if process_ref else None)
        deviation = {"lot": lot, "retort_id": retort_id, "lot_size_containers": lot_size_containers,
                     "initial_temperature_C": initial_temperature_C, "retort_log": self.source,
                     "record_gap_limit_min": record_gap_limit_min,
                     "description": "live watch of the retort record"}
        if ref_text:
            deviation["process_ref"] = ref_text
        self.case = parse_case({"process": process.model_dump(mode="json"), "deviation": deviation},
                               source=f"watch of {self.source}")
        self.cooling_threshold_C = min(cooling_done_C, process.process_temperature_C - 10.0)
        self.cooling_done_C = cooling_done_C
        self._lines: list[str] = []
        self._line_numbers: list[int] = []  # file line number of each kept line
        self._file_lines = 0  # lines of the file read so far
        self.skipped: list[dict] = []  # bad rows reported and left out
        self._rows_done = 0  # data rows already judged
        self._seen: set = set()
        self._drops: list[_LiveDrop] = []
        self.flags: list[dict] = []
        self.record_id: str | None = None
        self._record_writable = True
        self.store_error: str | None = None
        self.evaluation = None  # the latest Evaluation
        self._evaluated_rows = 0
        self.final: dict | None = None
        self.profile = None
        # Load the engine and the rules now, not at the first reading: evaluate the filed cycle
        # once (about a second on the first call in a process, then tens of milliseconds).
        from deviation.evaluate import evaluate_case
        from deviation.inputs.case import LoadedCase

        filed = self.case.model_copy(update={"deviation": self.case.deviation.model_copy(
            update={"retort_log": None})})
        evaluate_case(LoadedCase(case=filed, source="warm-up", sha256=""), conservative=conservative,
                      rule_set=rule_set)
        if self.initial_temperature_assumed:
            self._emit({"type": "notice", "time_min": None,
                        "message": f"initial temperature not entered: the filed minimum "
                                   f"{initial_temperature_C:.1f} °C is assumed; measure it and enter it "
                                   "(a lower one is a deviation)"})

    # -- events ----------------------------------------------------------------------------

    def _emit(self, event: dict) -> dict:
        self.events.append(event)
        if self.on_event is not None:
            self.on_event(event)
        return event

    # -- the record so far -----------------------------------------------------------------

    @property
    def text(self) -> str:
        return "".join(line + "\n" for line in self._lines)

    def loaded(self):
        """The case with the record so far (:class:`deviation.inputs.case.LoadedCase`)."""
        from deviation.inputs.case import LoadedCase

        text = self.text
        digest = hashlib.sha256(self.case.model_dump_json().encode())
        digest.update(b"\0" + text.encode())
        return LoadedCase(case=self.case, source=f"watch of {self.source}", sha256=digest.hexdigest(),
                          retort_log_text=text, retort_log_source=self.source)

    def snapshot(self) -> dict:
        snap = self.loaded().snapshot()
        snap["watch"] = {"rows": self._rows_done, "complete": self.final is not None,
                         "initial_temperature_assumed": self.initial_temperature_assumed,
                         "skipped": [{"line": s["line"], "text": s["text"], "why": s["why"]}
                                     for s in self.skipped]}
        if self.process_ref:
            snap["process_ref"] = dict(self.process_ref)
        return snap

    def _parse(self):
        """The record so far, or None while it has fewer than 2 readings."""
        from deviation.inputs.logs import parse_log_text

        data = [ln for ln in self._lines if ln.strip() and not ln.strip().startswith("#")]
        if len(data) < 3:  # a header and 2 readings
            return None
        try:
            return parse_log_text(self.text, source=self.source)
        except RecordError as exc:
            if "expected at least 2 rows" in exc.message:  # rows of empty fields only, so far
                return None
            raise

    # -- judging each reading --------------------------------------------------------------

    def _analyse(self, k: int):
        from deviation.inputs.cycle import analyse_cycle
        from deviation.inputs.logs import RetortProfile

        p, dev = self.process, self.case.deviation
        prefix = RetortProfile(self.profile.time_min[:k], self.profile.temperature_C[:k], self.source)
        return analyse_cycle(prefix, process_temperature_C=p.process_temperature_C,
                             process_time_min=p.process_time_min, come_up_time_min=p.come_up_time_min,
                             initial_temperature_C=dev.initial_temperature_C,
                             minimum_initial_temperature_C=p.minimum_initial_temperature_C,
                             gap_limit_min=dev.record_gap_limit_min)

    def _new_flag(self, key, *, code: str, message: str, row: int, source: str, **extra) -> dict | None:
        if key in self._seen:
            return None
        self._seen.add(key)
        t, T = self.profile.time_min, self.profile.temperature_C
        ev = {"type": "flag", "time_min": float(t[row - 1]), "code": code, "message": message, "row": row,
              "reading_C": float(T[row - 1]), "source": source}
        ev.update({k: v for k, v in extra.items() if v is not None})
        self.flags.append(ev)
        return self._emit(ev)

    def _matches_drop(self, start_min: float | None) -> bool:
        if start_min is None:
            return False
        return any(d.before_min - _EPS_MIN <= start_min <= d.first_min + _EPS_MIN for d in self._drops)

    def _judge_row(self, k: int, *, final: bool = False) -> list[dict]:
        """Flags the first ``k`` readings show that the first ``k - 1`` did not."""
        p = self.process
        t, T = self.profile.time_min[:k], self.profile.temperature_C[:k]
        PT = p.process_temperature_C
        a = self._analyse(k)
        cooling = bool(T[-1] < self.cooling_threshold_C and np.max(T) - T[-1] >= 5.0)
        out = []
        # Live findings first: what a running cycle shows before the analysis can.
        if a.hold_start_min is None and t[-1] > p.come_up_time_min + _EPS_MIN and T[-1] < PT:
            out.append(self._new_flag(
                "long-come-up", code="long-come-up", row=k, source="live", value=float(t[-1] - p.come_up_time_min),
                message=f"come-up has taken {t[-1]:.2f} min and the retort reads {T[-1]:.1f} °C, still below "
                        f"the process temperature {PT:.1f} °C: longer than the filed come-up time "
                        f"{p.come_up_time_min:g} min"))
        if (a.hold_start_min is not None and k >= 2 and T[-1] < PT <= T[-2]
                and t[-1] - a.hold_start_min < p.process_time_min - _EPS_MIN):
            self._drops.append(_LiveDrop(float(t[-2]), float(t[-1])))
            elapsed = float(t[-1] - a.hold_start_min)
            out.append(self._new_flag(
                ("temperature-low", float(t[-1])), code="temperature-low", row=k, source="live",
                value=float(T[-1]), start_min=float(t[-2]),
                message=f"retort reads {T[-1]:.1f} °C at {t[-1]:.2f} min, below the process temperature "
                        f"{PT:.1f} °C during the hold ({elapsed:.2f} min into the filed "
                        f"{p.process_time_min:g} min): a drop, or the hold ending early"))
        for f in a.flags:
            if f.code == "record-ends-before-cooling" and not final:
                continue
            if f.code in _AT_COOLING and not (cooling or final):
                continue
            if f.code == "temperature-low":
                if self._matches_drop(f.start_min):
                    continue
                key = ("temperature-low", round(f.start_min, 6))
            elif f.code in _ONCE:
                key = f.code
            else:
                key = (f.code, None if f.start_min is None else round(f.start_min, 6))
            out.append(self._new_flag(key, code=f.code, message=f.message, row=k, source="analysis",
                                      start_min=f.start_min, end_min=f.end_min, value=f.value))
        return [e for e in out if e is not None]

    # -- feeding rows ----------------------------------------------------------------------

    def feed(self, lines: list[str], *, final: bool = False) -> list[dict]:
        """Take new complete lines of the log; judge each new reading, then evaluate once.

        A bad row (not a number, a time not after the one before, a reading no retort gives, a
        time past :data:`MAX_RECORD_MIN`) is reported (a ``skipped`` event) and left out; the
        watch goes on, and a gap it leaves is flagged as any gap. Returns the events made (also
        passed to ``on_event`` as they are made).
        """
        start = len(self.events)
        first_new = len(self._lines)
        for line in lines:
            self._file_lines += 1
            late = self._late(line)
            self._lines.append(line)
            self._line_numbers.append(self._file_lines)
            if late is not None:  # before the whole parse: a glitched time would put every later row out of order
                self._skip(len(self._lines) - 1, late)
        profile = self._parse_skipping(first_new=first_new)
        if profile is None:
            return self.events[start:]
        self.profile = profile
        n = profile.time_min.size
        new_flags = []
        for k in range(max(self._rows_done + 1, 2), n + 1):
            new_flags += self._judge_row(k)
        self._rows_done = n
        if final:
            new_flags += self._judge_row(n, final=True)
        deviations = [f for f in new_flags if f["code"] not in _NOT_DEVIATIONS]
        if deviations and self.store is not None and self.record_id is None:
            self._create_record(deviations[0])
        if n > self._evaluated_rows or final:
            self._evaluate(new_flags, final=final)
        return self.events[start:]

    def _evaluate(self, new_flags: list[dict], *, final: bool) -> None:
        from deviation.evaluate import evaluate_case

        if self.evaluation is None or self._rows_done > self._evaluated_rows:
            self.evaluation = evaluate_case(self.loaded(), conservative=self.conservative,
                                            rule_set=self.rule_set)
        ev = self.evaluation
        self._evaluated_rows = self._rows_done
        # Findings only the whole evaluation makes (implausible input, the filed model's F, alternates).
        t_last, T_last = float(self.profile.time_min[-1]), float(self.profile.temperature_C[-1])
        for f in ev.flags:
            if f.code in ("scheduled-F-below-target", "implausible-input", "alternate-process-met",
                          "critical-factor-out"):
                key = f.code if f.code in _ONCE else (f.code, f.message)
                e = self._new_flag(key, code=f.code, message=f.message, row=self._rows_done,
                                   source="evaluation", value=f.value)
                if e is not None:
                    new_flags.append(e)
                    if f.code not in _NOT_DEVIATIONS and self.store is not None and self.record_id is None:
                        self._create_record(e)
        if self.record_id is not None and (new_flags or (final and self._stored_rows != self._rows_done)):
            self._store_evaluation(ev, amend=self._entered_rows != self._rows_done,
                                   reason=("end of the cycle" if final else
                                           "new flag: " + ", ".join(sorted({f['code'] for f in new_flags}))))
        cycle = ev.cycle
        hold_elapsed = (t_last - cycle.hold_start_min) if cycle.hold_start_min is not None else None
        self._emit({
            "type": "update", "time_min": t_last, "row": self._rows_done, "retort_C": T_last,
            "phase": self.phase(), "delivered_F_min": ev.delivered_F_min, "projected_F_min": ev.projected_F_min,
            "extension_to_target_min": ev.extension_to_target_min, "extension_reason": ev.extension_reason,
            "target_F_min": ev.target_F_min, "hold_elapsed_min": hold_elapsed,
            "hold_remaining_min": (max(self.process.process_time_min - hold_elapsed, 0.0)
                                   if hold_elapsed is not None else None),
            "cold_spot_C": ev.cold_spot.temperature_C[-1] if ev.cold_spot.temperature_C else None,
            "flags": [f.code for f in ev.flags],
            "disposition": (ev.guidance or {}).get("disposition"), "record_id": self.record_id})

    def phase(self) -> str:
        """``come-up``, ``hold``, ``below process temperature`` or ``cooling`` at the last reading."""
        ev = self.evaluation
        if self.profile is None or ev is None:
            return "waiting"
        t, T = float(self.profile.time_min[-1]), float(self.profile.temperature_C[-1])
        PT = self.process.process_temperature_C
        start = ev.cycle.hold_start_min
        if start is None:
            return "cooling" if T < self.cooling_threshold_C and np.max(self.profile.temperature_C) - T >= 5 \
                else "come-up"
        if T >= PT:
            return "hold"
        if t - start < self.process.process_time_min - _EPS_MIN and T >= self.cooling_threshold_C:
            return "below process temperature"
        return "cooling"

    def cycle_done(self) -> bool:
        """The retort has left the hold and it and the predicted cold spot are below the cooling
        threshold, past their peaks."""
        ev = self.evaluation
        if ev is None or self.profile is None or ev.cycle.running:
            return False
        T = self.profile.temperature_C
        if not (T[-1] < self.cooling_threshold_C and np.max(T) >= self.cooling_threshold_C):
            return False
        cold = ev.cold_spot.temperature_C
        return bool(cold) and cold[-1] < self.cooling_done_C and cold[-1] < max(cold)

    # -- the store -------------------------------------------------------------------------

    _entered_rows = -1
    _stored_rows = -1

    def _store_call(self, fn, *args, **kw):
        from deviation.errors import StoreError
        from deviation.records.roles import TransitionRefused

        if not self._record_writable:
            return None
        try:
            return fn(*args, **kw)
        except TransitionRefused as exc:
            self._record_writable = False
            self._emit({"type": "notice", "time_min": None,
                        "message": f"record {self.record_id} no longer takes the watch's entries ({exc}); "
                                   "the watch goes on without writing to it"})
        except StoreError as exc:
            self._record_writable = False
            self.store_error = str(exc)
            self._emit({"type": "notice", "level": "error", "time_min": None,
                        "message": f"the record store refused a write ({exc}); the watch goes on without it"})
        return None

    def _create_record(self, flag: dict) -> None:
        p = self.process
        rid = self._store_call(
            self.store.create_record, self.snapshot(), actor=self.actor, role=self.role,
            lot=self.case.deviation.lot, retort_id=self.case.deviation.retort_id,
            process_id=self.process_ref["process_id"] if self.process_ref else p.id,
            process_version=str(self.process_ref["process_version"]) if self.process_ref else None)
        if rid is None:
            return
        self.record_id = rid
        self._entered_rows = self._rows_done
        self._emit({"type": "record", "time_min": flag["time_min"], "record_id": rid, "action": "entered",
                    "message": f"deviation record {rid} started ({flag['code']} at {flag['time_min']:.2f} min)"})

    def _store_evaluation(self, ev, *, amend: bool, reason: str) -> None:
        if amend:
            e = self._store_call(self.store.amend, self.record_id, self.snapshot(),
                                 reason=f"watch: record to row {self._rows_done} ({reason})",
                                 actor=self.actor, role=self.role)
            if e is None:
                return
            self._entered_rows = self._rows_done
        if self._store_call(self.store.add_evaluation, self.record_id, ev.model_dump(mode="json"),
                            actor=self.actor, role=self.role,
                            options={"conservative": self.conservative, "what_if": True,
                                     "watch": True}) is not None:
            self._stored_rows = self._rows_done

    def note(self, text: str) -> None:
        """A note on the record (when there is one)."""
        if self.record_id is not None:
            self._store_call(self.store.note, self.record_id, text, actor=self.actor, role=self.role)

    # -- the end ---------------------------------------------------------------------------

    def finish(self, reason: str, lines: list[str] | None = None) -> dict:
        """Evaluate the record as it stands (with any last ``lines``) and emit the final event."""
        if self.final is not None:
            return self.final
        self.final = {"reason": reason}  # marks the snapshot complete
        self.feed(lines or [], final=True)
        ev = self.evaluation
        out = {"type": "final", "reason": reason, "rows": self._rows_done, "record_id": self.record_id,
               "process_ref": self.process_ref,
               "initial_temperature_assumed": self.initial_temperature_assumed,
               "store_error": self.store_error,
               "skipped": [{"line": s["line"], "why": s["why"]} for s in self.skipped]}
        if ev is not None:
            out.update(ev.model_dump(mode="json"))
        else:
            out["error"] = "the record has fewer than 2 readings: nothing to evaluate"
        out["type"] = "final"
        self.final = out
        return self._emit(out)

    # -- bad rows --------------------------------------------------------------------------

    def _parse_skipping(self, first_new: int):
        """The record so far with each bad new row reported and left out (see :meth:`feed`)."""
        for _ in range(MAX_SKIPPED_PER_READ + 1):
            try:
                profile = self._parse()
            except RecordError as exc:
                k = _error_line(exc)
                if k is None or k - 1 < first_new or k - 1 == self._header_index():
                    raise  # the header, or rows already judged: not a bad row to skip
                self._skip(k - 1, exc.message.split(": ", 1)[-1] if exc.message.startswith("line ")
                           else exc.message)
                continue
            if profile is None:
                return None
            bad = self._out_of_bounds(profile)
            if bad is None:
                return profile
            self._skip(*bad)
        raise RecordError(f"more than {MAX_SKIPPED_PER_READ} bad rows in one read; the watch stopped "
                          f"after line {self._file_lines}: check the recorder's output", source=self.source)

    def _late(self, line: str) -> str | None:
        """Why a new row's ``time_min`` is past :data:`MAX_RECORD_MIN` from the first row, or None
        (rows of an ISO ``time`` column are checked after the parse)."""

        header = self._header_index()
        if header is None or not line.strip() or line.strip().startswith("#"):
            return None
        names = [n.strip().lower() for n in _fields(self._lines[header])]
        if "time_min" not in names:
            return None
        fields = _fields(line)
        i = names.index("time_min")
        try:
            value = float(fields[i])
        except (IndexError, ValueError):
            return None  # the parse names what is wrong with it
        first = self.profile_first_min
        if first is None:
            return None
        if value - first > MAX_RECORD_MIN:
            return (f"time {value:g} min is past the longest record the watch follows ({MAX_RECORD_MIN:g} "
                    "min from the first row): a glitch of the recorder's clock?")
        return None

    @property
    def profile_first_min(self) -> float | None:
        """``time_min`` of the first reading kept (as written in the file), or None."""

        header = self._header_index()
        if header is None:
            return None
        names = [n.strip().lower() for n in _fields(self._lines[header])]
        if "time_min" not in names:
            return None
        for i in self._data_indices():
            try:
                return float(_fields(self._lines[i])[names.index("time_min")])
            except (IndexError, ValueError):
                continue
        return None

    def _header_index(self) -> int | None:
        return next((i for i, ln in enumerate(self._lines) if ln.strip() and not ln.strip().startswith("#")),
                    None)

    def _data_indices(self) -> list[int]:
        """Index in ``_lines`` of each reading the parsed profile holds, in order."""

        header = self._header_index()
        out = []
        for i, ln in enumerate(self._lines):
            if header is None or i <= header or not ln.strip() or ln.strip().startswith("#"):
                continue
            fields = _fields(ln)
            if any(f.strip() for f in fields):
                out.append(i)
        return out

    def _out_of_bounds(self, profile) -> tuple[int, str] | None:
        """The first new reading outside what a retort record can hold: (index in ``_lines``, why)."""
        t, T = profile.time_min, profile.temperature_C
        first = self._rows_done
        if t.size <= first:
            return None
        late = t[first:] > MAX_RECORD_MIN
        cold = T[first:] <= ROW_MIN_C
        hot = T[first:] > ROW_MAX_C
        bad = np.flatnonzero(late | cold | hot)
        if not bad.size:
            return None
        i = first + int(bad[0])
        indices = self._data_indices()
        if i >= len(indices):
            return None
        if late[i - first]:
            why = (f"time {t[i]:g} min from the first row is past the longest record the watch follows "
                   f"({MAX_RECORD_MIN:g} min): a glitch of the recorder's clock?")
        elif hot[i - first]:
            as_C = (T[i] - 32.0) * 5.0 / 9.0
            hint = (f"; {T[i]:g} looks like °F (= {as_C:.1f} °C)"
                    if self.process.process_temperature_C - 40.0 <= as_C <= ROW_MAX_C else "")
            why = f"{T[i]:g} °C is above {ROW_MAX_C:g} °C, which no retort reaches{hint}"
        else:
            why = f"{T[i]:g} °C is not a retort reading (above {ROW_MIN_C:g} °C expected): a sensor fault?"
        return indices[i], why

    def _skip(self, index: int, why: str) -> None:
        """Leave out line ``index`` of ``_lines`` and say so (a ``skipped`` event, a note)."""
        line_no = self._line_numbers[index]
        text = self._lines[index]
        shown = text if len(text) <= 60 else text[:60] + "…"
        del self._lines[index]
        del self._line_numbers[index]
        message = f"line {line_no} ({shown!r}) skipped: {why}"
        self.skipped.append({"line": line_no, "text": text, "why": why})
        self._emit({"type": "skipped", "time_min": None, "line": line_no, "row_text": shown,
                    "message": message})
        self.note(f"watch: {message}")

    # -- the loop --------------------------------------------------------------------------

    def run(self, follower: LogFollower, *, poll_s: float = 0.25, until_end: bool = False,
            idle_s: float = 3.0, stop: Callable[[], bool] | None = None,
            clock: Callable[[], float] = time.monotonic, sleep: Callable[[float], None] = time.sleep) -> dict:
        """Follow the log until the cycle is done (or, ``until_end``, until the file has not grown
        for ``idle_s`` seconds); returns the final event.

        Without ``until_end`` the watch ends when the cycle is done (:meth:`cycle_done`); with it,
        only at the end of the file, so the final evaluation covers every row the file holds (a
        last line without a line end is then read as complete).
        """
        last_size, last_growth = -1, clock()
        try:
            while True:
                lines = follower.read_new()
                now = clock()
                if follower.size != last_size:
                    last_size, last_growth = follower.size, now
                if lines:
                    self.feed(lines)
                    if not until_end and self.cycle_done():
                        return self.finish("cooling done")
                elif until_end and now - last_growth >= idle_s:
                    return self.finish("end of file", follower.read_new(final=True))
                if stop is not None and stop():
                    return self.finish("stopped")
                sleep(poll_s)
        except KeyboardInterrupt:
            self.finish("interrupted")
            raise
        except DeviationError as exc:
            self._emit({"type": "error", "time_min": None, "message": str(exc)})
            self.note(f"watch stopped: {exc}")
            raise


def _error_line(exc: RecordError) -> int | None:
    """The line a retort-log reader's message names first (the row at fault), or None."""
    import re

    m = re.search(r"\bline (\d+)\b", exc.message)
    return int(m.group(1)) if m else None


def check_header(lines: list[str], *, source: str) -> None:
    """Refuse a log whose header (the first line that is not blank or a ``#`` comment) names no
    time or temperature column; the rows are not looked at (the watch skips a bad one)."""
    from deviation.inputs.logs import parse_log_text

    upto = next((i for i, ln in enumerate(lines) if ln.strip() and not ln.strip().startswith("#")), None)
    if upto is None:
        return
    try:
        parse_log_text("".join(ln + "\n" for ln in lines[:upto + 1]), source=source)
    except RecordError as exc:
        if "but no readings" not in exc.message:
            raise


def _fields(line: str) -> list[str]:
    """The CSV fields of one line; a stray carriage return or other break inside it (which the
    csv module refuses) is read as plain commas, and the parse names what is wrong with the row."""
    import csv

    try:
        return next(csv.reader([line]), [])
    except csv.Error:
        return line.split(",")


def event_json(event: dict) -> str:
    """One event as a JSON line (no NaN); characters a line reader splits on (NEL, the Unicode
    line and paragraph separators) are escaped, so one event stays one line."""
    text = json.dumps(event, separators=(",", ":"), ensure_ascii=False, allow_nan=False)
    return text.replace("\x85", "\\u0085").replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")


__all__ = ["LogFollower", "Watch", "LogChanged", "LogTruncated", "LogRotated", "COOLING_DONE_C", "event_json",
           "check_header", "ROW_MIN_C", "ROW_MAX_C", "MAX_RECORD_MIN", "MAX_SKIPPED_PER_READ"]
