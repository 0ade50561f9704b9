"""Figures as plain SVG text, with no plotting library and no Qt.

``upstroke export --figures`` writes its time courses with :func:`time_course_svg`; the app's
figure export builds its SVG from the same elements (:mod:`app.svg.elements`).
"""

from .elements import attr, document, escape, num, points, rgba, thin_columns
from .figures import PANELS, nice_ticks, time_course_svg

__all__ = [
    "PANELS", "attr", "document", "escape", "nice_ticks", "num", "points", "rgba", "thin_columns",
    "time_course_svg",
]
