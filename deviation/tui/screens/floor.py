"""Floor entry: the operator records a deviation while the cycle runs and sees it evaluated.

Keys come from the one key map (:mod:`deviation.tui.keys`): Ctrl+L low now (with the reading
typed), Ctrl+B back at process temperature now, Ctrl+T a typed time and reading, Ctrl+O import a
retort log, Ctrl+F follow a retort log the recorder is still writing (Ctrl+F again stops),
Ctrl+R drop the last reading, Ctrl+S save the record, Ctrl+N new entry, Ctrl+G curves/guidance.
Every typed value is checked in place by :mod:`deviation.tui.entry` (the reason and, for a unit
slip, the likely value); every change, also a reading typed but not entered, is kept as a draft
in the store and restored (and announced, and a followed log followed again) when the app starts.

While a cycle runs the screen moves with the clock: every :attr:`FloorScreen.CLOCK_REFRESH_S`
seconds "now", the open low interval and every figure are evaluated again, without a key.

Following a log (:mod:`deviation.tui.follow`) feeds the rows so far through the import path as
they arrive and raises a toast for each flag the live watch sees, and for each bad row it skips;
it does not create a record by itself: Ctrl+S saves the record with the rows so far.
"""

from __future__ import annotations

import time
from dataclasses import replace
from datetime import datetime
from pathlib import Path

import numpy as np
from rich.text import Text
from textual import work
from textual.actions import SkipAction
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import Screen
from textual.widgets import Footer, Input, Label, Select, Static
from textual.worker import get_current_worker

from deviation.errors import CaseError, DeviationError
from deviation.tui.entry import (
    FIELD_LABELS,
    FloorEntry,
    Reading,
    build_case,
    check_fields,
    check_reading,
    cycle_running,
    describe_start,
    log_running,
    entry_snapshot,
    minutes_since,
    parse_cycle_start,
    parse_time,
    with_reading,
    without_last_reading,
)
from deviation.tui.follow import POLL_S, FollowEvent, FollowSession, FollowStart, open_followed_log, run_follow
from deviation.tui.keys import FLOOR_KEYS, bindings
from deviation.tui.screens.floor_dialogs import FollowLogDialog, ImportLogDialog
from deviation.tui.sources import FiledProcess, filed_processes
from deviation.tui.widgets.form import FileChoice
from deviation.tui.widgets.guidance import CautionBar, GuidancePanel
from deviation.tui.widgets.plots import CyclePlots
from deviation.tui.widgets.results import FloorFigures, ResultsPanel
from deviation.tui.widgets.status import StatusLine
from deviation.tui.widgets.steady_input import SteadyInput

# (field, placeholder) of the form, in order (labels from entry.FIELD_LABELS).
FORM = (
    ("lot", "lot code"),
    ("retort", "retort id"),
    ("lot_size", "containers"),
    ("initial_temperature", "product °C at steam on"),
    ("cycle_start", "HH:MM (clock)"),
    ("plant", "plant"),
    ("shift", "shift"),
)
FORM_NAMES = tuple(name for name, _ in FORM)
# Typed while the cycle runs (kept in the draft, entered with a key).
LIVE = (("reading", "e.g. 117.5"), ("at", "min or HH:MM"))


def so_far(ev, now_min: float | None) -> float | None:
    """Delivered F0 up to ``now_min`` read off the evaluation's cumulative curve [min]."""
    if now_min is None:
        return None
    t = np.asarray(ev.cold_spot.time_min)
    F = np.asarray(ev.cold_spot.cumulative_F_min)
    return float(np.interp(now_min, t, F))


def filed_summary(process: dict) -> str:
    """The filed process as the floor checks it: temperature, time, come-up, initial, F0."""
    def num(key: str) -> str:
        v = process.get(key)
        return f"{v:g}" if isinstance(v, (int, float)) else "?"

    return (f"filed {num('process_temperature_C')} °C for {num('process_time_min')} min, come-up "
            f"{num('come_up_time_min')} min, initial ≥ {num('minimum_initial_temperature_C')} °C, "
            f"F0 {num('target_F_min')} min")


class FloorScreen(Screen):
    """Enter a deviation as it happens."""

    TITLE_TEXT = "Floor entry"
    BINDINGS = bindings(FLOOR_KEYS)
    #: Seconds between refreshes while a cycle runs (no key needed); tests make it shorter.
    CLOCK_REFRESH_S = 5.0
    CSS = """
    FloorScreen #entry-form { width: 34; border-right: vkey $primary; padding: 0 1 0 0; }
    FloorScreen.-wide #entry-form, .-wide FloorScreen #entry-form { width: 44; }
    FloorScreen .form-head { text-style: bold; margin-top: 0; }
    FloorScreen .row-label { width: 11; }
    FloorScreen .row-label-short { width: 6; }
    FloorScreen #plant { width: 1fr; }
    FloorScreen #shift { width: 5; }
    FloorScreen #product { color: $text-muted; height: auto; max-height: 5; }
    FloorScreen #notice { display: none; height: auto; max-height: 2; padding: 0 1; background: $secondary 25%; }
    FloorScreen #notice.-shown { display: block; }
    """

    def __init__(self) -> None:
        super().__init__()
        self.entry = FloorEntry()
        self.processes: dict[str, FiledProcess] = {}
        self._request = 0
        self._restoring = False
        self._shown_now: float | None = None
        self.last_error: str | None = None
        self.last_refresh_s: float | None = None
        self.saved_record_id: str | None = None
        self.follow: FollowSession | None = None  # the log being followed (or last followed)
        self._follows = 0
        self.follow_poll_s = POLL_S
        self._draft_log_key = None

    # -- layout ------------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        yield StatusLine(id="status")
        with Horizontal(id="floor"):
            with VerticalScroll(id="entry-form"):
                yield Select([], prompt="choose the filed process", id="process", compact=True)
                yield Static("", id="product")
                for name, placeholder in FORM:
                    if name == "shift":
                        continue
                    with Horizontal(classes="row"):
                        yield Label(FIELD_LABELS[name], classes="row-label")
                        yield SteadyInput(placeholder=placeholder, id=name, compact=True)
                        if name == "plant":
                            yield Label(" Shift", classes="row-label-short")
                            yield SteadyInput(placeholder="shift", id="shift", compact=True)
                    yield Static("", id=f"{name}-error", classes="field-error")
                yield Static("", id="shift-error", classes="field-error")
                yield Static("", id="now-line")
                yield Label("While the cycle runs", classes="form-head")
                for name, placeholder in LIVE:
                    with Horizontal(classes="row"):
                        yield Label(FIELD_LABELS[name], classes="row-label")
                        yield SteadyInput(placeholder=placeholder, id=name, compact=True)
                yield Static("", id="entry-error", classes="field-error")
                yield Static("", id="readings")
            with Vertical(id="floor-right"):
                yield ResultsPanel(id="results")
                with Horizontal(id="floor-lower"):
                    yield GuidancePanel(id="guidance")
                    yield CyclePlots(id="plots")
        yield Static("", id="notice")
        yield Static("", id="follow-status")
        yield CautionBar(id="caution")
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.load_processes()
        self.restore_draft()
        self.refresh_status()
        self.set_interval(self.CLOCK_REFRESH_S, self.clock_tick)

    def refresh_status(self) -> None:
        ctx = self.app.ctx
        self.query_one(StatusLine).update(
            f"{self.TITLE_TEXT} · {ctx.actor} ({ctx.role}) · {ctx.store_name} · {ctx.now_text()}")

    def on_screen_resume(self) -> None:
        self.refresh_status()

    # -- processes and drafts ----------------------------------------------------------------

    def load_processes(self) -> None:
        ctx = self.app.ctx
        found = filed_processes(ctx.store, ctx.cases_dir)
        self.processes = {p.key: p for p in found}
        sel = self.query_one("#process", Select)
        sel.set_options([(p.id + (f" v{p.version}" if p.version else ""), p.key) for p in found])

    def _set_fields(self, entry: FloorEntry) -> None:
        self._restoring = True
        try:
            self.entry = entry
            sel = self.query_one("#process", Select)
            sel.value = entry.process_key if entry.process_key else Select.NULL
            for name in (*FORM_NAMES, *(n for n, _ in LIVE)):
                self.query_one(f"#{name}", Input).value = getattr(entry, name)
        finally:
            self._restoring = False

    def restore_draft(self) -> None:
        ctx = self.app.ctx
        try:
            draft = ctx.store.load_draft(ctx.draft_key)
            log = ctx.store.load_draft(ctx.draft_key + ".log") if draft else None
        except DeviationError as exc:
            self.notify(str(exc), severity="error")
            draft = log = None
        entry = FloorEntry.from_draft(draft)
        if log and draft and log.get("source") == draft.get("retort_log_source"):
            entry = replace(entry, retort_log_text=log.get("text"))
        elif entry.retort_log_source:
            entry = replace(entry, retort_log_source=None)
        if entry.process_key not in self.processes:
            entry = replace(entry, process_key=None)
        self._set_fields(entry)
        self.show_product()
        self.show_readings()
        self.evaluate()
        if draft and not entry.is_blank():
            self.announce_restored(entry)
            if entry.following:
                self.resume_following(entry.following)
        self.focus_first_empty()

    def announce_restored(self, entry: FloorEntry) -> None:
        """Say what came back from the draft, on screen until the next entry (and as a toast)."""
        parts = [f"lot {entry.lot.strip()}" if entry.lot.strip() else "no lot yet",
                 f"{len(entry.readings)} reading{'s' if len(entry.readings) != 1 else ''}"]
        if entry.retort_log_source:
            parts.append(f"log {Path(entry.retort_log_source).name}")
        if entry.reading.strip():
            parts.append(f"reading {entry.reading.strip()} typed, not entered yet")
        text = "↺ Draft restored from the store: " + ", ".join(parts)
        self.show_notice(text)
        self.notify(text, title="Draft restored")

    def show_notice(self, text: str | None) -> None:
        box = self.query_one("#notice", Static)
        box.update(Text(text or ""))
        box.set_class(bool(text), "-shown")

    def focus_first_empty(self) -> None:
        """The cursor where the operator types next: the first empty field, else the reading."""
        if self.entry.process_key is None:
            self.query_one("#process").focus()
            return
        for name in FORM_NAMES:
            if name in ("plant", "shift"):
                continue
            if not getattr(self.entry, name).strip():
                self.query_one(f"#{name}", Input).focus()
                return
        self.query_one("#reading", Input).focus()

    def save_draft(self) -> None:
        """Keep the entry in the store; the (large) retort log only when it changes."""
        ctx = self.app.ctx
        draft = self.entry.to_draft()
        text = draft.pop("retort_log_text", None)
        # A followed log grows: keep it again when its length changes, not only its source.
        log_key = (self.entry.retort_log_source, len(text)) if text is not None else None
        try:
            if text is not None and self._draft_log_key != log_key:
                ctx.store.save_draft(ctx.draft_key + ".log", {"source": self.entry.retort_log_source,
                                                             "text": text})
                self._draft_log_key = log_key
            ctx.store.save_draft(ctx.draft_key, draft)
        except DeviationError as exc:
            self.notify(f"draft not kept: {exc}", severity="error")

    # -- input events ------------------------------------------------------------------------

    def on_input_changed(self, event: Input.Changed) -> None:
        name = event.input.id
        if self._restoring or name not in (*FORM_NAMES, "reading", "at"):
            return
        if getattr(self.entry, name) == event.value:
            return  # set from the draft or cleared by the screen itself: nothing new typed
        self.entry = replace(self.entry, **{name: event.value})
        if name == "cycle_start":
            self.entry = replace(self.entry, cycle_start_iso=None)
        self.save_draft()
        if name in FORM_NAMES:
            self.evaluate()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        # Enter in the reading box: a low reading now (the most frequent entry); in "At": typed.
        if event.input.id == "reading":
            self.action_low_now()
        elif event.input.id == "at":
            self.action_typed()

    def action_next_field(self) -> None:
        """Enter in a form field: the next field, at once (so a scanner's burst lands field by
        field); elsewhere Enter does what the focused widget does with it."""
        focused = self.focused
        if not isinstance(focused, Input) or focused.id not in FORM_NAMES:
            raise SkipAction()
        self.focus_next()

    def on_select_changed(self, event: Select.Changed) -> None:
        if self._restoring or event.select.id != "process":
            return
        key = event.value if event.value is not Select.NULL else None
        if key == self.entry.process_key:
            self.show_product()  # taken already (sync_fields), not yet shown
            return
        self.stop_following("the filed process changed; follow again to judge against the new one")
        self.entry = replace(self.entry, process_key=key)
        self.show_product()
        self.save_draft()
        self.evaluate()

    # -- time --------------------------------------------------------------------------------

    def sync_fields(self) -> None:
        """Take the fields as they stand on screen (a change message may still be queued)."""
        if self._restoring:
            return
        changed = {name: self.query_one(f"#{name}", Input).value for name in FORM_NAMES
                   if self.query_one(f"#{name}", Input).value != getattr(self.entry, name)}
        chosen = self.query_one("#process", Select).value
        key = chosen if chosen is not Select.NULL and chosen in self.processes else None
        if key is not None and key != self.entry.process_key:  # a choice not yet announced by Select.Changed
            changed["process_key"] = key
            self.call_later(self.show_product)
        if changed:
            if "cycle_start" in changed:
                changed["cycle_start_iso"] = None
            self.entry = replace(self.entry, **changed)

    def cycle_start(self) -> datetime | None:
        """The cycle start as a date-time (None when not set); raises on a bad value."""
        self.sync_fields()
        text = self.entry.cycle_start.strip()
        if not text:
            return None
        if self.entry.cycle_start_iso:
            return datetime.fromisoformat(self.entry.cycle_start_iso)
        start = parse_cycle_start(text, self.app.ctx.clock())
        self.entry = replace(self.entry, cycle_start_iso=start.isoformat())
        return start

    def now_min(self) -> float | None:
        try:
            start = self.cycle_start()
        except DeviationError:
            return None
        return None if start is None else minutes_since(start, self.app.ctx.clock())

    def clock_tick(self) -> None:
        """Every few seconds: the clock in the status line; while a cycle runs, every figure."""
        if not self.is_current or not self.query(StatusLine):
            return
        self.refresh_status()
        now = self.now_min()
        proc = self._process()
        if now is None or proc is None or not self.entry.has_record():
            return
        if self.entry.retort_log_text is not None and not self.following:
            return  # an imported record does not move with the clock
        if self._shown_now is not None and round(now, 1) == round(self._shown_now, 1):
            return  # nothing to redraw: keep it cheap
        self.evaluate()

    # -- actions -----------------------------------------------------------------------------

    def _process(self) -> FiledProcess | None:
        self.sync_fields()
        return self.processes.get(self.entry.process_key) if self.entry.process_key else None

    def _process_temperature(self) -> float | None:
        proc = self._process()
        pt = proc.process.get("process_temperature_C") if proc is not None else None
        return float(pt) if isinstance(pt, (int, float)) else None

    def _entry_error(self, text: str | None) -> None:
        self.last_error = text
        box = self.query_one("#entry-error", Static)
        box.update(Text(f"✗ {text}") if text else "")
        box.set_class(bool(text), "-shown")

    def _add(self, reading: Reading) -> None:
        self.entry = with_reading(self.entry, reading)
        self._entry_error(None)
        self.show_notice(None)
        self.query_one("#reading", Input).value = ""
        self.entry = replace(self.entry, reading="")
        self.evaluate()  # first: the worker computes while the draft is written
        self.show_readings()
        self.save_draft()

    def _now_or_error(self) -> float | None:
        try:
            start = self.cycle_start()
        except DeviationError as exc:
            self._entry_error(str(exc))
            return None
        if start is None:
            self._entry_error("set Steam on (the cycle start, HH:MM) to enter a reading 'now', or type "
                              "a time in At and press Ctrl+T")
            return None
        return minutes_since(start, self.app.ctx.clock())

    def _checked_reading(self) -> float | None:
        if self._process() is None:
            self._entry_error("choose the filed process first")
            return None
        try:
            return check_reading(self.query_one("#reading", Input).value, self._process_temperature())
        except DeviationError as exc:
            self._entry_error(str(exc))
            return None

    def action_low_now(self) -> None:
        value = self._checked_reading()
        if value is None:
            return
        now = self._now_or_error()
        if now is not None:
            self._add(Reading(round(now, 4), value, "low"))

    def action_back_now(self) -> None:
        if self._process() is None:
            self._entry_error("choose the filed process first")
            return
        now = self._now_or_error()
        if now is not None:
            self._add(Reading(round(now, 4), self._process_temperature(), "back"))

    def action_typed(self) -> None:
        value = self._checked_reading()
        if value is None:
            return
        try:
            at = parse_time(self.query_one("#at", Input).value, self.cycle_start(), self.app.ctx.clock())
        except DeviationError as exc:
            self._entry_error(str(exc))
            return
        self.query_one("#at", Input).value = ""
        self.entry = replace(self.entry, at="")
        self._add(Reading(at, value, "typed"))

    def action_drop_last(self) -> None:
        if self.entry.readings:
            self.entry = without_last_reading(self.entry)
            self.save_draft()
            self.show_readings()
            self.evaluate()

    def action_new_entry(self) -> None:
        """A clean screen for the next lot: fields, readings, flags, guidance and curves cleared;
        the filed process kept; the cursor in Lot."""
        self.stop_following("new entry")
        self._set_fields(FloorEntry(process_key=self.entry.process_key))
        self.app.ctx.store.delete_draft(self.app.ctx.draft_key)
        self.app.ctx.store.delete_draft(self.app.ctx.draft_key + ".log")
        self._draft_log_key = None
        self._entry_error(None)
        self.show_notice(None)
        self.show_readings()
        self.evaluate()
        self.focus_first_empty()

    def action_toggle_curves(self) -> None:
        self.toggle_class("-show-curves")

    def action_import_log(self) -> None:
        def read(choice: FileChoice) -> None:
            from deviation.inputs.case import _read_text  # the case reader's own messages
            from deviation.inputs.logs import parse_log_text

            path = Path(choice.path).expanduser()
            text = _read_text(path, what="retort log", named_in="import")
            parse_log_text(text, source=str(path))  # refuse a bad log before it is kept
            self.stop_following("another log imported")
            self.entry = replace(self.entry, retort_log_text=text, retort_log_source=str(path))

        def done(choice: FileChoice | None) -> None:
            if choice is not None:
                self.save_draft()
                self.show_readings()
                self.notify(f"retort log {Path(choice.path).name} imported")
                self.evaluate()

        self.app.push_screen(ImportLogDialog(apply=read), done)

    # -- following a log the recorder is writing ----------------------------------------------

    @property
    def following(self) -> bool:
        return self.follow is not None and self.follow.active

    def check_action(self, action: str, parameters) -> bool | None:
        # Ctrl+F follows, or stops following: the footer shows the one that applies.
        if action == "follow_log":
            return not self.following
        if action == "stop_follow":
            return self.following
        return True

    def action_follow_log(self) -> None:
        proc = self._process()
        if proc is None:
            self._entry_error("choose the filed process first")
            self.notify("choose the filed process first", title="Not following", severity="error")
            return

        def done(start: FollowStart | None) -> None:
            if start is not None:
                self.start_following(start)

        self.app.push_screen(FollowLogDialog(), done)

    def resume_following(self, path: str) -> None:
        """Follow again the log the draft was following (announced; said so if it cannot be)."""
        try:
            start = open_followed_log(path)
        except DeviationError as exc:
            self.entry = replace(self.entry, following=None)
            self.save_draft()
            self.show_notice(f"✗ Following {Path(path).name} not resumed: {exc}. Ctrl+F follows a log again.")
            return
        self.start_following(start, resumed=True)

    def start_following(self, start: FollowStart, *, resumed: bool = False) -> None:
        """Follow the log opened by the dialog (rows so far first, then as they arrive)."""
        from deviation.inputs.case import parse_case

        proc = self._process()
        if proc is None:
            start.close()
            self._entry_error("choose the filed process first")
            return
        self.stop_following("another log followed")
        self.sync_fields()
        try:
            # Only the filed process is wanted here: the watch builds its own case around it.
            process = parse_case({"process": proc.process, "deviation": {
                "lot": "-", "retort_id": "-", "lot_size_containers": 1, "initial_temperature_C": 20.0}},
                source=proc.origin).process
        except DeviationError as exc:
            start.close()
            self.notify(f"cannot follow against this filed process: {exc}", title="Not following",
                        severity="error")
            return
        checked = check_fields(self.entry, self._process_temperature())
        initial = checked.values.get("initial_temperature_C")  # None: the watch assumes the filed minimum
        self._follows += 1
        session = FollowSession(self._follows, start.path, rows=start.readings)
        self.follow = session
        self.entry = replace(self.entry, following=str(start.path))
        self.save_draft()
        self._entry_error(None)
        self.show_follow_status()
        self.refresh_bindings()
        word = "resumed" if resumed else "started"
        self.notify(f"following {start.path.name} {word}: {start.readings} rows so far; Ctrl+F stops",
                    title="◉ Following")
        if resumed:
            self.show_notice(f"◉ Following {start.path.name} resumed after the restart "
                             f"({start.readings} rows so far).")
        self._follow_worker(session, start, process, checked.values.get("lot", ""),
                            checked.values.get("retort_id", ""), initial)

    @work(thread=True, group="follow", exit_on_error=False)
    def _follow_worker(self, session: FollowSession, start: FollowStart, process, lot: str, retort_id: str,
                       initial: float | None) -> None:
        worker = get_current_worker()
        run_follow(self.post_message, session, start, process, lot=lot, retort_id=retort_id,
                   initial_temperature_C=initial, poll_s=self.follow_poll_s,
                   cancelled=lambda: worker.is_cancelled)

    def action_stop_follow(self) -> None:
        self.stop_following("stopped by the operator")

    def stop_following(self, why: str, *, keep_in_draft: bool = False) -> None:
        """Stop following (the rows so far stay in the entry)."""
        session = self.follow
        if session is None or not session.active:
            return
        session.active = False
        session.ended = why
        session.stop.set()
        if not keep_in_draft and self.entry.following:
            self.entry = replace(self.entry, following=None)
            self.save_draft()
        self.show_follow_status()
        self.refresh_bindings()

    def on_follow_event(self, message: FollowEvent) -> None:
        session = self.follow
        if not self.query("#follow-status"):
            return
        if session is None or message.session != session.number:
            return  # from a follow already replaced
        e = message.event
        kind = e.get("type")
        if kind == "error":
            self.stop_following("error")
            self.show_follow_status(error=e.get("message", ""))
            self.notify(e.get("message", ""), title="✗ Following stopped", severity="error", timeout=30)
            return
        if not session.active:
            return  # stopping: the watch's last evaluation adds nothing the operator asked for
        if kind == "skipped":
            session.skipped.append(e)
            self.notify(f"{e.get('message', '')}. Following goes on.", title="⚠ Row skipped",
                        severity="warning", timeout=30)
        elif kind == "flag":
            session.flags.append(e)
            t = e.get("time_min")
            self.notify(f"FLAG {e['code']}" + (f" at {t:.2f} min" if t is not None else "")
                        + f": {e.get('message', '')}. Ctrl+S saves the record.",
                        title="⚑ Deviation flag", severity="warning", timeout=30)
        elif kind in ("update", "final"):
            rows = e.get("row", e.get("rows"))
            if rows is not None:
                session.rows = int(rows)
            if e.get("time_min") is not None:
                session.last_min = float(e["time_min"])
            session.phase = e.get("phase") or session.phase
            if kind == "final":
                reason = e.get("reason")
                self.stop_following("cycle done: cooling" if reason == "cooling done" else str(reason))
                self.notify(f"{session.path.name}: {session.ended}; following stopped", title="✓ Cycle done")
            if message.text is not None and message.text != self.entry.retort_log_text:
                self.import_log_text(message.text, str(session.path))
        self.show_follow_status()

    def show_follow_status(self, error: str | None = None) -> None:
        box = self.query_one("#follow-status", Static)
        session = self.follow
        if session is None:
            box.set_class(False, "-shown")
            return
        box.update(Text(f"✗ {error}" if error else session.status()))
        box.set_class(True, "-shown")
        box.set_class(bool(error), "-error")

    def on_unmount(self) -> None:
        if self.follow is not None:
            self.follow.stop.set()  # the draft keeps the followed log: it is followed again next time

    def import_log_text(self, text: str, source: str) -> None:
        """Attach a retort log (used by the import dialog and by a watch)."""
        self.entry = replace(self.entry, retort_log_text=text, retort_log_source=source)
        self.evaluate()
        self.show_readings()
        self.save_draft()

    def action_save(self) -> None:
        from deviation.evaluate import evaluate_case
        from deviation.records import roles

        ctx = self.app.ctx
        proc = self._process()
        try:
            role = roles.check_role(ctx.actor, ctx.role, "enter")
            if proc is None:
                raise DeviationError("choose the filed process first", source="Filed process")
            if not self.entry.has_record():
                raise DeviationError("nothing entered yet: enter the readings (or import the retort "
                                     "log) before saving", source="Record")
            start = self.cycle_start()
            built = build_case(proc.process, self.entry, self.now_min(), start=start)
            loaded = built.loaded
            ev = evaluate_case(loaded).model_dump(mode="json")
            dev = loaded.case.deviation
            snapshot = loaded.snapshot()
            snapshot["floor_entry"] = entry_snapshot(self.entry, start)  # every reading as entered
            rid = ctx.store.create_record(snapshot, actor=ctx.actor, role=role, lot=dev.lot,
                                          retort_id=dev.retort_id, process_id=loaded.case.process.id,
                                          process_version=proc.version)
            ctx.store.add_evaluation(rid, ev, actor=ctx.actor, role=role, snapshot_seq=1,
                                     options={"conservative": ev["conservative"], "what_if": True})
        except CaseError as exc:
            self.show_field_errors(check_fields(self.entry, self._process_temperature()).errors)
            self.notify(str(exc), title="Not saved", severity="error")
            return
        except DeviationError as exc:
            self.notify(str(exc), title="Not saved", severity="error")
            return
        self.saved_record_id = rid
        self.stop_following(f"record {rid} saved; Ctrl+F follows again into a new entry")
        disposition = (ev.get("guidance") or {}).get("disposition")
        self.notify(f"Record {rid} saved (lot {dev.lot}, guidance {disposition}). A supervisor holds it "
                    "on the holds board (F3).", title="Saved")
        self.action_new_entry()

    # -- evaluation --------------------------------------------------------------------------

    def show_product(self) -> None:
        proc = self._process()
        if proc is None:
            self.query_one("#product", Static).update("")
            return
        where = "library" if proc.origin == "process library" else Path(proc.origin).name
        self.query_one("#product", Static).update(Text(f"{proc.product} ({where})\n{filed_summary(proc.process)}"))

    def show_readings(self) -> None:
        lines = [r.describe() for r in sorted(self.entry.readings, key=lambda r: r.time_min)]
        if self.entry.retort_log_source:
            lines.insert(0, f"log: {Path(self.entry.retort_log_source).name}")
        self.query_one("#readings", Static).update(Text("\n".join(lines) or "no readings yet"))

    def show_field_errors(self, errors: dict[str, str]) -> None:
        for name in FORM_NAMES:
            if name == "cycle_start":
                continue
            msg = errors.get(name)
            box = self.query_one(f"#{name}-error", Static)
            box.update(Text(f"✗ {msg}") if msg else "")
            box.set_class(bool(msg), "-shown")
            self.query_one(f"#{name}", Input).set_class(bool(msg), "-invalid")

    def _clear_lower(self, text: Text) -> None:
        """No evaluation to show: the flags, guidance and curves of a previous one go too."""
        self.query_one(GuidancePanel).show_text(text)
        self.query_one(CyclePlots).show(None)

    def _now_line(self, start: datetime | None, now: float | None) -> None:
        if now is None:
            text = "now: set Steam on"
        else:
            text = f"now {now:.1f} min from steam on {describe_start(start, self.app.ctx.clock())}"
        self.query_one("#now-line", Static).update(text, layout=False)

    def evaluate(self) -> None:
        """Check the entry and evaluate it (in a worker thread); the panels update when done."""
        if not self.query(ResultsPanel):
            return  # closing: a follow event or a timer arrived after the widgets went
        self._request += 1
        request = self._request
        proc = self._process()
        box = self.query_one("#cycle_start-error", Static)
        try:
            start = self.cycle_start()
            box.update("")
            box.set_class(False, "-shown")
            self.query_one("#cycle_start", Input).set_class(False, "-invalid")
        except DeviationError as exc:
            start = None
            box.update(Text(f"✗ {exc}"))
            box.set_class(True, "-shown")
            self.query_one("#cycle_start", Input).set_class(True, "-invalid")
        now = minutes_since(start, self.app.ctx.clock()) if start is not None else None
        self._shown_now = now
        self._now_line(start, now)
        results = self.query_one(ResultsPanel)
        if proc is None:
            results.show_message("Choose the filed process (Tab to the list, Enter).")
            self._clear_lower(Text("No filed process chosen yet.", style="dim"))
            return
        checked = check_fields(self.entry, self._process_temperature())
        self.show_field_errors(checked.errors)
        missing = [FIELD_LABELS[n] for n in checked.missing]
        if not self.entry.has_record():
            results.show_nothing_yet(missing + [f"{FIELD_LABELS[n]} (refused)" for n in checked.errors])
            self._clear_lower(Text("◌ Nothing entered yet: flags, guidance and curves appear with the "
                                   "first reading or log. No deviation is ruled out.", style="bold"))
            return
        try:
            built = build_case(proc.process, self.entry, now, start=start)
        except CaseError as exc:
            results.show_error(exc.message.splitlines())
            self._clear_lower(Text("✗ Not evaluated: see the results above.", style="bold red"))
            return
        running = cycle_running(proc.process, now, built.low_running)
        self._run(request, built, float(proc.process["process_temperature_C"]), running, time.perf_counter())

    @work(thread=True, exclusive=True, group="evaluate")
    def _run(self, request: int, built, process_temperature_C: float, running: bool, started: float) -> None:
        from deviation.evaluate import evaluate_case

        try:
            ev = evaluate_case(built.loaded)
            error = None
        except DeviationError as exc:
            ev, error = None, str(exc)
        if get_current_worker().is_cancelled:
            return
        self.app.call_from_thread(self._show, request, built, ev, error, process_temperature_C, running, started)

    def _show(self, request: int, built, ev, error, process_temperature_C: float, running: bool,
              started: float) -> None:
        if request != self._request or not self.query(ResultsPanel):
            return  # a newer entry is being evaluated, or the screen is closing
        results = self.query_one(ResultsPanel)
        if ev is None:
            results.show_error((error or "").splitlines())
            self._clear_lower(Text("✗ Not evaluated: see the results above.", style="bold red"))
            return
        from_log = built.loaded.retort_log_text is not None
        if from_log:
            F_now, at = ev.delivered_F_min, None
            running = (bool(ev.cycle.running) or self.following
                       or log_running(ev.cold_spot.retort_C[-1], process_temperature_C))
        else:
            F_now, at = so_far(ev, built.now_min), built.now_min
        results.show(FloorFigures(ev, F_now, at, from_log, built.low_running, running, process_temperature_C))
        self.last_refresh_s = time.perf_counter() - started

        def rest() -> None:
            # A frame after the figures: the numbers paint first, the text and curves follow.
            if request != self._request or not self.query(GuidancePanel):
                return
            self.query_one(GuidancePanel).show(ev, running=running, from_log=from_log,
                                               process_temperature_C=process_temperature_C)
            self.query_one(CyclePlots).show(ev, now_min=None if from_log else built.now_min,
                                            process_temperature_C=process_temperature_C, running=running)

        self.set_timer(1 / 30, rest)
