"""Options several commands share: how a recorded log is read between its readings."""

from __future__ import annotations

import argparse


def add_reading_options(p: argparse.ArgumentParser) -> None:
    """``--interpolate`` (straight lines between readings, a friendlier figure) against the
    default: a recorded log read at the lower of two readings (FDA, Guide to Inspections of Low
    Acid Canned Food Manufacturers, Part 1). ``--conservative`` is kept for scripts; it is the
    default."""
    p.add_argument("--interpolate", dest="conservative", action="store_false",
                   help="read a log with straight lines between readings (not the figure the "
                        "guidance stands on by default)")
    p.add_argument("--conservative", dest="conservative", action="store_true",
                   help="read a log at the lower of two readings (the default)")
    p.set_defaults(conservative=True)


__all__ = ["add_reading_options"]
