"""Following a retort log that a recorder is still writing, for the floor-entry screen.

The file is read with :class:`deviation.live.watch.LogFollower` and judged row by row by a
:class:`deviation.live.watch.Watch` (no store: the operator saves the record with Ctrl+S, as for
any entry), in a worker thread. The watch's events reach the screen as :class:`FollowEvent`
messages; the screen feeds the rows so far through the same path as an imported log, so
results, flags, guidance and curves refresh as rows arrive. Live flags come from the watch,
which knows when a finding is certain while the cycle still runs (the evaluation of a record
that stops mid-cycle reads a drop in progress as a short hold, for one).
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, field
from pathlib import Path

from textual.message import Message

from deviation.errors import DeviationError, RecordError

#: Seconds between looks at the file (a recorder writes a row every few seconds at most).
POLL_S = 0.5


@dataclass
class FollowStart:
    """A retort log checked and opened for following (the follow dialog's result)."""

    path: Path
    follower: object  # deviation.live.watch.LogFollower, positioned after ``lines``
    lines: list[str]  # the complete lines read so far, header included
    readings: int  # data rows among them

    def close(self) -> None:
        self.follower.close()


def open_followed_log(path_text: str) -> FollowStart:
    """Open ``path_text`` for following: it must exist and start with a valid header.

    Raises
    ------
    RecordError
        The file is missing, a folder, unreadable, has no header yet or a bad header (the
        retort-log reader's messages). A bad data row is not refused here: the watch reports
        and skips it, and goes on.
    """
    from deviation.live.watch import LogFollower, check_header

    text = path_text.strip()
    if not text:
        raise RecordError("give the path of the retort log the recorder is writing", source="file")
    path = Path(text).expanduser()
    if path.is_dir():
        raise RecordError("this is a folder; give the retort log CSV file in it", source=str(path))
    follower = LogFollower(path)
    try:
        lines = follower.read_new()
        data = [ln for ln in lines if ln.strip() and not ln.strip().startswith("#")]
        if not data:
            raise RecordError("no header line yet: the file must start with a header naming time_min and "
                              "temperature_C (or temperature_F); follow it once the recorder has written it",
                              source=str(path))
        check_header(lines, source=str(path))  # a bad row is the watch's to report and skip
    except DeviationError:
        follower.close()
        raise
    return FollowStart(path=path, follower=follower, lines=lines, readings=max(len(data) - 1, 0))


class FollowEvent(Message):
    """One event of the watch (see :mod:`deviation.live.watch`), posted from the follow thread."""

    def __init__(self, session: int, event: dict, text: str | None) -> None:
        super().__init__()
        self.session = session
        self.event = event
        self.text = text  # the log so far (with update events)


@dataclass
class FollowSession:
    """What the screen knows about the log being followed."""

    number: int
    path: Path
    stop: threading.Event = field(default_factory=threading.Event)
    rows: int = 0
    last_min: float | None = None
    phase: str = "waiting"
    flags: list[dict] = field(default_factory=list)
    skipped: list[dict] = field(default_factory=list)  # bad rows reported and skipped
    active: bool = True
    ended: str | None = None  # why following ended

    def status(self) -> str:
        """The status line: symbol, file, rows, last reading time, flags so far."""
        name = self.path.name
        flags = ""
        if self.flags:
            codes = list(dict.fromkeys(f["code"] for f in self.flags))
            flags = f" · ⚑ {len(self.flags)} flag{'s' if len(self.flags) > 1 else ''}: {', '.join(codes)}"
        if self.skipped:
            flags += f" · ⚠ {len(self.skipped)} bad row{'s' if len(self.skipped) > 1 else ''} skipped"
        last = f"last at {self.last_min:.1f} min" if self.last_min is not None else "waiting for readings"
        if self.active:
            return f"◉ following {name}: {self.rows} rows, {last} ({self.phase}){flags} · Ctrl+F stops"
        return f"■ stopped following {name} ({self.ended}): {self.rows} rows, {last}{flags}"


def run_follow(post, session: FollowSession, start: FollowStart, process, *, lot: str, retort_id: str,
               initial_temperature_C: float | None, poll_s: float = POLL_S, cancelled=lambda: False) -> None:
    """Follow the log until the cycle is done, it is stopped, or the file changes (worker thread).

    ``post`` is given each :class:`FollowEvent`; nothing here touches the screen.
    """
    from deviation.live.watch import Watch

    holder: list = []

    def on_event(event: dict) -> None:
        text = holder[0].text if holder and event.get("type") in ("update", "final") else None
        post(FollowEvent(session.number, event, text))

    try:
        try:
            watch = Watch(process, lot=lot or "(not entered)", retort_id=retort_id or "(not entered)",
                          initial_temperature_C=initial_temperature_C, store=None, source=str(start.path),
                          on_event=on_event)
            holder.append(watch)
            watch.feed(start.lines)
            if watch.cycle_done():  # a finished record: nothing more will come
                watch.finish("cooling done")
                return
        except DeviationError as exc:
            post(FollowEvent(session.number, {"type": "error", "message": str(exc)}, None))
            return
        try:
            watch.run(start.follower, poll_s=poll_s, stop=lambda: session.stop.is_set() or cancelled(),
                      sleep=session.stop.wait)
        except DeviationError:
            pass  # the watch has posted its "error" event with the message
    except Exception as exc:  # noqa: BLE001 - a follow thread must end with a message, not a traceback
        message = f"following stopped: {type(exc).__name__}: {exc}"
        post(FollowEvent(session.number, {"type": "error", "message": message}, None))
    finally:
        start.close()


__all__ = ["POLL_S", "FollowStart", "FollowEvent", "FollowSession", "open_followed_log", "run_follow"]
