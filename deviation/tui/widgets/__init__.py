"""Widgets of the terminal UI, one module per screen region (results, guidance, plots, timeline)."""
