"""The command line: one module per command group, and the terminal rendering."""

from deviation.cli.commands import main

__all__ = ["main"]
