"""How every face shows a disposition and a probability: the same words, symbols and styles
(colour is never the only signal) on the terminal, in the TUI and in the report."""

from __future__ import annotations

import math

# Each disposition has a word, a symbol and a style: colour is never the only signal.
DISPOSITION_LOOK = {
    "no-deviation": ("NO DEVIATION", "✓", "green"),
    "covered-by-alternate": ("COVERED BY ALTERNATE PROCESS", "≈", "cyan"),
    "evaluate": ("HOLD - PROCESS AUTHORITY EVALUATES", "!", "yellow"),
    "reprocess": ("HOLD - REPROCESS OR EVALUATE", "!!", "dark_orange"),
    "reprocess-or-destroy": ("HOLD - REPROCESS OR DESTROY", "✗", "bold red"),
}


def fmt_probability(p: float, log10_p: float | None = None) -> str:
    """A probability, readable at a glance (1 in N); never "0" for a positive probability.

    ``log10_p`` (the evaluation's ``log10_`` twin) keeps the exponent of a probability that
    underflows to 0 in double precision.
    """
    if p <= 0.0 or (p < 1e-300 and log10_p is not None):
        if log10_p is None or not math.isfinite(log10_p):
            return "below 1e-300 (exponent not given)" if p <= 0.0 else f"{p:.2e}"
        exponent = math.floor(log10_p)
        mantissa = 10.0 ** (log10_p - exponent)
        return f"{mantissa:.2f}e{exponent:d} (1 in 1e{-exponent:d})"
    if p >= 0.5:
        return f"{p:.3f}"
    return f"{p:.2e} (1 in {1.0 / p:,.0f})"


def fmt_probability_short(p: float, log10_p: float | None = None) -> str:
    """A probability in one short figure (``3.2e-07``); from its log10 when it underflowed."""
    if (p <= 0.0 or p < 1e-300) and log10_p is not None and math.isfinite(log10_p):
        exponent = math.floor(log10_p)
        return f"{10.0 ** (log10_p - exponent):.1f}e{exponent:d}"
    return f"{p:.1e}"
