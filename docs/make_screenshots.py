"""Make the user guide's screenshots (docs/images/) with the app's own ``--screenshot`` option.

    python docs/make_screenshots.py

Each picture is the main window rendered offscreen, loaded and analysed, by the command line a
user would type:

* ``demo.png``: ``upstroke demo --screenshot``, the invented nodal-like cell NL-0417 with its
  conditions (baseline, UP-113, washout);
* ``reviewed.png``: ``upstroke gui RESULTS.h5 --screenshot`` on a results file in which the beats
  of the seal trouble (158-163 s) were rejected, as a reviewer would;
* ``episodic.png``: ``upstroke gui sample_data/VL-0212_episodic.abf --screenshot``, the
  ventricular-like cell in sweeps.

The recordings are the invented ones in sample_data/.
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


def main() -> int:
    IMAGES.mkdir(parents=True, exist_ok=True)
    _upstroke("demo", "--screenshot", str(IMAGES / "demo.png"), "--size", SIZE)
    with tempfile.TemporaryDirectory() as tmp:
        results = reviewed_results(Path(tmp))
        _upstroke("gui", str(results), "--screenshot", str(IMAGES / "reviewed.png"), "--size", SIZE)
    _upstroke("gui", str(SAMPLES / "VL-0212_episodic.abf"), "--screenshot", str(IMAGES / "episodic.png"), "--size", SIZE)
    return 0


if __name__ == "__main__":
    sys.exit(main())
