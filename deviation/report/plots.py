"""The report's plots (matplotlib, SVG): retort and cold-spot temperature with the process
temperature and the deviation intervals shaded; lethal rate and cumulative F against the target.
Deterministic: SVG ids are salted with a fixed string and metadata is dropped."""

from __future__ import annotations

import io
import math
import re

from deviation.errors import DeviationError

# Plot at most this many points per curve (every n-th sample): the SVG stays small and the
# PDF fast; the figures in the report come from the full series, never from the plot.
_PLOT_POINTS = 2500


_SVG_SALT = "deviation-report"


def _clean_svg(text: str) -> str:
    """Inline-ready SVG: no XML declaration, DOCTYPE or metadata block (nothing version-dependent)."""
    start = text.find("<svg")
    text = text[start:]
    text = re.sub(r"<metadata>.*?</metadata>\s*", "", text, flags=re.S)
    # Sized by the page: the viewBox keeps the aspect ratio.
    text = re.sub(r'<svg([^>]*?) width="[^"]*" height="[^"]*"', r'<svg\1 class="plot"', text, count=1)
    return text.strip() + "\n"


def _thin(n: int) -> slice:
    return slice(None, None, max(1, math.ceil(n / _PLOT_POINTS)))


def plots_svg(evaluation, process) -> dict[str, str]:
    """The report's two plots as inline SVG (matplotlib, SVG backend, deterministic output).

    1. ``temperature``: retort and cold-spot temperature against time, the process temperature
       line and each interval below it (and each over-limit record gap) shaded and hatched.
    2. ``lethality``: lethal rate and cumulative F0 against time, with the filed target line.

    Line styles and hatches differ as well as colours: colour is never the only signal.

    Parameters
    ----------
    evaluation : deviation.evaluate.Evaluation
        Supplies the cold-spot series, the low intervals and the flags.
    process : deviation.inputs.case.Process
        The filed process (process temperature [°C], target F0 [min]).

    Returns
    -------
    dict of str to str
        SVG markup by plot name, with text kept as text.
    """
    try:
        import matplotlib
        from matplotlib.backends.backend_svg import FigureCanvasSVG
        from matplotlib.figure import Figure
    except ImportError:
        raise DeviationError("the report plots need the Python package matplotlib: pip install matplotlib") from None

    ev = evaluation
    cs = ev.cold_spot
    k = _thin(len(cs.time_min))
    t, TR, TC = cs.time_min[k], cs.retort_C[k], cs.temperature_C[k]
    L, F = cs.lethal_rate[k], cs.cumulative_F_min[k]
    # Keep the last point so the final cumulative F0 shows.
    if cs.time_min and t[-1] != cs.time_min[-1]:
        t, TR, TC = t + [cs.time_min[-1]], TR + [cs.retort_C[-1]], TC + [cs.temperature_C[-1]]
        L, F = L + [cs.lethal_rate[-1]], F + [cs.cumulative_F_min[-1]]

    style = {
        "svg.hashsalt": _SVG_SALT,
        "svg.fonttype": "none",  # text stays text: selectable in HTML, extractable in the PDF
        "font.family": "sans-serif",
        "font.sans-serif": ["DejaVu Sans", "Liberation Sans", "Arial"],
        "font.size": 8.5,
        "axes.linewidth": 0.6,
        "axes.spines.top": False,
        "lines.linewidth": 1.3,
        "legend.frameon": False,
        "legend.fontsize": 7.5,
        "path.simplify": True,
    }
    out = {}
    with matplotlib.rc_context(style):
        fig = Figure(figsize=(6.9, 2.3))
        FigureCanvasSVG(fig)
        ax = fig.add_subplot()
        for i, li in enumerate(ev.cycle.low_intervals):
            ax.axvspan(li.start_min, li.end_min, facecolor="#f4c7c3", edgecolor="#b3261e", hatch="////",
                       linewidth=0.0, alpha=0.7, label="below process temperature" if i == 0 else None)
        gaps = [f for f in ev.flags if f.code == "record-gap" and f.start_min is not None]
        for i, f in enumerate(gaps):
            ax.axvspan(f.start_min, f.end_min, facecolor="#e0e0e0", edgecolor="#555555", hatch="xx",
                       linewidth=0.0, alpha=0.8, label="gap in the record" if i == 0 else None)
        ax.axhline(process.process_temperature_C, color="#444444", linestyle=(0, (1.5, 1.5)), linewidth=0.9,
                   label=f"process temperature {process.process_temperature_C:.1f} °C")
        ax.plot(t, TR, color="#1f4e79", linestyle="-", label="retort")
        ax.plot(t, TC, color="#c0504d", linestyle=(0, (5, 2)),
                label="cold spot (measured)" if cs.source == "measured" else
                f"cold spot ({str(cs.source).replace('$', chr(92) + '$')} model)")
        ax.set_xlabel("time from steam on [min]")
        ax.set_ylabel("temperature [°C]")
        ax.set_xlim(t[0], t[-1])
        ax.grid(True, linewidth=0.3, color="#cccccc")
        ax.legend(loc="lower center", ncol=3, bbox_to_anchor=(0.5, 1.0))
        fig.tight_layout(pad=0.4)
        buf = io.StringIO()
        fig.savefig(buf, format="svg", metadata={"Date": None})
        out["temperature"] = _clean_svg(buf.getvalue())

        fig = Figure(figsize=(6.9, 2.3))
        FigureCanvasSVG(fig)
        ax = fig.add_subplot()
        ax.spines["right"].set_visible(True)
        ax.plot(t, L, color="#7f6000", linestyle="-", label="lethal rate L")
        ax.set_xlabel("time from steam on [min]")
        ax.set_ylabel("lethal rate L [-]")
        ax.set_xlim(t[0], t[-1])
        ax.set_ylim(bottom=0.0)
        ax.grid(True, linewidth=0.3, color="#cccccc")
        ax2 = ax.twinx()
        ax2.plot(t, F, color="#1f4e79", linestyle=(0, (5, 2)), label="cumulative F0")
        ax2.axhline(process.target_F_min, color="#444444", linestyle=(0, (1.5, 1.5)), linewidth=0.9,
                    label=f"filed target F0 {process.target_F_min:.2f} min")
        ax2.set_ylabel("cumulative F0 [min]")
        ax2.set_ylim(bottom=0.0, top=max(max(F) if F else 0.0, process.target_F_min) * 1.12)
        handles = ax.get_legend_handles_labels()[0] + ax2.get_legend_handles_labels()[0]
        labels = ax.get_legend_handles_labels()[1] + ax2.get_legend_handles_labels()[1]
        ax.legend(handles, labels, loc="lower center", ncol=3, bbox_to_anchor=(0.5, 1.0))
        fig.tight_layout(pad=0.4)
        buf = io.StringIO()
        fig.savefig(buf, format="svg", metadata={"Date": None})
        out["lethality"] = _clean_svg(buf.getvalue())
    return out
