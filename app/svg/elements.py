"""Plain-text SVG building blocks shared by the command line's figures and the app's figure export.

Numbers are written short (``num``), points as ``x,y`` pairs (``points``), and a document is
its size, an optional background and its body (``document``). Dense curves are thinned to what
a pixel column can show (``thin_columns``), so that a figure of many long traces stays a file
of a few hundred kilobytes while every column keeps its highest and lowest point. Nothing here
imports Qt.
"""

from __future__ import annotations

from typing import Iterable
from xml.sax.saxutils import escape, quoteattr

import numpy as np

__all__ = ["attr", "document", "escape", "num", "points", "rgba", "thin_columns"]


def num(x: float, digits: int = 2) -> str:
    """A number with at most ``digits`` decimals and no trailing zeros (``3.50`` -> ``3.5``).

    Examples
    --------
    >>> num(12.3456), num(2.0), num(-0.004)
    ('12.35', '2', '-0')
    """
    x = float(x)
    if abs(x) >= 1e6:
        return f"{x:.3g}"
    text = f"{x:.{digits}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def attr(value: str) -> str:
    """An XML attribute value, quoted and escaped."""
    return quoteattr(str(value))


def rgba(r: int, g: int, b: int, a: int = 255) -> tuple[str, str | None]:
    """An SVG colour and its opacity (None when opaque) from 0-255 components."""
    return f"#{r:02x}{g:02x}{b:02x}", (None if a >= 255 else num(a / 255.0, 3))


def points(x_px: np.ndarray, y_px: np.ndarray, digits: int = 2) -> str:
    """The ``points`` attribute of a polyline: ``x,y`` pairs separated by spaces."""
    return " ".join(f"{num(x, digits)},{num(y, digits)}" for x, y in zip(np.asarray(x_px, float), np.asarray(y_px, float)))


def thin_columns(x_px: np.ndarray, y_px: np.ndarray, *, per_px: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """A curve denser than ``per_px`` points per pixel of x, cut to what each column shows.

    The x range is cut into columns ``1 / per_px`` pixel wide; in each column the first, the
    lowest, the highest and the last point are kept, in their order. A curve drawn with it is
    the same picture at its size and at up to ``per_px`` times zoom (every extreme stays where it
    was). Curves that go back in x (a phase-plane loop) or that are not that dense are returned
    whole.

    Parameters
    ----------
    x_px, y_px : ndarray
        The curve in pixels, finite.
    per_px : int, keyword-only
        Columns per pixel.

    Returns
    -------
    (ndarray, ndarray)
        The kept points, in the curve's order.
    """
    x = np.asarray(x_px, dtype=float)
    y = np.asarray(y_px, dtype=float)
    if x.size < 8 or np.any(np.diff(x) < 0):
        return x, y
    column = np.floor((x - x[0]) * per_px).astype(np.int64)
    if x.size <= 4 * (int(column[-1]) + 1):
        return x, y
    starts = np.flatnonzero(np.r_[True, column[1:] != column[:-1]])
    ends = np.r_[starts[1:], x.size] - 1
    lows = np.minimum.reduceat(y, starts)
    highs = np.maximum.reduceat(y, starts)
    keep = np.zeros(x.size, dtype=bool)
    keep[starts] = keep[ends] = True
    # The first point of each column at its lowest and at its highest value.
    order = np.repeat(np.arange(starts.size), np.diff(np.r_[starts, x.size]))
    at_low = np.flatnonzero(y == lows[order])
    at_high = np.flatnonzero(y == highs[order])
    keep[at_low[np.r_[True, order[at_low][1:] != order[at_low][:-1]]]] = True
    keep[at_high[np.r_[True, order[at_high][1:] != order[at_high][:-1]]]] = True
    return x[keep], y[keep]


def document(width: float, height: float, body: Iterable[str], *, defs: Iterable[str] = (),
             title: str | None = None, background: str | None = "white", font: str | None = None) -> str:
    """An SVG document of ``width`` x ``height`` pixels around its body's elements.

    Parameters
    ----------
    width, height : float
        Size in pixels (also the view box, so one unit is one pixel).
    body : iterable of str
        Elements, one per line, in painting order.
    defs : iterable of str, keyword-only
        Definitions (clip paths) to put before the body.
    title : str or None, keyword-only
        The document's ``<title>``.
    background : str or None, keyword-only
        Fill of a rectangle behind everything; None for none.
    font : str or None, keyword-only
        Attributes for the root element, as text (``font-family="..." font-size="11"``).

    Returns
    -------
    str
        The SVG text (UTF-8, ``\\n`` line ends).
    """
    w, h = num(width), num(height)
    out = [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}"'
        + (f" {font}" if font else "") + ">",
    ]
    if title is not None:
        out.append(f"<title>{escape(title)}</title>")
    defs = list(defs)
    if defs:
        out += ["<defs>", *defs, "</defs>"]
    if background is not None:
        out.append(f'<rect width="{w}" height="{h}" fill="{background}"/>')
    out += list(body)
    out.append("</svg>")
    return "\n".join(out) + "\n"
