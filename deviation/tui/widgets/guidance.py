"""Flags, guidance (disposition, reasons, actions) and the process-authority caution."""

from __future__ import annotations

from rich.console import Group
from rich.text import Text
from textual.containers import VerticalScroll
from textual.widgets import Static

from deviation.evaluate import CAUTION, Evaluation
from deviation.tui.widgets.results import disposition_text, plain

# Shown under every result, whatever the guidance says (domain primer, "Cautions the tool shows").
CAUTION_EXTRA = ("Incubation cannot by itself show safety. If any container was distributed, tell the "
                 "regulator.")


def flags_renderable(ev: Evaluation) -> Text:
    if not ev.flags:
        return Text("✓ no deviation found in the record", style="green")
    out = Text()
    for i, f in enumerate(ev.flags):
        if i:
            out.append("\n")
        out.append(f"⚑ {f.code}", style="bold yellow")
        out.append(f": {f.message}")
    return out


class FlagsList(Static):
    """What the record shows (one line per flag: symbol, code, message)."""

    def show(self, ev: Evaluation | None) -> None:
        self._shown = flags_renderable(ev) if ev is not None else Text("")
        self.update(self._shown)


def guidance_renderable(ev: Evaluation) -> Group:
    g = ev.guidance or {}
    body = [disposition_text(g.get("disposition"))]
    if g.get("summary"):
        body.append(Text(g["summary"]))
    reasons = g.get("reasons") or []
    if reasons:
        body.append(Text("Why:", style="bold"))
        for r in reasons:
            body.append(Text(f" • {r['text']}"))
            body.append(Text(f"   basis: {r['basis']}", style="dim"))
    if g.get("actions"):
        body.append(Text("What to do now:", style="bold"))
        for i, a in enumerate(g["actions"], 1):
            body.append(Text(f" {i}. {a}"))
    body.append(Text(f"⚠ {g.get('caution') or CAUTION + ' ' + CAUTION_EXTRA}", style="bold"))
    return Group(*body)


class GuidancePanel(VerticalScroll):
    """Flags, then the guidance with its reasons and actions (scrolls when long)."""

    DEFAULT_CSS = """
    GuidancePanel { height: 1fr; padding: 0 1; }
    GuidancePanel > Static { height: auto; }
    """

    def compose(self):
        yield FlagsList(id="flags")
        yield Static("", id="guidance-text")

    def on_mount(self) -> None:
        self.border_title = "Flags and guidance"

    def show(self, ev: Evaluation | None) -> None:
        self.query_one(FlagsList).show(ev)
        self._guidance = guidance_renderable(ev) if ev is not None else Text("")
        self.query_one("#guidance-text", Static).update(self._guidance)

    def plain_text(self, width: int = 80) -> str:
        flags = getattr(self.query_one(FlagsList), "_shown", "")
        return plain(flags, width) + plain(getattr(self, "_guidance", ""), width)


class CautionBar(Static):
    """The process-authority caution: always on screen, never scrolled away."""

    DEFAULT_CSS = """
    CautionBar { height: auto; padding: 0 1; }
    """

    def __init__(self, **kw) -> None:
        super().__init__(Text(f"⚠ {CAUTION}"), **kw)
