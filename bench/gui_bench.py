"""The desktop app on a long recording: time to the first drawn sweep, and pan/zoom frame times.

Writes a 30-minute 20 kHz gap-free ABF 1 file (36 M samples, 72 MB of int16) of a synthetic
nodal-like cell (``analysis.synthetic._cells``, tiled) with pyabf's writer, then runs, each in a fresh
process and offscreen:

* ``upstroke``  the main window: ``open_path`` to the first paint of the trace view (the analysis
  starts in the background at the same time, as it does for a user); then, once the beats are
  in, the window's trace view (markers, bands and all) through a scripted sequence of pans and
  zooms (from 10 s up to the whole 30 minutes and back), each frame timed from the range change
  to the end of a synchronous repaint;
* ``baseline``  the plain approach: pyabf reads the sweep, one pyqtgraph curve holds all 36 M
  points with pyqtgraph's own clip-to-view and peak downsampling; the same measurements.

It prints each variant's first-paint time, frame times (median, 95th percentile, worst, frames
per second from the mean), whole-process wall time and peak resident memory, and the ratios of
Upstroke to the baseline. Run from the repository: ``python bench/gui_bench.py``.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
RATE_HZ = 20_000.0
MINUTES = 30.0
WIDTH, HEIGHT = 1600, 1000


def write_long_abf(path: Path) -> Path:
    """36 M samples of a synthetic nodal-like cell (20 s made once, tiled), as ABF 1."""
    from pyabf.abfWriter import writeABF1

    from analysis.synthetic import preset, synthesize

    block = synthesize(preset("nodal-like"), duration_s=20.0, fs_hz=RATE_HZ, seed=5, noise_mV=0.3).recording.sweep(0)
    n = int(MINUTES * 60 * RATE_HZ)
    trace = np.resize(block, n)
    writeABF1(trace[np.newaxis, :], str(path), RATE_HZ, units="mV")
    return path


def frame_script(duration_s: float) -> list[tuple[float, float]]:
    """View ranges of the scripted pan/zoom: pans at 10 s, zoom out to everything, pans, back."""
    spans: list[tuple[float, float]] = []
    a, w = 0.0, 10.0
    for _ in range(60):  # pan right at 10 s
        a += 0.02 * w
        spans.append((a, a + w))
    centre = a + w / 2
    while w < duration_s:  # zoom out around the centre, to the whole recording
        w = min(duration_s, w * 1.2)
        centre = min(max(centre, w / 2), duration_s - w / 2)
        spans.append((centre - w / 2, centre + w / 2))
    for _ in range(20):  # zoomed out, pan a little (clamped)
        spans.append((0.0, duration_s))
    while w > 10.0:  # zoom back in, toward the middle
        w = max(10.0, w / 1.2)
        centre = duration_s / 2
        spans.append((centre - w / 2, centre + w / 2))
    a = centre - w / 2
    for _ in range(60):  # pan left at 10 s
        a -= 0.02 * w
        spans.append((a, a + w))
    return spans


def _peak_mb() -> float:
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def _time_frames(app, widget, view_box, spans) -> list[float]:
    """Per frame: change the range, then let Qt's event loop paint, as it does on screen (all
    pending updates are drawn in one paint); a frame that did not paint is painted at once."""
    paints = [0]
    original = widget.paintEvent

    def counting(event):
        paints[0] += 1
        original(event)

    widget.paintEvent = counting
    times = []
    for a, b in spans:
        before = paints[0]
        t0 = time.perf_counter()
        view_box.setXRange(a, b, padding=0.0)
        app.processEvents()
        if paints[0] == before:
            widget.repaint()
        times.append(time.perf_counter() - t0)
    widget.paintEvent = original
    return times


def run_upstroke(path: Path) -> dict:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from app.gui.window.launch import application
    from app.gui.window.main_window import MainWindow

    app = application()
    window = MainWindow(interactive=False)
    window.resize(WIDTH, HEIGHT)
    window.show()
    app.processEvents()
    painted: list[float] = []
    window.trace_view.first_paint.connect(lambda: painted.append(time.perf_counter()))
    t0 = time.perf_counter()
    window.open_path(path)
    while not painted and time.perf_counter() - t0 < 60:
        app.processEvents()
    first_paint_s = painted[0] - t0 if painted else float("nan")
    # Then the user waits for the beats: pan and zoom the window's own trace view with every
    # beat's markers, bands and the overview in place.
    window.settle(3_600_000)
    analysed_s = time.perf_counter() - t0
    view = window.trace_view
    n_beats = len(window.beats) if window.beats is not None else 0
    frames = _time_frames(app, view, view.vb, frame_script(window.levels(0).duration_s))
    return {"first_paint_s": first_paint_s, "analysed_s": analysed_s, "frames": frames,
            "n_samples": window.levels(0).n_samples, "n_beats": n_beats}


def run_baseline(path: Path) -> dict:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    import pyabf
    import pyqtgraph as pg
    from PySide6 import QtWidgets

    from app.gui.refcount_guard import install

    install()  # the same guard the app runs under PySide6 6.12.0 on Python 3.11, for a fair run
    app = QtWidgets.QApplication.instance() or QtWidgets.QApplication([])
    widget = pg.PlotWidget()
    widget.resize(WIDTH - 440, 460)
    widget.show()
    app.processEvents()
    painted: list[float] = []
    original = widget.paintEvent

    def paint_event(event):
        original(event)
        if curve.xData is not None and not painted:
            painted.append(time.perf_counter())

    widget.paintEvent = paint_event
    curve = pg.PlotDataItem(skipFiniteCheck=True)
    widget.getPlotItem().setClipToView(True)
    widget.getPlotItem().setDownsampling(auto=True, mode="peak")
    widget.getViewBox().disableAutoRange()
    widget.addItem(curve)
    t0 = time.perf_counter()
    abf = pyabf.ABF(str(path))
    abf.setSweep(0)
    y = abf.sweepY
    x = np.arange(y.size) / abf.sampleRate
    curve.setData(x, y)
    widget.getViewBox().setXRange(0.0, 10.0, padding=0.0)
    while not painted and time.perf_counter() - t0 < 120:
        widget.repaint()
        app.processEvents()
    first_paint_s = painted[0] - t0 if painted else float("nan")
    frames = _time_frames(app, widget, widget.getViewBox(), frame_script(float(x[-1])))
    return {"first_paint_s": first_paint_s, "analysed_s": float("nan"), "frames": frames, "n_samples": int(y.size), "n_beats": 0}


def child(variant: str, path: Path) -> None:
    start = time.perf_counter()
    result = run_upstroke(path) if variant == "upstroke" else run_baseline(path)
    frames = result.pop("frames")
    result.update(
        variant=variant, frame_median_ms=1e3 * statistics.median(frames),
        frame_p95_ms=1e3 * float(np.percentile(frames, 95)), frame_max_ms=1e3 * max(frames),
        fps_mean=len(frames) / sum(frames), n_frames=len(frames),
        process_s=time.perf_counter() - start, peak_mb=_peak_mb(),
    )
    print("RESULT " + json.dumps(result), flush=True)
    # Background analysis may still be running; the figures are out, so leave at once.
    os._exit(0)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--variant", choices=("upstroke", "baseline"))
    parser.add_argument("--file", type=Path)
    args = parser.parse_args()
    if args.variant:
        child(args.variant, args.file)
        return
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "long-gapfree.abf"
        t = time.perf_counter()
        write_long_abf(path)
        print(f"wrote {path.name}: {path.stat().st_size / 1e6:.1f} MB in {time.perf_counter() - t:.1f} s")
        results = {}
        for variant in ("upstroke", "baseline"):
            t = time.perf_counter()
            out = subprocess.run([sys.executable, __file__, "--variant", variant, "--file", str(path)],
                                 capture_output=True, text=True, cwd=REPO, env={**os.environ, "QT_QPA_PLATFORM": "offscreen"})
            line = next((ln for ln in out.stdout.splitlines() if ln.startswith("RESULT ")), None)
            if line is None:
                print(out.stdout, out.stderr, file=sys.stderr)
                raise SystemExit(f"{variant} failed")
            results[variant] = json.loads(line[7:])
            results[variant]["wall_s"] = time.perf_counter() - t
    rows = (
        ("first sweep drawn after open (s)", "first_paint_s", "{:.3f}"),
        ("beats detected, measured, summarised (s)", "analysed_s", "{:.1f}"),
        ("pan/zoom frame, median (ms)", "frame_median_ms", "{:.1f}"),
        ("pan/zoom frame, 95th percentile (ms)", "frame_p95_ms", "{:.1f}"),
        ("pan/zoom frame, worst (ms)", "frame_max_ms", "{:.1f}"),
        ("frames per second (mean)", "fps_mean", "{:.1f}"),
        ("whole process, wall (s)", "wall_s", "{:.1f}"),
        ("peak resident memory (MB)", "peak_mb", "{:.0f}"),
    )
    u, b = results["upstroke"], results["baseline"]
    print(f"{u['n_samples'] / 1e6:.0f} M samples, {u['n_beats']} beats drawn (Upstroke; the baseline draws the trace only), "
          f"{u['n_frames']} scripted frames, offscreen, {WIDTH}x{HEIGHT} window")
    print(f"{'':40s}{'upstroke':>12s}{'baseline':>12s}{'ratio':>9s}")
    for label, key, fmt in rows:
        ratio = u[key] / b[key] if b[key] and np.isfinite(b[key]) and np.isfinite(u[key]) else float("nan")
        print(f"{label:40s}{fmt.format(u[key]):>12s}{fmt.format(b[key]):>12s}{ratio:>9.2f}")
    print("targets: first sweep within 0.5 s; pan/zoom >= 30 frames/s (frame <= 33 ms)")


if __name__ == "__main__":
    main()
