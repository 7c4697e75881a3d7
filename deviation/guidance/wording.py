"""How every face shows a disposition and a probability: the same words, symbols and styles
(colour is never the only signal) on the terminal, in the TUI and in the report."""

from __future__ import annotations

# Each disposition has a word, a symbol and a style: colour is never the only signal.
DISPOSITION_LOOK = {
    "no-deviation": ("NO DEVIATION", "✓", "green"),
    "covered-by-alternate": ("COVERED BY ALTERNATE PROCESS", "≈", "cyan"),
    "evaluate": ("HOLD - PROCESS AUTHORITY EVALUATES", "!", "yellow"),
    "reprocess": ("HOLD - REPROCESS OR EVALUATE", "!!", "dark_orange"),
    "reprocess-or-destroy": ("HOLD - REPROCESS OR DESTROY", "✗", "bold red"),
}


def fmt_probability(p: float) -> str:
    """A probability per container, readable at a glance (1 in N)."""
    if p <= 0.0:
        return "< 1e-300"
    if p >= 0.5:
        return f"{p:.3f}"
    return f"{p:.2e} (1 in {1.0 / p:,.0f})"
