"""Figure export: each figure of the demo scenario as PNG and SVG, the SVG drawn by an independent
renderer (librsvg), both read back as pictures. On each, the axes are read off the picture (the
tick labels' positions against the values they show) and a known data point must lie where those
axes put it."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtGui  # noqa: E402

from analysis import open_recording  # noqa: E402
from analysis.recording import Recording  # noqa: E402
from app import demo_data  # noqa: E402
from app.gui import palette  # noqa: E402
from app.gui.figures.figure_svg import unknown_items  # noqa: E402

from ... import svg_raster as sr  # noqa: E402

PAPER = sr.hex_rgb(palette.PAPER)
#: How far a mark may lie from where the axes put it, in pixels of the figure on screen (scaled
#: to the picture), beyond half its line's width: anti-aliasing and the labels' glyph centres.
TOLERANCE_PX = 2.0


@pytest.fixture(scope="module")
def exported(qapp, tmp_path_factory):
    """The demo scenario's recording with its three conditions, analysed in the window; every
    figure exported to PNG and SVG."""
    from app.gui.window.main_window import MainWindow

    source, conditions, label = demo_data.demo_recording()
    w = MainWindow(interactive=False)
    w.resize(1600, 1000)
    w.show()
    if isinstance(source, Recording):
        w.open_recording_file(source, label=label, conditions=conditions)
    else:
        w.open_recording_file(open_recording(source), origin=str(source), label=label, conditions=conditions)
    assert w.settle(120_000) and w.key is not None
    folder = tmp_path_factory.mktemp("figures")
    w.figures.export_all(folder, fmt="png")
    w.figures.export_all(folder, fmt="svg")
    yield w.figures, folder
    w.runner.wait(10_000)
    w.close()


class Picture:
    """One exported figure as a picture, with the figure's layout scaled onto it."""

    def __init__(self, name: str, image: np.ndarray, figure) -> None:
        self.name = name
        self.image = image
        self.figure = figure
        rect = figure.export_item().sceneBoundingRect()
        self.origin = rect.topLeft()
        self.scale = image.shape[1] / rect.width()

    def view_box(self, plot) -> tuple[int, int, int, int]:
        """Where the plot's view lies on the picture (only to know where to look)."""
        r = plot.getViewBox().sceneBoundingRect().translated(-self.origin)
        s = self.scale
        return int(r.left() * s), int(r.top() * s), int(np.ceil(r.right() * s)), int(np.ceil(r.bottom() * s))

    def axes(self, plot):
        """The plot's two axes as read off the picture: value-to-pixel maps ``(slope, intercept)``
        for x and y, from the tick labels' positions and the values they show."""
        s = self.scale
        x0, y0, x1, y1 = self.view_box(plot)
        pad = int(4 * s)
        column = sr.axis_column(self.image, (x0 - pad, y0, x0 + pad, y1))
        row = sr.axis_row(self.image, (x0, y1 - pad, x1, y1 + pad))
        # The right end of each left label (its last glyph), and the band of the bottom labels.
        ys = sr.label_rows(self.image, (column - int(12 * s), y0 - pad, column - int(3 * s), y1 + pad), gap=int(2 * s))
        xs = sr.label_columns(self.image, (x0 - 3 * pad, row + int(2 * s), x1 + 3 * pad, row + int(16 * s)), gap=int(4 * s))
        y_values = sorted(_label_values(plot, "left"), reverse=True)
        x_values = sorted(_label_values(plot, "bottom"))
        assert len(ys) == len(y_values) and len(xs) == len(x_values), (self.name, ys, y_values, xs, x_values)
        fx, fy = sr.axis_map(x_values, xs), sr.axis_map(y_values, ys)
        # The labels read off the picture are evenly spaced, as their values are.
        assert fx[2] < 1.0 * s and fy[2] < 1.0 * s, (self.name, fx, fy)
        return fx[:2], fy[:2]

    def marks(self, colour, alpha: int = 255, tol: float = 40.0) -> np.ndarray:
        return sr.near(self.image, sr.over(sr.hex_rgb(colour), alpha, PAPER), tol)


def _label_values(plot, side: str) -> list[float]:
    """The values an axis shows as tick labels (its own text), whatever their level."""
    axis = plot.getAxis(side)
    image = QtGui.QImage(4, 4, QtGui.QImage.Format_ARGB32)
    painter = QtGui.QPainter(image)
    try:
        texts = axis.generateDrawSpecs(painter)[2]
    finally:
        painter.end()
    return [float(text.replace("\u2212", "-")) for _rect, _flags, text in texts]


def _pictures(exported, key: str) -> list[Picture]:
    figures, folder = exported
    figure = figures.figures[key]
    png = sr.read_png(folder / f"{key}.png")
    svg = sr.rasterise(folder / f"{key}.svg", folder / f"{key}.librsvg.png", width_px=png.shape[1])
    return [Picture("PNG export", png, figure), Picture("SVG drawn by librsvg", svg, figure)]


def _at(fit, value: float) -> float:
    return fit[0] * value + fit[1]


def _colours(figures) -> dict[str, str]:
    return dict(figures._input.groups)


def _within(picture: Picture, found: float, expected: float, line_px: float = 0.0) -> bool:
    return abs(found - expected) <= (TOLERANCE_PX + line_px / 2) * picture.scale


def test_every_item_of_every_figure_is_written(exported):
    figures, _folder = exported
    assert {key: unknown_items(fig) for key, fig in figures.figures.items()} == {key: [] for key in figures.figures}


def test_poincare_longest_cycle_lands_on_its_cl(exported):
    """The pair with the longest CL n (the demo's pause) is drawn at its two CLs."""
    figures, _ = exported
    figure = figures.figures["poincare"]
    name, (x, y) = max(figure.pairs.items(), key=lambda kv: kv[1][0].max())
    i = int(np.argmax(x))
    for pic in _pictures(exported, "poincare"):
        fx, fy = pic.axes(figure.plot)
        dot = max(sr.blobs(pic.marks(_colours(figures)[name], 170)), key=lambda b: b["cx"])
        assert _within(pic, dot["cx"], _at(fx, x[i])), (pic.name, dot, _at(fx, x[i]))  # librsvg is the reference
        assert _within(pic, dot["cy"], _at(fy, y[i])), (pic.name, dot, _at(fy, y[i]))


def test_ddr_vs_cl_fastest_ddr_lands_on_its_values(exported):
    figures, _ = exported
    figure = figures.figures["ddr_cl"]
    beats = figures._input.beats
    ok = (np.asarray(beats["accepted"]) == 1) & np.isfinite(beats["cl_ms"]) & np.isfinite(beats["ddr_mV_per_s"])
    i = int(np.flatnonzero(ok)[np.argmax(np.asarray(beats["ddr_mV_per_s"])[ok])])
    colour = _colours(figures)[str(beats["condition"][i])]
    for pic in _pictures(exported, "ddr_cl"):
        fx, fy = pic.axes(figure.plot)
        dot = min(sr.blobs(pic.marks(colour, 160)), key=lambda b: b["cy"])
        assert _within(pic, dot["cx"], _at(fx, beats["cl_ms"][i])), (pic.name, dot)  # librsvg is the reference
        assert _within(pic, dot["cy"], _at(fy, beats["ddr_mV_per_s"][i])), (pic.name, dot)


def test_time_course_slowest_beat_lands_on_its_time_and_rate(exported):
    """In the rate panel, the slowest accepted beat (the demo's pause) at its time and rate."""
    from analysis.readouts import _plotdata as plotdata

    figures, _ = exported
    figure = figures.figures["time_course"]
    data = figures._input
    beats = data.beats
    ok = (np.asarray(beats["accepted"]) == 1) & np.isfinite(beats["rate_bpm"])
    i = int(np.flatnonzero(ok)[np.argmin(np.asarray(beats["rate_bpm"])[ok])])
    t = plotdata.recording_times_s(beats, data.recording.sweep_starts_s)[i]
    colour = _colours(figures)[str(beats["condition"][i])]
    for pic in _pictures(exported, "time_course"):
        fx, fy = pic.axes(figure.plots[0])
        x0, y0, x1, y1 = pic.view_box(figure.plots[0])
        inside = np.zeros(pic.image.shape[:2], bool)
        inside[y0:y1, x0:x1] = True
        dot = max(sr.blobs(pic.marks(colour, 255, 30) & inside), key=lambda b: b["cy"])
        assert _within(pic, dot["cx"], _at(fx, t)), (pic.name, dot, _at(fx, t))  # librsvg is the reference
        assert _within(pic, dot["cy"], _at(fy, beats["rate_bpm"][i])), (pic.name, dot)


def _curve(plot, prefix: str):
    (item,) = [it for it in plot.listDataItems() if (it.name() or "").startswith(prefix)]
    x, y = item.getData()
    return np.asarray(x, float), np.asarray(y, float), item.opts["pen"].widthF()


def test_aligned_beats_ensemble_peak_and_upstroke_land_on_their_values(exported):
    """The ensemble average drawn last (on top): its peak at its voltage, and its upstroke
    crossing half its amplitude at its time."""
    figures, _ = exported
    figure = figures.figures["aligned"]
    name = [n for n, _c in figures._input.groups if n in figure.averages][-1]
    t, v, width = _curve(figure.plot, f"{name}:")
    half = (np.nanmax(v) + np.nanmin(v)) / 2
    k = int(np.flatnonzero((v[:-1] < half) & (v[1:] >= half))[0])
    t_half = t[k] + (half - v[k]) / (v[k + 1] - v[k]) * (t[k + 1] - t[k])
    for pic in _pictures(exported, "aligned"):
        fx, fy = pic.axes(figure.plot)
        x0, y0, x1, y1 = pic.view_box(figure.plot)
        mean = pic.marks(_colours(figures)[name], 255, 30)
        mean[:, : x0 + 2] = mean[:, x1 - 2:] = False
        top = np.flatnonzero(mean.any(axis=1))[0]
        # The top edge of a line lies half its width above the peak.
        assert _within(pic, top, _at(fy, np.nanmax(v)) - width / 2 * pic.scale, width), (pic.name, top)
        row = int(round(_at(fy, half)))
        runs = sr.clusters(mean[row], gap=2)
        assert runs, pic.name
        centre = (runs[0][0] + runs[0][1]) / 2
        assert _within(pic, centre, _at(fx, t_half), width), (pic.name, centre, _at(fx, t_half))  # librsvg is the reference


def test_phase_plane_average_beats_reach_their_peak_voltage_and_fastest_fall(exported):
    """The average beat that reaches the highest voltage ends rightmost at it, and the one that
    falls fastest reaches lowest at its dV/dt (each the outermost curve on its side)."""
    figures, _ = exported
    figure = figures.figures["phase_plane"]
    colours = _colours(figures)
    curves = {n: _curve(figure.plot, f"{n}:") for n in figures.figures["aligned"].averages}
    highest = max(curves, key=lambda n: np.nanmax(curves[n][0]))
    fastest = min(curves, key=lambda n: np.nanmin(curves[n][1]))
    for pic in _pictures(exported, "phase_plane"):
        fx, fy = pic.axes(figure.plot)
        x0, y0, x1, y1 = pic.view_box(figure.plot)

        def curve_pixels(name):
            mask = np.zeros(pic.image.shape[:2], bool)
            mask[y0:y1, x0 + 2:x1] = pic.marks(colours[name], 255, 30)[y0:y1, x0 + 2:x1]
            return mask

        v, _dvdt, width = curves[highest]
        right = np.flatnonzero(curve_pixels(highest).any(axis=0))[-1]
        edge = _at(fx, np.nanmax(v)) + width / 2 * pic.scale  # the line's edge, half its width out
        assert _within(pic, right, edge, width), (pic.name, right, edge)  # librsvg is the reference
        _v, dvdt, width = curves[fastest]
        bottom = np.flatnonzero(curve_pixels(fastest).any(axis=1))[-1]
        edge = _at(fy, np.nanmin(dvdt)) + width / 2 * pic.scale
        assert _within(pic, bottom, edge, width), (pic.name, bottom, edge)


def test_svg_is_plain_vector_drawing_of_the_figure(exported):
    """No embedded pictures or scripts; the view clips what it holds; text is text."""
    figures, folder = exported
    ns = "{http://www.w3.org/2000/svg}"
    root = ET.parse(folder / "poincare.svg").getroot()  # well-formed XML (the standard's syntax)
    tags = {el.tag.replace(ns, "") for el in root.iter()}
    assert not tags & {"image", "script", "foreignObject"}
    assert "clipPath" in tags and "circle" in tags
    texts = {el.text for el in root.iter(f"{ns}text")}
    assert {"CL n (ms)", "CL n+1 (ms)"} <= texts and any(re.fullmatch(r"\d{3,4}", t or "") for t in texts)
    pairs = sum(x.size for x, _y in figures.figures["poincare"].pairs.values())
    assert len(list(root.iter(f"{ns}circle"))) >= pairs  # one mark per pair (and the legend's)
