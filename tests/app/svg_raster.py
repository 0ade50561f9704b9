"""Reading an SVG figure through an independent renderer: librsvg's ``rsvg-convert`` (the Debian
package librsvg2-bin; not Qt's renderer, which shares the app's painting code), and finding on
the picture where the axes put their tick labels and where the data were drawn."""

from __future__ import annotations

import shutil
import subprocess

import numpy as np
import pytest
from scipy import ndimage

#: The reference renderer.
RENDERER = shutil.which("rsvg-convert")


def rasterise(svg_path, png_path, *, width_px: int) -> np.ndarray:
    """The SVG drawn by librsvg ``width_px`` wide on white, as an RGB array (rows, columns, 3)."""
    if RENDERER is None:
        pytest.skip("librsvg's rsvg-convert (Debian package librsvg2-bin), the reference SVG renderer, is not installed")
    subprocess.run([RENDERER, "-w", str(int(width_px)), "-b", "white", "-o", str(png_path), str(svg_path)],
                   check=True, capture_output=True, timeout=120)
    return read_png(png_path)


def read_png(path) -> np.ndarray:
    """A PNG file as an RGB array (read with Qt's image reader, no window needed)."""
    from PySide6 import QtGui

    image = QtGui.QImage(str(path)).convertToFormat(QtGui.QImage.Format_RGB888)
    assert not image.isNull(), path
    rows = np.frombuffer(image.constBits(), dtype=np.uint8).reshape(image.height(), image.bytesPerLine())
    return rows[:, : 3 * image.width()].reshape(image.height(), image.width(), 3).copy()


def ink(image: np.ndarray, level: int = 100) -> np.ndarray:
    """Dark pixels (axis lines and text), every channel below ``level``."""
    return image.max(axis=2) < level


def near(image: np.ndarray, rgb, tol: float = 40.0) -> np.ndarray:
    """Pixels within ``tol`` of a colour in every channel."""
    return np.all(np.abs(image.astype(int) - np.asarray(rgb, int)) <= tol, axis=2)


def over(rgb, alpha: int, ground) -> tuple[int, int, int]:
    """A colour of opacity ``alpha`` (0-255) painted over ``ground`` (source-over)."""
    a = alpha / 255.0
    return tuple(int(round(a * c + (1 - a) * g)) for c, g in zip(rgb, ground))


def hex_rgb(colour: str) -> tuple[int, int, int]:
    colour = colour.lstrip("#")
    return tuple(int(colour[i:i + 2], 16) for i in (0, 2, 4))


def clusters(flags: np.ndarray, *, gap: int) -> list[tuple[int, int]]:
    """Runs of True in a 1-D array, runs closer than ``gap`` merged: ``(first, last)`` each."""
    idx = np.flatnonzero(flags)
    if not idx.size:
        return []
    cuts = np.flatnonzero(np.diff(idx) > gap)
    starts = np.r_[idx[0], idx[cuts + 1]]
    ends = np.r_[idx[cuts], idx[-1]]
    return list(zip(starts.tolist(), ends.tolist()))


def axis_column(image: np.ndarray, box) -> int:
    """The column of a vertical axis line: the one with most dark pixels inside ``box``."""
    x0, y0, x1, y1 = box
    return x0 + int(np.argmax(ink(image[y0:y1, x0:x1]).sum(axis=0)))


def axis_row(image: np.ndarray, box) -> int:
    """The row of a horizontal axis line: the one with most dark pixels inside ``box``."""
    x0, y0, x1, y1 = box
    return y0 + int(np.argmax(ink(image[y0:y1, x0:x1]).sum(axis=1)))


def label_rows(image: np.ndarray, box, *, gap: int) -> list[float]:
    """Vertical centres of the text lines (tick labels) inside ``box``, top to bottom."""
    x0, y0, x1, y1 = box
    dark = ink(image[y0:y1, x0:x1]).any(axis=1)
    return [y0 + (a + b) / 2 for a, b in clusters(dark, gap=gap)]


def label_columns(image: np.ndarray, box, *, gap: int) -> list[float]:
    """Horizontal centres of the words (tick labels) inside ``box``, left to right."""
    x0, y0, x1, y1 = box
    dark = ink(image[y0:y1, x0:x1]).any(axis=0)
    return [x0 + (a + b) / 2 for a, b in clusters(dark, gap=gap)]


def axis_map(values, pixels) -> tuple[float, float, float]:
    """The straight line from axis values to pixels through the labels' positions:
    ``(slope, intercept, largest residual in pixels)``."""
    values = np.asarray(values, dtype=float)
    pixels = np.asarray(pixels, dtype=float)
    assert values.size == pixels.size >= 3, (values, pixels)
    slope, intercept = np.polyfit(values, pixels, 1)
    return float(slope), float(intercept), float(np.max(np.abs(slope * values + intercept - pixels)))


def blobs(mask: np.ndarray) -> list[dict]:
    """Connected patches of a mask: centroid ``cx, cy``, extent ``x0, x1, y0, y1`` and size ``n``."""
    labels, count = ndimage.label(mask)
    out = []
    for k, sl in enumerate(ndimage.find_objects(labels), start=1):
        ys, xs = np.nonzero(labels[sl] == k)
        out.append({"cx": sl[1].start + xs.mean(), "cy": sl[0].start + ys.mean(), "n": xs.size,
                    "x0": sl[1].start + xs.min(), "x1": sl[1].start + xs.max(),
                    "y0": sl[0].start + ys.min(), "y1": sl[0].start + ys.max()})
    return out
