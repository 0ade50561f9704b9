"""Shared test set-up: Qt offscreen, settings in a temporary folder, outside data locations."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

REPO = Path(__file__).resolve().parents[1]
#: Real ABF files from working labs, read in place (never copied into the repository).
REAL_ABF_DIR = Path(os.environ.get("UPSTROKE_REAL_ABF", REPO.parent / "shared" / "real-abf"))
#: Real stem-cell-derived cardiomyocyte recordings as text, with beat counts in their README.
REAL_IPSC_DIR = Path(os.environ.get("UPSTROKE_REAL_IPSC", REPO.parent / "shared" / "real-ipsc"))


@pytest.fixture(autouse=True)
def _private_config(tmp_path_factory, monkeypatch):
    """Keep every test's app settings, recent files and autosaves out of the user's home."""
    home = tmp_path_factory.mktemp("config")
    monkeypatch.setenv("UPSTROKE_CONFIG_DIR", str(home))
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home))


@pytest.fixture(scope="session")
def real_abf_dir() -> Path:
    """The folder of real ABF files; skips when it is not beside the repository."""
    if not (REAL_ABF_DIR / "MANIFEST.csv").is_file():
        pytest.skip(f"real ABF files not found at {REAL_ABF_DIR} (set UPSTROKE_REAL_ABF)")
    return REAL_ABF_DIR


@pytest.fixture(scope="session")
def real_ipsc_dir() -> Path:
    """The folder of real hiPSC-cardiomyocyte text recordings; skips when it is not there."""
    if not (REAL_IPSC_DIR / "README.md").is_file():
        pytest.skip(f"real hiPSC-CM recordings not found at {REAL_IPSC_DIR} (set UPSTROKE_REAL_IPSC)")
    return REAL_IPSC_DIR


@pytest.fixture(scope="session")
def myokit_data_dir() -> Path:
    """myokit's shipped test data (published models and two real ABF files)."""
    myokit = pytest.importorskip("myokit", reason="myokit is in the test extras")
    path = Path(myokit.__file__).parent / "tests" / "data"
    if not path.is_dir():
        pytest.skip(f"myokit's test data not found at {path}")
    return path
