"""Curves of the cycle: retort and predicted cold spot against time, and F0 against the target.

Drawn with plotext in the terminal. The legend is a line of its own above each plot (never over
the curves); each series has its own marker as well as its own colour, so the plot reads the
same without colour. The retort is drawn last, over the process-temperature line, and every
interval below the process temperature is shaded (░), so a short dip shows even where it spans
a column or two. On a small panel (80×24) one close-up of the hold is drawn instead of two full
plots: the process temperature and a few degrees below it, from the start to the end of the hold.
"""

from __future__ import annotations

import numpy as np
from rich.text import Text
from textual.containers import Vertical
from textual.widgets import Static
from textual_plotext import PlotextPlot

from deviation.evaluate import Evaluation

# At most this many points per series: a terminal column holds two braille dots; more points
# only cost time (a 2-hour, 1-second record has 7,200).
_MAX_POINTS = 240
#: Below this many rows (or columns) the panel shows the compact close-up of the hold.
COMPACT_ROWS = 18
COMPACT_COLUMNS = 56
#: The close-up shows at least this far below the process temperature [°C].
CLOSE_UP_BELOW_C = 6.0

# (symbol in the legend, plotext marker, colour) of each series.
RETORT = ("⠒", "braille", "orange")
COLD_SPOT = ("•", "•", "cyan")
PROCESS = ("─", "─", "green")
LOW = ("░", "░", "red")
NOW = ("│", None, "white")
F0 = ("•", "•", "cyan")
F0_PROJECTED = ("·", "·", "cyan")
TARGET = ("─", "─", "red")

_RICH = {"orange": "dark_orange", "cyan": "cyan", "green": "green", "red": "red", "white": "white"}


def _thin(*series: list[float]) -> list[np.ndarray]:
    n = len(series[0])
    step = max(1, int(np.ceil(n / _MAX_POINTS)))
    return [np.asarray(s, float)[::step] for s in series]


def legend(*items: tuple[tuple, str]) -> Text:
    """A legend line: each symbol in its colour, then its word."""
    out = Text()
    for (symbol, _, colour), word in items:
        if out:
            out.append("  ")
        out.append(symbol, style=f"bold {_RICH[colour]}")
        out.append(f" {word}")
    return out


def close_up_range(ev: Evaluation, process_temperature_C: float) -> tuple[tuple[float, float], tuple[float, float]]:
    """((x from, x to), (y from, y to)) of the compact close-up of the hold [min], [°C]."""
    t = np.asarray(ev.cold_spot.time_min, float)
    retort = np.asarray(ev.cold_spot.retort_C, float)
    c = ev.cycle
    start = c.hold_start_min if c.hold_start_min is not None else float(t[0])
    end = c.hold_end_min if c.hold_end_min is not None else float(t[-1])
    span = max(end - start, 1.0)
    x = (max(float(t[0]), start - 0.08 * span), min(float(t[-1]), end + 0.08 * span))
    in_hold = retort[(t >= start) & (t <= end)]
    candidates = [process_temperature_C - CLOSE_UP_BELOW_C] + [iv.lowest_C for iv in c.low_intervals]
    if in_hold.size:
        candidates.append(float(in_hold.min()))
    lowest = min(candidates)
    return x, (float(np.floor(lowest - 1.0)), float(np.ceil(process_temperature_C + 2.0)))


class CyclePlots(Vertical):
    """The legend and plots, updated with each evaluation."""

    DEFAULT_CSS = """
    CyclePlots { height: 1fr; }
    CyclePlots > PlotextPlot { height: 1fr; min-height: 6; }
    CyclePlots > .legend { height: auto; max-height: 2; padding: 0 1; }
    CyclePlots.-compact #lethality-plot, CyclePlots.-compact #F-legend { display: none; }
    """

    def compose(self):
        yield Static("", id="plot-legend", classes="legend")
        yield PlotextPlot(id="temperature-plot")
        yield Static("", id="F-legend", classes="legend")
        yield PlotextPlot(id="lethality-plot")

    def on_mount(self) -> None:
        self.border_title = "Curves"
        self._last: tuple | None = None
        self.show(None)

    @property
    def compact(self) -> bool:
        return self.size.height < COMPACT_ROWS or self.size.width < COMPACT_COLUMNS

    def on_resize(self) -> None:
        if self._last is not None:
            self.show(*self._last[0], **self._last[1])

    def show(self, ev: Evaluation | None, *, now_min: float | None = None,
             process_temperature_C: float | None = None, running: bool = False) -> None:
        self._last = ((ev,), {"now_min": now_min, "process_temperature_C": process_temperature_C,
                              "running": running})
        compact = self.compact
        self.set_class(compact, "-compact")
        tp = self.query_one("#temperature-plot", PlotextPlot)
        fp = self.query_one("#lethality-plot", PlotextPlot)
        for p in (tp, fp):
            p.plt.clear_data()
            p.plt.clear_figure()
        if ev is None:
            self.border_title = "Curves"
            self.query_one("#plot-legend", Static).display = True
            self.query_one("#plot-legend", Static).update(Text("no curves yet", style="dim"))
            self.query_one("#F-legend", Static).update("")
            tp.refresh()
            fp.refresh()
            return
        cs = ev.cold_spot
        t, retort, cold, F = _thin(cs.time_min, cs.retort_C, cs.temperature_C, cs.cumulative_F_min)
        tl, tr = float(t[0]), float(t[-1])
        pt = process_temperature_C
        tt = tp.plt
        items = [(RETORT, "retort")]
        if not compact:
            items.append((COLD_SPOT, "cold spot"))
        if pt is not None:
            items.append((PROCESS, f"{pt:g}" if compact else f"process {pt:g}"))
        if ev.cycle.low_intervals:
            items.append((LOW, "low"))
        if now_min is not None and tl <= now_min <= tr:
            items.append((NOW, "now"))
        head = legend(*items)
        if compact:
            # Small panel: the legend goes in the border, above the plot, so the plot keeps its rows.
            self.border_title = "Hold: " + head.markup
            self.query_one("#plot-legend", Static).display = False
        else:
            self.border_title = "Curves"
            self.query_one("#plot-legend", Static).display = True
            self.query_one("#plot-legend", Static).update(head)
        # Shading first, then the process line, then the curves: later series draw over earlier.
        for iv in ev.cycle.low_intervals:
            xs = np.linspace(iv.start_min, iv.end_min, 24).tolist()
            tt.plot(xs, [pt if pt is not None else iv.lowest_C] * len(xs), marker=LOW[1], color=LOW[2],
                    fillx=True)
        if pt is not None:
            tt.plot([tl, tr], [pt] * 2, marker=PROCESS[1], color=PROCESS[2])
        if not compact:
            tt.plot(t.tolist(), cold.tolist(), marker=COLD_SPOT[1], color=COLD_SPOT[2])
        tt.plot(t.tolist(), retort.tolist(), marker=RETORT[1], color=RETORT[2])
        if compact and pt is not None:
            (x0, x1), (y0, y1) = close_up_range(ev, pt)
            tt.xlim(x0, x1)
            tt.ylim(y0, y1)
            tt.yticks([y0, pt, y1], [f"{y0:g}", f"{pt:g}", f"{y1:g}"])
        if now_min is not None and tl <= now_min <= tr:
            tt.vline(now_min, color=NOW[2])
        if not compact:
            tt.xlabel("min from steam on")
        # F0 against the target; past "now" the curve is the projection (rest as filed).
        ff = fp.plt
        f_items = [(F0, "F0 so far" if running else "F0")]
        ff.plot([tl, tr], [ev.target_F_min] * 2, marker=TARGET[1], color=TARGET[2])
        if running and now_min is not None and tl <= now_min < tr:
            before = t <= now_min
            ff.plot(t[~before].tolist(), F[~before].tolist(), marker=F0_PROJECTED[1], color=F0_PROJECTED[2])
            ff.plot(t[before].tolist(), F[before].tolist(), marker=F0[1], color=F0[2])
            f_items.append((F0_PROJECTED, "projected"))
        else:
            ff.plot(t.tolist(), F.tolist(), marker=F0[1], color=F0[2])
        f_items.append((TARGET, f"target {ev.target_F_min:g} min"))
        if now_min is not None and tl <= now_min <= tr:
            ff.vline(now_min, color=NOW[2])
        ff.xlabel("min from steam on")
        self.query_one("#F-legend", Static).update(legend(*f_items))
        tp.refresh()
        fp.refresh()
