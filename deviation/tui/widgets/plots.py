"""Curves of the cycle: retort and predicted cold spot against time, and F0 against the target.

Drawn with plotext in the terminal. Each series has its own marker as well as its own colour
(the legend names the marker), so the plot reads the same without colour.
"""

from __future__ import annotations

import numpy as np
from textual.containers import Vertical
from textual_plotext import PlotextPlot

from deviation.evaluate import Evaluation

# At most this many points per series: a terminal column holds two braille dots; more points
# only cost time (a 2-hour, 1-second record has 7,200).
_MAX_POINTS = 240


def _thin(*series: list[float]) -> list[np.ndarray]:
    n = len(series[0])
    step = max(1, int(np.ceil(n / _MAX_POINTS)))
    return [np.asarray(s, float)[::step] for s in series]


class CyclePlots(Vertical):
    """Two plots, updated with each evaluation."""

    DEFAULT_CSS = """
    CyclePlots { height: 1fr; }
    CyclePlots > PlotextPlot { height: 1fr; min-height: 6; }
    """

    def compose(self):
        yield PlotextPlot(id="temperature-plot")
        yield PlotextPlot(id="lethality-plot")

    def on_mount(self) -> None:
        self.border_title = "Curves"
        self.show(None)

    def show(self, ev: Evaluation | None, *, now_min: float | None = None,
             process_temperature_C: float | None = None) -> None:
        tp = self.query_one("#temperature-plot", PlotextPlot)
        fp = self.query_one("#lethality-plot", PlotextPlot)
        for p in (tp, fp):
            p.plt.clear_data()
            p.plt.clear_figure()
        tp.plt.title("Temperature °C: retort (·), cold spot (•), process (─)")
        fp.plt.title("F0 min: delivered (•), target (─)")
        if ev is None:
            tp.refresh()
            fp.refresh()
            return
        cs = ev.cold_spot
        t, retort, cold, F = _thin(cs.time_min, cs.retort_C, cs.temperature_C, cs.cumulative_F_min)
        tl, tr = float(t[0]), float(t[-1])
        tt = tp.plt
        tt.plot(t.tolist(), retort.tolist(), marker="·", color="orange", label="retort")
        tt.plot(t.tolist(), cold.tolist(), marker="•", color="cyan", label="cold spot")
        if process_temperature_C is not None:
            tt.plot([tl, tr], [process_temperature_C] * 2, marker="─", color="green", label="process")
        ff = fp.plt
        ff.plot(t.tolist(), F.tolist(), marker="•", color="cyan", label="F0")
        ff.plot([tl, tr], [ev.target_F_min] * 2, marker="─", color="red", label="target")
        if now_min is not None and tl <= now_min <= tr:
            tt.vline(now_min, color="white")
            ff.vline(now_min, color="white")
        for p in (tt, ff):
            p.xlabel("min from steam on")
        tp.refresh()
        fp.refresh()
