"""The figures of an evaluation at a glance: F0 so far, projected, extra minutes, risks."""

from __future__ import annotations

from dataclasses import dataclass

from rich.console import Group
from rich.table import Table
from rich.text import Text
from textual.message import Message
from textual.widgets import Static

from deviation.evaluate import Evaluation
from deviation.guidance.wording import DISPOSITION_LOOK


def disposition_look(disposition: str | None) -> tuple[str, str, str]:
    """Word, symbol and style of a disposition (colour never the only signal)."""
    if not disposition:
        return ("NOT EVALUATED", "·", "dim")
    return DISPOSITION_LOOK.get(disposition, (disposition.upper(), "?", "bold"))


def disposition_text(disposition: str | None) -> Text:
    word, symbol, style = disposition_look(disposition)
    return Text(f"{symbol} {word}", style=style)


@dataclass(frozen=True)
class FloorFigures:
    """What the results panel shows for one evaluation of the floor entry."""

    evaluation: Evaluation
    so_far_F_min: float | None  # delivered up to now [min]
    so_far_at_min: float | None  # "now" [min from steam on]; None: the whole record
    from_log: bool  # the retort record is an imported log (else the filed cycle + entries)
    low_running: bool  # a temperature-low interval is still open


def fmt_F(value: float) -> str:
    """An F value [min]: two decimals, or three significant digits below 0.1 min."""
    return f"{value:.2f}" if abs(value) >= 0.1 or value == 0 else f"{value:.2g}"


class ResultsPanel(Static):
    """Figures of the latest evaluation; ``generation`` counts the refreshes (for tests)."""

    class Refreshed(Message):
        """Posted after the panel shows a new evaluation."""

        def __init__(self, generation: int) -> None:
            self.generation = generation
            super().__init__()

    DEFAULT_CSS = """
    ResultsPanel { height: auto; padding: 0 1; }
    """

    def __init__(self, **kw) -> None:
        super().__init__("", **kw)
        self.generation = 0
        self.figures: FloorFigures | None = None
        self.border_title = "Results"
        self.show_message("Choose a filed process and enter the lot to see results.")

    def show_message(self, text: str, style: str = "dim") -> None:
        self.update(Text(text, style=style))

    def show_error(self, lines: list[str]) -> None:
        body = [Text("✗ NOT EVALUATED: the entry is incomplete or out of range", style="bold red")]
        body += [Text(f"  {line}") for line in lines[:6]]
        self.update(Group(*body))

    def show(self, figures: FloorFigures) -> None:
        self.figures = figures
        ev = figures.evaluation
        g = ev.guidance or {}
        t = Table.grid(padding=(0, 1))
        t.add_column(justify="left", no_wrap=True)
        t.add_column(justify="right", no_wrap=True)
        t.add_column(justify="left")
        target = ev.target_F_min
        if figures.so_far_F_min is not None:
            at = f"to min {figures.so_far_at_min:.1f}" if figures.so_far_at_min is not None else "whole log"
            t.add_row("F0 so far", f"{fmt_F(figures.so_far_F_min)} min", at)
        else:
            t.add_row("F0 so far", "—", "set Steam on")
        proj = ev.projected_F_min if ev.projected_F_min is not None else ev.delivered_F_min
        ok = proj >= target
        t.add_row("F0 projected", f"{fmt_F(proj)} min",
                  Text(("✓ meets " if ok else "✗ below ") + f"{target:g}", style="green" if ok else "bold red"))
        ext = ev.extension_to_target_min
        if ext is None:
            t.add_row("extra hold", "n/a", (ev.extension_reason or "")[:40])
        elif ext == 0.0:
            t.add_row("extra hold", "0.0 min", "none needed")
        else:
            t.add_row("extra hold", Text(f"+{ext:.1f} min", style="bold"), "at process temp.")
        p_ok = ev.spoilage_probability <= ev.target_spoilage_probability * (1 + 1e-9)
        t.add_row("spoilage/can", f"{ev.spoilage_probability:.1e}",
                  Text(("✓ ≤ " if p_ok else "✗ > ") + f"{ev.target_spoilage_probability:.0e}",
                       style="green" if p_ok else "bold red"))
        bot_ok = ev.botulinum_log_reductions >= ev.botulinum_log_reductions_required
        t.add_row("botulinum", f"{ev.botulinum_log_reductions:.1f} log",
                  Text(("✓ meets " if bot_ok else "✗ below ") + f"{ev.botulinum_log_reductions_required:g}D",
                       style="green" if bot_ok else "bold red"))
        # Without a log the evaluation covers the whole filed cycle with the entries, so the
        # spoilage and botulinum rows are for the projected F0: say so.
        basis = ("imported retort log" if figures.from_log
                 else "filed cycle + entries; spoilage, botulinum: whole cycle")
        if figures.low_running:
            basis += "; ▼ still low (counted until now)"
        head = disposition_text(g.get("disposition"))
        self.update(Group(head, t, Text(basis, style="dim")))
        self.generation += 1
        self.post_message(self.Refreshed(self.generation))

    def update(self, content="", **kw) -> None:  # noqa: D401 - keeps what is shown, for plain_text
        self._shown = content
        super().update(content, **kw)

    def plain_text(self, width: int = 80) -> str:
        """What the panel shows, as plain text (tests and the benchmark read it)."""
        return plain(getattr(self, "_shown", ""), width)


def plain(renderable, width: int = 80) -> str:
    """A Rich renderable as plain text."""
    from rich.console import Console

    console = Console(width=width, record=True, color_system=None, file=_Null())
    console.print(renderable)
    return console.export_text()


class _Null:
    def write(self, _text: str) -> int:
        return 0

    def flush(self) -> None:
        pass
