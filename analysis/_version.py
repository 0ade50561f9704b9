"""Upstroke's version, in one place (the results file and the CLI record it)."""

__version__ = "0.1.0"
