"""Screens of the terminal UI, one module per screen; dialogs return typed results."""
