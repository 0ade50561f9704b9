"""The user's documentation: links that lead somewhere, pictures that exist, keys that are the app's."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
DOCS = ROOT / "docs"
GUIDE = DOCS / "user-guide.md"
_LINK = re.compile(r"\]\(([^)#\s]+)(#[^)\s]*)?\)")


def _pages() -> list[Path]:
    return sorted(DOCS.glob("*.md")) + [ROOT / "sample_data" / "README.md"]


@pytest.mark.parametrize("page", _pages(), ids=lambda p: p.name)
def test_every_relative_link_and_picture_exists(page):
    for target, _anchor in _LINK.findall(page.read_text(encoding="utf-8")):
        if "://" in target:
            continue
        assert (page.parent / target).exists(), f"{page.name} links to {target}, which does not exist"


def test_the_guide_links_every_reference_page():
    text = GUIDE.read_text(encoding="utf-8")
    for name in ("measurements.md", "results-format.md", "cli.md", "batch-and-cluster.md", "images/demo.png"):
        assert f"]({name}" in text


def test_the_guide_anchors_exist():
    text = GUIDE.read_text(encoding="utf-8")
    # GitHub's anchors: headings lower-cased, punctuation dropped, spaces to hyphens.
    anchors = {re.sub(r"[^\w\- ]", "", h.strip().lower()).replace(" ", "-") for h in re.findall(r"^#+ (.+)$", text, re.M)}
    for target, anchor in _LINK.findall(text) + [("", a) for a in re.findall(r"\]\((#[^)]+)\)", text)]:
        if anchor and not target:
            assert anchor[1:] in anchors, f"no heading for {anchor}"


def test_the_guide_lists_every_keyboard_shortcut_of_the_app(qtbot):
    pytest.importorskip("pytestqt")
    from PySide6 import QtGui

    from app.gui.window.main_window import MainWindow

    window = MainWindow(interactive=False)
    qtbot.addWidget(window)
    text = GUIDE.read_text(encoding="utf-8")
    rows = [line for line in text.splitlines() if line.startswith("| `")]
    listed = " ".join(rows)
    for action in window.findChildren(QtGui.QAction):
        keys = action.shortcut().toString(QtGui.QKeySequence.PortableText)
        if keys:
            assert f"`{keys}`" in listed, f"the guide's key table lacks {keys} ({action.text()})"
