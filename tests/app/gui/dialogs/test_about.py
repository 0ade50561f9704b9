"""The About box names the version and carries the research-use caution."""

from __future__ import annotations

import pytest

pytest.importorskip("pytestqt")

from app import __version__  # noqa: E402
from app.gui.dialogs.about import CAUTION, AboutDialog  # noqa: E402


def test_about_box_has_version_and_caution(qtbot):
    box = AboutDialog()
    qtbot.addWidget(box)
    text = box.text()
    assert f"Upstroke {__version__}" in text
    assert "not a medical device" in CAUTION and "diagnosing or treating" in CAUTION  # MEASUREMENTS.md caution
    assert CAUTION in text
