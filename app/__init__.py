"""Upstroke's front ends: the command line (no Qt at import) and the desktop app."""

__version__ = "0.1.0"
