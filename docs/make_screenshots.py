"""Make the user guide's screenshots (docs/images/) with the app's own ``--screenshot`` option.

    python docs/make_screenshots.py

Each picture is the main window rendered offscreen, loaded and analysed, by the command line a
user would type:

* ``demo.png``: ``upstroke demo --screenshot``, the invented nodal-like cell NL-0417 with its
  conditions (baseline, UP-113, washout);
* ``reviewed.png``: ``upstroke gui RESULTS.h5 --screenshot`` on a results file in which the beats
  of the seal trouble (158-163 s) were rejected, as a reviewer would;
* ``episodic.png``: ``upstroke gui sample_data/VL-0212_episodic.abf --screenshot``, the
  ventricular-like cell in sweeps;
* ``study.png``: ``upstroke demo --study --screenshot``, the invented study (five cells under
  baseline, UP-113 and washout) with its grid of recordings, at 1366 x 768;
* ``study-comparison.png``: the same window with the comparison across cells raised, after the
  beat of NL-S04 under UP-113 with the electrical artefact planted in its diastole was rejected.

The recordings are the invented ones in sample_data/ (the study's in sample_data/study/).
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
IMAGES = ROOT / "docs" / "images"
SAMPLES = ROOT / "sample_data"
SIZE = "1600x1000"


def _upstroke(*args: str) -> None:
    env = dict(os.environ, QT_QPA_PLATFORM=os.environ.get("QT_QPA_PLATFORM", "offscreen"))
    subprocess.run([sys.executable, "-m", "app", *args], check=True, cwd=ROOT, env=env)


def reviewed_results(folder: Path) -> Path:
    """A results file of the demo recording with the seal trouble's beats rejected."""
    sys.path.insert(0, str(ROOT))
    import numpy as np

    from analysis import Session
    from app import demo_data

    session = Session()
    key = session.add(SAMPLES / demo_data.GAP_FREE_ABF, conditions=demo_data.demo_conditions(None))
    beats = session.beats(key)
    t = np.asarray(beats["t_upstroke_s"])
    rows = np.flatnonzero((t > 158.0) & (t < 164.0))  # the seal trouble (sample_data/README.md)
    session.reject(key, rows.tolist(), "seal or access trouble")
    path = folder / "NL-0417_reviewed.h5"
    session.save(path)
    return path


def study_comparison(path: Path, folder: Path) -> None:
    """The demo study's window with the comparison across cells raised, after a rejection."""
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    # The app's own folder (recent files, autosave journals) in the scratch folder, not the user's.
    os.environ["UPSTROKE_CONFIG_DIR"] = str(folder / "config")
    sys.path.insert(0, str(ROOT))
    import numpy as np

    from app.cli.demo import demo_study_results
    from app.gui.window.launch import application
    from app.gui.window.main_window import MainWindow

    application()
    window = MainWindow(interactive=False)
    window.resize(1366, 768)
    window.show()
    window.open_results(str(demo_study_results(folder)))
    window.settle()
    key = next(k for k in window.study.order() if "NL-S04_UP-113" in k)
    window.study.choose(key)
    window.settle()
    beats = window.beats
    # The beat whose diastole holds the artefact planted at 7.311 s (app/demo_study.py): flagged noisy.
    flagged = [i for i, f in enumerate(beats["flags"]) if "noisy" in str(f).split(";")]
    t = np.asarray(beats["t_upstroke_s"])
    artefact = min(flagged, key=lambda i: abs(t[i] - 7.311)) if flagged else int(np.argmin(np.abs(t - 7.311)))
    window.select_beat(artefact)
    window.reject_current("electrical artefact")
    window.settle()
    window.study.show_comparison()
    window.settle()
    window.render_png(path, size=(1366, 768))
    window.close()


def main() -> int:
    IMAGES.mkdir(parents=True, exist_ok=True)
    _upstroke("demo", "--screenshot", str(IMAGES / "demo.png"), "--size", SIZE)
    with tempfile.TemporaryDirectory() as tmp:
        results = reviewed_results(Path(tmp))
        _upstroke("gui", str(results), "--screenshot", str(IMAGES / "reviewed.png"), "--size", SIZE)
    _upstroke("gui", str(SAMPLES / "VL-0212_episodic.abf"), "--screenshot", str(IMAGES / "episodic.png"), "--size", SIZE)
    _upstroke("demo", "--study", "--screenshot", str(IMAGES / "study.png"), "--size", "1366x768")
    with tempfile.TemporaryDirectory() as tmp:
        study_comparison(IMAGES / "study-comparison.png", Path(tmp))
    return 0


if __name__ == "__main__":
    sys.exit(main())
