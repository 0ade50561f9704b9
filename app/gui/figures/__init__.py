"""Figures of a recording's beats (aligned beats, phase plane, time course, Poincare, DDR-CL),
drawn with pyqtgraph and exported to PNG or SVG (the SVG writer of a figure's items is
:mod:`app.gui.figures.figure_svg`; its function of the same name is not repeated here, where it
would hide the module)."""

from .figure_export import export_figure, figure_png
from .figure_input import FigureInput, summary_beat_rows
from .figure_svg import unknown_items
from .plots import FIGURES, FiguresPanel

__all__ = [
    "FIGURES", "FigureInput", "FiguresPanel", "export_figure", "figure_png", "summary_beat_rows", "unknown_items",
]
