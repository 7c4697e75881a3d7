"""One key map: the bindings, the footer, the help screen and the README all come from
deviation.tui.keys (or are checked against it), and the floor and help screens fit 80x24."""

import asyncio
import functools
import re
from pathlib import Path

from deviation.tui import keys
from deviation.tui.app import DeviationApp, build_app
from deviation.tui.screens.audit import AuditScreen
from deviation.tui.screens.floor import FloorScreen
from deviation.tui.screens.help import HELP
from deviation.tui.screens.holds import HoldsScreen
from deviation.tui.screens.record import RecordScreen

REPO = Path(__file__).resolve().parents[2]


def sync(fn):
    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        return asyncio.run(fn(*args, **kwargs))

    return wrapper


def pairs(bindings) -> set[tuple[str, str]]:
    return {(b.key, b.action) for b in bindings}


def test_readme_key_table_is_the_key_map():
    # Defect: help, timeline, README and footer disagreed (Enter vs ^l, Ctrl+R and Ctrl+N undocumented).
    readme = (REPO / "README.md").read_text()
    assert keys.keys_markdown() in readme
    for k in keys.FLOOR_KEYS + keys.APP_KEYS:
        assert f"`{k.label}`" in readme


def test_bindings_footer_and_help_come_from_the_key_map():
    assert pairs(FloorScreen.BINDINGS) == pairs(keys.bindings(keys.FLOOR_KEYS))
    assert pairs(DeviationApp.BINDINGS) == pairs(keys.bindings(keys.APP_KEYS))
    from deviation.tui.screens.holds import STATE_LOOK

    assert HELP == keys.help_text(STATE_LOOK)
    for k in keys.FLOOR_KEYS + keys.APP_KEYS:
        assert k.label in HELP


def test_other_screens_bindings_agree_with_the_key_map():
    for screen, name in ((HoldsScreen, "holds"), (RecordScreen, "record"), (AuditScreen, "audit")):
        assert pairs(screen.BINDINGS) == pairs(keys.SCREEN_KEYS[name]), name


def test_help_names_the_symbols_the_screens_draw():
    from deviation.guidance.wording import DISPOSITION_LOOK
    from deviation.tui.screens.holds import STATE_LOOK
    from deviation.tui.widgets.timeline import KIND_LOOK

    for symbol, _ in KIND_LOOK.values():
        assert symbol in HELP
    for text, _ in STATE_LOOK.values():
        assert text in HELP
    for word, symbol, _ in DISPOSITION_LOOK.values():
        assert f"{symbol}" in HELP and word.lower() in HELP
    assert all(len(line) <= keys.HELP_WIDTH for line in HELP.splitlines())


def screen_text(app) -> str:
    """The terminal as text (from the app's own screenshot)."""
    import html

    svg = app.export_screenshot()
    rows = re.findall(r'<text class="[^"]*" x="[^"]*" y="([^"]*)"[^>]*>([^<]*)</text>', svg)
    lines: dict[float, str] = {}
    for y, text in rows:
        lines[float(y)] = lines.get(float(y), "") + html.unescape(text).replace("\xa0", " ")
    return "\n".join(lines[y] for y in sorted(lines))


@sync
async def test_floor_and_help_fit_80x24(tmp_path, monkeypatch):
    # Defect: at 80x24 F3/F4 and ^q Quit were cut from the footer; the help was clipped.
    monkeypatch.delenv("DEVIATION_DB", raising=False)
    app = build_app(db=tmp_path / "k.db", actor="olga", role="operator")
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        text = screen_text(app)
        footer = text.splitlines()[-1]
        for word in ("Low", "Save", "Help", "Holds", "Audit", "Quit"):
            assert word in footer, footer
        assert "^q" in footer and "f3" in footer.lower() and "f4" in footer.lower()
        assert "local" in text and "UTC" in text
        await pilot.press("f1")
        await pilot.pause()
        shown = screen_text(app)
        assert "Every screen" in shown and "Esc or F1 closes" in shown
