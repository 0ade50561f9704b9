"""Upstroke's colours, pens and marker shapes, in one place.

A light "bench paper" theme: dark ink for the membrane potential so a printed or projected
figure reads well, one distinct hue per marker kind (chosen to stay apart for the common forms
of colour blindness), and faint washes for the phases so they never hide the trace.
"""

from __future__ import annotations

from analysis.columns import column

#: Window and plot background, and the ink of axes and text.
PAPER = "#fbfaf6"
INK = "#26303b"
GRID_ALPHA = 0.12
GRID = "#e7e4dc"

#: The membrane potential trace and the overview envelope.
TRACE = "#1d3557"
TRACE_WIDTH = 1  # a one-pixel cosmetic pen: wider pens cost Qt's raster engine a stroke per segment
ENVELOPE = "#45617f"
RATE = "#b5452b"

#: Marker kinds drawn on every beat: (label, colour, pyqtgraph symbol, size in px); the label is
#: the catalogue's label of the column the marker belongs to.
MARKERS = {
    "upstroke": (column("t_upstroke_s").label, "#d1495b", "t1", 11),
    "mdp": (column("mdp_mV").label, "#0b7a75", "t", 10),
    "top": (column("top_mV").label, "#e09f1f", "d", 10),
    "peak": (column("peak_mV").label, "#6a4c93", "o", 9),
    "apd90": (column("apd90_ms").label, "#2a9d3f", "s", 8),
}

#: Rejected beats: greyed markers and a hatched rose band behind the beat.
REJECTED_MARKER = "#9aa0a6"
REJECTED_BAND = (196, 64, 64, 46)
REJECTED_LABEL = "#9b2c2c"

#: Accepted beats carrying a flag the review should look at (EAD, DAD, pause, noise...);
#: the flags every first or last beat carries are left quiet.
FLAG_BAND = (224, 159, 31, 34)
FLAG_LABEL = "#8a5a00"
QUIET_FLAGS = ("no_diastole", "truncated")
#: Beats waiting for a look (a flag that holds them out of the summaries until reviewed).
REVIEW_BAND = (230, 126, 20, 38)

#: The beat under review.
CURRENT_BAND = (29, 53, 87, 28)

#: Phase washes (RGBA): 4 diastolic depolarisation, 0 upstroke, 1 early repolarisation,
#: 2 plateau, 3 final repolarisation.
PHASES = {
    4: (86, 156, 214, 40),
    0: (232, 120, 60, 46),
    1: (214, 92, 160, 40),
    2: (226, 196, 70, 44),
    3: (96, 170, 110, 40),
}

#: The two gates that bound a stretch of trace to read out: (colour, tag drawn on the line).
CURSORS = (("#8e3b8a", "◧ from"), ("#3f7d20", "to ◨"))

#: Conditions (bands on the overview and the time courses, points in the DDR plot), in order.
CONDITIONS = ("#3a86ff", "#ef476f", "#06a77d", "#8338ec", "#fb8500", "#118ab2", "#8d6e63")


def condition_colour(index: int) -> str:
    """The colour of the ``index``-th condition (cycling)."""
    return CONDITIONS[index % len(CONDITIONS)]


def rgba(hex_colour: str, alpha: int) -> tuple[int, int, int, int]:
    """An ``#rrggbb`` colour with an alpha (0-255)."""
    h = hex_colour.lstrip("#")
    return int(h[0:2], 16), int(h[2:4], 16), int(h[4:6], 16), int(alpha)
