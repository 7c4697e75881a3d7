"""The figures of an evaluation at a glance: F0 so far, projected, extra minutes, risks."""

from __future__ import annotations

from dataclasses import dataclass

from rich.console import Group
from rich.table import Table
from rich.text import Text
from textual.message import Message
from textual.widgets import Static

from deviation.evaluate import Evaluation
from deviation.evaluate.output import FlagOut
from deviation.guidance.wording import DISPOSITION_LOOK, fmt_probability_short


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
    running: bool = False  # the cycle has not ended: every figure is a projection
    process_temperature_C: float | None = None


#: Flags a record that stops while the cycle runs shows only because it stops: the worst case of
#: an unfinished hold, not something known. They are judged when the cycle ends.
JUDGED_AT_THE_END = ("short-hold", "record-ends-before-cooling", "process-temperature-not-reached")


def still_low(ev: Evaluation, process_temperature_C: float | None) -> FlagOut | None:
    """A record that stops below the process temperature after the hold started: the retort is
    low now (a drop, or the hold ending early: the record cannot tell yet)."""
    cs, c = ev.cold_spot, ev.cycle
    if process_temperature_C is None or c.hold_start_min is None or not cs.retort_C:
        return None
    t, T = cs.time_min[-1], cs.retort_C[-1]
    if T >= process_temperature_C:
        return None
    return FlagOut(code="temperature-low", start_min=c.hold_end_min, value=T,
                   message=f"retort reads {T:.1f} °C at {t:.2f} min (the last row), below the process "
                           f"temperature {process_temperature_C:g} °C during the hold: a drop, or the hold "
                           "ending early; still low")


def known_flags(ev: Evaluation, running: bool, process_temperature_C: float | None = None,
                from_log: bool = False) -> list:
    """The flags to show: all of them, or while the cycle runs those already known (and, for a
    retort log, the retort low at the last row, which a record that stops there reads as a short
    hold)."""
    if not running:
        return list(ev.flags)
    flags = [f for f in ev.flags if f.code not in JUDGED_AT_THE_END]
    low = still_low(ev, process_temperature_C) if from_log else None
    if low is not None and not any(f.code == "temperature-low" and f.end_min is not None
                                   and f.end_min >= ev.cold_spot.time_min[-1] - 1e-6 for f in flags):
        flags.append(low)
    return flags


def fmt_F(value: float) -> str:
    """An F value [min]: two decimals; below 0.01 min, "< 0.01"."""
    if value != 0 and abs(value) < 0.01:
        return "< 0.01"
    return f"{value:.2f}"


def running_head(ev: Evaluation, from_log: bool, running: bool,
                 process_temperature_C: float | None = None) -> Text:
    """The first line of the results and the guidance: the disposition, or for a running cycle
    what is known so far (never the worst case of a hold that has not ended)."""
    g = ev.guidance or {}
    if not running:
        return disposition_text(g.get("disposition"))
    head = Text("◔ RUNNING ", style="bold cyan")
    if from_log:
        n = sum(1 for f in known_flags(ev, True, process_temperature_C, from_log=True)
                if f.code not in ("scheduled-F-below-target", "alternate-process-met", "ball-formula-differs"))
        head.append("· guidance when the cycle ends; so far: ", style="cyan")
        head.append(f"⚑ {n} deviation flag{'s' if n != 1 else ''}" if n else "✓ no deviation",
                    style="bold yellow" if n else "green")
        return head
    head.append("· projected: ", style="cyan")
    return head + disposition_text(g.get("disposition"))


def affected_lines(ev, most: int = 4) -> list[Text]:
    """A continuous system's affected entry ranges (clock times where known), worst first.

    ``ev``: an Evaluation, or a stored evaluation (a dict with ``affected_containers``)."""
    found = ev.get("affected_containers") if isinstance(ev, dict) else ev.affected_containers
    ranges = [a for a in (found or []) if a.get("disposition") != "unaffected"]
    if not ranges:
        return []
    ranges.sort(key=lambda a: a["min_F_min"])
    out = [Text(f"affected entries ({sum(a['containers'] for a in ranges):,} containers):", style="bold")]
    for a in ranges[:most]:
        start = (a.get("entry_start") or f"{a['entry_start_min']:.1f} min").replace("T", " ")
        end = (a.get("entry_end") or f"{a['entry_end_min']:.1f} min").replace("T", " ")
        if start[:11] == end[:11] and start[4:5] == "-":  # same day: the end's clock time only
            end = end[11:]
        out.append(Text(f"  {start} – {end}: {a['containers']:,} · F0 ≥ {fmt_F(a['min_F_min'])} min · "
                        f"{a['disposition']}"))
    if len(ranges) > most:
        out.append(Text(f"  … {len(ranges) - most} more range(s): see the record", style="dim"))
    return out


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
        self.figures = None
        self.update(Text(text, style=style))

    def show_error(self, lines: list[str]) -> None:
        self.figures = None
        body = [Text("✗ NOT EVALUATED: the entry is incomplete or refused", style="bold red")]
        body += [Text(f"  {line}") for line in lines[:6]]
        self.update(Group(*body))

    def show_nothing_yet(self, missing: list[str]) -> None:
        """Before the first reading or log: nothing to judge, said so (never "no deviation")."""
        self.figures = None
        body = [Text("◌ NOTHING ENTERED YET", style="bold"),
                Text("No reading and no retort log: nothing can be judged yet, so no deviation is "
                     "ruled out. Enter readings as they happen (Reading °C, Enter), or import "
                     "(Ctrl+O) or follow (Ctrl+F) the recorder's log.")]
        if missing:
            body.append(Text("Still to enter: " + ", ".join(missing), style="yellow"))
        self.update(Group(*body))

    def show(self, figures: FloorFigures) -> None:
        self.figures = figures
        ev = figures.evaluation
        running, from_log = figures.running, figures.from_log
        t = Table.grid(padding=(0, 1))
        t.add_column(justify="left", no_wrap=True)
        t.add_column(justify="right", no_wrap=True)
        t.add_column(justify="left")
        target = ev.target_F_min

        def meets(value: float) -> Text:
            ok = value >= target
            return Text(("✓ meets " if ok else "✗ below ") + f"{target:g}", style="green" if ok else "bold red")

        if from_log and not running:
            t.add_row("F0 delivered", f"{fmt_F(ev.delivered_F_min)} min", meets(ev.delivered_F_min))
        else:
            if figures.so_far_F_min is None:
                t.add_row("F0 so far", "—", "set Steam on")
            else:
                at = figures.so_far_at_min
                where = (f"at {at:.1f} min" if at is not None and not from_log
                         else f"to {ev.cold_spot.time_min[-1]:.1f} min (last row)")
                t.add_row("F0 so far", f"{fmt_F(figures.so_far_F_min)} min", where)
            proj = ev.projected_F_min if ev.projected_F_min is not None else ev.delivered_F_min
            if from_log and running and not ev.cycle.running:
                # The record stops below process temperature: the engine reads it as the end of the
                # hold, so its projection is the worst case; none is given until the retort is back.
                t.add_row("F0 projected", "—", "when back at process temp.")
            else:
                t.add_row("F0 projected" if running else "F0 delivered", f"{fmt_F(proj)} min", meets(proj))
        ext = ev.extension_to_target_min
        if from_log and running and not ev.cycle.running:
            t.add_row("extra hold", "—", "when back at process temp.")
        elif ext is None:
            t.add_row("extra hold", "n/a", (ev.extension_reason or "")[:40])
        elif ext == 0.0:
            t.add_row("extra hold", "0.0 min", "none needed")
        else:
            t.add_row("extra hold", f"+{ext:.1f} min", Text("at process temp.", style="bold"))
        if from_log and running:
            t.add_row("spoilage/can", "—", "judged when the cycle ends")
        else:
            lp, lt = ev.log10_spoilage_probability, ev.log10_target_spoilage_probability
            p_ok = (lp <= lt + 1e-9 if lp is not None and lt is not None
                    else ev.spoilage_probability <= ev.target_spoilage_probability * (1 + 1e-9))
            t.add_row("spoilage/can", fmt_probability_short(ev.spoilage_probability, ev.log10_spoilage_probability),
                      Text(("✓ ≤ " if p_ok else "✗ > ")
                           + fmt_probability_short(ev.target_spoilage_probability, ev.log10_target_spoilage_probability),
                           style="green" if p_ok else "bold red"))
            bot_ok = ev.botulinum_log_reductions >= ev.botulinum_log_reductions_required
            t.add_row("botulinum", f"{ev.botulinum_log_reductions:.1f} log",
                      Text(("✓ meets " if bot_ok else "✗ below ") + f"{ev.botulinum_log_reductions_required:g}D",
                           style="green" if bot_ok else "bold red"))
        if from_log:
            basis = "retort log so far; projected: rest as filed" if running else "retort log"
        else:
            # Without a log the evaluation covers the whole filed cycle with the entries.
            basis = "filed cycle + entries" + ("; rest as filed" if running else "")
        if figures.low_running:
            basis += "; ▼ still low (counted until now)"
        parts = [running_head(ev, from_log, running, figures.process_temperature_C), t]
        parts += affected_lines(ev)
        parts.append(Text(basis, style="dim"))
        self.update(Group(*parts))
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
