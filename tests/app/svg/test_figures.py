"""``upstroke export RESULTS.h5 --figures DIR``: the SVG time courses, drawn by an independent
renderer (librsvg), put each panel's most extreme beat where the panel's axes say it is."""

from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np
import pytest

from analysis.columns import column
from analysis.readouts import _plotdata as plotdata
from analysis.session import Session
from app import demo_data
from app.cli import main
from app.svg.elements import num, thin_columns
from app.svg.figures import PANELS

from .. import svg_raster as sr

NS = "{http://www.w3.org/2000/svg}"
ACCEPTED = (0x1F, 0x4E, 0x8C)  # the fill of an accepted beat's dot
SCALE = 2  # the picture is drawn at twice the figure's size


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    """The demo scenario's gap-free recording analysed with its conditions, and its figure."""
    paths = demo_data.demo_paths()
    if not paths.found:
        pytest.skip("the demo scenario's bundled recordings (sample_data/) are absent")
    folder = tmp_path_factory.mktemp("cli")
    argv = ["analyze", str(paths.gap_free), "--out", str(folder / "r.h5")]
    for text in demo_data.CONDITION_TEXTS:
        argv += ["--condition", text]
    assert main(argv) == 0
    # The reviewer accepts the beats held for review (the seal trouble's), so that every beat is drawn
    # filled and the panels' extremes stand apart (the seal trouble's MDP and APD90).
    reviewed = Session.open(folder / "r.h5")
    key = reviewed.recordings[0]
    reviewed.accept(key, np.flatnonzero(reviewed.beats(key)["verdict"] == "to_review").tolist())
    reviewed.save(folder / "r.h5")
    assert main(["export", str(folder / "r.h5"), "--figures", str(folder / "figs")]) == 0
    (svg,) = sorted((folder / "figs").iterdir())
    session = Session.open(folder / "r.h5")
    key = session.recordings[0]
    return svg, session.beats(key), session.info(key).sweep_starts_s, folder


def _frames(root) -> list[tuple[float, float, float, float]]:
    """Each panel's frame as the document states it: (left, top, right, bottom)."""
    out = []
    for el in root.iter(f"{NS}rect"):
        if el.get("fill") == "none" and el.get("stroke"):
            x, y, w, h = (float(el.get(k)) for k in ("x", "y", "width", "height"))
            out.append((x, y, x + w, y + h))
    return out


def _labels(root):
    """The axes' tick labels: (text, x, y, anchor) of every text element."""
    return [(el.text, float(el.get("x")), float(el.get("y")), el.get("text-anchor")) for el in root.iter(f"{NS}text")
            if el.get("x") is not None and el.text]


@pytest.mark.parametrize("panel", range(len(PANELS)), ids=[p[0] for p in PANELS])
def test_most_extreme_beat_lands_where_the_axes_say(exported, panel):
    svg, beats, sweep_starts_s, folder = exported
    column = PANELS[panel][0]
    image = sr.rasterise(svg, folder / f"{column}.librsvg.png", width_px=int(ET.parse(svg).getroot().get("width")) * SCALE)
    root = ET.parse(svg).getroot()
    frames = _frames(root)
    assert len(frames) == len(PANELS)
    left, top, right, bottom = (v * SCALE for v in frames[panel])
    last_bottom = frames[-1][3] * SCALE
    s = SCALE
    # The axes, read off the picture: the y labels' rows beside the frame, the x labels' columns
    # under the last panel, against the values the labels show.
    frame_x = sr.axis_column(image, (int(left) - 3 * s, int(top), int(left) + 3 * s, int(bottom)))
    rows = sr.label_rows(image, (frame_x - 12 * s, int(top) - 8 * s, frame_x - 3 * s, int(bottom) + 8 * s), gap=2 * s)
    y_values = [float(t) for t, x, y, a in _labels(root) if a == "end" and top - 8 * s <= y * s <= bottom + 8 * s]
    frame_y = sr.axis_row(image, (int(left), int(last_bottom) - 3 * s, int(right), int(last_bottom) + 3 * s))
    cols = sr.label_columns(image, (int(left) - 20 * s, frame_y + 6 * s, int(right) + 20 * s, frame_y + 18 * s), gap=4 * s)
    x_values = [float(t) for t, x, y, a in _labels(root) if a == "middle" and abs(y * s - last_bottom - 16 * s) < 1]
    assert len(rows) == len(y_values) >= 3 and len(cols) == len(x_values) >= 3, (rows, y_values, cols, x_values)
    fy = sr.axis_map(sorted(y_values, reverse=True), rows)
    fx = sr.axis_map(sorted(x_values), cols)
    assert fx[2] < s and fy[2] < s  # evenly spaced on the picture, as their values are

    # The beat: the panel's lowest accepted value for rate and APD90, its highest for DDR and MDP.
    y = np.asarray(beats[column], float)
    ok = (np.asarray(beats["accepted"]) == 1) & np.isfinite(y)
    lowest = column in ("rate_bpm", "apd90_ms")
    i = int(np.flatnonzero(ok)[np.argmin(y[ok]) if lowest else np.argmax(y[ok])])
    t = plotdata.recording_times_s(beats, sweep_starts_s)[i]
    inside = np.zeros(image.shape[:2], bool)
    inside[int(top):int(bottom) + 1, int(left):int(right) + 1] = True
    dots = sr.blobs(sr.near(image, ACCEPTED, 40) & inside)
    dot = max(dots, key=lambda b: b["cy"]) if lowest else min(dots, key=lambda b: b["cy"])
    # librsvg is the reference; a dot is 4 pixels across on the figure, 2 px of slack.
    assert abs(dot["cx"] - (fx[0] * t + fx[1])) <= 2 * s, (column, dot, fx[0] * t + fx[1])
    assert abs(dot["cy"] - (fy[0] * y[i] + fy[1])) <= 2 * s, (column, dot, fy[0] * y[i] + fy[1])


def test_numbers_are_short_and_curves_keep_their_extremes():
    assert [num(v) for v in (12.3456, 2.0, -1.5, 1234567.0)] == ["12.35", "2", "-1.5", "1.23e+06"]
    # A dense noisy curve: thinned to at most four points per half pixel, extremes kept.
    rng = np.random.default_rng(2)
    x = np.linspace(0, 100, 20_000)
    y = np.sin(x / 9) * 40 + rng.normal(0, 2, x.size)
    xs, ys = thin_columns(x, y)
    assert xs.size <= 4 * 201 and np.all(np.diff(xs) >= 0)
    for a in np.arange(0, 100, 0.5):  # every half-pixel column keeps its lowest and highest point
        inside = (x >= a) & (x < a + 0.5)
        kept = (xs >= a) & (xs < a + 0.5)
        assert ys[kept].min() == y[inside].min() and ys[kept].max() == y[inside].max()
    loop = np.r_[x, x[::-1]]  # a curve that goes back in x is left whole
    assert thin_columns(loop, np.r_[y, y])[0].size == loop.size


def test_panel_axes_are_labelled_by_the_catalogue(exported):
    # The Qt-free writer names each panel's axis by the catalogue's label and unit (analysis.columns).
    svg, _beats, _starts, _folder = exported
    root = ET.parse(svg).getroot()
    rotated = [el.text for el in root.iter(f"{NS}text") if "rotate(-90)" in (el.get("transform") or "")]
    assert rotated == [column(name).axis_label for name, _label, _span in PANELS]
    assert rotated[1] == "APD90 (ms)"
