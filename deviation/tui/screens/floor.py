"""Floor entry: the operator records a deviation while the cycle runs and sees it evaluated.

Keys (shown in the footer): Ctrl+L low now (with the reading typed), Ctrl+B back at process
temperature now, Ctrl+T a typed time and reading, Ctrl+O import a retort log, Ctrl+F follow a
retort log the recorder is still writing (Ctrl+F again stops), Ctrl+R drop the last reading,
Ctrl+S save the record, Ctrl+N new entry, Ctrl+G curves/guidance (narrow terminals).
Every change is kept as a draft in the store, restored when the app starts again.

Following a log (:mod:`deviation.tui.follow`) feeds the rows so far through the import path as
they arrive and raises a toast for each flag the live watch sees; it does not create a record by
itself: Ctrl+S saves the record with the rows so far, as for any entry.
"""

from __future__ import annotations

import time
from dataclasses import replace
from pathlib import Path

import numpy as np
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import Screen
from textual.widgets import Footer, Input, Label, Select, Static
from textual.worker import get_current_worker

from deviation.errors import CaseError, DeviationError
from deviation.tui.entry import (
    FloorEntry,
    Reading,
    build_case,
    field_messages,
    minutes_since,
    parse_cycle_start,
    parse_reading,
    parse_time,
    with_reading,
    without_last_reading,
)
from deviation.tui.follow import POLL_S, FollowEvent, FollowSession, FollowStart, run_follow
from deviation.tui.screens.floor_dialogs import FollowLogDialog, ImportLogDialog
from deviation.tui.sources import FiledProcess, filed_processes
from deviation.tui.widgets.form import FileChoice
from deviation.tui.widgets.guidance import CautionBar, GuidancePanel
from deviation.tui.widgets.plots import CyclePlots
from deviation.tui.widgets.results import FloorFigures, ResultsPanel
from deviation.tui.widgets.status import StatusLine
from deviation.tui.widgets.steady_input import SteadyInput

# (field, label, placeholder) of the form, in order.
FORM = (
    ("lot", "Lot", "lot code"),
    ("retort", "Retort", "retort id"),
    ("lot_size", "Lot size", "containers"),
    ("initial_temperature", "Initial °C", "initial temperature °C"),
    ("cycle_start", "Steam on", "HH:MM (clock)"),
)


def so_far(ev, now_min: float | None) -> float | None:
    """Delivered F0 up to ``now_min`` read off the evaluation's cumulative curve [min]."""
    if now_min is None:
        return None
    t = np.asarray(ev.cold_spot.time_min)
    F = np.asarray(ev.cold_spot.cumulative_F_min)
    return float(np.interp(now_min, t, F))


class FloorScreen(Screen):
    """Enter a deviation as it happens."""

    TITLE_TEXT = "Floor entry"
    BINDINGS = [
        Binding("ctrl+l", "low_now", "Low now", priority=True),
        Binding("ctrl+b", "back_now", "Back now", priority=True),
        Binding("ctrl+t", "typed", "Typed", priority=True),
        Binding("ctrl+o", "import_log", "Import log", priority=True),
        Binding("ctrl+f", "follow_log", "Follow", priority=True),
        Binding("ctrl+f", "stop_follow", "Unfollow", priority=True),
        Binding("ctrl+s", "save", "Save", priority=True),
        Binding("ctrl+r", "drop_last", "Undo reading", show=False, priority=True),
        Binding("ctrl+n", "new_entry", "New", show=False, priority=True),
        Binding("ctrl+g", "toggle_curves", "Curves", priority=True),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.entry = FloorEntry()
        self.processes: dict[str, FiledProcess] = {}
        self._request = 0
        self._restoring = False
        self.last_error: str | None = None
        self.follow: FollowSession | None = None  # the log being followed (or last followed)
        self._follows = 0
        self.follow_poll_s = POLL_S

    # -- layout ------------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        yield StatusLine(id="status")
        with Horizontal(id="floor"):
            with VerticalScroll(id="entry-form"):
                yield Label("Filed process", classes="form-head")
                yield Select([], prompt="choose the filed process", id="process", compact=True)
                yield Static("", id="product")
                for name, label, placeholder in FORM:
                    with Horizontal(classes="row"):
                        yield Label(label, classes="row-label")
                        yield SteadyInput(placeholder=placeholder, id=name, compact=True)
                    yield Static("", id=f"{name}-error", classes="field-error")
                yield Static("", id="now-line")
                yield Label("While the cycle runs", classes="form-head")
                with Horizontal(classes="row"):
                    yield Label("Reading °C", classes="row-label")
                    yield SteadyInput(placeholder="e.g. 117.5", id="reading", compact=True)
                with Horizontal(classes="row"):
                    yield Label("At", classes="row-label")
                    yield SteadyInput(placeholder="min or HH:MM", id="at", compact=True)
                yield Static("", id="entry-error", classes="field-error")
                yield Static("", id="readings")
            with Vertical(id="floor-right"):
                yield ResultsPanel(id="results")
                with Horizontal(id="floor-lower"):
                    yield GuidancePanel(id="guidance")
                    yield CyclePlots(id="plots")
        yield Static("", id="follow-status")
        yield CautionBar(id="caution")
        yield Footer()

    def on_mount(self) -> None:
        self.load_processes()
        self.restore_draft()
        self.refresh_status()

    def refresh_status(self) -> None:
        ctx = self.app.ctx
        self.query_one(StatusLine).update(
            f"deviation · {self.TITLE_TEXT} · {ctx.actor} ({ctx.role}) · store {ctx.store_name}"
            "   F1 help  F2 floor  F3 holds  F4 audit")

    def on_screen_resume(self) -> None:
        self.refresh_status()

    # -- processes and drafts ----------------------------------------------------------------

    def load_processes(self) -> None:
        ctx = self.app.ctx
        found = filed_processes(ctx.store, ctx.cases_dir)
        self.processes = {p.key: p for p in found}
        sel = self.query_one("#process", Select)
        sel.set_options([(p.id + (f" v{p.version}" if p.version else ""), p.key) for p in found])

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
        self._restoring = True
        try:
            self.entry = entry
            sel = self.query_one("#process", Select)
            sel.value = entry.process_key if entry.process_key else Select.NULL
            for name, _, _ in FORM:
                self.query_one(f"#{name}", Input).value = getattr(entry, name)
        finally:
            self._restoring = False
        if draft and not entry.is_blank():
            self.notify("Unsaved entry restored from the draft kept in the store.", title="Draft restored")
        self.show_product()
        self.show_readings()
        self.evaluate()

    def save_draft(self) -> None:
        """Keep the entry in the store; the (large) retort log only when it changes."""
        ctx = self.app.ctx
        draft = self.entry.to_draft()
        text = draft.pop("retort_log_text", None)
        # A followed log grows: keep it again when its length changes, not only its source.
        log_key = (self.entry.retort_log_source, len(text)) if text is not None else None
        try:
            if text is not None and getattr(self, "_draft_log_key", None) != log_key:
                ctx.store.save_draft(ctx.draft_key + ".log", {"source": self.entry.retort_log_source,
                                                             "text": text})
                self._draft_log_key = log_key
            ctx.store.save_draft(ctx.draft_key, draft)
        except DeviationError as exc:
            self.notify(f"draft not kept: {exc}", severity="error")

    # -- input events ------------------------------------------------------------------------

    def on_input_changed(self, event: Input.Changed) -> None:
        name = event.input.id
        if self._restoring or name not in {f for f, _, _ in FORM}:
            return
        if getattr(self.entry, name) == event.value:
            return  # set from the draft or cleared by the screen itself: nothing new typed
        self.entry = replace(self.entry, **{name: event.value})
        if name == "cycle_start":
            self.entry = replace(self.entry, cycle_start_iso=None)
        self.save_draft()
        self.evaluate()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        # Enter in the reading box: a low reading now (the most frequent entry); in "At": typed.
        if event.input.id == "reading":
            self.action_low_now()
        elif event.input.id == "at":
            self.action_typed()
        else:
            self.focus_next()

    def on_select_changed(self, event: Select.Changed) -> None:
        if self._restoring or event.select.id != "process":
            return
        key = event.value if event.value is not Select.NULL else None
        if key == self.entry.process_key:
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
        changed = {name: self.query_one(f"#{name}", Input).value for name, _, _ in FORM
                   if self.query_one(f"#{name}", Input).value != getattr(self.entry, name)}
        if changed:
            if "cycle_start" in changed:
                changed["cycle_start_iso"] = None
            self.entry = replace(self.entry, **changed)

    def cycle_start(self):
        """The cycle start as a date-time (None when not set); raises on a bad value."""
        self.sync_fields()
        text = self.entry.cycle_start.strip()
        if not text:
            return None
        from datetime import datetime

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

    # -- actions -----------------------------------------------------------------------------

    def _process(self) -> FiledProcess | None:
        return self.processes.get(self.entry.process_key) if self.entry.process_key else None

    def _entry_error(self, text: str | None) -> None:
        self.last_error = text
        box = self.query_one("#entry-error", Static)
        box.update(f"✗ {text}" if text else "")
        box.set_class(bool(text), "-shown")

    def _add(self, reading: Reading) -> None:
        self.entry = with_reading(self.entry, reading)
        self._entry_error(None)
        self.query_one("#reading", Input).value = ""
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

    def action_low_now(self) -> None:
        text = self.query_one("#reading", Input).value
        try:
            value = parse_reading(text)
        except DeviationError as exc:
            self._entry_error(str(exc))
            return
        now = self._now_or_error()
        if now is not None:
            self._add(Reading(round(now, 4), value, "low"))

    def action_back_now(self) -> None:
        proc = self._process()
        if proc is None:
            self._entry_error("choose the filed process first")
            return
        now = self._now_or_error()
        if now is not None:
            self._add(Reading(round(now, 4), float(proc.process["process_temperature_C"]), "back"))

    def action_typed(self) -> None:
        try:
            value = parse_reading(self.query_one("#reading", Input).value)
            start = self.cycle_start()
            at = parse_time(self.query_one("#at", Input).value, start, self.app.ctx.clock())
        except DeviationError as exc:
            self._entry_error(str(exc))
            return
        self.query_one("#at", Input).value = ""
        self._add(Reading(at, value, "typed"))

    def action_drop_last(self) -> None:
        if self.entry.readings:
            self.entry = without_last_reading(self.entry)
            self.save_draft()
            self.show_readings()
            self.evaluate()

    def action_new_entry(self) -> None:
        self.stop_following("new entry")
        self.entry = FloorEntry(process_key=self.entry.process_key)
        self._restoring = True
        try:
            for name, _, _ in FORM:
                self.query_one(f"#{name}", Input).value = ""
        finally:
            self._restoring = False
        self.app.ctx.store.delete_draft(self.app.ctx.draft_key)
        self.app.ctx.store.delete_draft(self.app.ctx.draft_key + ".log")
        self._draft_log_key = None
        self.show_readings()
        self.evaluate()

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

    def start_following(self, start: FollowStart) -> None:
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
        try:
            initial = float(self.entry.initial_temperature)
        except ValueError:
            initial = None  # the watch assumes the filed minimum; the results say the field is missing
        self._follows += 1
        session = FollowSession(self._follows, start.path, rows=start.readings)
        self.follow = session
        self._entry_error(None)
        self.show_follow_status()
        self.refresh_bindings()
        self.notify(f"following {start.path.name}: {start.readings} rows so far; Ctrl+F stops",
                    title="◉ Following")
        self._follow_worker(session, start, process, self.entry.lot.strip(), self.entry.retort.strip(),
                            initial)

    @work(thread=True, group="follow", exit_on_error=False)
    def _follow_worker(self, session: FollowSession, start: FollowStart, process, lot: str, retort_id: str,
                       initial: float | None) -> None:
        worker = get_current_worker()
        run_follow(self.post_message, session, start, process, lot=lot, retort_id=retort_id,
                   initial_temperature_C=initial, poll_s=self.follow_poll_s,
                   cancelled=lambda: worker.is_cancelled)

    def action_stop_follow(self) -> None:
        self.stop_following("stopped by the operator")

    def stop_following(self, why: str) -> None:
        """Stop following (the rows so far stay in the entry)."""
        session = self.follow
        if session is None or not session.active:
            return
        session.active = False
        session.ended = why
        session.stop.set()
        self.show_follow_status()
        self.refresh_bindings()

    def on_follow_event(self, message: FollowEvent) -> None:
        session = self.follow
        if session is None or message.session != session.number:
            return  # from a follow already replaced
        e = message.event
        kind = e.get("type")
        if kind == "error":
            session.active = False
            session.ended = "error"
            session.stop.set()
            self.show_follow_status(error=e.get("message", ""))
            self.refresh_bindings()
            self.notify(e.get("message", ""), title="✗ Following stopped", severity="error", timeout=30)
            return
        if not session.active:
            return  # stopping: the watch's last evaluation adds nothing the operator asked for
        if kind == "flag":
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
            if message.text is not None and message.text != self.entry.retort_log_text:
                self.import_log_text(message.text, str(session.path))
            if kind == "final":
                session.active = False
                reason = e.get("reason")
                session.ended = "cycle done: cooling" if reason == "cooling done" else reason
                self.refresh_bindings()
                self.notify(f"{session.path.name}: {session.ended}; following stopped",
                            title="✓ Cycle done")
        self.show_follow_status()

    def show_follow_status(self, error: str | None = None) -> None:
        box = self.query_one("#follow-status", Static)
        session = self.follow
        if session is None:
            box.set_class(False, "-shown")
            return
        box.update(f"✗ {error}" if error else session.status())
        box.set_class(True, "-shown")
        box.set_class(bool(error), "-error")

    def on_unmount(self) -> None:
        if self.follow is not None:
            self.follow.stop.set()

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
                raise DeviationError("choose the filed process first", source="process")
            built = build_case(proc.process, self.entry, self.now_min())
            loaded = built.loaded
            ev = evaluate_case(loaded).model_dump(mode="json")
            dev = loaded.case.deviation
            rid = ctx.store.create_record(loaded.snapshot(), actor=ctx.actor, role=role, lot=dev.lot,
                                          retort_id=dev.retort_id, process_id=loaded.case.process.id,
                                          process_version=proc.version)
            ctx.store.add_evaluation(rid, ev, actor=ctx.actor, role=role, snapshot_seq=1,
                                     options={"conservative": False, "what_if": True})
        except CaseError as exc:
            self.show_field_errors(exc)
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
        self.query_one("#product", Static).update(
            f"{proc.product} ({'library' if proc.origin == 'process library' else Path(proc.origin).name})"
            if proc else "")

    def show_readings(self) -> None:
        lines = [r.describe() for r in sorted(self.entry.readings, key=lambda r: r.time_min)]
        if self.entry.retort_log_source:
            lines.insert(0, f"log: {Path(self.entry.retort_log_source).name}")
        self.query_one("#readings", Static).update("\n".join(lines) or "no readings yet")

    def show_field_errors(self, exc: CaseError | None) -> dict[str, str]:
        per, rest = field_messages(exc) if exc is not None else ({}, [])
        for name, _, _ in FORM:
            if name == "cycle_start":
                continue
            msg = per.get(name)
            box = self.query_one(f"#{name}-error", Static)
            box.update(f"✗ {msg}" if msg else "")
            box.set_class(bool(msg), "-shown")
            self.query_one(f"#{name}", Input).set_class(bool(msg), "-invalid")
        return per

    def evaluate(self) -> None:
        """Validate the entry and evaluate it (in a worker thread); the panels update when done."""
        self._request += 1
        request = self._request
        proc = self._process()
        box = self.query_one("#cycle_start-error", Static)
        try:
            start = self.cycle_start()
            box.update("")
            box.set_class(False, "-shown")
        except DeviationError as exc:
            start = None
            box.update(f"✗ {exc}")
            box.set_class(True, "-shown")
        now = minutes_since(start, self.app.ctx.clock()) if start is not None else None
        self.query_one("#now-line", Static).update(
            f"now: {now:.1f} min from steam on" if now is not None else "now: set Steam on", layout=False)
        if proc is None:
            self.query_one(ResultsPanel).show_message("Choose the filed process (Tab to the list, Enter).")
            return
        try:
            built = build_case(proc.process, self.entry, now)
        except CaseError as exc:
            per = self.show_field_errors(exc)
            _, rest = field_messages(exc)
            self.query_one(ResultsPanel).show_error(rest or list(per.values()))
            return
        self.show_field_errors(None)
        self._run(request, built, float(proc.process["process_temperature_C"]), time.perf_counter())

    @work(thread=True, exclusive=True, group="evaluate")
    def _run(self, request: int, built, process_temperature_C: float, started: float) -> None:
        from deviation.evaluate import evaluate_case

        try:
            ev = evaluate_case(built.loaded)
            error = None
        except DeviationError as exc:
            ev, error = None, str(exc)
        if get_current_worker().is_cancelled:
            return
        self.app.call_from_thread(self._show, request, built, ev, error, process_temperature_C, started)

    def _show(self, request: int, built, ev, error, process_temperature_C: float, started: float) -> None:
        if request != self._request:
            return  # a newer entry is being evaluated
        results = self.query_one(ResultsPanel)
        if ev is None:
            results.show_error((error or "").splitlines())
            return
        from_log = built.loaded.retort_log_text is not None
        if from_log:
            F_now, at = ev.delivered_F_min, None
        else:
            F_now, at = so_far(ev, built.now_min), built.now_min
        results.show(FloorFigures(ev, F_now, at, from_log, built.low_running))
        self.last_refresh_s = time.perf_counter() - started

        def rest() -> None:
            # A frame after the figures: the numbers paint first, the text and curves follow.
            if request != self._request:
                return
            self.query_one(GuidancePanel).show(ev)
            self.query_one(CyclePlots).show(ev, now_min=None if from_log else built.now_min,
                                            process_temperature_C=process_temperature_C)

        self.set_timer(1 / 30, rest)
