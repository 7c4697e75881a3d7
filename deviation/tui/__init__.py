"""The terminal UI of ``deviation`` (textual): floor entry, holds board, record timeline, audit.

Run ``deviation tui`` (``--demo`` for a store seeded from ``demo_cases/``). The UI computes
nothing itself: every figure comes from :func:`deviation.evaluate.evaluate_case`, every write
goes through :mod:`deviation.records.store` with the same role rules and messages as the CLI.
"""

from deviation.tui.app import DeviationApp, build_app
from deviation.tui.screenshots import save_screens

__all__ = ["DeviationApp", "build_app", "save_screens"]
