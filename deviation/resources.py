"""Where the shipped data lives: the default rules, the input limits, the demo plant.

An installed wheel carries them as package data (``deviation/_data/``, mapped from the
repository's top-level ``rules/`` and ``demo_cases/`` by the build); a checkout reads those
folders directly. Every layer may import this module (like ``deviation.errors``).
"""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path

_CHECKOUT = Path(__file__).resolve().parents[1]


def shipped(folder: str) -> Path:
    """The shipped folder ``rules`` or ``demo_cases``: installed package data, else the checkout's."""
    installed = files("deviation").joinpath("_data", folder)
    if installed.is_dir():
        return Path(str(installed))
    return _CHECKOUT / folder


__all__ = ["shipped"]
