"""``upstroke gui`` and ``upstroke demo``: screenshots, bad input, no Qt for the rest of the CLI."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from app.cli import main  # noqa: E402


def test_missing_file_is_exit_2_in_one_line_and_writes_nothing(tmp_path, capsys):
    shot = tmp_path / "shot.png"
    assert main(["gui", str(tmp_path / "nope.abf"), "--screenshot", str(shot)]) == 2  # CONTRACT.md exit status
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "nope.abf" in err and "Traceback" not in err
    assert not shot.exists()


def test_screenshot_must_be_png(tmp_path, capsys):
    assert main(["demo", "--screenshot", str(tmp_path / "shot.jpg")]) == 2
    assert ".png" in capsys.readouterr().err


@pytest.mark.slow
def test_demo_screenshot_shows_the_analysed_scenario(qapp, tmp_path):
    from PySide6 import QtGui

    shot = tmp_path / "demo.png"
    assert main(["demo", "--screenshot", str(shot)]) == 0
    image = QtGui.QImage(str(shot))
    assert (image.width(), image.height()) == (1600, 1000)
    # not a blank window: the trace and tables put many distinct colours on it
    ptr = image.convertToFormat(QtGui.QImage.Format_RGB32).constBits()
    pixels = np.frombuffer(ptr, dtype=np.uint32, count=image.width() * image.height())
    assert len(np.unique(pixels)) > 200
