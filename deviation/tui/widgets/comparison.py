"""Stored against recomputed evaluation, side by side, differences marked (✗ and highlight)."""

from __future__ import annotations

from rich.text import Text
from textual.widgets import DataTable

from deviation.guidance.wording import fmt_probability
from deviation.records.text import one_line

# (label, key in the evaluation JSON, how to show it)
ROWS = (
    ("delivered F0 [min]", "delivered_F_min", "F"),
    ("projected F0 [min]", "projected_F_min", "F"),
    ("target F0 [min]", "target_F_min", "F"),
    ("scheduled F0 [min]", "scheduled_F_min", "F"),
    ("extra minutes", "extension_to_target_min", "F"),
    ("spoilage/can", "spoilage_probability", "p"),
    ("botulinum logs", "botulinum_log_reductions", "F"),
    ("lethality est.", "lethality_established", "b"),
    ("alternate met", "covered_by_alternate", "b"),
    ("disposition", "guidance.disposition", "s"),
    ("flags", "flags", "s"),
    ("engine version", "engine_version", "s"),
    ("rule set", "guidance.rule_set_sha256", "h"),
)


def _value(ev: dict | None, key: str):
    if ev is None:
        return None
    if key == "flags":
        return ", ".join(sorted(f.get("code", "?") for f in ev.get("flags", []))) or "none"
    if key.startswith("guidance."):
        return (ev.get("guidance") or {}).get(key.split(".", 1)[1])
    return ev.get(key)


def _fmt(value, how: str) -> str:
    if value is None:
        return "—"
    if how == "F" and isinstance(value, (int, float)):
        return f"{value:.5g}"
    if how == "p" and isinstance(value, (int, float)):
        return fmt_probability(value).split(" (")[0]
    if how == "b":
        return "yes" if value else "no"
    if how == "h":
        return one_line(value)[:12] + "…"
    return one_line(value)


class ComparisonTable(DataTable):
    """Rows of the comparison; a row that differs beyond the replay tolerances reads ✗."""

    DEFAULT_CSS = """
    ComparisonTable { height: auto; max-height: 16; }
    """

    def on_mount(self) -> None:
        self.cursor_type = "row"
        self.add_columns(" ", "quantity", "stored", "recomputed")

    def show(self, stored: dict | None, now: dict | None, differing: set[str]) -> None:
        """``differing``: evaluation keys (``compare_evaluations`` field names) that differ."""
        self.clear()
        for label, key, how in ROWS:
            a, b = _value(stored, key), _value(now, key)
            bad = key in differing
            info = key in ("engine_version", "guidance.rule_set_sha256") and a != b
            mark = Text("✗", style="bold red") if bad else (Text("≠", style="yellow") if info else Text("✓", style="green"))
            style = "bold red reverse" if bad else ("yellow" if info else "")
            self.add_row(mark, Text(label), Text(_fmt(a, how), style=style), Text(_fmt(b, how), style=style), key=key)
