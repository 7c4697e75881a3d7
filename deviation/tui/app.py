"""The terminal UI application: screens, keys, and a factory for tests (:func:`build_app`)."""

from __future__ import annotations

from datetime import datetime
from pathlib import Path
from typing import Callable

from textual.app import App

from deviation.tui.context import TuiContext
from deviation.tui.keys import APP_KEYS, bindings
from deviation.tui.screens.audit import AuditScreen
from deviation.tui.screens.dialogs import Identity, IdentityDialog
from deviation.tui.screens.floor import FloorScreen
from deviation.tui.screens.help import HelpScreen
from deviation.tui.screens.holds import HoldsScreen


class DeviationApp(App):
    """Floor entry, holds board and audit over one record store."""

    CSS_PATH = "app.tcss"
    TITLE = "deviation"
    ENABLE_COMMAND_PALETTE = False
    HORIZONTAL_BREAKPOINTS = [(0, "-narrow"), (120, "-wide")]
    MODES = {"floor": FloorScreen, "holds": HoldsScreen, "audit": AuditScreen}
    DEFAULT_MODE = "floor"
    # From the one key map. Tab and Shift+Tab are priority bindings: focus moves the moment the
    # key is read, so keys typed in one burst (a barcode scanner) land field by field.
    BINDINGS = bindings(APP_KEYS)

    def __init__(self, ctx: TuiContext) -> None:
        super().__init__()
        self.ctx = ctx

    def action_help(self) -> None:
        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen())

    def action_identity(self) -> None:
        def done(who: Identity | None) -> None:
            if who is not None:
                self.set_identity(who.actor, who.role)

        self.push_screen(IdentityDialog(values={"actor": self.ctx.actor, "role": self.ctx.role}), done)

    def set_identity(self, actor: str, role: str) -> None:
        """Change who is at the terminal (the floor draft follows the person)."""
        self.ctx.actor, self.ctx.role = actor, role
        for mode in ("floor", "holds", "audit"):
            screen = self._screen_for(mode)
            if screen is None:
                continue
            for name in ("refresh_status", "reload"):
                if hasattr(screen, name) and mode != "floor":
                    getattr(screen, name)()
            if mode == "floor":
                screen.refresh_status()
                screen.restore_draft()
        self.notify(f"{actor} ({role}) at the terminal")

    def _screen_for(self, mode: str):
        stack = self._screen_stacks.get(mode) if hasattr(self, "_screen_stacks") else None
        return stack[0] if stack else None

    def open_audit(self, record_id: str) -> None:
        """Show the audit screen with ``record_id`` replayed."""
        self.switch_mode("audit")
        screen = self._screen_for("audit")
        if screen is not None:
            self.call_after_refresh(lambda: (screen.reload(), screen.select(record_id), screen.replay(record_id)))

    def on_unmount(self) -> None:
        close = getattr(self.ctx.store, "close", None)
        if close is not None:
            close()


def build_app(db=None, demo: bool = False, actor: str | None = None, role: str | None = None,
              cases_dir: str | Path | None = None, *,
              clock: Callable[[], datetime] | None = None) -> DeviationApp:
    """Build the app over a store (tests call this; ``deviation tui`` too).

    Parameters
    ----------
    db : str or path, optional
        The record store (SQLite file or URL); ``None``: ``DEVIATION_DB`` or the default store,
        or a fresh demo store with ``demo``.
    demo : bool
        Seed the store from ``demo_cases/`` when it holds no records.
    actor, role : str, optional
        Who is at the terminal (default: the OS user; ``DEVIATION_ROLE``, else operator).
    cases_dir : path, optional
        A folder of filed processes and case files (default: the repository's demo cases).
    clock : callable, optional
        "Now" as a ``datetime`` (tests inject a fixed clock).
    """
    from deviation.records.store import open_store
    from deviation.tui.sources import REPO_DEMO_CASES, demo_db_path, seed_demo

    if demo and db is None:
        db = demo_db_path()
    store = open_store(db)
    cases = Path(cases_dir) if cases_dir else REPO_DEMO_CASES
    if demo:
        seed_demo(store, cases)
    ctx = TuiContext(store=store, cases_dir=cases, demo=demo)
    if actor:
        ctx.actor = actor
    if role:
        from deviation.records.roles import normalize_role

        ctx.role = normalize_role(role, actor=ctx.actor)
    if clock is not None:
        ctx.clock = clock
    return DeviationApp(ctx)
