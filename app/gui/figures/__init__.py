"""Figures of a recording's beats (aligned beats, phase plane, time course, Poincare, DDR-CL),
drawn with pyqtgraph and exported to PNG or SVG."""

from .figure_export import export_figure, figure_png
from .figure_input import FigureInput, summary_beat_rows
from .figure_svg import figure_svg, unknown_items
from .plots import FIGURES, FiguresPanel

__all__ = [
    "FIGURES", "FigureInput", "FiguresPanel", "export_figure", "figure_png", "figure_svg", "summary_beat_rows",
    "unknown_items",
]
