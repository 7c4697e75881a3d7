"""Flags, guidance (disposition, reasons, actions) and the process-authority caution."""

from __future__ import annotations

import re

from rich.console import Group
from rich.text import Text
from textual.containers import VerticalScroll
from textual.widgets import Static

from deviation.evaluate import CAUTION, Evaluation
from deviation.tui.widgets.results import fmt_F, known_flags, plain, running_head

# Shown under every result, whatever the guidance says (domain primer, "Cautions the tool shows").
CAUTION_EXTRA = ("Incubation cannot by itself show safety. If any container was distributed, tell the "
                 "regulator.")


def flags_renderable(ev: Evaluation, running: bool = False, process_temperature_C: float | None = None,
                     from_log: bool = False) -> Text:
    """One line per flag (symbol, code, message); while the cycle runs, those known so far."""
    flags = known_flags(ev, running, process_temperature_C, from_log)
    if not flags:
        return Text("✓ no deviation so far" if running else "✓ no deviation found in the record",
                    style="green")
    out = Text("So far:\n", style="bold") if running else Text()
    for i, f in enumerate(flags):
        if i:
            out.append("\n")
        out.append(f"⚑ {f.code}", style="bold yellow")
        out.append(f": {f.message}")
    return out


class FlagsList(Static):
    """What the record shows (one line per flag: symbol, code, message)."""

    def show(self, ev: Evaluation | None, running: bool = False, process_temperature_C: float | None = None,
             from_log: bool = False) -> None:
        self._shown = (flags_renderable(ev, running, process_temperature_C, from_log)
                       if ev is not None else Text(""))
        self.update(self._shown)


_DELIVERED = re.compile(r"\b([Dd])elivered\b")


def _projected(text: str) -> str:
    """Rule text about a running cycle: its F is projected, not delivered."""
    return _DELIVERED.sub(lambda m: "Projected" if m.group(1) == "D" else "projected", text)


def guidance_renderable(ev: Evaluation, running: bool = False, from_log: bool = False,
                        process_temperature_C: float | None = None) -> Group:
    """The guidance with its reasons and actions; for a running cycle, what is known so far.

    A running cycle read from a log is not given the rules' guidance (it would judge the hold
    that has not ended by its worst case); the projection and the extra hold are shown instead.
    A running floor entry is judged on the filed cycle with the entries, so its guidance is a
    projection and says so.
    """
    g = ev.guidance or {}
    say = _projected if running else str
    body = [running_head(ev, from_log, running, process_temperature_C)]
    if running and from_log:
        proj = ev.projected_F_min
        if not ev.cycle.running:
            body.append(Text("The retort is below process temperature at the last row: the F0 if the "
                             "rest runs as filed is given when it is back.", style="yellow"))
        elif proj is not None:
            ok = proj >= ev.target_F_min
            body.append(Text(f"If the rest runs as filed: F0 {fmt_F(proj)} min, "
                             + ("meets" if ok else "below") + f" the target {ev.target_F_min:g} min.",
                             style="green" if ok else "bold red"))
        ext = ev.extension_to_target_min
        if ext and ev.cycle.running:
            body.append(Text(f"Extra hold to reach the target: +{ext:.1f} min at process temperature.",
                             style="bold"))
        body.append(Text("The guidance (hold, reprocess, evaluate) is given when the cycle ends; a "
                         "deviation flagged so far already means the lot is held for the process "
                         "authority.", style="dim"))
    else:
        if g.get("summary"):
            body.append(Text(say(g["summary"])))
        reasons = g.get("reasons") or []
        if reasons:
            body.append(Text("Why:", style="bold"))
            for r in reasons:
                body.append(Text(f" • {say(r['text'])}"))
                body.append(Text(f"   basis: {r['basis']}", style="dim"))
        if g.get("actions"):
            body.append(Text("What to do now:", style="bold"))
            for i, a in enumerate(g["actions"], 1):
                body.append(Text(f" {i}. {say(a)}"))
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

    def show(self, ev: Evaluation | None, *, running: bool = False, from_log: bool = False,
             process_temperature_C: float | None = None) -> None:
        self.query_one(FlagsList).show(ev, running, process_temperature_C, from_log)
        self._guidance = (guidance_renderable(ev, running, from_log, process_temperature_C)
                          if ev is not None else Text(""))
        self.query_one("#guidance-text", Static).update(self._guidance)
        self.scroll_home(animate=False)

    def show_text(self, text: Text) -> None:
        """No evaluation to show (nothing entered yet, or the entry refused): say why; the caution stays."""
        flags = self.query_one(FlagsList)
        flags._shown = text
        flags.update(text)
        self._guidance = Text(f"⚠ {CAUTION} {CAUTION_EXTRA}", style="bold")
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
